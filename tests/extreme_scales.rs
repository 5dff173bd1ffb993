//! A column's scale is not its information: summaries and constancy
//! checks hold at any magnitude a double holds, logistic regression fits a
//! column at 1e-300 or 1e300 as it fits it at 1, and the Gaussian
//! families, which keep variances in the data's own units, say so and give
//! the remedy where those units cannot hold them.

mod common;

use std::path::Path;

use common::{run, temp_dir, write};

/// 300 rows: x shifts with the class, z is noise; x is written times 10^e.
fn scaled_file(dir: &Path, e: i32) -> String {
    let mut rng = baserate::rng::Rng::new(17);
    let mut text = String::from("x,z,y\n");
    for _ in 0..300 {
        let bad = rng.uniform() < 0.3;
        let x = rng.normal() + if bad { 1.0 } else { 0.0 };
        let z = rng.normal();
        text.push_str(&format!("{:?},{z:?},{}\n", x * 10f64.powi(e), if bad { "bad" } else { "good" }));
    }
    let name = format!("scaled{e}.csv");
    write(dir, &name, text.as_bytes());
    name
}

fn posteriors(dir: &Path, model: &str, data: &str) -> Vec<f64> {
    let out = format!("{model}.scores.csv");
    let (code, _, err) = run(dir, &["score", model, data, "-o", &out, "--quiet"]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(dir.join(&out)).expect("scores");
    text.lines().skip(1).map(|l| l.split(',').next().and_then(|v| v.parse().ok()).expect("posterior")).collect()
}

#[test]
fn describe_gives_finite_spreads_at_any_scale() {
    let dir = temp_dir();
    let d = dir.path();
    for e in [-300, -200, 154, 300] {
        let name = scaled_file(d, e);
        let (code, out, err) = run(d, &["describe", &name, "--target", "y", "--json", "-"]);
        assert_eq!(code, 0, "{err}");
        assert!(!err.contains("constant"), "10^{e}: {err}");
        let json: serde_json::Value = serde_json::from_str(&out).expect("json");
        let columns = json["schema"]["columns"].as_array().expect("columns");
        let x = columns.iter().find(|c| c["name"] == "x").expect("x");
        let sd = x["numeric"]["std_dev"].as_f64().expect("sd");
        // The unit-scale column's sd is about 1.
        let relative = sd / 10f64.powi(e);
        assert!(relative > 0.8 && relative < 1.3, "10^{e}: sd {sd}");
    }
}

#[test]
fn logistic_regression_fits_a_column_at_any_scale_as_at_one() {
    let dir = temp_dir();
    let d = dir.path();
    let unit = scaled_file(d, 0);
    let (code, _, err) = run(d, &["fit", &unit, "--target", "y", "--family", "logistic", "-o", "unit.json"]);
    assert_eq!(code, 0, "{err}");
    let expected = posteriors(d, "unit.json", &unit);
    for e in [-300, -200, 154, 300] {
        let name = scaled_file(d, e);
        let model = format!("m{e}.json");
        let (code, _, err) = run(d, &["fit", &name, "--target", "y", "--family", "logistic", "-o", &model]);
        assert_eq!(code, 0, "10^{e}: {err}");
        assert!(!err.contains("constant"), "10^{e}: {err}");
        // Below 1e-154 the slope's variance (1e308 and up) is beyond a double.
        assert_eq!(err.contains("no standard errors are stored"), e < -154, "10^{e}: {err}");
        // The model file reads back (a large number's exponent is written
        // with a sign, and the checksum covers it as written).
        let got = posteriors(d, &model, &name);
        assert_eq!(got.len(), expected.len());
        for (a, b) in got.iter().zip(&expected) {
            // The same fit up to where the optimiser stops (tolerance 1e-8
            // on the standardised step).
            assert!((a - b).abs() < 1e-7, "10^{e}: {a} vs {b}");
        }
    }
}

#[test]
fn gaussian_families_refuse_an_unrepresentable_spread_with_the_remedy() {
    let dir = temp_dir();
    let d = dir.path();
    for e in [-200, 200] {
        let name = scaled_file(d, e);
        for family in ["naive-bayes", "lda", "qda"] {
            let (code, _, err) = run(d, &["fit", &name, "--target", "y", "--family", family, "-o", "g.json"]);
            assert_eq!(code, 1, "{family} 10^{e}: {err}");
            assert!(err.contains("column 'x' varies on a scale of about 1e"), "{family} 10^{e}: {err}");
            assert!(err.contains("rescale it") && !err.contains("constant"), "{family} 10^{e}: {err}");
            assert!(!d.join("g.json").exists());
        }
    }
    // Within the range, they fit as usual.
    let name = scaled_file(d, 100);
    for family in ["naive-bayes", "lda", "qda"] {
        let (code, _, err) = run(d, &["fit", &name, "--target", "y", "--family", family, "-o", "g.json"]);
        assert_eq!(code, 0, "{family}: {err}");
    }
}

/// LDA far from the data: an income of 1e21 (or −1e21) is decided by the
/// linear discriminant, as the SQL export computes it, not given the prior
/// because xᵀΣ⁻¹x swamped the class terms.
#[test]
fn lda_decides_a_value_far_from_the_data_by_its_discriminant() {
    let dir = temp_dir();
    let d = dir.path();
    let name = scaled_file(d, 0);
    let (code, _, err) = run(d, &["fit", &name, "--target", "y", "--family", "lda", "-o", "lda.json"]);
    assert_eq!(code, 0, "{err}");
    write(d, "far.csv", b"x,z\n1e21,0\n-1e21,0\n");
    // x is larger in class bad (the first class): p(bad) → 1 at +1e21.
    let p = posteriors(d, "lda.json", "far.csv");
    assert_eq!(p, vec![1.0, 0.0]);
}
