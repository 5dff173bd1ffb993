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

/// Reads a `score` output and its reject file: (posterior of the first
/// class per scored line, reason per set-aside line), by input line.
fn dispositions(dir: &Path, scores: &str, rejects: &str) -> (Vec<f64>, Vec<(u64, String, String)>) {
    let text = std::fs::read_to_string(dir.join(scores)).expect("scores");
    let scored = text.lines().skip(1).map(|l| l.split(',').next().and_then(|v| v.parse().ok()).expect("p")).collect();
    let mut reader = csv::Reader::from_path(dir.join(rejects)).expect("rejects");
    let set_aside = reader
        .records()
        .map(|r| {
            let r = r.expect("record");
            (r[0].parse().expect("line"), r[1].to_string(), r[2].to_string())
        })
        .collect();
    (scored, set_aside)
}

/// Far from the data, every family either scores a row from finite
/// evidence or sets it aside as `out-of-range`, naming the column; none
/// gives a made-up posterior. x varies on a scale of 1e4, so at 1e155 a
/// Gaussian term ((x − μ)/σ)²/2 ≈ 5e301 is still a double, at 1e200 it is
/// not; the linear families' evidence (slope ≈ 1e-4 per unit) is a double
/// even at 1e300.
#[test]
fn every_family_scores_extreme_values_or_sets_them_aside() {
    let dir = temp_dir();
    let d = dir.path();
    let name = scaled_file(d, 4);
    write(d, "far.csv", b"x,z\n1e21,0\n1e155,0\n1e200,0\n1e300,0\n-1e300,0\n-1e21,0\n");
    for family in ["logistic", "lda", "qda", "naive-bayes"] {
        let model = format!("{family}.json");
        let (code, _, err) = run(d, &["fit", &name, "--target", "y", "--family", family, "-o", &model]);
        assert_eq!(code, 0, "{family}: {err}");
        let (scores, rejects) = (format!("{family}.far.csv"), format!("{family}.rejects.csv"));
        let (code, _, err) = run(d, &["score", &model, "far.csv", "-o", &scores, "--rejects", &rejects, "-q"]);
        assert_eq!(code, 0, "{family}: {err}");
        let (scored, set_aside) = dispositions(d, &scores, &rejects);
        let json: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(d.join(&model)).expect("model")).expect("json");
        match family {
            // x is larger in class bad, the first class: p(bad) → 1 far to
            // the right, → 0 far to the left.
            "logistic" | "lda" => {
                assert!(set_aside.is_empty(), "{family}: {set_aside:?}");
                assert_eq!(scored, vec![1.0, 1.0, 1.0, 1.0, 0.0, 0.0], "{family}");
            }
            _ => {
                let lines: Vec<u64> = set_aside.iter().map(|r| r.0).collect();
                assert_eq!(lines, vec![4, 5, 6], "{family}: {set_aside:?}");
                assert!(set_aside.iter().all(|r| r.1 == "x" && r.2 == "out-of-range"), "{family}: {set_aside:?}");
                // Far out, the class whose x-precision is smaller (wider in
                // x) takes the row: (Σ⁻¹)ₓₓ = σ_zz / det for QDA, 1/σ²ₓ for
                // naive Bayes.
                let precision = |k: usize| -> f64 {
                    if family == "qda" {
                        let c: Vec<f64> = json["model"]["covariances"][k]
                            .as_array()
                            .expect("covariance")
                            .iter()
                            .map(|v| v.as_f64().expect("number"))
                            .collect();
                        c[3] / (c[0] * c[3] - c[1] * c[2])
                    } else {
                        1.0 / json["model"]["variances"][k][0].as_f64().expect("variance")
                    }
                };
                let wider_first = if precision(0) < precision(1) { 1.0 } else { 0.0 };
                assert_eq!(scored, vec![wider_first; 3], "{family}");
            }
        }
        // Without a reject file the run stops at the first such row,
        // naming its line and column, and writes nothing.
        if family == "qda" || family == "naive-bayes" {
            let out = format!("{family}.stopped.csv");
            let (code, _, err) = run(d, &["score", &model, "far.csv", "-o", &out]);
            assert_eq!(code, 1, "{family}");
            assert!(err.contains("far.csv") && err.contains("line 4") && err.contains("'x'"), "{family}: {err}");
            assert!(err.contains("beyond the range this model scores"), "{family}: {err}");
            assert!(!d.join(&out).exists());
        }
    }
}

/// A model with one slope of 1e308 (edited by hand) scores the rows whose
/// evidence is a double and sets the others aside, instead of giving every
/// row the prior.
#[test]
fn a_slope_of_1e308_scores_only_what_it_can() {
    let dir = temp_dir();
    let d = dir.path();
    let name = scaled_file(d, 0);
    let (code, _, err) = run(d, &["fit", &name, "--target", "y", "--family", "logistic", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
    // Edited as text: the file's field order is part of its format.
    let text = std::fs::read_to_string(d.join("m.json")).expect("model");
    let at = text.find("\"slopes\": [").expect("slopes") + "\"slopes\": [".len();
    let start = at + text[at..].find(|c: char| c == '-' || c.is_ascii_digit()).expect("slope");
    let end = start + text[start..].find(|c: char| c == ',' || c.is_whitespace()).expect("end");
    let edited = format!("{}1e308{}", &text[..start], &text[end..]);
    write(d, "edited.json", edited.as_bytes());
    write(d, "rows.csv", b"x,z\n0,0\n1e-300,0\n-1e-300,1\n2,0\n");
    let flags = ["--accept-edited-model", "-o", "s.csv", "--rejects", "r.csv", "-q"];
    let mut args = vec!["score", "edited.json", "rows.csv"];
    args.extend(flags);
    let (code, _, err) = run(d, &args);
    assert_eq!(code, 0, "{err}");
    let (scored, set_aside) = dispositions(d, "s.csv", "r.csv");
    assert_eq!(set_aside.iter().map(|r| (r.0, r.2.as_str())).collect::<Vec<_>>(), vec![(5, "out-of-range")]);
    assert_eq!(scored.len(), 3);
    // x = 0 leaves the intercept and z alone; ±1e-300 moves the log odds by ±1e8.
    assert!(scored[0] > 0.0 && scored[0] < 1.0 && scored[0] != 0.5, "{scored:?}");
    assert!(scored[1] == 0.0 || scored[1] == 1.0, "{scored:?}");
    assert_eq!(scored[1] + scored[2], 1.0, "{scored:?}");
}
