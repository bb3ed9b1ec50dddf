//! Charts as SVG text, drawn with the `plotters` crate (SVG backend only): line charts over
//! categorical x positions with dashed reference lines (bench sweeps, model sweeps), and
//! stacked bar charts (a ledger per channel).
//!
//! Invariants: the y axis starts at zero; each series is one `<polyline>` (a line chart)
//! or one `<rect>` per non-zero category (a bar chart), in the given order, and its name
//! appears in the legend. No fonts, scripts or external references, so the SVG opens in
//! any viewer and can be inlined into an HTML page.

use plotters::coord::ranged1d::SegmentValue;
use plotters::prelude::*;

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

/// A line chart.
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

/// A stacked bar chart: one bar per category, one stacked segment per series.
#[derive(Debug, Clone)]
pub struct BarChart {
    /// Title above the plot.
    pub title: String,
    /// Label under the x axis.
    pub x_label: String,
    /// Label beside the y axis.
    pub y_label: String,
    /// Category labels.
    pub x: Vec<String>,
    /// The stacked series (values missing count as zero).
    pub series: Vec<Series>,
}

const SIZE: (u32, u32) = (760, 420);
const COLORS: [RGBColor; 6] = [
    RGBColor(0x1f, 0x77, 0xb4),
    RGBColor(0xd6, 0x27, 0x28),
    RGBColor(0x2c, 0xa0, 0x2c),
    RGBColor(0x94, 0x67, 0xbd),
    RGBColor(0xff, 0x7f, 0x0e),
    RGBColor(0x17, 0xbe, 0xcf),
];

/// The top of the y axis: the data maximum plus headroom (1 when everything is zero).
fn y_top(max: f64) -> f64 {
    if max > 0.0 {
        max * 1.1
    } else {
        1.0
    }
}

/// What to draw inside the frame.
enum Body<'a> {
    Lines(&'a [Series], &'a [Reference]),
    Bars(&'a [Series]),
}

/// Draws `body` in a frame with a categorical x axis of `labels` and a y axis from zero;
/// returns the SVG text.
fn render(title: &str, x_label: &str, y_label: &str, labels: &[String], body: Body) -> String {
    let max = match &body {
        Body::Lines(series, refs) => series
            .iter()
            .flat_map(|s| s.values.iter().flatten())
            .chain(refs.iter().map(|r| &r.value))
            .fold(0.0f64, |a, &b| a.max(b)),
        Body::Bars(series) => (0..labels.len())
            .map(|i| {
                series
                    .iter()
                    .map(|s| s.values.get(i).copied().flatten().unwrap_or(0.0))
                    .sum::<f64>()
            })
            .fold(0.0f64, f64::max),
    };
    let mut svg = String::new();
    // Drawing into a String cannot fail for lack of space or fonts (the SVG backend writes
    // text elements and leaves font layout to the viewer), so an error here is a bug.
    draw(&mut svg, title, x_label, y_label, labels, &body, y_top(max))
        .expect("drawing an SVG chart into a string");
    svg
}

fn draw(
    svg: &mut String,
    title: &str,
    x_label: &str,
    y_label: &str,
    labels: &[String],
    body: &Body,
    top: f64,
) -> Result<(), Box<dyn std::error::Error>> {
    let root = SVGBackend::with_string(svg, SIZE).into_drawing_area();
    root.fill(&WHITE)?;
    let n = labels.len().max(1) as u32;
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 17))
        .margin(12)
        .x_label_area_size(42)
        .y_label_area_size(62)
        .build_cartesian_2d((0u32..n).into_segmented(), 0f64..top)?;
    let label_of = |v: &SegmentValue<u32>| match v {
        SegmentValue::CenterOf(i) | SegmentValue::Exact(i) => {
            labels.get(*i as usize).cloned().unwrap_or_default()
        }
        SegmentValue::Last => String::new(),
    };
    chart
        .configure_mesh()
        .disable_x_mesh()
        .x_labels(labels.len().max(1))
        .x_label_formatter(&label_of)
        .x_desc(x_label)
        .y_desc(y_label)
        .label_style(("sans-serif", 12))
        .draw()?;
    match body {
        Body::Lines(series, refs) => {
            for (k, r) in refs.iter().enumerate() {
                let c = COLORS[k % COLORS.len()];
                chart
                    .draw_series(DashedLineSeries::new(
                        [
                            (SegmentValue::Exact(0), r.value),
                            (SegmentValue::Last, r.value),
                        ],
                        6,
                        4,
                        c.stroke_width(1),
                    ))?
                    .label(r.name.as_str())
                    .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], c));
            }
            for (k, s) in series.iter().enumerate() {
                let c = COLORS[(k + refs.len()) % COLORS.len()];
                let pts: Vec<(SegmentValue<u32>, f64)> = s
                    .values
                    .iter()
                    .enumerate()
                    .filter_map(|(i, v)| v.map(|v| (SegmentValue::CenterOf(i as u32), v)))
                    .collect();
                chart
                    .draw_series(LineSeries::new(pts.clone(), c.stroke_width(2)))?
                    .label(s.name.as_str())
                    .legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2))
                    });
                chart.draw_series(pts.into_iter().map(|p| Circle::new(p, 3, c.filled())))?;
            }
        }
        Body::Bars(series) => {
            let mut base = vec![0.0f64; labels.len()];
            for (k, s) in series.iter().enumerate() {
                let c = COLORS[k % COLORS.len()];
                let rects: Vec<Rectangle<(SegmentValue<u32>, f64)>> = (0..labels.len())
                    .filter_map(|i| {
                        let v = s.values.get(i).copied().flatten().unwrap_or(0.0);
                        (v > 0.0).then(|| {
                            let lo = base[i];
                            base[i] += v;
                            let mut r = Rectangle::new(
                                [
                                    (SegmentValue::Exact(i as u32), lo),
                                    (SegmentValue::Exact(i as u32 + 1), lo + v),
                                ],
                                c.filled(),
                            );
                            r.set_margin(0, 0, 8, 8);
                            r
                        })
                    })
                    .collect();
                chart
                    .draw_series(rects)?
                    .label(s.name.as_str())
                    .legend(move |(x, y)| {
                        Rectangle::new([(x, y - 5), (x + 14, y + 5)], c.filled())
                    });
            }
        }
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .label_font(("sans-serif", 12))
        .draw()?;
    root.present()?;
    Ok(())
}

impl Chart {
    /// The chart as an SVG document.
    pub fn to_svg(&self) -> String {
        render(
            &self.title,
            &self.x_label,
            &self.y_label,
            &self.x,
            Body::Lines(&self.series, &self.references),
        )
    }
}

impl BarChart {
    /// The chart as an SVG document.
    pub fn to_svg(&self) -> String {
        render(
            &self.title,
            &self.x_label,
            &self.y_label,
            &self.x,
            Body::Bars(&self.series),
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_svg_has_every_series_and_reference() {
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
        assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
        // The series line and its legend swatch are 2 px wide; axes and dashes 1 px.
        assert_eq!(svg.matches(r#"stroke-width="2""#).count(), 2);
        assert_eq!(
            svg.matches("<circle").count(),
            1,
            "a missing value draws no point"
        );
        assert!(svg.contains("scan &lt;u32&gt;") && svg.contains("read, 2 threads"));
        assert!(
            svg.contains("\n0.01\n") && svg.contains("\n0.1\n"),
            "x labels drawn"
        );
    }

    #[test]
    fn bars_stack_per_category() {
        let c = BarChart {
            title: "ledger".into(),
            x_label: "channel".into(),
            y_label: "MiB".into(),
            x: vec!["0".into(), "1".into()],
            series: vec![
                Series {
                    name: "read".into(),
                    values: vec![Some(4.0), Some(2.0)],
                },
                Series {
                    name: "write".into(),
                    values: vec![Some(1.0), None],
                },
            ],
        };
        let svg = c.to_svg();
        // Background, three bars, two legend swatches (and the legend box).
        assert!(svg.matches("<rect").count() >= 6, "{svg}");
        assert!(svg.contains("read") && svg.contains("write"));
    }
}
