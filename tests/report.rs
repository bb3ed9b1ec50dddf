//! Charts and the HTML report: SVG parsed with roxmltree, the page with an HTML parser
//! (scraper), and the page loaded in headless Chromium, which must render every chart
//! with no script error (skipped with a note when `chromium` is missing, unless
//! `WEIR_REQUIRE_EXTERNAL=1`).

mod util;

use std::process::Command;

use weir::ledger::{Direction, Key, Ledger, Phase, Traffic};
use weir::memsys::sweep::{sweep, sweep_chart, SweepPoint};
use weir::memsys::Device;

fn run_ledger(engines: u32, spread: bool) -> Ledger {
    let mut l = Ledger::new();
    for e in 0..engines {
        let c = if spread { e % 4 } else { 0 };
        let t = Traffic {
            bytes: 64 << 14,
            words: 1 << 14,
            rows: 16 << 14,
        };
        l.add(Key::device(e, Phase::single("scan"), c, Direction::Read), t);
        l.add(
            Key::device(e, Phase::single("scan"), c, Direction::Write),
            Traffic {
                bytes: 640,
                words: 10,
                rows: 160,
            },
        );
    }
    l
}

fn sweep_svg() -> String {
    let d = Device::preset("hbm2x2").unwrap();
    let mut pts = Vec::new();
    for s in ["spread", "packed"] {
        for e in [1, 2, 4, 8] {
            pts.push(SweepPoint {
                series: s.into(),
                engines: e,
                ledger: run_ledger(e, s == "spread"),
            });
        }
    }
    sweep_chart(&sweep(&d, &pts, 512).unwrap(), &d.name).to_svg()
}

/// Texts of every `<text>` element of an SVG document.
fn svg_texts(doc: &roxmltree::Document) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or("").trim().to_string())
        .collect()
}

#[test]
fn sweep_svg_parses_and_has_one_line_per_placement() {
    let svg = sweep_svg();
    let doc = roxmltree::Document::parse(&svg).expect("well-formed SVG (roxmltree)");
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    // Series lines are drawn 2 px wide with one vertex per engine count (axes and grid
    // are 1 px wide; legend swatches have two vertices).
    let lines: Vec<_> = doc
        .descendants()
        .filter(|n| n.has_tag_name("polyline") && n.attribute("stroke-width") == Some("2"))
        .filter(|n| n.attribute("points").unwrap().split_whitespace().count() > 2)
        .collect();
    assert_eq!(lines.len(), 2);
    for l in &lines {
        assert_eq!(
            l.attribute("points").unwrap().split_whitespace().count(),
            4,
            "four engine counts"
        );
    }
    let texts = svg_texts(&doc);
    for want in ["spread", "packed", "engines", "1", "8"] {
        assert!(
            texts.iter().any(|t| t == want),
            "{want} missing from {texts:?}"
        );
    }
}

fn write_run(t: &util::TempDir) -> std::path::PathBuf {
    t.write(
        "run/ledger.json",
        &serde_json::to_string(&run_ledger(8, true).to_json(512)).unwrap(),
    );
    t.write("run/sweep.svg", &sweep_svg());
    t.join("run")
}

#[test]
fn report_html_parses_and_embeds_the_charts_and_plan() {
    let t = util::TempDir::new("report-html");
    let run = write_run(&t);
    let r = run.to_str().unwrap();
    assert_eq!(util::weir(&["plan", r, "--device", "hbm2x2"]).code, 0);
    let out = util::weir(&["report", r]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let html = std::fs::read_to_string(run.join("report.html")).unwrap();
    let page = scraper::Html::parse_document(&html);
    assert!(
        page.errors.is_empty(),
        "HTML parse errors: {:?}",
        page.errors
    );
    let fig = scraper::Selector::parse("figure.chart").unwrap();
    let figs: Vec<_> = page.select(&fig).collect();
    assert_eq!(figs.len(), 2, "ledger chart and the sweep figure");
    assert_eq!(figs[0].value().attr("data-series"), Some("read|written"));
    let svg = scraper::Selector::parse("svg").unwrap();
    let text = scraper::Selector::parse("text").unwrap();
    let ledger_texts: Vec<String> = figs[0]
        .select(&text)
        .map(|n| n.text().collect::<String>().trim().to_string())
        .collect();
    for want in ["read", "written", "0", "3"] {
        assert!(
            ledger_texts.iter().any(|t| t == want),
            "{want} not in {ledger_texts:?}"
        );
    }
    assert!(figs[1].select(&svg).next().is_some());
    let sweep_texts: Vec<String> = figs[1]
        .select(&text)
        .map(|n| n.text().collect::<String>().trim().to_string())
        .collect();
    assert!(sweep_texts.iter().any(|t| t == "spread") && sweep_texts.iter().any(|t| t == "packed"));
    let plan_rows = scraper::Selector::parse("#plan tr").unwrap();
    assert_eq!(
        page.select(&plan_rows).count(),
        3,
        "header, the scan phase, total"
    );
    assert!(html.contains("not a timing sign-off"));
    for external in ["src=\"http", "href=\"http", "<link", "@import"] {
        assert!(!html.contains(external), "external asset {external}");
    }
}

/// Whether `chromium` can run: false (after a note) when missing, a panic instead when
/// `WEIR_REQUIRE_EXTERNAL=1`.
fn chromium_present() -> bool {
    let found = std::env::var_os("PATH")
        .is_some_and(|p| std::env::split_paths(&p).any(|d| d.join("chromium").is_file()));
    if !found {
        let required = std::env::var("WEIR_REQUIRE_EXTERNAL").is_ok_and(|v| v == "1");
        assert!(!required, "chromium not found, but WEIR_REQUIRE_EXTERNAL=1");
        println!("skipped: chromium not found");
    }
    found
}

fn chromium(
    profile: &std::path::Path,
    extra: &[&str],
    page: &std::path::Path,
) -> std::process::Output {
    Command::new("chromium")
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", profile.display()))
        .args(extra)
        .arg(format!("file://{}", page.display()))
        .output()
        .expect("run chromium")
}

#[test]
fn report_renders_in_headless_chromium() {
    if !chromium_present() {
        return;
    }
    let t = util::TempDir::new("report-browser");
    let run = write_run(&t);
    let r = run.to_str().unwrap();
    assert_eq!(util::weir(&["plan", r, "--device", "hbm2x2"]).code, 0);
    assert_eq!(util::weir(&["report", r]).code, 0);
    let page = run.join("report.html");
    let out = chromium(&t.join("profile-dom"), &["--dump-dom"], &page);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let dom = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    // The page's own script writes these once the load event has laid out every chart.
    assert!(dom.contains("data-charts=\"2\""), "{dom}");
    assert!(
        dom.contains("data-rendered=\"2\""),
        "not every chart rendered: {dom}"
    );
    assert!(
        dom.contains("data-errors=\"0\""),
        "script errors recorded: {dom}"
    );
    assert_eq!(dom.matches("data-rendered=\"yes\"").count(), 2);
    let console: Vec<&str> = stderr.lines().filter(|l| l.contains("CONSOLE")).collect();
    assert!(
        console.is_empty(),
        "console messages from the page: {console:?}"
    );
    let parsed = scraper::Html::parse_document(&dom);
    let poly = scraper::Selector::parse("figure.chart polyline[stroke-width=\"2\"]").unwrap();
    assert!(
        parsed.select(&poly).count() >= 2,
        "sweep lines present after load"
    );
    // A screenshot beside the report, for a person to look at.
    let png = run.join("report.png");
    let arg = format!("--screenshot={}", png.display());
    let out = chromium(
        &t.join("profile-png"),
        &[&arg, "--window-size=1200,1800"],
        &page,
    );
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let bytes = std::fs::read(&png).expect("screenshot written");
    // PNG signature (ISO/IEC 15948 / RFC 2083).
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
    if let Ok(keep) = std::env::var("WEIR_KEEP_REPORT") {
        std::fs::copy(&png, keep).unwrap();
    }
}
