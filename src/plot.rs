//! Small SVG line charts for sweeps: categorical x positions, a linear y axis from zero,
//! one polyline per series and dashed reference lines (such as a calibrated bandwidth).
//! Text only; no fonts or scripts, so the file opens in any browser or viewer.

use std::fmt::Write as _;

/// One series: a name and one y value per x position (`None` leaves a gap).
#[derive(Debug, Clone)]
pub struct Series {
    /// Legend text.
    pub name: String,
    /// Values, one per x label.
    pub values: Vec<Option<f64>>,
}

/// A horizontal reference line.
#[derive(Debug, Clone)]
pub struct Reference {
    /// Legend text.
    pub name: String,
    /// Its y value.
    pub value: f64,
}

/// A chart.
#[derive(Debug, Clone)]
pub struct Chart {
    /// Title above the plot.
    pub title: String,
    /// Label under the x axis.
    pub x_label: String,
    /// Label beside the y axis.
    pub y_label: String,
    /// The x positions' labels.
    pub x: Vec<String>,
    /// The series.
    pub series: Vec<Series>,
    /// Reference lines.
    pub references: Vec<Reference>,
}

const W: f64 = 720.0;
const H: f64 = 420.0;
const LEFT: f64 = 70.0;
const RIGHT: f64 = 200.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 60.0;
const COLORS: [&str; 6] = [
    "#1f77b4", "#d62728", "#2ca02c", "#9467bd", "#ff7f0e", "#17becf",
];

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// A "nice" step (1, 2 or 5 × 10^k) giving about `n` ticks up to `max`.
fn nice_step(max: f64, n: f64) -> f64 {
    let raw = (max / n).max(f64::MIN_POSITIVE);
    let mag = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag)
}

impl Chart {
    /// The chart as an SVG document.
    pub fn to_svg(&self) -> String {
        let ymax_data = self
            .series
            .iter()
            .flat_map(|s| s.values.iter().flatten())
            .chain(self.references.iter().map(|r| &r.value))
            .fold(0.0f64, |a, &b| a.max(b));
        let step = nice_step(ymax_data.max(1e-9), 5.0);
        let ymax = (ymax_data / step).ceil().max(1.0) * step;
        let pw = W - LEFT - RIGHT;
        let ph = H - TOP - BOTTOM;
        let n = self.x.len().max(1);
        let xp = |i: usize| LEFT + pw * (i as f64 + 0.5) / n as f64;
        let yp = |v: f64| TOP + ph * (1.0 - v / ymax);
        let mut s = String::new();
        let _ = writeln!(
            s,
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{W}" height="{H}" viewBox="0 0 {W} {H}" font-family="sans-serif" font-size="12">"#
        );
        let _ = writeln!(s, r#"<rect width="{W}" height="{H}" fill="white"/>"#);
        let _ = writeln!(
            s,
            r#"<text x="{}" y="22" font-size="15" text-anchor="middle">{}</text>"#,
            LEFT + pw / 2.0,
            esc(&self.title)
        );
        // Grid and y ticks.
        let mut v = 0.0;
        while v <= ymax + step * 1e-9 {
            let y = yp(v);
            let _ = writeln!(
                s,
                r##"<line x1="{LEFT}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#ddd"/>"##,
                LEFT + pw
            );
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#,
                LEFT - 6.0,
                y + 4.0,
                trim(v)
            );
            v += step;
        }
        let _ = writeln!(
            s,
            r#"<rect x="{LEFT}" y="{TOP}" width="{pw}" height="{ph}" fill="none" stroke="black"/>"#
        );
        for (i, label) in self.x.iter().enumerate() {
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
                xp(i),
                TOP + ph + 18.0,
                esc(label)
            );
        }
        let _ = writeln!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
            LEFT + pw / 2.0,
            H - 16.0,
            esc(&self.x_label)
        );
        let _ = writeln!(
            s,
            r#"<text x="18" y="{:.1}" text-anchor="middle" transform="rotate(-90 18 {:.1})">{}</text>"#,
            TOP + ph / 2.0,
            TOP + ph / 2.0,
            esc(&self.y_label)
        );
        let mut legend_y = TOP + 10.0;
        let lx = W - RIGHT + 16.0;
        for (k, r) in self.references.iter().enumerate() {
            let c = COLORS[k % COLORS.len()];
            let y = yp(r.value);
            let _ = writeln!(
                s,
                r#"<line x1="{LEFT}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="{c}" stroke-dasharray="6 4"/>"#,
                LEFT + pw
            );
            legend(
                &mut s,
                lx,
                legend_y,
                &format!(r#"stroke="{c}" stroke-dasharray="6 4""#),
                &r.name,
            );
            legend_y += 20.0;
        }
        for (k, ser) in self.series.iter().enumerate() {
            let c = COLORS[k % COLORS.len()];
            let pts: Vec<String> = ser
                .values
                .iter()
                .enumerate()
                .filter_map(|(i, v)| v.map(|v| format!("{:.1},{:.1}", xp(i), yp(v))))
                .collect();
            let _ = writeln!(
                s,
                r#"<polyline points="{}" fill="none" stroke="{c}" stroke-width="2"/>"#,
                pts.join(" ")
            );
            for p in &pts {
                let (x, y) = p.split_once(',').unwrap_or(("0", "0"));
                let _ = writeln!(s, r#"<circle cx="{x}" cy="{y}" r="3.5" fill="{c}"/>"#);
            }
            legend(
                &mut s,
                lx,
                legend_y,
                &format!(r#"stroke="{c}" stroke-width="2""#),
                &ser.name,
            );
            legend_y += 20.0;
        }
        s.push_str("</svg>\n");
        s
    }
}

/// One legend entry at (`x`, `y`): a short line drawn with `style`, then `name`.
fn legend(s: &mut String, x: f64, y: f64, style: &str, name: &str) {
    let _ = writeln!(
        s,
        r#"<line x1="{x}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" {style}/>"#,
        x + 24.0
    );
    let _ = writeln!(
        s,
        r#"<text x="{:.1}" y="{:.1}">{}</text>"#,
        x + 30.0,
        y + 4.0,
        esc(name)
    );
}

/// A tick value without trailing zeros.
fn trim(v: f64) -> String {
    let t = format!("{v:.2}");
    t.trim_end_matches('0').trim_end_matches('.').to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn steps_are_nice() {
        // 1-2-5 tick steps: common practice for chart axes.
        assert_eq!(nice_step(31.0, 5.0), 10.0);
        assert_eq!(nice_step(7.0, 5.0), 2.0);
        assert_eq!(nice_step(0.9, 5.0), 0.2);
    }

    #[test]
    fn svg_has_every_series_and_reference() {
        let c = Chart {
            title: "scan <u32>".into(),
            x_label: "selectivity".into(),
            y_label: "GB/s".into(),
            x: vec!["0.01".into(), "0.1".into()],
            series: vec![Series {
                name: "2 threads".into(),
                values: vec![Some(25.0), None],
            }],
            references: vec![Reference {
                name: "read, 2 threads".into(),
                value: 31.0,
            }],
        };
        let svg = c.to_svg();
        assert!(svg.starts_with("<svg") && svg.ends_with("</svg>\n"));
        assert_eq!(svg.matches("<polyline").count(), 1);
        assert_eq!(
            svg.matches("<circle").count(),
            1,
            "a missing value draws no point"
        );
        assert!(svg.contains("scan &lt;u32&gt;") && svg.contains("read, 2 threads"));
    }
}
