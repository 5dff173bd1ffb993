//! Aliased inputs — exact linear combinations of earlier ones — are
//! dropped from logistic regression's and LDA's fits with a warning, the
//! model records them and `inspect` shows them; `--refuse-aliased` refuses
//! instead. Dropping and reporting aliased columns is common practice in
//! regression software. The fit with the aliased column dropped must be the
//! fit without it. `describe` names aliased and near-collinear inputs; its
//! variance inflation factors are checked against numpy on the
//! breast_cancer fixture.

mod common;

use std::path::Path;

use baserate::data::{Dataset, ReadOptions};
use common::{close, run, temp_dir, write};

/// 400 rows: `total` = `a` + `b` exactly (three decimals each).
fn aliased_file(dir: &Path) {
    let mut rng = baserate::rng::Rng::new(5);
    let mut text = String::from("a,b,total,c,y\n");
    for _ in 0..400 {
        let round = |v: f64| (v * 1000.0).round() / 1000.0;
        let (a, b, c) = (round(rng.normal()), round(rng.normal()), round(rng.normal()));
        let odds = (a - b + 0.5 * c).exp();
        let y = if rng.uniform() < odds / (1.0 + odds) { "bad" } else { "good" };
        // Summed in thousandths (integers), so the sum is exact.
        let total = ((a * 1000.0).round() + (b * 1000.0).round()) / 1000.0;
        text.push_str(&format!("{a},{b},{total},{c},{y}\n"));
    }
    write(dir, "aliased.csv", text.as_bytes());
}

fn first_posteriors(dir: &Path, model: &str) -> Vec<f64> {
    let out = format!("{model}.csv");
    let (code, _, err) = run(dir, &["score", model, "aliased.csv", "-o", &out, "-q"]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(dir.join(out)).expect("scores");
    text.lines().skip(1).map(|l| l.split(',').next().and_then(|v| v.parse().ok()).expect("p")).collect()
}

#[test]
fn aliased_inputs_are_dropped_recorded_and_shown() {
    let dir = temp_dir();
    let d = dir.path();
    aliased_file(d);
    for family in ["logistic", "lda"] {
        let model = format!("{family}.json");
        let (code, _, err) = run(d, &["fit", "aliased.csv", "--target", "y", "--family", family, "-o", &model]);
        assert_eq!(code, 0, "{family}: {err}");
        assert!(err.contains("'total' is aliased: a linear combination of 'a', 'b'"), "{family}: {err}");
        let json: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(d.join(&model)).expect("model")).expect("json");
        assert_eq!(json["model"]["aliased"], serde_json::json!(["total"]), "{family}");
        // The same posteriors as the fit that never saw the column.
        let without = format!("{family}-without.json");
        let args = ["fit", "aliased.csv", "--target", "y", "--family", family, "--exclude", "total", "-o", &without];
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 0, "{family}: {err}");
        let (p, q) = (first_posteriors(d, &model), first_posteriors(d, &without));
        // Both fits converge to 1e-8 on the standardised step (logistic)
        // or are closed forms (LDA): 1e-8 relative on the posteriors.
        assert!(p.iter().zip(&q).all(|(a, b)| close(*a, *b, 1e-8)), "{family}");
        let (code, out, err) = run(d, &["inspect", &model]);
        assert_eq!(code, 0, "{err}");
        let row = out.lines().find(|l| l.starts_with("total ")).expect("a row for total");
        assert!(row.contains("aliased"), "{family}: {row}");
        assert!(out.contains("(aliased: 'total'"), "{family}: {out}");
        let (code, out, _) = run(d, &["inspect", &model, "--json", "-"]);
        assert_eq!(code, 0);
        let view: serde_json::Value = serde_json::from_str(&out).expect("inspect json");
        let field = if family == "lda" { "discriminant_coefficients" } else { "coefficients" };
        let total = view[field].as_array().expect("coefficients").iter().find(|c| c["input"] == "total").cloned();
        let total = total.expect("total");
        assert_eq!(total["aliased"], true, "{family}: {total}");
        assert!(total.get("se").is_none() && total.get("odds_ratio").is_none(), "{family}: {total}");
        // --refuse-aliased refuses, naming the columns.
        let args = ["fit", "aliased.csv", "--target", "y", "--family", family, "--refuse-aliased", "-o", "r.json"];
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 1, "{family}");
        assert!(err.contains("'total' is aliased") && err.contains("--exclude"), "{family}: {err}");
        assert!(!d.join("r.json").exists());
    }
    // In compare, every fold drops it too: both families are evaluated.
    let (code, out, err) =
        run(d, &["compare", "aliased.csv", "--target", "y", "--family", "logistic", "--family", "lda"]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("FAILED"), "{out}");
    let (code, _, err) = run(
        d,
        &["compare", "aliased.csv", "--target", "y", "--family", "logistic", "--family", "lda", "--refuse-aliased"],
    );
    assert_eq!(code, 1, "{err}");
    // --refuse-aliased is for the families that drop aliased inputs.
    let args = ["fit", "aliased.csv", "--target", "y", "--family", "qda", "--refuse-aliased", "-o", "q.json"];
    let (code, _, err) = run(d, &args);
    assert_eq!(code, 2, "{err}");
    // describe names the aliased input.
    let (code, out, err) = run(d, &["describe", "aliased.csv", "--target", "y"]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("'total' is a linear combination of 'a', 'b'"), "{out}");
}

/// Variance inflation factors of the breast_cancer fixture's inputs: the
/// diagonal of the inverse correlation matrix, as numpy computes it
/// (`np.diag(np.linalg.inv(np.corrcoef(X, rowvar=False)))`, numpy 2.4,
/// run once and copied here).
#[test]
fn variance_inflation_matches_numpy_on_breast_cancer() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/data/breast_cancer.csv");
    let (dataset, _) = Dataset::read(&path, &ReadOptions::new("target")).expect("fixture");
    let found = baserate::model::collinearity::collinearity(&dataset);
    assert!(found.aliased.is_empty());
    let reference = [
        ("mean_radius", 3806.1152963901673),
        ("mean_perimeter", 3786.400418924818),
        ("mean_area", 347.8786574561234),
        ("texture_error", 4.2054231937692546),
        ("worst_radius", 799.1059459432646),
    ];
    for (name, expected) in reference {
        let got = found.inflation.iter().find(|(n, _)| n == name).map(|(_, v)| *v).expect(name);
        // An inverse of a condition-1e5 matrix: 1e-8 relative leaves room
        // for the two libraries' orders of summation.
        assert!(close(got, expected, 1e-8), "{name}: {got} vs numpy {expected}");
    }
    assert!(found.groups.iter().any(|g| g.iter().any(|n| n == "mean_radius")));
}
