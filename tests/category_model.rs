//! Categorical inputs in LDA and QDA: one-hot 0/1 columns modelled as
//! Gaussian, or smoothed class-conditional level frequencies beside a
//! Gaussian model of the numeric inputs, p(x | k) = p(x_cat | k)·p(x_num | k)
//! — the simplest case of the location model (Krzanowski 1975,
//! "Discrimination and classification using both binary and continuous
//! variables", JASA 70(352)). The frequency treatment must equal the
//! numeric-only fit with each categorical input's Laplace-smoothed level
//! frequencies multiplied in; `inspect` names the treatment; old model
//! files read as one-hot; QDA warns when a class covariance is nearly
//! singular. The exported SQL of both treatments is checked against `score`
//! in tests/warehouse.rs.

mod common;

use std::collections::BTreeMap;
use std::path::Path;

use common::{close, python_with, run, temp_dir, write};

/// 600 rows: two numeric inputs whose spread differs by class, a
/// four-level `region` with one rare level and a two-level `channel`.
fn mixed_file(dir: &Path) {
    let mut rng = baserate::rng::Rng::new(11);
    let mut text = String::from("x1,x2,region,channel,y\n");
    for _ in 0..600 {
        let bad = rng.uniform() < 0.3;
        let x1 = rng.normal() + if bad { 1.0 } else { 0.0 };
        let x2 = if bad { 0.5 * x1 + 1.5 * rng.normal() } else { rng.normal() - 0.2 };
        let u = rng.uniform();
        let cut = if bad { [0.5, 0.8, 0.97] } else { [0.3, 0.5, 0.99] };
        let region = if u < cut[0] {
            "north"
        } else if u < cut[1] {
            "south"
        } else if u < cut[2] {
            "east"
        } else {
            "isle"
        };
        let channel = if rng.uniform() < if bad { 0.7 } else { 0.4 } { "web" } else { "branch" };
        let y = if bad { "bad" } else { "good" };
        text.push_str(&format!("{x1:.4},{x2:.4},{region},{channel},{y}\n"));
    }
    write(dir, "mixed.csv", text.as_bytes());
}

fn fit(dir: &Path, args: &[&str], model: &str) -> String {
    let mut all = vec!["fit", "mixed.csv", "--target", "y"];
    all.extend(args);
    all.extend(["-o", model]);
    let (code, _, err) = run(dir, &all);
    assert_eq!(code, 0, "{args:?}: {err}");
    err
}

/// P(bad) of every row of `data` under `model`.
fn p_bad(dir: &Path, model: &str, data: &str) -> Vec<f64> {
    let out = format!("{model}.scores.csv");
    let (code, _, err) = run(dir, &["score", model, data, "-o", &out, "-q"]);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(dir.join(out)).expect("scores");
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().expect("header").split(',').collect();
    let column = header.iter().position(|h| *h == "posterior_bad").expect("posterior_bad");
    lines.map(|l| l.split(',').nth(column).and_then(|v| v.parse().ok()).expect("p")).collect()
}

/// The rows of the file as (region, channel, class).
fn categorical_rows(dir: &Path) -> Vec<(String, String, String)> {
    let text = std::fs::read_to_string(dir.join("mixed.csv")).expect("data");
    text.lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[2].to_string(), f[3].to_string(), f[4].to_string())
        })
        .collect()
}

/// log P(level | class) with Laplace smoothing (α = 1): (c + 1)/(nₖ + L).
fn log_frequencies(values: &[(&str, &str)]) -> BTreeMap<(String, String), f64> {
    let mut counts: BTreeMap<(String, String), f64> = BTreeMap::new();
    let mut class_rows: BTreeMap<String, f64> = BTreeMap::new();
    let mut levels: Vec<String> = values.iter().map(|(l, _)| l.to_string()).collect();
    levels.sort();
    levels.dedup();
    for (level, class) in values {
        *counts.entry((level.to_string(), class.to_string())).or_default() += 1.0;
        *class_rows.entry(class.to_string()).or_default() += 1.0;
    }
    let mut table = BTreeMap::new();
    for (class, n) in &class_rows {
        for level in &levels {
            let c = counts.get(&(level.clone(), class.clone())).copied().unwrap_or(0.0);
            table.insert((level.clone(), class.clone()), ((c + 1.0) / (n + levels.len() as f64)).ln());
        }
    }
    table
}

/// Under level frequencies, the log posterior odds are the numeric-only
/// fit's plus Σⱼ ln P(levelⱼ | bad)/P(levelⱼ | good): the Gaussian part is
/// fitted to the numeric inputs alone and the priors are the same. Closed
/// forms on both sides: 1e-8 relative on the posteriors.
#[test]
fn level_frequencies_are_the_numeric_fit_times_the_smoothed_frequencies() {
    let dir = temp_dir();
    let d = dir.path();
    mixed_file(d);
    let rows = categorical_rows(d);
    let region: Vec<(&str, &str)> = rows.iter().map(|(r, _, y)| (r.as_str(), y.as_str())).collect();
    let channel: Vec<(&str, &str)> = rows.iter().map(|(_, c, y)| (c.as_str(), y.as_str())).collect();
    let (region_table, channel_table) = (log_frequencies(&region), log_frequencies(&channel));
    let ratio = |table: &BTreeMap<(String, String), f64>, level: &str| {
        table[&(level.to_string(), "bad".to_string())] - table[&(level.to_string(), "good".to_string())]
    };
    for family in ["lda", "qda"] {
        let (model, numeric) = (format!("{family}.json"), format!("{family}-numeric.json"));
        fit(d, &["--family", family, "--category-model", "frequencies"], &model);
        fit(d, &["--family", family, "--exclude", "region,channel"], &numeric);
        let (with_levels, numeric_only) = (p_bad(d, &model, "mixed.csv"), p_bad(d, &numeric, "mixed.csv"));
        let mut worst = 0.0f64;
        for ((p, q), (r, c, _)) in with_levels.iter().zip(&numeric_only).zip(&rows) {
            let log_odds = (q / (1.0 - q)).ln() + ratio(&region_table, r) + ratio(&channel_table, c);
            let expected = 1.0 / (1.0 + (-log_odds).exp());
            worst = worst.max((p - expected).abs() / expected);
            assert!(close(*p, expected, 1e-8), "{family}: {p} against {expected}");
        }
        eprintln!("{family}: worst relative difference {worst:.1e}");
    }
}

/// `inspect` names the treatment on the screen and in the JSON; each
/// family's default is the one that predicted better out of sample (LDA
/// one-hot, QDA level frequencies; README).
#[test]
fn inspect_names_the_treatment_and_the_defaults_are_per_family() {
    let dir = temp_dir();
    let d = dir.path();
    mixed_file(d);
    for (family, option, expected) in [
        ("lda", None, "one-hot"),
        ("lda", Some("frequencies"), "frequencies"),
        ("qda", None, "frequencies"),
        ("qda", Some("one-hot"), "one-hot"),
    ] {
        let model = format!("{family}-{expected}.json");
        let mut args = vec!["--family", family];
        if let Some(o) = option {
            args.extend(["--category-model", o]);
        }
        fit(d, &args, &model);
        let (code, out, err) = run(d, &["inspect", &model]);
        assert_eq!(code, 0, "{err}");
        let line = out.lines().find(|l| l.starts_with("categorical inputs")).expect("a treatment line");
        assert!(
            line.contains("'region', 'channel'") && line.contains(&format!("--category-model {expected}")),
            "{line}"
        );
        if expected == "frequencies" {
            assert!(out.contains("'region': P(level | class)"), "{out}");
        }
        let (code, out, _) = run(d, &["inspect", &model, "--json", "-"]);
        assert_eq!(code, 0);
        let view: serde_json::Value = serde_json::from_str(&out).expect("inspect json");
        assert_eq!(view["category_model"], expected, "{family}");
    }
}

/// A model file written before the choice existed has no `categories`
/// parameter: it reads as one-hot and scores as it did.
#[test]
fn model_files_without_the_treatment_read_as_one_hot() {
    let dir = temp_dir();
    let d = dir.path();
    mixed_file(d);
    for family in ["lda", "qda"] {
        let model = format!("{family}.json");
        fit(d, &["--family", family, "--category-model", "one-hot"], &model);
        let text = std::fs::read_to_string(d.join(&model)).expect("model");
        let older = text.replace(",\n    \"categories\": \"one-hot\"", "");
        assert_ne!(older, text, "{family}: the parameter is written");
        let old_model = format!("{family}-old.json");
        write(d, &old_model, older.as_bytes());
        let (code, _, err) =
            run(d, &["score", &old_model, "mixed.csv", "-o", "old.csv", "-q", "--accept-edited-model"]);
        assert_eq!(code, 0, "{family}: {err}");
        let (code, _, err) = run(d, &["score", &model, "mixed.csv", "-o", "new.csv", "-q"]);
        assert_eq!(code, 0, "{family}: {err}");
        let (a, b) = (
            std::fs::read_to_string(d.join("old.csv")).expect("old"),
            std::fs::read_to_string(d.join("new.csv")).expect("new"),
        );
        assert_eq!(a, b, "{family}: the same scores");
        let (code, out, err) = run(d, &["inspect", &old_model, "--accept-edited-model"]);
        assert_eq!(code, 0, "{err}");
        assert!(out.contains("--category-model one-hot"), "{family}: {out}");
    }
}

/// With every input categorical there is no Gaussian part: the frequency
/// treatment is naive Bayes, and says so.
#[test]
fn frequencies_with_only_categorical_inputs_are_refused() {
    let dir = temp_dir();
    let d = dir.path();
    mixed_file(d);
    for family in ["lda", "qda"] {
        let args = [
            "fit",
            "mixed.csv",
            "--target",
            "y",
            "--family",
            family,
            "--category-model",
            "frequencies",
            "--exclude",
            "x1,x2",
            "-o",
            "m.json",
        ];
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 1, "{family}");
        assert!(err.contains("naive-bayes") && err.contains("one-hot"), "{family}: {err}");
        assert!(!d.join("m.json").exists(), "{family}: no model file");
    }
}

/// statsmodels 0.15.0 ships the fair data (Fair 1978, "A theory of
/// extramarital affairs", J. Political Economy 86(1)): 6,366 rows; the
/// target is affairs > 0 and the two occupations are categorical. One-hot
/// QDA's class covariances are nearly singular along the occupation
/// columns (numpy: smallest/largest eigenvalue of the correlation matrix
/// 0.0042 for 'no', 0.0019 for 'yes'), which the fit says, naming the
/// class and the columns and suggesting --pooled-weight. Under level frequencies
/// there is no warning, and the 41 rows of occupation 1, which one-hot QDA
/// gave P(yes) ≤ 3.9e-35 in sample, get posteriors that are not absurd.
/// Out of sample, level frequencies give QDA the lower log loss here as on
/// the demo data (the figures are in the README).
#[test]
fn one_hot_qda_warns_on_the_fair_data_and_frequencies_do_not() {
    if !python_with("statsmodels") {
        return;
    }
    let dir = temp_dir();
    let d = dir.path();
    let script = format!(
        "import statsmodels.api as sm\n\
         d = sm.datasets.fair.load_pandas().data\n\
         d['affair'] = (d.affairs > 0).map({{True: 'yes', False: 'no'}})\n\
         d = d.drop(columns=['affairs'])\n\
         for c in ['occupation', 'occupation_husb']:\n    d[c] = d[c].astype(int).map(lambda v: 'occ%d' % v)\n\
         d.to_csv(r'{}', index=False)\n",
        d.join("fair.csv").display()
    );
    let status = std::process::Command::new("python3").args(["-c", &script]).status().expect("python3");
    assert!(status.success(), "the fair data");
    let fit_fair = |option: &str, model: &str| {
        let args =
            ["fit", "fair.csv", "--target", "affair", "--family", "qda", "--category-model", option, "-o", model];
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 0, "{err}");
        err
    };
    let warned = fit_fair("one-hot", "one-hot.json");
    assert!(warned.contains("the covariance of class 'yes' is nearly singular along"), "{warned}");
    assert!(warned.contains("'occupation=occ2'") && warned.contains("--pooled-weight"), "{warned}");
    let quiet = fit_fair("frequencies", "frequencies.json");
    assert!(!quiet.contains("nearly singular"), "{quiet}");
    let (code, _, err) = run(d, &["score", "frequencies.json", "fair.csv", "-o", "s.csv", "-q"]);
    assert_eq!(code, 0, "{err}");
    let data = std::fs::read_to_string(d.join("fair.csv")).expect("data");
    let scores = std::fs::read_to_string(d.join("s.csv")).expect("scores");
    let header: Vec<&str> = data.lines().next().expect("header").split(',').collect();
    let occupation = header.iter().position(|h| *h == "occupation").expect("occupation");
    let score_header: Vec<&str> = scores.lines().next().expect("header").split(',').collect();
    let p_yes = score_header.iter().position(|h| *h == "posterior_yes").expect("posterior_yes");
    let smallest = data
        .lines()
        .skip(1)
        .zip(scores.lines().skip(1))
        .filter(|(row, _)| row.split(',').nth(occupation) == Some("occ1"))
        .map(|(_, s)| s.split(',').nth(p_yes).and_then(|v| v.parse::<f64>().ok()).expect("p"))
        .fold(f64::INFINITY, f64::min);
    assert!(smallest > 1e-3, "occupation 1: smallest P(yes) {smallest}");
    // Out of sample: level frequencies beat one-hot for QDA.
    let args = [
        "compare",
        "fair.csv",
        "--target",
        "affair",
        "--family",
        "qda",
        "--family",
        "qda:category-model=one-hot",
        "--json",
        "c.json",
    ];
    let (code, _, err) = run(d, &args);
    assert_eq!(code, 0, "{err}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("c.json")).expect("json")).expect("json");
    let log_loss = |i: usize| json["results"][i]["metrics"]["log_loss"].as_f64().expect("log loss");
    assert!(log_loss(0) < log_loss(1), "{} against {}", log_loss(0), log_loss(1));
}
