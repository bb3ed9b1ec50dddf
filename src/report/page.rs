//! Building the page text from what [`super::gather`] read.

use std::fmt::Write as _;

use crate::ledger::Ledger;
use crate::memsys::BOUND_NOTE;

/// What the page shows.
#[derive(Debug, Clone)]
pub struct ReportInput {
    /// Page title (the run directory's name).
    pub title: String,
    /// The run's ledger.
    pub ledger: Ledger,
    /// Word width of its words.
    pub word_bits: u32,
    /// `plan.json`, when present.
    pub plan: Option<serde_json::Value>,
    /// SVG figures found beside the run: (file name, SVG text).
    pub figures: Vec<(String, String)>,
}

/// Escapes text for HTML content and attribute values.
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

const STYLE: &str = "body{font-family:sans-serif;margin:2em;max-width:70em;color:#222}\
table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #ccc;padding:.25em .6em;text-align:right}\
th{background:#f3f3f3}td:first-child,th:first-child{text-align:left}figure.chart{margin:1.5em 0}\
.note{background:#fff7dd;border-left:4px solid #e0b000;padding:.5em 1em}";

/// Marks each chart rendered (figures read from files name no series) once laid out with drawn shapes; records script errors.
const SCRIPT: &str = "var weirErrors=[];window.addEventListener('error',function(e){weirErrors.push(String(e.message));});\
window.addEventListener('load',function(){var figs=document.querySelectorAll('figure.chart');var ok=0;\
figs.forEach(function(f){var s=f.querySelector('svg');var b=s?s.getBoundingClientRect():null;\
var shapes=s?s.querySelectorAll('polyline,rect,circle').length:0;var yes=b&&b.width>0&&b.height>0&&shapes>0;\
f.setAttribute('data-rendered',yes?'yes':'no');if(yes){ok++;}});\
document.body.setAttribute('data-charts',String(figs.length));document.body.setAttribute('data-rendered',String(ok));\
document.body.setAttribute('data-errors',String(weirErrors.length));\
document.getElementById('status').textContent=ok+' of '+figs.length+' charts rendered, '+weirErrors.length+' script errors';});";

/// The SVG text without an XML prolog or doctype, ready to inline.
fn inline_svg(svg: &str) -> &str {
    svg.find("<svg").map_or("", |i| &svg[i..])
}

fn figure(out: &mut String, caption: &str, series: &[String], svg: &str) {
    let _ = write!(
        out,
        "<figure class=\"chart\" data-series=\"{}\">\n{}\n<figcaption>{}</figcaption></figure>\n",
        esc(&series.join("|")),
        inline_svg(svg),
        esc(caption)
    );
}

fn num(v: &serde_json::Value, key: &str) -> f64 {
    v.get(key).and_then(|x| x.as_f64()).unwrap_or(0.0)
}

fn plan_section(out: &mut String, plan: &serde_json::Value) {
    let s = |k: &str| {
        plan.get(k)
            .and_then(|x| x.as_str())
            .unwrap_or("")
            .to_string()
    };
    let _ = write!(
        out,
        "<h2>Plan on {}</h2>\n<p class=\"note\">{}</p>\n<table id=\"plan\"><tr><th>phase</th><th>predicted ms</th>\
         <th>peak bound ms</th><th>bottleneck</th><th>consumed GB/s</th></tr>\n",
        esc(&s("device")),
        esc(&s("note"))
    );
    for p in plan
        .get("phases")
        .and_then(|x| x.as_array())
        .into_iter()
        .flatten()
    {
        let _ = writeln!(
            out,
            "<tr><td>{}</td><td>{:.4}</td><td>{:.4}</td><td>{}</td><td>{:.2}</td></tr>",
            esc(p.get("phase").and_then(|x| x.as_str()).unwrap_or("")),
            num(p, "time_s") * 1e3,
            num(p, "peak_time_s") * 1e3,
            esc(p.get("bottleneck").and_then(|x| x.as_str()).unwrap_or("")),
            num(p, "consumed_gbps")
        );
    }
    let _ = writeln!(
        out,
        "<tr><th>total</th><th>{:.4}</th><th>{:.4}</th><th></th><th>{:.2} aggregate</th></tr></table>",
        num(plan, "total_s") * 1e3,
        num(plan, "peak_total_s") * 1e3,
        num(plan, "aggregate_gbps")
    );
    if let Some(b) = plan.get("baseline").filter(|b| !b.is_null()) {
        let _ = writeln!(
            out,
            "<p id=\"baseline\">host baseline ({}): {:.4} ms; predicted speed-up {:.2}×</p>",
            esc(b.get("source").and_then(|x| x.as_str()).unwrap_or("")),
            num(b, "host_s") * 1e3,
            num(b, "speedup")
        );
    }
}

/// The whole page.
pub fn render(r: &ReportInput) -> String {
    let mut out = String::new();
    let _ = write!(
        out,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>weir report: {t}</title>\
         <style>{STYLE}</style><script>{SCRIPT}</script></head>\n<body>\n<h1>weir report: {t}</h1>\n\
         <p id=\"status\">charts not yet checked</p>\n",
        t = esc(&r.title)
    );
    let chart = super::ledger_chart(&r.ledger);
    let names: Vec<String> = chart.series.iter().map(|s| s.name.clone()).collect();
    let _ = writeln!(out, "<h2>Ledger</h2>");
    figure(
        &mut out,
        &format!("device bytes per channel ({}-bit words)", r.word_bits),
        &names,
        &chart.to_svg(),
    );
    match &r.plan {
        Some(p) => plan_section(&mut out, p),
        None => {
            let _ = writeln!(
                out,
                "<h2>Plan</h2><p>No plan.json in this run; `weir plan` writes one. ({BOUND_NOTE}.)</p>"
            );
        }
    }
    if !r.figures.is_empty() {
        let _ = writeln!(out, "<h2>Figures</h2>");
    }
    for (name, svg) in &r.figures {
        figure(&mut out, name, &[], svg);
    }
    out.push_str("</body></html>\n");
    out
}
