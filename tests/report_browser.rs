//! The HTML report in a real browser: headless Chromium (Debian package
//! `chromium`) loads it from disk with the network off, runs its check
//! script, and reports no console errors; every chart is there. Skips with
//! a notice when Chromium is absent, unless BASERATE_REQUIRE_EXTERNAL=1.

mod common;

use std::process::Command;

#[test]
fn the_report_renders_in_chromium() {
    if !common::external_tool("chromium", Command::new("chromium").arg("--version")) {
        return;
    }
    let dir = common::temp_dir();
    let mut text = String::from("amount<script>,score,\"y\"\n");
    let mut rng = baserate::demo::rng::Rng::new(11);
    for i in 0..2000 {
        let positive = i % 5 == 0;
        let x = rng.normal() + if positive { 1.2 } else { 0.0 };
        let z = rng.normal() * if positive { 2.0 } else { 1.0 };
        text.push_str(&format!("{x},{z},{}\n", if positive { "<i>late</i>" } else { "paid" }));
    }
    common::write(dir.path(), "d.csv", text.as_bytes());
    let output =
        common::baserate(dir.path(), &["compare", "d.csv", "--target", "y", "--learning-curve", "--report", "r.html"]);
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    let html = std::fs::read_to_string(dir.path().join("r.html")).expect("report");
    let charts = html.matches("<div class=\"chart\"").count();
    // ROC, precision–recall, reliability, cost curves, one score distribution
    // per family, learning curve.
    assert_eq!(charts, 4 + 4 + 1, "charts in the report");
    for kind in [
        "ROC curves",
        "precision–recall curves",
        "reliability diagram",
        "cost curves",
        "learning curve",
        "score distribution: qda",
    ] {
        assert!(html.contains(&format!("data-chart=\"{kind}\"")), "missing chart {kind}");
    }
    let profile = common::temp_dir();
    let page = format!("file://{}", dir.path().join("r.html").display());
    let browser = Command::new("chromium")
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
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .args(["--dump-dom", &page])
        .output()
        .expect("run chromium");
    let dom = String::from_utf8_lossy(&browser.stdout);
    let log = String::from_utf8_lossy(&browser.stderr);
    assert!(
        dom.contains(&format!("data-charts=\"{charts}\"")),
        "the check script did not count {charts} charts:\n{}",
        &dom[..dom.len().min(400)]
    );
    let console_errors: Vec<&str> =
        log.lines().filter(|l| l.contains("CONSOLE") || l.contains("Uncaught") || l.contains("SyntaxError")).collect();
    assert!(console_errors.is_empty(), "console errors: {console_errors:?}");
    assert!(
        !dom.contains("<i>late</i>") && dom.contains("&lt;i&gt;late&lt;/i&gt;"),
        "names from the data must arrive escaped"
    );
}
