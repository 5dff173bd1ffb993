//! `score` as a batch job: every row accounted for, outputs that do not
//! depend on chunking or threads, nothing left behind by a failed or killed
//! run, the schema checked before scoring, the unseen-category policies,
//! drift and reason codes.

mod common;

use std::io::Write;
use std::path::Path;
use std::process::{Command, Stdio};

use common::{close, run, temp_dir, write};
use serde_json::Value;

fn demo(name: &str) -> String {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data/lending").join(name);
    std::fs::read_to_string(path).expect("demo data")
}

/// A lending model of `family` fitted in `dir` as `m.json`, and the new
/// portfolio as `new.csv`.
fn setup(dir: &Path, family: &str) {
    write(dir, "train.csv", demo("train.csv").as_bytes());
    write(dir, "new.csv", demo("new_portfolio.csv").as_bytes());
    write(dir, "costs.toml", demo("costs.toml").as_bytes());
    let args = [
        "fit",
        "train.csv",
        "--target",
        "outcome",
        "--id",
        "application_id,application_month",
        "--missing",
        "impute",
        "--family",
        family,
        "-o",
        "m.json",
    ];
    let (code, _, err) = run(dir, &args);
    assert_eq!(code, 0, "{err}");
}

fn summary(dir: &Path, name: &str) -> Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join(name)).expect("summary")).expect("summary json")
}

/// Every number in two JSON values equal to `relative`, everything else equal.
fn assert_json_close(a: &Value, b: &Value, relative: f64, at: &str) {
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().unwrap_or(f64::NAN), y.as_f64().unwrap_or(f64::NAN));
            assert!(close(x, y, relative) || (x - y).abs() < 1e-300, "{at}: {x} vs {y}");
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "{at}");
            for (i, (p, q)) in x.iter().zip(y).enumerate() {
                assert_json_close(p, q, relative, &format!("{at}[{i}]"));
            }
        }
        (Value::Object(x), Value::Object(y)) => {
            assert_eq!(x.keys().collect::<Vec<_>>(), y.keys().collect::<Vec<_>>(), "{at}");
            for (k, v) in x {
                assert_json_close(v, &y[k], relative, &format!("{at}.{k}"));
            }
        }
        _ => assert_eq!(a, b, "{at}"),
    }
}

/// 1% of the rows broken in four ways: read = scored + rejected exactly,
/// and every reject carries its own line and raw text.
#[test]
fn every_row_is_scored_or_set_aside_with_its_line() {
    let dir = temp_dir();
    setup(dir.path(), "lda");
    let text = demo("new_portfolio.csv");
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let mut broken = std::collections::BTreeMap::new();
    for (k, i) in (1..lines.len()).step_by(100).enumerate() {
        let fields: Vec<&str> = lines[i].split(',').collect();
        let (row, reason) = match k % 4 {
            0 => (lines[i].replacen(fields[5], "n/a-ish", 1), "not-a-number"),
            1 => (format!("{},extra", lines[i]), "field-count"),
            2 => (lines[i].replacen(&format!(",{},", fields[2]), ",kiosk,", 1), "unseen-category"),
            _ => (lines[i].replacen(fields[6], "inf", 1), "not-finite"),
        };
        lines[i] = row.clone();
        // Line numbers are 1-based and the header is line 1.
        broken.insert(i as u64 + 1, (row, reason));
    }
    // A quoted id with an embedded newline shifts every later line by one.
    lines[3] = lines[3].replacen("QL26-000003", "\"QL26\n000003\"", 1);
    let shifted: std::collections::BTreeMap<u64, (String, &str)> =
        broken.into_iter().map(|(l, v)| (if l > 4 { l + 1 } else { l }, v)).collect();
    write(dir.path(), "broken.csv", (lines.join("\n") + "\n").as_bytes());
    let (code, _, err) = run(
        dir.path(),
        &[
            "score",
            "m.json",
            "broken.csv",
            "--id",
            "application_id",
            "--unseen",
            "reject",
            "--rejects",
            "rejects.csv",
            "--summary",
            "s.json",
            "-o",
            "out.csv",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let s = summary(dir.path(), "s.json");
    let (read, scored, rejected) = (
        s["rows_read"].as_u64().unwrap_or(0),
        s["rows_scored"].as_u64().unwrap_or(0),
        s["rows_rejected"].as_u64().unwrap_or(0),
    );
    assert_eq!(read, 5000);
    assert_eq!(rejected, shifted.len() as u64);
    assert_eq!(read, scored + rejected);
    let by_reason = s["rejected_by_reason"].as_object().expect("by reason");
    assert_eq!(by_reason.values().map(|v| v.as_u64().unwrap_or(0)).sum::<u64>(), rejected);
    let output = std::fs::read_to_string(dir.path().join("out.csv")).expect("out");
    let mut reader = csv::Reader::from_reader(output.as_bytes());
    assert_eq!(reader.records().count() as u64, scored);
    let mut rejects = csv::Reader::from_path(dir.path().join("rejects.csv")).expect("rejects");
    assert_eq!(
        rejects.headers().expect("header").iter().collect::<Vec<_>>(),
        ["line", "column", "reason", "message", "row"]
    );
    let mut seen = 0;
    for record in rejects.records() {
        let record = record.expect("reject row");
        let line: u64 = record[0].parse().expect("line");
        let (row, reason) = &shifted[&line];
        assert_eq!(&record[2], *reason, "line {line}");
        assert_eq!(&record[4], row, "line {line}");
        seen += 1;
    }
    assert_eq!(seen, shifted.len());
    // The id with the embedded newline survives, quoted.
    assert!(output.contains("\"QL26\n000003\""), "quoted id");
    // Without a reject file, the first broken row stops the run, named.
    let (code, _, err) = run(dir.path(), &["score", "m.json", "broken.csv", "-o", "none.csv"]);
    assert_eq!(code, 1);
    let first = shifted.keys().next().copied().unwrap_or(0);
    assert!(err.contains(&format!("line {first}")) && err.contains("--rejects"), "{err}");
    assert!(!dir.path().join("none.csv").exists());
    // A stated limit on rejects: exit 3, outputs written.
    let (code, _, err) = run(
        dir.path(),
        &[
            "score",
            "m.json",
            "broken.csv",
            "--unseen",
            "reject",
            "--rejects",
            "r2.csv",
            "--max-reject-rate",
            "0.005",
            "-o",
            "o2.csv",
        ],
    );
    assert_eq!(code, 3, "{err}");
    assert!(err.contains("max-reject-rate"), "{err}");
    let (code, _, _) = run(
        dir.path(),
        &[
            "score",
            "m.json",
            "broken.csv",
            "--unseen",
            "reject",
            "--rejects",
            "r3.csv",
            "--max-reject-rate",
            "0.02",
            "-o",
            "o3.csv",
        ],
    );
    assert_eq!(code, 0);
}

/// Any chunk size, any thread count: the same bytes, the same figures.
#[test]
fn output_does_not_depend_on_chunks_or_threads() {
    let dir = temp_dir();
    setup(dir.path(), "logistic");
    let mut text = demo("new_portfolio.csv");
    // A few rejects and quoted fields in the mix.
    text = text.replacen(",online,", ",\"online\",", 7).replacen(",mortgage,", ",tent,", 3);
    write(dir.path(), "new.csv", text.as_bytes());
    let mut reference: Option<(Vec<u8>, Vec<u8>, Value)> = None;
    for (chunk, threads) in [("1048576", "1"), ("1", "2"), ("7", "3"), ("333", "1"), ("4096", "2"), ("65536", "4")] {
        let (code, _, err) = run(
            dir.path(),
            &[
                "score",
                "m.json",
                "new.csv",
                "--id",
                "application_id",
                "--costs",
                "costs.toml",
                "--reasons",
                "2",
                "--unseen",
                "reject",
                "--rejects",
                "r.csv",
                "--summary",
                "s.json",
                "--chunk-bytes",
                chunk,
                "--threads",
                threads,
                "-o",
                "out.csv",
            ],
        );
        assert_eq!(code, 0, "{err}");
        let out = std::fs::read(dir.path().join("out.csv")).expect("out");
        let rejects = std::fs::read(dir.path().join("r.csv")).expect("rejects");
        let s = summary(dir.path(), "s.json");
        match &reference {
            None => {
                assert_eq!(s["rows_rejected"], 3);
                assert_eq!(s["actions"]["refer"], 300, "the capacity holds");
                reference = Some((out, rejects, s));
            }
            Some((o, r, first)) => {
                assert!(out == *o, "chunk {chunk}, threads {threads}: output differs");
                assert!(rejects == *r, "chunk {chunk}, threads {threads}: rejects differ");
                assert_json_close(first, &s, 1e-12, "summary");
            }
        }
    }
}

/// gzip input by extension, and stdin to stdout, give the same bytes.
#[test]
fn gzip_and_stdin_read_as_the_file_does() {
    let dir = temp_dir();
    setup(dir.path(), "naive-bayes");
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--id", "application_id", "-o", "plain.csv"]);
    assert_eq!(code, 0, "{err}");
    let mut encoder = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    encoder.write_all(demo("new_portfolio.csv").as_bytes()).expect("gzip");
    write(dir.path(), "new.csv.gz", &encoder.finish().expect("gzip"));
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv.gz", "--id", "application_id", "-o", "gz.csv"]);
    assert_eq!(code, 0, "{err}");
    let plain = std::fs::read(dir.path().join("plain.csv")).expect("plain");
    assert!(plain == std::fs::read(dir.path().join("gz.csv")).expect("gz"));
    let mut child = Command::new(env!("CARGO_BIN_EXE_baserate"))
        .current_dir(dir.path())
        .args(["score", "m.json", "-", "--id", "application_id", "-o", "-"])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    let data = demo("new_portfolio.csv");
    let mut stdin = child.stdin.take().expect("stdin");
    let feeder = std::thread::spawn(move || stdin.write_all(data.as_bytes()));
    let output = child.wait_with_output().expect("wait");
    let _ = feeder.join();
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    assert!(output.stdout == plain);
}

/// A run killed midway leaves no output file (only, at most, a hidden
/// partial file beside it); a failed run leaves not even that.
#[test]
fn a_killed_run_leaves_no_output() {
    let dir = temp_dir();
    setup(dir.path(), "lda");
    let mut child = Command::new(env!("CARGO_BIN_EXE_baserate"))
        .current_dir(dir.path())
        .args(["score", "m.json", "-", "--rejects", "r.csv", "-o", "out.csv", "--chunk-bytes", "4096"])
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn");
    let data = demo("new_portfolio.csv");
    let mut stdin = child.stdin.take().expect("stdin");
    // Half the rows, then the process waits for more: it is mid-run.
    stdin.write_all(&data.as_bytes()[..data.len() / 2]).expect("feed");
    stdin.flush().expect("flush");
    std::thread::sleep(std::time::Duration::from_millis(500));
    child.kill().expect("kill");
    let _ = child.wait();
    drop(stdin);
    assert!(!dir.path().join("out.csv").exists());
    assert!(!dir.path().join("r.csv").exists());
    // What a killed run can leave: hidden partial files, nothing a reader
    // of out.csv would pick up.
    for entry in std::fs::read_dir(dir.path()).expect("dir").filter_map(|e| e.ok()) {
        let name = entry.file_name().to_string_lossy().into_owned();
        if name.contains(".partial-") {
            assert!(name.starts_with('.'), "{name}");
            std::fs::remove_file(entry.path()).expect("remove");
        }
    }
    // A run that fails partway removes its partial files.
    let mut lines: Vec<String> = data.lines().map(String::from).collect();
    lines[4000] = lines[4000]
        .replacen(",online,", ",kiosk,", 1)
        .replacen(",branch,", ",kiosk,", 1)
        .replacen(",broker,", ",kiosk,", 1);
    write(dir.path(), "late_error.csv", (lines.join("\n") + "\n").as_bytes());
    let (code, _, err) =
        run(dir.path(), &["score", "m.json", "late_error.csv", "--chunk-bytes", "4096", "-o", "out.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("line 4001") && err.contains("'kiosk'"), "{err}");
    let left: Vec<_> =
        std::fs::read_dir(dir.path()).expect("dir").filter_map(|e| e.ok()).map(|e| e.file_name()).collect();
    assert!(!left.iter().any(|n| n.to_string_lossy().contains("out.csv")), "{left:?}");
}

/// A header without a column the model needs fails before anything is
/// written; extra columns are ignored, or passed through with --keep.
#[test]
fn the_header_is_checked_before_scoring() {
    let dir = temp_dir();
    setup(dir.path(), "lda");
    let text = demo("new_portfolio.csv");
    write(
        dir.path(),
        "renamed.csv",
        text.replacen("income", "earnings", 1).replacen("purpose", "reason", 1).as_bytes(),
    );
    let (code, _, err) = run(
        dir.path(),
        &["score", "m.json", "renamed.csv", "--rejects", "r.csv", "--summary", "s.json", "-o", "out.csv"],
    );
    assert_eq!(code, 1);
    assert!(err.contains("renamed.csv") && err.contains("'income'") && err.contains("'purpose'"), "{err}");
    for name in ["out.csv", "r.csv", "s.json"] {
        assert!(!dir.path().join(name).exists(), "{name}");
    }
    let (code, _, err) = run(
        dir.path(),
        &["score", "m.json", "new.csv", "--id", "application_id", "--keep", "application_month,channel", "-o", "k.csv"],
    );
    assert_eq!(code, 0, "{err}");
    let out = std::fs::read_to_string(dir.path().join("k.csv")).expect("out");
    assert!(
        out.starts_with("application_id,posterior_defaulted,posterior_repaid,application_month,channel\n"),
        "{out:.200}"
    );
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--keep", "nowhere", "-o", "k2.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("--keep") && err.contains("nowhere"), "{err}");
}

/// The three answers to a category the training data never had.
#[test]
fn each_unseen_category_policy() {
    let dir = temp_dir();
    setup(dir.path(), "naive-bayes");
    let text = demo("new_portfolio.csv");
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    // housing had missing values in training (a missing level); channel had none.
    let housing = lines[0].split(',').position(|f| f == "housing").expect("housing");
    let channel = lines[0].split(',').position(|f| f == "channel").expect("channel");
    for (i, column, level) in [(10, housing, "houseboat"), (20, channel, "kiosk")] {
        let mut fields: Vec<String> = lines[i].split(',').map(String::from).collect();
        fields[column] = level.into();
        lines[i] = fields.join(",");
    }
    write(dir.path(), "unseen.csv", (lines.join("\n") + "\n").as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "m.json", "unseen.csv", "-o", "e.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("line 11") && err.contains("'houseboat'"), "{err}");
    let (code, _, err) = run(dir.path(), &["score", "m.json", "unseen.csv", "--unseen", "reject", "-o", "x.csv"]);
    assert_eq!(code, 2, "reject needs a reject file: {err}");
    let (code, _, err) = run(
        dir.path(),
        &[
            "score",
            "m.json",
            "unseen.csv",
            "--unseen",
            "reject",
            "--rejects",
            "r.csv",
            "--summary",
            "s.json",
            "-o",
            "r_out.csv",
        ],
    );
    assert_eq!(code, 0, "{err}");
    assert_eq!(summary(dir.path(), "s.json")["rejected_by_reason"]["unseen-category"], 2);
    // As missing: housing takes its missing level; channel has none, so
    // that row cannot be scored and is set aside as a missing value.
    let (code, _, err) = run(
        dir.path(),
        &[
            "score",
            "m.json",
            "unseen.csv",
            "--unseen",
            "missing",
            "--rejects",
            "r.csv",
            "--summary",
            "s.json",
            "-o",
            "m_out.csv",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let s = summary(dir.path(), "s.json");
    assert_eq!(s["unseen_as_missing"]["housing"], 1);
    assert_eq!(s["rejected_by_reason"]["missing-value"], 1);
    assert_eq!(s["rows_scored"], 4999);
}

/// Drift: the training file against itself is exactly stable (PSI 0); a
/// shifted population is flagged. Numbers outside the training range are
/// counted.
#[test]
fn drift_and_range_against_the_training_rows() {
    let dir = temp_dir();
    setup(dir.path(), "logistic");
    let (code, _, err) = run(dir.path(), &["score", "m.json", "train.csv", "--summary", "s.json", "-o", "t.csv"]);
    assert_eq!(code, 0, "{err}");
    let s = summary(dir.path(), "s.json");
    assert_eq!(s["drift"]["score"]["psi"], 0.0);
    for f in s["drift"]["features"].as_array().expect("features") {
        assert_eq!(f["psi"], 0.0, "{f}");
    }
    assert!(s["out_of_range"].as_array().expect("range").iter().all(|o| o["below"] == 0 && o["above"] == 0));
    // Incomes doubled: the income feature and the score drift.
    let text = demo("new_portfolio.csv");
    let income = text.lines().next().unwrap_or("").split(',').position(|f| f == "income").expect("income");
    let doubled: Vec<String> = text
        .lines()
        .enumerate()
        .map(|(i, l)| {
            let mut f: Vec<String> = l.split(',').map(String::from).collect();
            if i > 0 {
                if let Ok(v) = f[income].parse::<f64>() {
                    f[income] = format!("{}", 2.0 * v);
                }
            }
            f.join(",")
        })
        .collect();
    write(dir.path(), "doubled.csv", (doubled.join("\n") + "\n").as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "m.json", "doubled.csv", "--summary", "s.json", "-o", "d.csv"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("drift") && err.contains("income"), "{err}");
    let s = summary(dir.path(), "s.json");
    let features = s["drift"]["features"].as_array().expect("features");
    let income_psi = features.iter().find(|f| f["feature"] == "income").expect("income psi");
    assert_eq!(income_psi["band"], "act", "{income_psi}");
    let above = s["out_of_range"].as_array().expect("range").iter().find(|o| o["feature"] == "income").expect("income");
    assert!(above["above"].as_u64().unwrap_or(0) > 0);
}

/// Reason codes of a logistic model are the largest terms βⱼ(xⱼ − x̄ⱼ):
/// checked against the coefficients `inspect` shows, on every row whose
/// numeric features are all present.
#[test]
fn logistic_reasons_are_the_largest_terms() {
    let dir = temp_dir();
    setup(dir.path(), "logistic");
    let (code, _, err) = run(
        dir.path(),
        &[
            "score",
            "m.json",
            "new.csv",
            "--id",
            "application_id",
            "--reasons",
            "3",
            "--summary",
            "s.json",
            "-o",
            "r.csv",
        ],
    );
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("decision support"), "{err}");
    let (_, json, _) = run(dir.path(), &["inspect", "m.json", "--json", "-"]);
    let model: Value = serde_json::from_str(&json).expect("inspect");
    let slope = |term: &str| {
        model["coefficients"]
            .as_array()
            .and_then(|c| c.iter().find(|t| t["input"] == term))
            .and_then(|t| t["coefficient"].as_f64())
    };
    let file: Value = serde_json::from_str(&std::fs::read_to_string(dir.path().join("m.json")).expect("m")).expect("m");
    let mean = |name: &str| {
        file["schema"]["columns"]
            .as_array()
            .and_then(|c| c.iter().find(|c| c["name"] == name))
            .and_then(|c| c["numeric"]["mean"].as_f64())
    };
    let numeric = ["income", "debt_to_income", "revolving_utilisation", "months_at_address", "amount_requested"];
    let portfolio = demo("new_portfolio.csv");
    let inputs = csv::Reader::from_reader(portfolio.as_bytes()).into_records();
    let outputs = csv::Reader::from_path(dir.path().join("r.csv")).expect("r").into_records();
    let header: Vec<String> =
        demo("new_portfolio.csv").lines().next().unwrap_or("").split(',').map(String::from).collect();
    let mut checked = 0;
    for (input, output) in inputs.zip(outputs) {
        let (input, output) = (input.expect("row"), output.expect("row"));
        let values: Option<Vec<f64>> = numeric
            .iter()
            .map(|n| header.iter().position(|h| h == n).and_then(|i| input[i].parse::<f64>().ok()))
            .collect();
        let Some(values) = values else { continue };
        let terms: Vec<(f64, &str)> = numeric
            .iter()
            .zip(&values)
            .map(|(n, x)| (slope(n).unwrap_or(f64::NAN) * (x - mean(n).unwrap_or(f64::NAN)), *n))
            .collect();
        let best_numeric = terms.iter().copied().filter(|t| t.0 > 1e-9).max_by(|a, b| a.0.total_cmp(&b.0));
        let reasons: Vec<&str> = (3..6).map(|i| &output[i]).filter(|r| !r.is_empty()).collect();
        // The first numeric reason given is the largest numeric term.
        if let (Some((_, name)), Some(first)) = (best_numeric, reasons.iter().find(|r| numeric.contains(r))) {
            assert_eq!(*first, name, "row {}", &input[0]);
            checked += 1;
        }
    }
    assert!(checked > 1000, "{checked}");
    let s = summary(dir.path(), "s.json");
    assert!(s["reason_reference"]["income"].is_string());
    // QDA has no reason codes.
    setup(dir.path(), "qda");
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--reasons", "2", "-o", "q.csv"]);
    assert_eq!(code, 2);
    assert!(err.contains("QDA"), "{err}");
}

/// A quote inside an unquoted field is text (it joins no rows), quoted
/// fields work with a tab delimiter, and an unclosed quote costs one row.
#[test]
fn stray_quotes_and_tab_delimited_quoted_fields() {
    let dir = temp_dir();
    setup(dir.path(), "lda");
    let text = demo("new_portfolio.csv");
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    // application_id is the first column: a stray quote inside it, and a
    // quote that opens and never closes.
    lines[5] = lines[5].replacen("QL26-", "QL26\"-", 1);
    lines[9] = format!("\"{}", lines[9]);
    write(dir.path(), "stray.csv", (lines.join("\n") + "\n").as_bytes());
    let (code, _, err) = run(
        dir.path(),
        &[
            "score",
            "m.json",
            "stray.csv",
            "--id",
            "application_id",
            "--rejects",
            "r.csv",
            "--summary",
            "s.json",
            "-o",
            "o.csv",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let s = summary(dir.path(), "s.json");
    assert_eq!(s["rows_read"], 5000);
    assert_eq!(s["rows_rejected"], 1, "{s}");
    let rejects = std::fs::read_to_string(dir.path().join("r.csv")).expect("rejects");
    assert!(rejects.lines().nth(1).is_some_and(|l| l.starts_with("10,")), "{rejects}");
    let out = std::fs::read_to_string(dir.path().join("o.csv")).expect("out");
    assert!(out.contains("\"QL26\"\"-000005\""), "the stray quote is kept as text");
    // Tab-delimited, every id quoted.
    let tabbed: Vec<String> = text
        .lines()
        .map(|l| {
            let mut f: Vec<String> = l.split(',').map(String::from).collect();
            f[0] = format!("\"{}\"", f[0]);
            f.join("\t")
        })
        .collect();
    write(dir.path(), "tabbed.tsv", (tabbed.join("\n") + "\n").as_bytes());
    let (code, _, err) = run(
        dir.path(),
        &["score", "m.json", "tabbed.tsv", "--delimiter", "tab", "--id", "application_id", "-o", "t.csv"],
    );
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--id", "application_id", "-o", "n.csv"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(std::fs::read(dir.path().join("t.csv")).ok(), std::fs::read(dir.path().join("n.csv")).ok());
    // Two outputs on one path are refused before anything is written.
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--rejects", "same.csv", "-o", "same.csv"]);
    assert_eq!(code, 2);
    assert!(err.contains("same file"), "{err}");
    assert!(!dir.path().join("same.csv").exists());
}
