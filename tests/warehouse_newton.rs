//! Logistic regression fitted where the data lives: `stats-sql --family
//! logistic --start MODEL` writes one Newton step's aggregate query, `fit
//! --from-stats --start MODEL` takes the step, and the loop — start on a
//! sample, then query and step until converged — must end at the fit on
//! the file: coefficients to 1e-8 relative, standard errors to 1e-6, in
//! PostgreSQL, DuckDB and Apache Spark.
//!
//! The tolerances: both fits stop when the largest Newton step on the
//! standardised scale is below 1e-8, and Newton's quadratic convergence
//! puts both iterates far nearer the optimum than that (5e-14 relative
//! measured), so 1e-8 is the closed-form tolerance, not a loosened one. The
//! standard errors from the engine are those of the information at the
//! last model queried, one step (< 1e-8) before the final one; the file
//! fit's are at its final iterate, hence 1e-6.
//!
//! The data are the demo's lending scenario (our own invented portfolio),
//! with a frequency weight of 1, 2 or 3 per row. Skipped with a notice when
//! an engine is absent, unless BASERATE_REQUIRE_EXTERNAL=1 (as CI sets).

mod common;

use std::path::{Path, PathBuf};

use common::engine::{postgres, DuckDb, Engine};
use common::spark::Spark;
use common::{close, run, temp_dir};

const COEFFICIENT_TOLERANCE: f64 = 1e-8;
const STANDARD_ERROR_TOLERANCE: f64 = 1e-6;
/// Queries at most in a loop before the test gives up.
const MOST_QUERIES: usize = 40;

#[test]
fn newton_steps_in_postgresql_end_at_the_file_fit() {
    let Some(mut pg) = postgres() else { return };
    newton_steps_end_at_the_file_fit(&mut pg, true);
}

#[test]
fn newton_steps_in_duckdb_end_at_the_file_fit() {
    let Some(mut duck) = DuckDb::start() else { return };
    newton_steps_end_at_the_file_fit(&mut duck, true);
}

/// The same in Spark, every query in the Spark dialect (the start that is
/// worse than no inputs is left to the other two engines: what follows
/// from it is the library's doing, not the engine's).
#[test]
fn newton_steps_in_spark_end_at_the_file_fit() {
    let Some(mut spark) = Spark::shared() else { return };
    newton_steps_end_at_the_file_fit(&mut *spark, false);
}

/// One loop's end: the last model and what the loop printed.
struct Loop {
    model: PathBuf,
    queries: usize,
    transcript: String,
}

/// Queries and steps from `start` until `fit --from-stats` says converged.
fn newton_loop(engine: &mut dyn Engine, dir: &Path, tag: &str, start: &Path, query: &[&str], step: &[&str]) -> Loop {
    let mut model = start.to_path_buf();
    let mut transcript = String::new();
    for i in 1..=MOST_QUERIES {
        let sql = dir.join(format!("{tag}-step{i}.sql"));
        let mut args = vec!["stats-sql", "--family", "logistic", "--table", "train", "--dialect", engine.dialect()];
        args.extend(query);
        args.extend(["--start", model.to_str().unwrap(), "-o", sql.to_str().unwrap()]);
        let (code, _, stderr) = run(dir, &args);
        assert_eq!(code, 0, "{tag}: stats-sql: {stderr}");
        let result = engine.query_csv(&std::fs::read_to_string(&sql).expect("sql"));
        let result_file = dir.join(format!("{tag}-result{i}.csv"));
        std::fs::write(&result_file, result).expect("write result");
        let next = dir.join(format!("{tag}-model{i}.json"));
        let mut args = vec!["fit", result_file.to_str().unwrap(), "--from-stats", "--family", "logistic"];
        args.extend(step);
        args.extend(["--start", model.to_str().unwrap(), "-o", next.to_str().unwrap()]);
        let (code, stdout, stderr) = run(dir, &args);
        assert_eq!(code, 0, "{tag}: fit --from-stats, query {i}: {stderr}");
        transcript.push_str(&stdout);
        model = next;
        if stdout.lines().any(|l| l.starts_with("converged:")) {
            return Loop { model, queries: i, transcript };
        }
    }
    panic!("{tag}: not converged in {MOST_QUERIES} queries:\n{transcript}");
}

/// The coefficients (by class and term) and their standard errors.
fn coefficients(model: &Path) -> (serde_json::Value, Vec<(String, f64, Option<f64>)>) {
    let json: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(model).expect("model")).expect("json");
    let m = &json["model"];
    let mut terms: Vec<String> =
        m["encoding"]["numeric"].as_array().expect("numeric").iter().map(|t| t.as_str().unwrap().to_string()).collect();
    for h in m["encoding"]["one_hot"].as_array().expect("one_hot") {
        let column = h["column"].as_str().unwrap();
        terms.extend(
            h["levels"].as_array().unwrap().iter().skip(1).map(|l| format!("{column}={}", l.as_str().unwrap())),
        );
    }
    let covariance: Option<Vec<f64>> =
        m["covariance"].as_array().map(|c| c.iter().map(|v| v.as_f64().unwrap()).collect());
    let blocks = m["coefficients"].as_array().expect("coefficients");
    let size = blocks.len() * (terms.len() + 1);
    let mut out = Vec::new();
    for (position, block) in blocks.iter().enumerate() {
        let class = m["classes"][block["class"].as_u64().unwrap() as usize].as_str().unwrap().to_string();
        let values = std::iter::once(block["intercept"].as_f64().unwrap())
            .chain(block["slopes"].as_array().unwrap().iter().map(|v| v.as_f64().unwrap()));
        let names = std::iter::once("<intercept>".to_string()).chain(terms.iter().cloned());
        for (a, (name, value)) in names.zip(values).enumerate() {
            let i = position * (terms.len() + 1) + a;
            let se = covariance.as_ref().map(|c| c[i * size + i].sqrt());
            out.push((format!("{class}: {name}"), value, se));
        }
    }
    (m["encoding"].clone(), out)
}

/// The loop's model against the file fit's.
fn assert_same_fit(case: &str, from_engine: &Path, from_file: &Path, standard_errors: bool) {
    let (encoding_a, a) = coefficients(from_engine);
    let (encoding_b, b) = coefficients(from_file);
    assert_eq!(encoding_a, encoding_b, "{case}: the designs differ");
    let (mut worst, mut worst_se) = (0.0f64, 0.0f64);
    for ((name, x, se_x), (_, y, se_y)) in a.iter().zip(&b) {
        assert!(close(*x, *y, COEFFICIENT_TOLERANCE), "{case}: {name} {x} from the engine, {y} from the file");
        worst = worst.max((x - y).abs() / y.abs().max(1.0));
        if standard_errors {
            let (u, v) = (se_x.expect("engine SE"), se_y.expect("file SE"));
            assert!(
                close(u, v, STANDARD_ERROR_TOLERANCE),
                "{case}: SE of {name} {u} from the engine, {v} from the file"
            );
            worst_se = worst_se.max((u - v).abs() / v);
        }
    }
    eprintln!("{case}: worst coefficient difference {worst:.1e}, worst SE difference {worst_se:.1e}");
}

/// `fit DATA --family logistic FLAGS -o MODEL`, which must succeed.
fn fit(dir: &Path, data: &Path, flags: &[&str], model: &Path) {
    let mut args = vec!["fit", data.to_str().unwrap(), "--family", "logistic"];
    args.extend(flags);
    args.extend(["-o", model.to_str().unwrap()]);
    let (code, _, stderr) = run(dir, &args);
    assert_eq!(code, 0, "fit: {stderr}");
}

/// The rows of `source` (header kept) for which `keep(row number, line)` holds.
fn sample(source: &Path, target: &Path, keep: impl Fn(usize, &str) -> bool) {
    let text = std::fs::read_to_string(source).expect("read");
    let mut out = String::new();
    for (i, line) in text.lines().enumerate() {
        if i == 0 || keep(i, line) {
            out.push_str(line);
            out.push('\n');
        }
    }
    std::fs::write(target, out).expect("write");
}

fn newton_steps_end_at_the_file_fit(engine: &mut dyn Engine, with_far_start: bool) {
    let dir = temp_dir();
    let d = dir.path();
    let out = d.join("demo");
    let (code, _, stderr) = run(d, &["demo", "--out", out.to_str().unwrap()]);
    assert_eq!(code, 0, "{stderr}");
    // The lending training rows with a frequency weight of 1, 2 or 3.
    let table = d.join("weighted.csv");
    {
        let text = std::fs::read_to_string(out.join("lending").join("train.csv")).expect("train");
        let mut weighted = String::new();
        for (i, line) in text.lines().enumerate() {
            weighted.push_str(line);
            weighted.push_str(&if i == 0 { ",w".to_string() } else { format!(",{}", 1 + i % 3) });
            weighted.push('\n');
        }
        std::fs::write(&table, weighted).expect("write");
    }
    let numeric: Vec<String> =
        ["income", "debt_to_income", "revolving_utilisation", "months_at_address", "amount_requested", "w"]
            .map(String::from)
            .to_vec();
    engine.load("train", &table, &numeric);
    let ids = "application_id,application_month";
    let binary = ["--target", "outcome", "--id", ids, "--weight", "w", "--missing", "drop-rows"];
    let binary_query = ["--target", "outcome", "--weight", "w"];
    let mut counts = Vec::new();

    // A start on a quarter of the rows, none of them from the branch
    // channel: the reference level 'branch' enters from the first step.
    let start = d.join("start.json");
    let no_branch = d.join("no_branch.csv");
    sample(&table, &no_branch, |i, line| i % 4 == 0 && !line.contains(",branch,"));
    fit(d, &no_branch, &binary, &start);
    let direct = d.join("direct.json");
    fit(d, &table, &binary, &direct);
    let done = newton_loop(engine, d, "binary", &start, &binary_query, &["--missing", "drop-rows"]);
    assert!(done.transcript.contains("new level channel=branch: enters"), "{}", done.transcript);
    assert_same_fit("binary, weighted, a new reference level", &done.model, &direct, true);
    counts.push(("binary from a quarter sample", done.queries));
    // The fit from aggregates scores as the file fit does.
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&done.model).expect("model")).expect("json");
    assert_eq!(json["diagnostics"]["converged"], true);
    assert_eq!(json["schema"]["rows"], 4926);

    // A ridge penalty, from a start on a tenth of the rows.
    let tenth = d.join("tenth.csv");
    sample(&table, &tenth, |i, _| i % 10 == 3);
    let ridge: Vec<&str> = binary.iter().copied().chain(["--newton-ridge", "0.05"]).collect();
    let (ridge_start, ridge_direct) = (d.join("ridge_start.json"), d.join("ridge_direct.json"));
    fit(d, &tenth, &ridge, &ridge_start);
    fit(d, &table, &ridge, &ridge_direct);
    let done = newton_loop(
        engine,
        d,
        "ridge",
        &ridge_start,
        &binary_query,
        &["--missing", "drop-rows", "--newton-ridge", "0.05"],
    );
    assert_same_fit("binary, ridge 0.05", &done.model, &ridge_direct, false);
    counts.push(("ridge from a tenth", done.queries));

    // Class weights (applied to each class's sums after the query).
    let reweighted: Vec<&str> = binary.iter().copied().chain(["--reweight", "equal-totals"]).collect();
    let (equal_start, equal_direct) = (d.join("equal_start.json"), d.join("equal_direct.json"));
    fit(d, &tenth, &reweighted, &equal_start);
    fit(d, &table, &reweighted, &equal_direct);
    let done = newton_loop(
        engine,
        d,
        "equal",
        &equal_start,
        &binary_query,
        &["--missing", "drop-rows", "--reweight", "equal-totals"],
    );
    assert_same_fit("binary, equal class totals", &done.model, &equal_direct, true);
    counts.push(("equal class totals from a tenth", done.queries));

    // Four classes: the loan purpose, with the outcome among the inputs.
    let four = ["--target", "purpose", "--id", ids, "--weight", "w", "--missing", "drop-rows"];
    let (four_start, four_direct) = (d.join("four_start.json"), d.join("four_direct.json"));
    fit(d, &tenth, &four, &four_start);
    fit(d, &table, &four, &four_direct);
    let done = newton_loop(
        engine,
        d,
        "four",
        &four_start,
        &["--target", "purpose", "--weight", "w"],
        &["--missing", "drop-rows"],
    );
    assert_same_fit("four classes", &done.model, &four_direct, true);
    counts.push(("four classes from a tenth", done.queries));

    if with_far_start {
        // A start on 60 rows separates its sample and is worse on the
        // table than no inputs at all: the loop goes on from the
        // intercept-only model, as the file fit starts.
        let few = d.join("few.csv");
        sample(&table, &few, |i, _| i % 83 == 0);
        let few_start = d.join("few_start.json");
        fit(d, &few, &binary, &few_start);
        let done = newton_loop(engine, d, "far", &few_start, &binary_query, &["--missing", "drop-rows"]);
        assert!(done.transcript.contains("the start is worse than no inputs"), "{}", done.transcript);
        assert_same_fit("binary, from 60 rows", &done.model, &direct, true);
        counts.push(("binary from 60 rows", done.queries));
    }
    eprintln!("queries to convergence ({}): {counts:?}", engine.dialect());
}
