//! `fit`, `inspect` and `score` through the binary: the contract's fields,
//! and a clear message (never a panic) for singular, separated,
//! non-converging and corrupt cases.

mod common;

use common::{run, temp_dir, write};
use serde_json::Value;

fn lending(dir: &std::path::Path) {
    let files = baserate::demo::generate(baserate::demo::DEFAULT_SEED, baserate::demo::DemoSize::standard());
    write(dir, "train.csv", files[0].contents.as_bytes());
    write(dir, "new.csv", files[1].contents.as_bytes());
}

const LENDING: [&str; 7] =
    ["train.csv", "--target", "outcome", "--id", "application_id,application_month", "--missing", "impute"];

#[test]
fn every_family_fits_inspects_and_scores() {
    let dir = temp_dir();
    lending(dir.path());
    for family in ["logistic", "naive-bayes", "lda", "qda"] {
        let mut args = vec!["fit"];
        args.extend(LENDING);
        args.extend(["--family", family, "-o", "model.json"]);
        let (code, out, err) = run(dir.path(), &args);
        assert_eq!(code, 0, "{family}: {err}");
        assert!(out.contains("decision support, not a decision"));

        let (code, json, err) = run(dir.path(), &["inspect", "model.json", "--json", "-"]);
        assert_eq!(code, 0, "{err}");
        let v: Value = serde_json::from_str(&json).expect("inspect json");
        assert_eq!(v["family"], family);
        assert_eq!(v["classes"], serde_json::json!(["defaulted", "repaid"]));
        assert_eq!(v["positive"], "defaulted");
        assert_eq!(v["training_class_counts"]["defaulted"], 536);
        let priors = v["priors"].as_object().expect("priors");
        assert!((priors.values().map(|p| p.as_f64().unwrap_or(0.0)).sum::<f64>() - 1.0).abs() < 1e-12);
        match family {
            "logistic" => {
                let c = v["coefficients"].as_array().expect("coefficients");
                assert_eq!(c[0]["input"], "<intercept>");
                assert!(c.iter().any(|t| t["input"] == "channel=broker"));
                for field in ["coefficient", "se", "z", "p_value", "interval_low", "interval_high"] {
                    assert!(c[1][field].is_number(), "{field}");
                }
            }
            "lda" => assert_eq!(v["discriminant_coefficients"][0]["input"], "<intercept>"),
            _ => {}
        }
        let (code, text, err) = run(dir.path(), &["inspect", "model.json"]);
        assert_eq!(code, 0, "{err}");
        assert!(text.contains(family) && text.contains("Caution"));

        let (code, _, err) = run(
            dir.path(),
            &["score", "model.json", "new.csv", "-o", "scores.csv", "--id", "application_id", "--base-rate", "0.03"],
        );
        assert_eq!(code, 0, "{err}");
        let scores = std::fs::read_to_string(dir.path().join("scores.csv")).expect("scores");
        let mut lines = scores.lines();
        assert_eq!(lines.next(), Some("application_id,posterior_defaulted,posterior_repaid"));
        let rows: Vec<&str> = lines.collect();
        assert_eq!(rows.len(), 5_000);
        for row in rows {
            let fields: Vec<&str> = row.split(',').collect();
            let p: f64 = fields[1].parse::<f64>().expect("p") + fields[2].parse::<f64>().expect("p");
            assert!((p - 1.0).abs() < 1e-12, "{row}");
        }
    }
}

#[test]
fn singular_covariances_name_the_class_and_columns() {
    let dir = temp_dir();
    // `twice` is exactly 2 × `x`; `flat` is constant within class b.
    let mut text = String::from("x,twice,flat,z,y\n");
    for i in 0..60 {
        let x = (i * 37 % 17) as f64;
        let class = if i % 2 == 0 { "a" } else { "b" };
        let flat = if class == "b" { 1.0 } else { (i % 5) as f64 };
        text.push_str(&format!("{x},{},{flat},{},{class}\n", 2.0 * x, (i * 13 % 7) as f64));
    }
    write(dir.path(), "s.csv", text.as_bytes());
    // An exact multiple is aliased: dropped with a warning, or refused.
    let (code, _, err) = run(dir.path(), &["fit", "s.csv", "--target", "y", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("'twice' is aliased: a linear combination of 'x'"), "{err}");
    let refuse = ["fit", "s.csv", "--target", "y", "--family", "lda", "--refuse-aliased", "-o", "m.json"];
    let (code, _, err) = run(dir.path(), &refuse);
    assert_eq!(code, 1);
    assert!(err.contains("singular") && err.contains("x, twice") && err.contains("--exclude"), "{err}");
    let (code, _, err) =
        run(dir.path(), &["fit", "s.csv", "--target", "y", "--family", "qda", "--exclude", "twice", "-o", "m.json"]);
    assert_eq!(code, 1);
    assert!(err.contains("class 'b'") && err.contains("flat") && err.contains("--pooled-weight"), "{err}");
    let (code, _, err) = run(
        dir.path(),
        &[
            "fit",
            "s.csv",
            "--target",
            "y",
            "--family",
            "qda",
            "--exclude",
            "twice",
            "--pooled-weight",
            "0.2",
            "-o",
            "m.json",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(dir.path(), &["fit", "s.csv", "--target", "y", "--family", "logistic", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("'twice' is aliased"), "{err}");
    let refuse = ["fit", "s.csv", "--target", "y", "--family", "logistic", "--refuse-aliased", "-o", "m2.json"];
    let (code, _, err) = run(dir.path(), &refuse);
    assert_eq!(code, 1);
    assert!(err.contains("'twice' is aliased") && err.contains("x, twice"), "{err}");
    assert!(!dir.path().join("m2.json").exists());
    assert!(!dir.path().join("m.json.partial").exists());
}

#[test]
fn too_few_rows_for_qda() {
    let dir = temp_dir();
    write(dir.path(), "t.csv", b"x1,x2,x3,y\n1,2,3,a\n2,1,0,a\n3,3,1,a\n0,1,2,a\n5,4,2,a\n1,1,1,b\n2,0,1,b\n");
    let (code, _, err) = run(dir.path(), &["fit", "t.csv", "--target", "y", "--family", "qda", "-o", "m.json"]);
    assert_eq!(code, 1);
    assert!(err.contains("class 'b' has 2 rows") && err.contains("--pooled-weight"), "{err}");
}

#[test]
fn separation_and_non_convergence_are_warnings() {
    let dir = temp_dir();
    let mut text = String::from("score,noise,y\n");
    for i in 0..40 {
        text.push_str(&format!("{},{},{}\n", i, (i * 7) % 5, if i < 20 { "no" } else { "yes" }));
    }
    write(dir.path(), "sep.csv", text.as_bytes());
    let (code, _, err) = run(dir.path(), &["fit", "sep.csv", "--target", "y", "--family", "logistic", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
    // Named truthfully: the kind, the input, and a penalty as the remedy,
    // never more iterations (the estimates do not exist).
    assert!(err.contains("complete separation by 'score'"), "{err}");
    assert!(err.contains("--newton-ridge 0.01") && !err.contains("--max-iterations"), "{err}");
    let (code, _, err) = run(
        dir.path(),
        &["fit", "sep.csv", "--target", "y", "--family", "logistic", "--max-iterations", "200", "-o", "m.json"],
    );
    assert_eq!(code, 0, "{err}");
    assert!(!err.contains("--max-iterations"), "{err}");
    let (_, json, _) = run(dir.path(), &["inspect", "m.json", "--json", "-"]);
    let v: Value = serde_json::from_str(&json).expect("json");
    assert!(v["warnings"].as_array().is_some_and(|w| !w.is_empty()));
    let score = v["coefficients"].as_array().and_then(|c| c.iter().find(|c| c["input"] == "score")).expect("score");
    assert_eq!(score["diverges"], true, "{score}");
    assert!(score.get("odds_ratio").is_none() && score.get("se").is_none(), "{score}");
    let (_, text, _) = run(dir.path(), &["inspect", "m.json"]);
    assert!(text.contains("diverges") && !text.contains(" inf\n") && !text.contains("penalised fit"), "{text}");
    assert!(text.contains("separation: the estimates of 'score'"), "{text}");

    let dir2 = temp_dir();
    lending(dir2.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "logistic", "--max-iterations", "1", "-o", "m.json"]);
    let (code, out, err) = run(dir2.path(), &args);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("did not converge in 1 iterations") && out.contains("NOT converged"), "{err}");
}

#[test]
fn corrupt_truncated_and_newer_model_files_are_refused() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "-o", "m.json"]);
    assert_eq!(run(dir.path(), &args).0, 0);
    let good = std::fs::read_to_string(dir.path().join("m.json")).expect("model");
    let cases = [
        ("truncated.json", good[..good.len() / 2].to_string(), "truncated"),
        ("newer.json", good.replacen("\"format_version\": 2", "\"format_version\": 99", 1), "newer baserate"),
        ("garbage.json", "this is not json".to_string(), "not a valid model file"),
        ("other.json", "{\"format\": \"something\"}".to_string(), "not a baserate model file"),
        (
            "edited.json",
            good.replacen("\"positive\": \"defaulted\"", "\"positive\": \"late\"", 1),
            "does not match its checksum",
        ),
    ];
    for (name, text, message) in cases {
        write(dir.path(), name, text.as_bytes());
        let (code, _, err) = run(dir.path(), &["inspect", name]);
        assert_eq!(code, 1, "{name}");
        assert!(err.contains(name) && err.contains(message), "{name}: {err}");
        let (code, _, _) = run(dir.path(), &["score", name, "new.csv", "-o", "out.csv"]);
        assert_eq!(code, 1);
        assert!(!dir.path().join("out.csv").exists());
    }
}

#[test]
fn scoring_checks_the_file_against_the_model() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "naive-bayes", "-o", "m.json"]);
    assert_eq!(run(dir.path(), &args).0, 0);
    let new = std::fs::read_to_string(dir.path().join("new.csv")).expect("new");
    // A missing column: an error before anything is written.
    write(dir.path(), "no_income.csv", new.replace("income,", "earnings,").as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "m.json", "no_income.csv", "-o", "out.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("no_income.csv") && err.contains("'income'"), "{err}");
    assert!(!dir.path().join("out.csv").exists());
    // An unseen category, with its line.
    let mut lines: Vec<String> = new.lines().map(String::from).collect();
    lines[3] = lines[3]
        .replacen(",online,", ",kiosk,", 1)
        .replacen(",branch,", ",kiosk,", 1)
        .replacen(",broker,", ",kiosk,", 1);
    write(dir.path(), "kiosk.csv", (lines.join("\n") + "\n").as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "m.json", "kiosk.csv", "-o", "out.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("line 4") && err.contains("column 'channel'") && err.contains("'kiosk'"), "{err}");
    // Columns in another order, extra columns: fine.
    let reordered: String = new
        .lines()
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            let mut g: Vec<&str> = f.iter().rev().copied().collect();
            g.push(if l.starts_with("application_id") { "extra" } else { "1" });
            g.join(",")
        })
        .collect::<Vec<_>>()
        .join("\n");
    write(dir.path(), "reordered.csv", (reordered + "\n").as_bytes());
    assert_eq!(run(dir.path(), &["score", "m.json", "reordered.csv", "-o", "a.csv", "--id", "application_id"]).0, 0);
    assert_eq!(run(dir.path(), &["score", "m.json", "new.csv", "-o", "b.csv", "--id", "application_id"]).0, 0);
    assert_eq!(std::fs::read(dir.path().join("a.csv")).ok(), std::fs::read(dir.path().join("b.csv")).ok());
}

#[test]
fn priors_are_validated() {
    let dir = temp_dir();
    lending(dir.path());
    for (prior, message) in [
        ("defaulted=0.2,repaid=0.7", "sum to"),
        ("defaulted=0.2", "'repaid' has no probability"),
        ("late=0.5,repaid=0.5", "'late' is not one of"),
        ("defaulted=0,repaid=1", "strictly between 0 and 1"),
    ] {
        let mut args = vec!["fit"];
        args.extend(LENDING);
        args.extend(["--family", "lda", "--prior", prior, "-o", "m.json"]);
        let (code, _, err) = run(dir.path(), &args);
        assert_eq!(code, 2, "{prior}");
        assert!(err.contains(message), "{prior}: {err}");
    }
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--pooled-weight", "0.1", "-o", "m.json"]);
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 2);
    assert!(err.contains("--pooled-weight applies to qda"), "{err}");
}

#[test]
fn columns_the_model_does_not_use_are_ignored_when_scoring() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "-o", "m.json"]);
    assert_eq!(run(dir.path(), &args).0, 0);
    let new = std::fs::read_to_string(dir.path().join("new.csv")).expect("new");
    // An extra column full of values that would be errors in a feature.
    let extra: String = new
        .lines()
        .enumerate()
        .map(|(i, l)| if i == 0 { format!("junk,{l}") } else { format!("inf,{l}") })
        .collect::<Vec<_>>()
        .join("\n");
    write(dir.path(), "extra.csv", (extra + "\n").as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "m.json", "extra.csv", "-o", "out.csv"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn nothing_to_model_is_an_error_not_a_crash() {
    let dir = temp_dir();
    write(dir.path(), "none.csv", b"id,y\n1,a\n2,b\n3,a\n4,b\n5,a\n6,b\n");
    // LDA and QDA have nothing to estimate; naive Bayes and logistic
    // regression fit the class mix alone, which is allowed.
    for family in ["qda", "lda"] {
        let (code, _, err) =
            run(dir.path(), &["fit", "none.csv", "--target", "y", "--id", "id", "--family", family, "-o", "m.json"]);
        assert_eq!(code, 1, "{family}: {err}");
    }
    // In a comparison, LDA and QDA are failed rows beside the two that fit.
    let (code, out, err) = run(dir.path(), &["compare", "none.csv", "--target", "y", "--id", "id", "--folds", "2"]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("failed: lda, qda") || out.contains("failed: qda, lda"), "{out}");
    let strict = ["compare", "none.csv", "--target", "y", "--id", "id", "--folds", "2", "--strict"];
    assert_eq!(run(dir.path(), &strict).0, 1);
}

#[test]
fn a_model_whose_parameters_do_not_match_its_schema_is_refused() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "logistic", "-o", "m.json"]);
    assert_eq!(run(dir.path(), &args).0, 0);
    let good = std::fs::read_to_string(dir.path().join("m.json")).expect("model");
    // Drop a level from the fitted encoding only (the schema keeps it).
    let edited = good.replacen("\"home_improvement\",\n", "", 1);
    assert_ne!(edited, good);
    write(dir.path(), "edited.json", edited.as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "edited.json", "new.csv", "-o", "out.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("edited.json"), "{err}");
}

#[test]
fn shift_estimates_the_new_base_rate() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--calibrate", "platt", "-o", "m.json"]);
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let model: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("m.json")).expect("model")).expect("json");
    assert_eq!(model["calibration"]["method"], "platt");
    assert_eq!(model["held_out"]["folds"], 5);
    let (code, out, err) = run(dir.path(), &["shift", "m.json", "new.csv", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).expect("shift json");
    assert!(v["training_prior"]["defaulted"].as_f64().is_some_and(|p| (p - 0.1072).abs() < 1e-12));
    let estimates = v["estimates"].as_array().expect("estimates");
    let methods: Vec<&str> = estimates.iter().map(|e| e["method"].as_str().unwrap_or("")).collect();
    assert_eq!(methods, vec!["em", "bbse", "mean_posterior", "classify_and_count"]);
    for e in &estimates[..2] {
        let (low, high) = (e["ci_low"].as_f64().unwrap_or(1.0), e["ci_high"].as_f64().unwrap_or(0.0));
        let share = e["prior"]["defaulted"].as_f64().unwrap_or(-1.0);
        assert!(low <= share && share <= high, "{e}");
        assert!(e["ci"]["defaulted"].is_array());
        // The new portfolio runs at 3% (2.5% realised): well below training's 10.7%.
        assert!(high < 0.08 && low > 0.0, "{e}");
    }
    assert!(v["unchanged_test"]["p_value"].as_f64().is_some_and(|p| p < 0.001));
    assert!(v["unchanged_test"]["statistic"].as_f64().is_some_and(|s| s > 10.0));
    // The estimate feeds scoring.
    std::fs::write(dir.path().join("shift.json"), &out).expect("write");
    let (code, _, err) =
        run(dir.path(), &["score", "m.json", "new.csv", "--prior-from", "shift.json:bbse", "-o", "s.csv"]);
    assert_eq!(code, 0, "{err}");
}

/// `shift` reads the new rows as `score` does: a missing value and an
/// unseen level are filled or set aside by the same policies.
#[test]
fn shift_applies_the_scoring_policies() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "-o", "m.json"]);
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(dir.path().join("new.csv")).expect("new");
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    // Line 3: income missing; line 6: a housing level training never had.
    let mut fields: Vec<String> = lines[2].split(',').map(String::from).collect();
    fields[5] = String::new();
    lines[2] = fields.join(",");
    let mut fields: Vec<String> = lines[5].split(',').map(String::from).collect();
    fields[3] = "houseboat".into();
    lines[5] = fields.join(",");
    write(dir.path(), "odd.csv", (lines.join("\n") + "\n").as_bytes());

    let (code, _, err) = run(dir.path(), &["shift", "m.json", "odd.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("odd.csv, line 6") && err.contains("housing") && err.contains("houseboat"), "{err}");

    let (code, out, err) =
        run(dir.path(), &["shift", "m.json", "odd.csv", "--missing", "impute", "--unseen", "missing", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).expect("shift json");
    assert_eq!(v["rows"], 5000);

    let (code, _, err) = run(dir.path(), &["shift", "m.json", "odd.csv", "--unseen", "reject"]);
    assert_eq!(code, 2, "{err}");
    let args = ["shift", "m.json", "odd.csv", "--unseen", "reject", "--rejects", "r.csv", "--json", "s.json"];
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&std::fs::read_to_string(dir.path().join("s.json")).expect("s")).expect("json");
    assert_eq!(v["rows"], 4999);
    let rejects = std::fs::read_to_string(dir.path().join("r.csv")).expect("rejects");
    let rows: Vec<&str> = rejects.lines().collect();
    assert_eq!(rows.len(), 2, "{rejects}");
    assert!(rows[1].starts_with("6,housing,unseen-category,houseboat,"), "{rejects}");

    // A semicolon-delimited copy reads the same.
    let semicolons = text.replace(',', ";");
    write(dir.path(), "semi.csv", semicolons.as_bytes());
    let (code, out, err) = run(dir.path(), &["shift", "m.json", "semi.csv", "--delimiter", ";", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    let (_, plain, _) = run(dir.path(), &["shift", "m.json", "new.csv", "--json", "-"]);
    assert_eq!(out, plain);
}

#[test]
fn sampled_training_data_scores_at_the_population_mix() {
    let dir = temp_dir();
    lending(dir.path());
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "logistic", "--sampled", "repaid=0.25", "-o", "m.json"]);
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let v: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("m.json")).expect("model")).expect("json");
    // 536 defaulted and 4,464 repaid kept at a quarter: the population has
    // 4 × 4,464 repaid, so a default share of 536/(536 + 17,856) = 0.029143...
    let expected = 536.0 / (536.0 + 4.0 * 4464.0);
    let prior = v["prior"][0].as_f64().unwrap_or(0.0);
    assert!((prior - expected).abs() < 1e-12, "{prior} vs {expected}");
    assert!((v["training_class_mix"][0].as_f64().unwrap_or(0.0) - 0.1072).abs() < 1e-12);
}

const LENDING_COSTS: &str = r#"
[actions.approve]
repaid = 0
defaulted = { fixed = 25, rate = 0.6, column = "amount_requested" }

[actions.refer]
repaid = 40
defaulted = 40
capacity = 300

[actions.decline]
repaid = { rate = 0.08, column = "amount_requested" }
defaulted = 0
"#;

#[test]
fn costs_drive_decisions_in_score_and_compare() {
    let dir = temp_dir();
    lending(dir.path());
    write(dir.path(), "costs.toml", LENDING_COSTS.as_bytes());
    write(
        dir.path(),
        "german.toml",
        b"[actions.approve]\nrepaid = 0\ndefaulted = 5\n[actions.decline]\nrepaid = 1\ndefaulted = 0\n",
    );
    let mut args = vec!["fit"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "-o", "m.json"]);
    assert_eq!(run(dir.path(), &args).0, 0);
    let (code, _, err) = run(
        dir.path(),
        &["score", "m.json", "new.csv", "--id", "application_id", "--costs", "costs.toml", "-o", "d.csv"],
    );
    assert_eq!(code, 0, "{err}");
    let out = std::fs::read_to_string(dir.path().join("d.csv")).expect("decisions");
    assert!(out.starts_with("application_id,posterior_defaulted,posterior_repaid,action,expected_cost\n"));
    let refer = out.lines().filter(|l| l.contains(",refer,")).count();
    assert!(refer <= 300 && refer > 0, "{refer}");
    assert!(err.contains("decisions: approve") && err.contains("total expected cost"), "{err}");
    let (code, _, err) =
        run(dir.path(), &["score", "m.json", "new.csv", "--costs", "german.toml", "--base-rate", "0.3", "-o", "g.csv"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("decline when p(defaulted) >= 0.166667"), "{err}");
    // A class the target does not have, and a column the data does not have.
    write(dir.path(), "bad.toml", b"[actions.approve]\ngood = 0\ndefaulted = 5\n");
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--costs", "bad.toml", "-o", "x.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("bad.toml") && err.contains("unknown key 'good': not a class"), "{err}");
    write(dir.path(), "nocol.toml", LENDING_COSTS.replace("amount_requested", "loan_size").as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--costs", "nocol.toml", "-o", "x.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("loan_size"), "{err}");
    assert!(!dir.path().join("x.csv").exists());
    write(dir.path(), "cat.toml", LENDING_COSTS.replace("amount_requested", "channel").as_bytes());
    let (code, _, err) = run(dir.path(), &["score", "m.json", "new.csv", "--costs", "cat.toml", "-o", "x.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("cat.toml") && err.contains("'channel'") && err.contains("categorical"), "{err}");
    // A capacity needs every row in hand: refused on stdin.
    let (code, _, err) = run(dir.path(), &["score", "m.json", "-", "--costs", "costs.toml", "-o", "x.csv"]);
    assert_ne!(code, 0);
    assert!(err.contains("capacity") && err.contains("stdin"), "{err}");
    assert!(!dir.path().join("x.csv").exists());

    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--family", "logistic", "--costs", "german.toml", "--json", "-"]);
    let (code, out, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let v: Value = serde_json::from_str(&out).expect("json");
    let m = &v["results"][0]["metrics"];
    assert!(m["expected_cost"].as_f64().is_some_and(|c| c > 0.0 && c < 1.0), "{m}");
    assert!((m["theoretical_cutoff"].as_f64().unwrap_or(0.0) - 1.0 / 6.0).abs() < 1e-12);
    assert!(m["best_cutoff_on_holdout"].is_number());
    let ci = &m["expected_cost_ci"];
    let cost = m["expected_cost"].as_f64().unwrap_or(f64::NAN);
    assert!(ci[0].as_f64().unwrap_or(f64::NAN) <= cost && cost <= ci[1].as_f64().unwrap_or(f64::NAN), "{ci}");
    // Cutoff table: approvals grow with the cutoff; at p* the two-action
    // cutoff rule is the Bayes rule, so its cost is the realised cost; no
    // cutoff in the table beats the best one found on these rows.
    let table = m["cutoff_table"].as_array().cloned().unwrap_or_default();
    let field = |r: &Value, k: &str| r[k].as_f64().unwrap_or(f64::NAN);
    assert!(table.windows(2).all(|p| field(&p[0], "approval_rate") <= field(&p[1], "approval_rate")));
    let at_theory = table.iter().find(|r| (field(r, "cutoff") - 1.0 / 6.0).abs() < 1e-12).expect("p* in the table");
    assert!((field(at_theory, "expected_cost") - cost).abs() < 1e-12);
    let best = m["best_cutoff_on_holdout"].as_f64().unwrap_or(f64::NAN);
    let at_best = table.iter().find(|r| (field(r, "cutoff") - best).abs() < 1e-12).expect("best in the table");
    assert!(table.iter().all(|r| field(at_best, "expected_cost") <= field(r, "expected_cost") + 1e-12));

    // The report carries the same decisions as a table beside the cost curves.
    let mut args = vec!["compare"];
    args.extend(LENDING);
    args.extend(["--family", "lda", "--costs", "german.toml", "--report", "r.html"]);
    let (code, _, err) = run(dir.path(), &args);
    assert_eq!(code, 0, "{err}");
    let html = std::fs::read_to_string(dir.path().join("r.html")).unwrap_or_default();
    assert!(html.contains("Decisions under the costs") && html.contains("data-chart=\"cost curves\""));
}

/// The fit summary gives a figure every family shares: the training log
/// loss of the posteriors. For logistic regression without class weights it
/// is −(log-likelihood)/n exactly (the same sum, 1e-12 relative); the
/// class-conditional families say they are closed forms and show no
/// joint-density likelihood.
#[test]
fn fit_summaries_give_the_training_log_loss() {
    let dir = temp_dir();
    let d = dir.path();
    lending(d);
    for family in ["logistic", "lda", "qda", "naive-bayes"] {
        let model = format!("{family}.json");
        let args = [
            "fit",
            "train.csv",
            "--target",
            "outcome",
            "--family",
            family,
            "--id",
            "application_id,application_month",
            "--missing",
            "impute",
            "-o",
            &model,
        ];
        let (code, out, err) = run(d, &args);
        assert_eq!(code, 0, "{family}: {err}");
        let line = out.lines().find(|l| l.starts_with("positive class:")).expect("summary");
        assert!(line.contains("training log loss") && !line.contains("log-likelihood"), "{family}: {line}");
        assert_eq!(line.contains("closed form"), family != "logistic", "{family}: {line}");
        let json: Value = serde_json::from_str(&std::fs::read_to_string(d.join(&model)).expect("model")).expect("json");
        let loss = json["diagnostics"]["training_log_loss"].as_f64().expect("training_log_loss");
        assert!(loss > 0.0 && loss < 1.0, "{family}: {loss}");
        if family == "logistic" {
            let rows = json["training"]["rows"].as_f64().expect("rows");
            let ll = json["diagnostics"]["log_likelihood"].as_f64().expect("log-likelihood");
            assert!(((loss * rows) + ll).abs() <= 1e-12 * ll.abs(), "{loss} × {rows} against {ll}");
        }
        let (code, shown, _) = run(d, &["inspect", &model]);
        assert_eq!(code, 0);
        assert!(shown.contains("training log loss"), "{family}: {shown}");
    }
}

/// The drift line shows the five largest PSIs and says how many more are in
/// the summary; on fewer than 500 scored rows it says PSI means little.
#[test]
fn the_drift_line_shows_five_and_marks_too_few_rows() {
    let dir = temp_dir();
    let d = dir.path();
    lending(d);
    let mut fit = vec!["fit"];
    fit.extend(LENDING);
    fit.extend(["--family", "lda", "-o", "m.json"]);
    let (code, _, err) = run(d, &fit);
    assert_eq!(code, 0, "{err}");
    // Every feature moved: numbers scaled, each category one level.
    let text = std::fs::read_to_string(d.join("new.csv")).expect("new");
    let mut moved = String::new();
    for (i, line) in text.lines().enumerate() {
        if i == 0 {
            moved.push_str(line);
        } else {
            let f: Vec<&str> = line.split(',').collect();
            let scaled = |v: &str| v.parse::<f64>().map_or(v.to_string(), |x| format!("{}", x * 1.9));
            let numbers: Vec<String> = f[5..].iter().map(|v| scaled(v)).collect();
            moved.push_str(&format!("{},{},broker,rent,car,{}", f[0], f[1], numbers.join(",")));
        }
        moved.push('\n');
    }
    write(d, "moved.csv", moved.as_bytes());
    let score = ["score", "m.json", "moved.csv", "-o", "s.csv", "--id", "application_id"];
    let (code, _, err) = run(d, &score);
    assert_eq!(code, 0, "{err}");
    let line = err.lines().find(|l| l.starts_with("drift")).expect("a drift line");
    let features = line.split_once("; ").map_or("", |(_, f)| f);
    assert_eq!(features.matches(" act").count() + features.matches(" watch").count(), 5, "{line}");
    assert!(line.contains("and 3 more not stable"), "{line}");
    assert!(!line.contains("too few"), "{line}");
    // 100 rows: marked.
    let few: String = moved.lines().take(101).map(|l| format!("{l}\n")).collect();
    write(d, "few.csv", few.as_bytes());
    let (code, _, err) = run(d, &["score", "m.json", "few.csv", "-o", "f.csv", "--id", "application_id"]);
    assert_eq!(code, 0, "{err}");
    let line = err.lines().find(|l| l.starts_with("drift")).expect("a drift line");
    assert!(line.contains("on 100 rows, too few for PSI to mean much"), "{line}");
}
