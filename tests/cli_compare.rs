//! `compare` and `judge` through the binary: the contract's JSON fields,
//! seeded determinism, every kind of split, out-of-fold predictions, and
//! escaping of names that come from the data.

mod common;

use common::{run, temp_dir, write};
use serde_json::Value;

fn lending(dir: &std::path::Path) -> String {
    let files = baserate::demo::generate(baserate::demo::DEFAULT_SEED, baserate::demo::DemoSize::standard());
    write(dir, "train.csv", files[0].contents.as_bytes());
    files[0].contents.clone()
}

const LENDING: [&str; 7] =
    ["train.csv", "--target", "outcome", "--id", "application_id,application_month", "--missing", "impute"];

fn compare_json(dir: &std::path::Path, extra: &[&str]) -> Value {
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(extra);
    args.extend(["--json", "-"]);
    let (code, out, err) = run(dir, &args);
    assert_eq!(code, 0, "{err}");
    serde_json::from_str(&out).expect("json")
}

#[test]
fn compare_writes_the_contract_fields() {
    let dir = temp_dir();
    lending(dir.path());
    let v = compare_json(dir.path(), &["--folds", "5"]);
    assert_eq!(v["positive"], "defaulted");
    assert_eq!(v["rows"], 5000);
    let results = v["results"].as_array().expect("results");
    let names: Vec<&str> = results.iter().map(|r| r["name"].as_str().unwrap_or("")).collect();
    assert_eq!(names, vec!["logistic", "naive-bayes", "lda", "qda"]);
    for r in results {
        assert_eq!(r["name"], r["family"]);
        for field in
            ["auc", "auc_se", "auc_ci_low", "auc_ci_high", "gini", "ks", "log_loss", "brier", "average_precision"]
        {
            assert!(r["metrics"][field].is_number(), "{field}");
        }
        let m = &r["metrics"];
        assert!((m["gini"].as_f64().unwrap_or(0.0) - (2.0 * m["auc"].as_f64().unwrap_or(0.0) - 1.0)).abs() < 1e-12);
    }
    let paired = v["paired"].as_array().expect("paired");
    assert_eq!(paired.len(), 6);
    for p in paired {
        for field in ["auc_diff", "z", "p_value"] {
            assert!(p[field].is_number(), "{field}");
        }
        assert!(p["a"].is_string() && p["b"].is_string());
        assert_eq!(p["z"].as_f64().unwrap_or(0.0).signum(), p["auc_diff"].as_f64().unwrap_or(0.0).signum());
    }
    assert!(v["caution"].as_str().unwrap_or("").contains("decision support"));
}

#[test]
fn same_seed_same_figures() {
    let dir = temp_dir();
    lending(dir.path());
    let a = compare_json(dir.path(), &["--seed", "3", "--family", "lda", "--family", "logistic"]);
    let b = compare_json(dir.path(), &["--seed", "3", "--family", "lda", "--family", "logistic"]);
    let c = compare_json(dir.path(), &["--seed", "4", "--family", "lda", "--family", "logistic"]);
    assert_eq!(a, b);
    assert_ne!(a["results"][0]["metrics"]["auc"], c["results"][0]["metrics"]["auc"]);
}

#[test]
fn family_options_and_names() {
    let dir = temp_dir();
    lending(dir.path());
    let v = compare_json(
        dir.path(),
        &[
            "--family",
            "qda",
            "--family",
            "qda:pooled-weight=0.3",
            "--family",
            "lda:diagonal-weight=ledoit-wolf",
            "--test-fraction",
            "0.3",
        ],
    );
    let names: Vec<&str> =
        v["results"].as_array().expect("results").iter().map(|r| r["name"].as_str().unwrap_or("")).collect();
    assert_eq!(names, vec!["qda", "qda:pooled-weight=0.3", "lda:diagonal-weight=ledoit-wolf"]);
    assert_eq!(v["results"][1]["family"], "qda");
    assert_eq!(v["tested_rows"], 1500);
    for (bad, message) in [
        ("qda:rge=0.1", "unknown option 'rge'"),
        ("tree", "not one of"),
        ("lda:pooled-weight=0.1", "--pooled-weight applies to qda"),
    ] {
        let mut args = vec!["compare"];
        args.extend(LENDING);
        args.extend(["--family", bad]);
        let (code, _, err) = run(dir.path(), &args);
        assert_eq!(code, 2, "{bad}");
        assert!(err.contains(message), "{bad}: {err}");
    }
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--family", "lda"]);
    assert_eq!(run(dir.path(), &args).0, 2);
}

#[test]
fn out_of_time_with_a_gap_and_an_explicit_holdout() {
    let dir = temp_dir();
    let text = lending(dir.path());
    let v = compare_json(
        dir.path(),
        &["--family", "lda", "--split-by", "application_month", "--test-from", "2025-10", "--gap", "2025-09"],
    );
    let expected = text.lines().skip(1).filter(|l| l.split(',').nth(1).is_some_and(|m| m >= "2025-10")).count();
    assert_eq!(v["tested_rows"].as_u64(), Some(expected as u64));
    assert!(v["split"].as_str().unwrap_or("").contains("gap"));

    let lines: Vec<&str> = text.lines().collect();
    write(dir.path(), "first.csv", (lines[..3001].join("\n") + "\n").as_bytes());
    write(dir.path(), "rest.csv", (format!("{}\n", lines[0]) + &lines[3001..].join("\n") + "\n").as_bytes());
    let (code, out, err) = run(
        dir.path(),
        &[
            "compare",
            "first.csv",
            "--target",
            "outcome",
            "--id",
            "application_id,application_month",
            "--missing",
            "impute",
            "--family",
            "logistic",
            "--holdout",
            "rest.csv",
            "--json",
            "-",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).expect("json");
    assert_eq!(v["tested_rows"], 2000);
    assert_eq!(v["rows"], 5000);
}

#[test]
fn a_holdout_column_with_text_makes_the_column_categorical_in_both_files() {
    // Each file is read on its own; a column that holds only numbers in the
    // training file but text in the holdout is read as one file holding both
    // would be: categorical.
    let dir = temp_dir();
    let mut train = String::from("grade,score,y\n");
    let mut test = String::from("grade,score,y\n");
    for i in 0..200 {
        let line = |g: &str| format!("{g},{},{}\n", (i % 17) as f64 / 3.0, if i % 3 == 0 { "bad" } else { "good" });
        train.push_str(&line(&(i % 3).to_string()));
        test.push_str(&line(if i == 7 { "x" } else { ["0", "1", "2"][i % 3] }));
    }
    write(dir.path(), "a.csv", train.as_bytes());
    write(dir.path(), "b.csv", test.as_bytes());
    let args = ["compare", "a.csv", "--target", "y", "--family", "naive-bayes", "--holdout", "b.csv", "--json", "-"];
    let (code, out, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).expect("json");
    assert_eq!(v["tested_rows"], 200);
    assert_eq!(v["rows"], 400);
    let (code, _, err) = run(dir.path(), &["describe", "b.csv", "--target", "y"]);
    assert_eq!(code, 0, "{err}");
    let different = "grade,other,y\n1,2,bad\n";
    write(dir.path(), "c.csv", different.as_bytes());
    let args = ["compare", "a.csv", "--target", "y", "--family", "naive-bayes", "--holdout", "c.csv"];
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("must have the same header as"), "{err}");
}

#[test]
fn predictions_feed_judge() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "logistic", "--family", "lda", "--predictions", "oof.csv", "--json", "c.json"]);
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let oof = std::fs::read_to_string(dir.path().join("oof.csv")).expect("predictions");
    assert!(oof.starts_with(
        "application_id,application_month,fold,outcome,logistic:posterior_defaulted,logistic:posterior_repaid,logistic:log_odds,lda:posterior_defaulted"
    ));
    assert_eq!(oof.lines().count(), 5001);
    let (code, out, err) = run(
        dir.path(),
        &[
            "judge",
            "oof.csv",
            "--target",
            "outcome",
            "--exclude",
            "application_id,application_month,fold",
            "--score",
            "logistic:posterior_defaulted",
            "--score",
            "lda:posterior_defaulted",
            "--json",
            "-",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let judged: Value = serde_json::from_str(&out).expect("json");
    let compared: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("c.json")).expect("c.json")).expect("json");
    // The same rows and the same predictions give the same AUC (the file
    // holds the probabilities to full precision).
    let a = judged["results"][0]["metrics"]["auc"].as_f64().unwrap_or(0.0);
    let c = compared["results"][0]["metrics"]["auc"].as_f64().unwrap_or(1.0);
    assert!((a - c).abs() < 1e-12, "{a} vs {c}");
    assert!(judged["results"][0].get("family").is_none());
    assert_eq!(judged["paired"].as_array().map(Vec::len), Some(1));
    // Rank scores get rank metrics only.
    let (code, out, _) = run(
        dir.path(),
        &[
            "judge",
            "oof.csv",
            "--target",
            "outcome",
            "--exclude",
            "application_id,application_month,fold",
            "--score",
            "lda:posterior_repaid",
            "--score-type",
            "rank",
            "--direction",
            "lower-positive",
            "--json",
            "-",
        ],
    );
    assert_eq!(code, 0);
    let ranked: Value = serde_json::from_str(&out).expect("json");
    assert!(ranked["results"][0]["metrics"].get("log_loss").is_none());
    let auc = ranked["results"][0]["metrics"]["auc"].as_f64().unwrap_or(0.0);
    let lda = judged["results"][1]["metrics"]["auc"].as_f64().unwrap_or(1.0);
    assert!((auc - lda).abs() < 1e-12, "a reversed rank score gives the same AUC: {auc} vs {lda}");
}

#[test]
fn multi_class_results_carry_one_vs_rest_aucs() {
    let dir = temp_dir();
    let iris = std::fs::read(std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/iris.csv"))
        .expect("iris");
    write(dir.path(), "iris.csv", &iris);
    let (code, out, err) = run(
        dir.path(),
        &["compare", "iris.csv", "--target", "target", "--family", "lda", "--family", "naive-bayes", "--json", "-"],
    );
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).expect("json");
    let m = &v["results"][0]["metrics"];
    assert!(m["auc_macro"].as_f64().unwrap_or(0.0) > 0.9);
    assert_eq!(m["auc_by_class"].as_object().map(|o| o.len()), Some(3));
    // Cost figures are for two classes; three are refused, not half-used.
    write(
        dir.path(),
        "c.toml",
        b"[actions.keep]\nsetosa = 0\nversicolor = 1\nvirginica = 1\n[actions.drop]\nsetosa = 1\nversicolor = 0\nvirginica = 0\n",
    );
    let (code, _, err) =
        run(dir.path(), &["compare", "iris.csv", "--target", "target", "--family", "lda", "--costs", "c.toml"]);
    assert_ne!(code, 0);
    assert!(err.contains("c.toml") && err.contains("two-class"), "{err}");
}

#[test]
fn names_from_the_data_are_escaped_in_the_report() {
    let dir = temp_dir();
    let mut text = String::from("x<script>alert(1)</script>,z,\"y\"\n");
    let mut rng = baserate::demo::rng::Rng::new(3);
    for i in 0..400 {
        let positive = i % 4 == 0;
        let x = rng.normal() + if positive { 1.5 } else { 0.0 };
        text.push_str(&format!("{x},{},{}\n", rng.normal(), if positive { "<b>bad</b>" } else { "good&fine" }));
    }
    write(dir.path(), "hostile.csv", text.as_bytes());
    let (code, _, err) =
        run(dir.path(), &["compare", "hostile.csv", "--target", "y", "--report", "r.html", "--bootstrap", "20"]);
    assert_eq!(code, 0, "{err}");
    let html = std::fs::read_to_string(dir.path().join("r.html")).expect("report");
    assert!(!html.contains("<script>alert"));
    assert!(!html.contains("<b>bad</b>"));
    assert!(html.contains("&lt;b&gt;bad&lt;/b&gt;") && html.contains("x&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert_eq!(html.matches("<script").count(), 0, "the report ships no script");
    assert!(
        !html.contains("http://")
            || html.matches("http://").count() == html.matches("http://www.w3.org/2000/svg").count()
    );
    assert!(html.contains("decision support, not a decision"));
}

/// With a target prior, posteriors are stated at it and the figures come
/// twice: as measured, and reweighted to the target class mix. Reweighting
/// by class leaves AUC exactly unchanged; judge applies the same odds
/// correction to external scores given the prior they are calibrated to.
#[test]
fn a_target_prior_restates_and_reweights() {
    let dir = temp_dir();
    lending(dir.path());
    let v = compare_json(dir.path(), &["--family", "lda", "--base-rate", "0.03", "--predictions", "oof03.csv"]);
    assert_eq!(v["target_prior"][0], 0.03);
    let measured = &v["results"][0]["metrics"];
    let reweighted = &v["reweighted"]["results"][0]["metrics"];
    assert!((measured["auc"].as_f64().unwrap_or(0.0) - reweighted["auc"].as_f64().unwrap_or(1.0)).abs() < 1e-12);
    assert!((reweighted["base_rate"].as_f64().unwrap_or(0.0) - 0.03).abs() < 1e-12);
    assert_ne!(measured["log_loss"], reweighted["log_loss"]);
    // The same predictions without the prior, corrected by judge.
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--predictions", "oof.csv", "--json", "plain.json"]);
    assert_eq!(run(dir.path(), &args).0, 0);
    let (code, out, err) = run(
        dir.path(),
        &[
            "judge",
            "oof.csv",
            "--target",
            "outcome",
            "--exclude",
            "application_id,application_month,fold",
            "--score",
            "lda:posterior_defaulted",
            "--train-prior",
            "0.1072",
            "--base-rate",
            "0.03",
            "--json",
            "-",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let a: Value = serde_json::from_str(&out).expect("json");
    let ours = a["results"][0]["metrics"]["log_loss"].as_f64().unwrap_or(0.0);
    let compared = measured["log_loss"].as_f64().unwrap_or(1.0);
    // The folds' training mixes differ from the overall 0.1072 in the fifth
    // digit, so the two corrections agree to about 1e-4.
    assert!((ours - compared).abs() < 1e-3 * compared, "{ours} vs {compared}");
    let (code, _, err) = run(
        dir.path(),
        &[
            "judge",
            "oof.csv",
            "--target",
            "outcome",
            "--exclude",
            "application_id,application_month,fold",
            "--score",
            "lda:posterior_defaulted",
            "--base-rate",
            "0.03",
        ],
    );
    assert_eq!(code, 2);
    assert!(err.contains("--train-prior"), "{err}");
}

/// Calibrated variants beside the raw ones: the map is fitted inside each
/// training fold on that fold's own out-of-fold predictions, so the test
/// rows never inform it; Platt calibration of naive Bayes — whose
/// independence assumption makes it overconfident — lowers its log loss.
#[test]
fn calibrated_variants_sit_beside_the_raw_ones() {
    let dir = temp_dir();
    lending(dir.path());
    let v = compare_json(
        dir.path(),
        &["--family", "naive-bayes", "--family", "naive-bayes+platt", "--family", "lda+isotonic"],
    );
    let names: Vec<&str> =
        v["results"].as_array().expect("results").iter().map(|r| r["name"].as_str().unwrap_or("")).collect();
    assert_eq!(names, vec!["naive-bayes", "naive-bayes+platt", "lda+isotonic"]);
    let raw = v["results"][0]["metrics"]["log_loss"].as_f64().unwrap_or(0.0);
    let calibrated = v["results"][1]["metrics"]["log_loss"].as_f64().unwrap_or(1.0);
    assert!(calibrated < raw, "{calibrated} vs {raw}");
    assert_eq!(v["results"][1]["family"], "naive-bayes");
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "lda+sigmoid"]);
    assert_eq!(run(dir.path(), &args).0, 2);
}

/// A segment without events has an event rate and a flag rate of zero,
/// never "-0.0000": an empty sum is −0 in IEEE arithmetic.
#[test]
fn segments_without_events_show_unsigned_zero_rates() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--by", "income", "--json", "segments.json"]);
    let (code, out, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("-0.0000 ") && !out.contains("-0.00%"), "{out}");
    let text = std::fs::read_to_string(dir.path().join("segments.json")).expect("json");
    let json: Value = serde_json::from_str(&text).expect("json");
    let segments = json["segments"].as_array().expect("segments");
    assert!(!segments.is_empty());
    for s in segments {
        for field in ["base_rate", "flag_rate"] {
            let rate = s[field].as_f64().expect("rate");
            assert!(rate.is_sign_positive(), "{field} {rate} in {s}");
        }
    }
    // With a segment per income value, most segments have no event.
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--by", "income"]);
    let (code, out, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains(" 0.0000 ") && !out.contains("-0.0000") && !out.contains("-0.00%"), "{out}");
}

/// Every figure `judge` computes from a comparison's `:log_odds` columns
/// equals the comparison's own, to 1e-12 relative: the file holds what the
/// figures are computed from, at full precision. From the probabilities,
/// rows that round to exactly 0 or 1 would be clipped.
#[test]
fn log_odds_predictions_reproduce_the_comparison() {
    let dir = temp_dir();
    lending(dir.path());
    let families = ["logistic", "naive-bayes", "lda", "qda"];
    let mut args = vec!["compare"];
    args.extend(LENDING);
    for f in families {
        args.extend(["--family", f]);
    }
    args.extend(["--predictions", "oof.csv", "--json", "c.json"]);
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let compared: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("c.json")).expect("c.json")).expect("json");
    let mut args = vec!["judge", "oof.csv", "--target", "outcome", "--id", "application_id,application_month,fold"];
    let columns: Vec<String> = families.iter().map(|f| format!("{f}:log_odds")).collect();
    for c in &columns {
        args.extend(["--score", c.as_str()]);
    }
    args.extend(["--score-type", "log-odds", "--json", "-"]);
    let (code, out, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let judged: Value = serde_json::from_str(&out).expect("json");
    let relative = |a: f64, c: f64| a == c || (a - c).abs() <= 1e-12 * a.abs().max(c.abs());
    let mut checked = 0;
    for (i, family) in families.iter().enumerate() {
        let ours = judged["results"][i]["metrics"].as_object().expect("metrics");
        let theirs = compared["results"][i]["metrics"].as_object().expect("metrics");
        for (key, value) in theirs {
            let Some(c) = value.as_f64() else { continue };
            let a = ours.get(key).and_then(Value::as_f64).unwrap_or(f64::NAN);
            assert!(relative(a, c), "{family} {key}: judge {a} vs compare {c}");
            checked += 1;
        }
    }
    assert!(checked >= 40, "{checked} figures checked");
    // The paired tests agree too.
    assert_eq!(judged["paired"].as_array().map(Vec::len), Some(6));
    assert_eq!(compared["paired"].as_array().map(Vec::len), Some(6));
    for (a, c) in
        judged["paired"].as_array().into_iter().flatten().zip(compared["paired"].as_array().into_iter().flatten())
    {
        for key in ["auc_diff", "z", "p_value"] {
            let (x, y) = (a[key].as_f64().unwrap_or(f64::NAN), c[key].as_f64().unwrap_or(f64::NAN));
            assert!(relative(x, y), "paired {key}: {x} vs {y}");
        }
    }
}

/// The report's provenance header: the command line, the time, the
/// version, each input's SHA-256 and the options in force; with
/// SOURCE_DATE_EPOCH set, two runs give the same bytes.
#[test]
fn the_report_header_names_what_was_run_on_which_bytes() {
    let dir = temp_dir();
    let mut text = String::from("x,z,y\n");
    let mut rng = baserate::demo::rng::Rng::new(5);
    for i in 0..300 {
        let positive = i % 4 == 0;
        text.push_str(&format!(
            "{},{},{}\n",
            rng.normal() + if positive { 1.0 } else { 0.0 },
            rng.normal(),
            u8::from(positive)
        ));
    }
    let data = write(dir.path(), "d.csv", text.as_bytes());
    let report = |name: &str| {
        let output = std::process::Command::new(env!("CARGO_BIN_EXE_baserate"))
            .args(["compare", "d.csv", "--target", "y", "--family", "qda:pooled-weight=0.2", "--report", name])
            .env("SOURCE_DATE_EPOCH", "1796346197")
            .current_dir(dir.path())
            .output()
            .expect("run baserate");
        assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
        std::fs::read_to_string(dir.path().join(name)).expect("report")
    };
    let first = report("a.html");
    let second = report("b.html");
    assert_eq!(first.replace("a.html", "b.html"), second, "same inputs, same seed, same SOURCE_DATE_EPOCH: same bytes");
    let digest = baserate::io::sha256_file(&data).expect("hash");
    for part in [
        "compare d.csv --target y --family qda:pooled-weight=0.2 --report a.html",
        "2026-12-04T01:03:17Z",
        env!("CARGO_PKG_VERSION"),
        &format!("input d.csv</th><td class=\"l\">SHA-256 <code>{digest}</code>"),
        "5-fold stratified cross-validation",
        "pooled-weight=0.2",
        "<h3>Failed families</h3>\n<p>none</p>",
    ] {
        assert!(first.contains(part), "the header lacks {part}");
    }
}
