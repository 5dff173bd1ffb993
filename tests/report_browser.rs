//! The HTML report in a real browser: headless Chromium (Debian package
//! `chromium`) loads a copy of it from disk with the network off, with a
//! check script this test injects (the report itself ships no script).
//! The script checks that every chart has a title and both axis labels
//! drawn in its plot, that no legend's box overlaps its plot, and that
//! each chart sits beside its table on a 1,560-pixel-wide window; it
//! writes what it found into the page, which Chromium dumps. Eight
//! families, a lasso path over 30 inputs, costs and segments exercise the
//! largest charts. Skips with a notice when
//! Chromium is absent, unless BASERATE_REQUIRE_EXTERNAL=1.

mod common;

use std::process::Command;

/// Injected before `</body>`: sets `data-check` on the body to `ok N` (N
/// charts checked) or to the list of problems.
const CHECK_SCRIPT: &str = r#"<script>
(function () {
  const problems = [];
  const figures = document.querySelectorAll('figure.chart');
  const overlap = (a, b) => a.left < b.right && b.left < a.right && a.top < b.bottom && b.top < a.bottom;
  figures.forEach(function (f) {
    const name = f.getAttribute('data-chart');
    const svg = f.querySelector('svg');
    if (!svg) { problems.push(name + ': no plot'); return; }
    const texts = Array.from(svg.querySelectorAll('text')).map(t => t.textContent.trim());
    for (const key of ['data-title', 'data-x-label', 'data-y-label']) {
      const want = (f.getAttribute(key) || '').trim();
      if (!want) problems.push(name + ': empty ' + key);
      else if (!texts.includes(want)) problems.push(name + ': ' + key + ' not drawn');
    }
    const legend = f.querySelector('ul.legend');
    if (legend) {
      const box = legend.getBoundingClientRect();
      const plot = svg.getBoundingClientRect();
      if (overlap(box, plot)) problems.push(name + ': legend overlaps the plot');
      if (box.height === 0) problems.push(name + ': legend not shown');
    }
    const pair = f.closest('div.pair');
    const table = pair && pair.querySelector('div.table');
    if (!table || !table.querySelector('table, p')) problems.push(name + ': no table beside it');
    else if (f.getBoundingClientRect().left < table.getBoundingClientRect().right - 1)
      problems.push(name + ': wrapped under its table, not beside it');
  });
  document.body.setAttribute('data-check', problems.length ? problems.join(' | ') : 'ok ' + figures.length);
})();
</script>"#;

#[test]
fn the_report_renders_in_chromium() {
    if !common::external_tool("chromium", Command::new("chromium").arg("--version")) {
        return;
    }
    let dir = common::temp_dir();
    let inputs = 30;
    let mut text: String = (1..=inputs).map(|j| format!("x{j},")).collect();
    text.push_str("amount<script>,region,\"y\"\n");
    let mut rng = baserate::demo::rng::Rng::new(11);
    for i in 0..2000 {
        let positive = i % 5 == 0;
        for j in 0..inputs {
            let shift = if positive && j < 6 { 0.6 } else { 0.0 };
            text.push_str(&format!("{:.5},", rng.normal() + shift));
        }
        let amount = 50.0 + 400.0 * rng.uniform();
        let region = ["north", "south", "east"][i % 3];
        text.push_str(&format!("{amount:.2},{region},{}\n", if positive { "<i>late</i>" } else { "paid" }));
    }
    common::write(dir.path(), "d.csv", text.as_bytes());
    common::write(
        dir.path(),
        "costs.toml",
        b"[actions.accept]\npaid = 0\n\"<i>late</i>\" = 5\n[actions.refer]\npaid = 1\n\"<i>late</i>\" = 0\n",
    );
    let families = [
        "logistic",
        "naive-bayes",
        "lda",
        "qda",
        "lda:diagonal-weight=ledoit-wolf",
        "qda:pooled-weight=0.2",
        "logistic:penalty=lasso",
        "logistic:penalty=ridge",
    ];
    let mut args = vec!["compare", "d.csv", "--target", "y", "--positive", "<i>late</i>", "--folds", "3"];
    for f in &families {
        args.extend(["--family", f]);
    }
    args.extend(["--costs", "costs.toml", "--by", "region", "--learning-curve", "--report", "r.html"]);
    let output = common::baserate(dir.path(), &args);
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    let html = std::fs::read_to_string(dir.path().join("r.html")).expect("report");
    assert!(!html.contains("<script"), "the report ships no script");
    let charts = html.matches("<figure class=\"chart\"").count();
    // ROC, precision–recall, one reliability panel and one score
    // distribution per family, cost curves, two charts per penalised
    // family, the learning curve.
    assert_eq!(charts, 2 + 2 * families.len() + 1 + 2 * 2 + 1, "charts in the report");
    for kind in [
        "ROC curves",
        "precision–recall curves",
        "reliability: qda",
        "cost curves",
        "learning curve",
        "score distribution: qda",
        "coefficient path: logistic:penalty=lasso",
        "cross-validation: logistic:penalty=lasso",
    ] {
        assert!(html.contains(&format!("data-chart=\"{kind}\"")), "missing chart {kind}");
    }
    // The words of the user: the binary legend names the other class, the
    // cutoff table the costs file's action, the segment table its rule.
    assert!(html.contains("</span>paid</li>"), "the score distribution's legend names the class 'paid'");
    assert!(html.contains("<th>accept rate</th>") && html.contains("rate among accept</th>"), "cutoff labels");
    assert!(html.contains("Flagged: the decisions under the costs: any action but accept."), "segment flag rule");
    // The governance header.
    for part in
        ["<h2>Provenance</h2>", "SHA-256", "Options in force", "Failed families", "family qda:pooled-weight=0.2"]
    {
        assert!(html.contains(part), "header lacks {part}");
    }
    let copy = dir.path().join("checked.html");
    std::fs::write(&copy, html.replace("</body>", &format!("{CHECK_SCRIPT}\n</body>"))).expect("copy");
    let profile = common::temp_dir();
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
            "--window-size=1560,1000",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .args(["--dump-dom", &format!("file://{}", copy.display())])
        .output()
        .expect("run chromium");
    let dom = String::from_utf8_lossy(&browser.stdout);
    let log = String::from_utf8_lossy(&browser.stderr);
    let check = dom.split("data-check=\"").nth(1).and_then(|rest| rest.split('"').next()).unwrap_or("(no result)");
    assert_eq!(check, format!("ok {charts}"), "the check script found problems");
    let console_errors: Vec<&str> =
        log.lines().filter(|l| l.contains("CONSOLE") || l.contains("Uncaught") || l.contains("SyntaxError")).collect();
    assert!(console_errors.is_empty(), "console errors: {console_errors:?}");
    assert!(
        !dom.contains("<i>late</i>") && dom.contains("&lt;i&gt;late&lt;/i&gt;"),
        "names from the data must arrive escaped"
    );
}
