//! `inspect` states each logistic odds ratio for a rise of one training
//! standard deviation of its input, or for a step the user gives with
//! `--odds-ratio-per`. The odds ratio for a rise of c units is exp(c·β)
//! (Hosmer, Lemeshow & Sturdivant 2013, Applied Logistic Regression, 3rd
//! ed., §3.3, continuous covariates; cited from memory). The standard
//! deviation is the sample one (divisor n − 1) of the training column.

mod common;

use std::path::Path;

use common::{close, run, temp_dir, write};

/// 600 rows: an income in currency units, whose per-unit odds ratio is
/// within 1e-4 of 1, a utilisation share, and a region.
fn income_file(dir: &Path) -> Vec<f64> {
    let mut rng = baserate::rng::Rng::new(11);
    let mut text = String::from("income,utilisation,region,y\n");
    let mut incomes = Vec::new();
    for i in 0..600 {
        let income = (42_000.0 + 15_000.0 * rng.normal()).round();
        let utilisation = (rng.uniform() * 1000.0).round() / 1000.0;
        let region = ["north", "south", "west"][i % 3];
        let odds = (1.0 - income / 30_000.0 + 2.0 * utilisation).exp();
        let y = if rng.uniform() < odds / (1.0 + odds) { "bad" } else { "good" };
        text.push_str(&format!("{income},{utilisation},{region},{y}\n"));
        incomes.push(income);
    }
    write(dir, "income.csv", text.as_bytes());
    incomes
}

fn sample_sd(values: &[f64]) -> f64 {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
}

fn record<'a>(json: &'a serde_json::Value, input: &str) -> &'a serde_json::Value {
    json["coefficients"].as_array().and_then(|c| c.iter().find(|r| r["input"] == input)).expect(input)
}

#[test]
fn odds_ratios_are_per_standard_deviation_unless_a_step_is_given() {
    let dir = temp_dir();
    let incomes = income_file(dir.path());
    let (code, _, err) =
        run(dir.path(), &["fit", "income.csv", "--target", "y", "--family", "logistic", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");

    let (code, out, err) = run(dir.path(), &["inspect", "m.json", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    let json: serde_json::Value = serde_json::from_str(&out).expect("json");
    let income = record(&json, "income");
    let beta = income["coefficient"].as_f64().expect("coefficient");
    let sd = sample_sd(&incomes);
    assert!(close(income["odds_ratio_step"].as_f64().expect("step"), sd, 1e-12), "{income}");
    assert_eq!(income["odds_ratio_per"], "sd");
    assert!(close(income["odds_ratio"].as_f64().expect("ratio"), (beta * sd).exp(), 1e-12), "{income}");
    // Per unit it would print as 1: the reason for the default.
    assert!((beta.exp() - 1.0).abs() < 1e-3, "{income}");
    let level = record(&json, "region=south");
    assert_eq!(level["odds_ratio_per"], "level");
    let b = level["coefficient"].as_f64().expect("coefficient");
    assert!(close(level["odds_ratio"].as_f64().expect("ratio"), b.exp(), 1e-12), "{level}");
    assert!(record(&json, "<intercept>").get("odds_ratio").is_none());

    let (code, out, err) = run(dir.path(), &["inspect", "m.json", "--odds-ratio-per", "income=1000", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    let json: serde_json::Value = serde_json::from_str(&out).expect("json");
    let income = record(&json, "income");
    assert_eq!(income["odds_ratio_per"], "given");
    assert!(close(income["odds_ratio"].as_f64().expect("ratio"), (1000.0 * beta).exp(), 1e-12), "{income}");
    // The other input keeps its standard deviation.
    assert_eq!(record(&json, "utilisation")["odds_ratio_per"], "sd");

    // The screen shows the step beside each odds ratio, and its interval.
    let (code, out, err) = run(dir.path(), &["inspect", "m.json", "--odds-ratio-per", "income=1000"]);
    assert_eq!(code, 0, "{err}");
    let line = out.lines().find(|l| l.starts_with("income") && l.contains("1000")).expect(&out);
    assert!(line.contains(&baserate::format::number((1000.0 * beta).exp(), 4)) && line.contains('…'), "{out}");
    assert!(out.lines().any(|l| l.starts_with("utilisation") && l.contains("sd 0.")), "{out}");
    assert!(out.lines().all(|l| l.chars().count() <= 100), "{out}");
}

#[test]
fn a_step_for_an_input_the_model_lacks_is_refused_with_a_suggestion() {
    let dir = temp_dir();
    income_file(dir.path());
    let (code, _, err) =
        run(dir.path(), &["fit", "income.csv", "--target", "y", "--family", "logistic", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(dir.path(), &["inspect", "m.json", "--odds-ratio-per", "incme=1000"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("'incme'") && err.contains("did you mean 'income'"), "{err}");
    let (code, _, err) = run(dir.path(), &["inspect", "m.json", "--odds-ratio-per", "income=-5"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("positive number"), "{err}");
}
