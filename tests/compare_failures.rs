//! A family that fails in some fold is a result, not a crash: it is
//! reported as failed with the fold and the reason (table, JSON, report),
//! the others are evaluated as usual, the paired comparisons it would be in
//! are listed as left out, and the run exits 0 unless every family failed
//! or `--strict` asks for 1 on any failure.

mod common;

use common::{run, temp_dir};
use serde_json::Value;

/// scikit-learn's breast_cancer data as `tests/reference/data/` holds it:
/// 30 inputs, several nearly collinear (radius, perimeter, area), on which
/// the unpenalised logistic fit's information matrix is singular in a fold.
fn breast_cancer() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/breast_cancer.csv")
}

#[test]
fn a_failed_family_is_a_failed_row_and_the_others_are_evaluated() {
    let dir = temp_dir();
    let d = dir.path();
    let data = breast_cancer();
    let data = data.to_str().expect("path");
    let args = ["compare", data, "--target", "target", "--json", "c.json", "--report", "c.html"];
    let (code, out, err) = run(d, &args);
    assert_eq!(code, 0, "{err}");
    let json: Value = serde_json::from_str(&std::fs::read_to_string(d.join("c.json")).expect("json")).expect("json");
    let results = json["results"].as_array().expect("results");
    let mut names: Vec<&str> = results.iter().map(|r| r["name"].as_str().expect("name")).collect();
    names.sort();
    assert_eq!(names, ["lda", "logistic", "naive-bayes", "qda"], "every family is a result");
    let failed: Vec<&Value> = results.iter().filter(|r| r["status"] == "failed").collect();
    for f in &failed {
        assert!(f.get("metrics").is_none() && f["family"].is_string());
        let error = f["error"].as_str().expect("error");
        assert!(error.starts_with("in fold ") && error.contains("fit failed"), "{error}");
        let name = f["name"].as_str().expect("name");
        assert!(out.contains(name) && out.contains("FAILED in fold"), "{out}");
        assert!(err.contains(&format!("warning: {name} failed in fold")), "{err}");
        // Its paired comparisons are left out, and listed.
        let left_out = json["paired_left_out"].as_array().expect("left out");
        assert_eq!(left_out.iter().filter(|p| p["b"] == name).count(), 4 - failed.len());
        assert!(json["paired"].as_array().expect("paired").iter().all(|p| p["a"] != name && p["b"] != name));
    }
    let evaluated = results.iter().filter(|r| r.get("metrics").is_some()).count();
    assert_eq!(evaluated + failed.len(), 4);
    assert!(evaluated >= 3, "{}", serde_json::to_string_pretty(&json).expect("json"));
    if !failed.is_empty() {
        let html = std::fs::read_to_string(d.join("c.html")).expect("report");
        assert!(html.contains("Failed, and left out of every figure"));
        // --strict: any failure ends with exit code 1 (the outputs are still written).
        let (code, _, err) = run(d, &["compare", data, "--target", "target", "--strict", "--json", "s.json"]);
        assert_eq!(code, 1, "{err}");
        assert!(d.join("s.json").exists());
    }
}

#[test]
fn when_every_family_fails_the_run_fails() {
    let dir = temp_dir();
    let d = dir.path();
    // Two inputs, one a copy of the other: QDA's class covariances are
    // singular in every fold.
    let mut text = String::from("x,z,y\n");
    for i in 0..60 {
        let x = (i % 7) as f64;
        text.push_str(&format!("{x},{x},{}\n", if i % 3 == 0 { "bad" } else { "good" }));
    }
    common::write(d, "twins.csv", text.as_bytes());
    let (code, _, err) = run(d, &["compare", "twins.csv", "--target", "y", "--family", "qda", "--json", "c.json"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("no candidate could be evaluated; qda failed in fold"), "{err}");
    assert!(!d.join("c.json").exists());
}

/// On the breast_cancer fixture (as scikit-learn ships it) every family is
/// evaluated: the logistic folds, warm-started from a fit that separates
/// the rows, are diagnosed as `fit` diagnoses all rows (separation, not
/// collinearity), and the run exits 0.
#[test]
fn every_family_is_evaluated_on_the_breast_cancer_fixture() {
    let dir = common::temp_dir();
    let d = dir.path();
    let data =
        std::fs::read(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/data/breast_cancer.csv")).expect("fixture");
    common::write(d, "bc.csv", &data);
    let (code, out, err) = common::run(d, &["compare", "bc.csv", "--target", "target", "--json", "c.json"]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("FAILED"), "{out}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("c.json")).expect("json")).expect("json");
    let results = json["results"].as_array().expect("results");
    assert_eq!(results.len(), 4);
    assert!(results.iter().all(|r| r.get("status").is_none() && r["metrics"]["auc"].as_f64().is_some()));
    let (code, _, fit_err) =
        common::run(d, &["fit", "bc.csv", "--target", "target", "--family", "logistic", "-o", "m.json"]);
    assert_eq!(code, 0, "{fit_err}");
    assert!(fit_err.contains("complete separation by") && !fit_err.contains("collinear"), "{fit_err}");
    assert!(!err.contains("collinear"), "{err}");
}
