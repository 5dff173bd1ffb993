//! The warehouse path in real engines: the exported scoring SQL run in
//! PostgreSQL (a throwaway cluster on a socket in a temporary directory)
//! must reproduce `score` — every posterior to 1e-9 absolute, every action
//! exactly — for every family, calibration map, prior and cost option;
//! hostile names must stay names; a model fitted from PostgreSQL's
//! aggregates must score as the model fitted on the file does. DuckDB
//! (through its Python package) checks the ANSI dialect a second time, and
//! Apache Spark (pyspark, local mode, one session per test binary) runs
//! the same scoring, policy, extreme-value, hostile-name and aggregate
//! cases from the Spark dialect.
//!
//! The data are the demo scenarios (our own invented lending and payments
//! portfolios). Skipped with a notice when PostgreSQL, DuckDB or pyspark is
//! absent, unless BASERATE_REQUIRE_EXTERNAL=1 (as CI sets).

mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use common::engine::{postgres, Engine};
use common::spark::Spark;
use common::{python_with, run, temp_dir, write};

/// Posteriors from the SQL and from `score` agree to this, absolutely: the
/// two compute the same formulas in double precision in different orders.
const POSTERIOR_TOLERANCE: f64 = 1e-9;

/// Rows of a CSV text keyed by `key`.
fn rows_by(text: &str, key: &str) -> (Vec<String>, BTreeMap<String, BTreeMap<String, String>>) {
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let header: Vec<String> = reader.headers().expect("header").iter().map(String::from).collect();
    let at = header.iter().position(|h| h == key).unwrap_or_else(|| panic!("no column {key} in {header:?}"));
    let mut rows = BTreeMap::new();
    for record in reader.records() {
        let record = record.expect("record");
        let row: BTreeMap<String, String> =
            header.iter().zip(record.iter()).map(|(h, v)| (h.clone(), v.to_string())).collect();
        assert!(rows.insert(record[at].to_string(), row).is_none(), "key {} twice", &record[at]);
    }
    (header, rows)
}

/// Checks the engine's result against `score`'s output: the same rows,
/// posteriors to [`POSTERIOR_TOLERANCE`], the same actions, and rows
/// `score` set aside marked with the same reason. Returns (rows scored,
/// worst posterior difference).
fn assert_same(case: &str, score: &str, rejects: Option<&str>, engine: &str, key: &str) -> (usize, f64) {
    let (score_header, scored) = rows_by(score, key);
    let (engine_header, produced) = rows_by(engine, key);
    let mut expected_header = score_header.clone();
    expected_header.push("reject_reason".into());
    assert_eq!(engine_header, expected_header, "{case}: output columns");
    let mut worst = 0.0f64;
    for (id, row) in &scored {
        let other = produced.get(id).unwrap_or_else(|| panic!("{case}: row {id} missing from the engine's result"));
        assert_eq!(other["reject_reason"], "", "{case}: row {id} marked as a reject");
        for column in &score_header {
            let (a, b) = (&row[column], &other[column]);
            if column.starts_with("posterior_") {
                let d = (a.parse::<f64>().expect("p") - b.parse::<f64>().expect("p")).abs();
                assert!(d <= POSTERIOR_TOLERANCE, "{case}: row {id}, {column}: score {a}, engine {b}");
                worst = worst.max(d);
            } else if column == "expected_cost" {
                let (x, y) = (a.parse::<f64>().expect("cost"), b.parse::<f64>().expect("cost"));
                assert!((x - y).abs() <= 1e-9 * x.abs().max(1.0), "{case}: row {id}, expected cost {a} vs {b}");
            } else {
                assert_eq!(a, b, "{case}: row {id}, column {column}");
            }
        }
    }
    // Every other row of the engine's result is one `score` set aside.
    let mut set_aside: BTreeMap<String, String> = BTreeMap::new();
    if let Some(rejects) = rejects {
        let mut reader = csv::Reader::from_reader(rejects.as_bytes());
        for record in reader.records() {
            let record = record.expect("reject");
            let row_text = &record[4];
            let id = row_text.split(',').next().unwrap_or("").to_string();
            set_aside.insert(id, format!("{}: {}", &record[2], &record[1]));
        }
    }
    for (id, row) in &produced {
        if scored.contains_key(id) {
            continue;
        }
        let reason = set_aside.get(id).unwrap_or_else(|| panic!("{case}: row {id} is neither scored nor set aside"));
        assert_eq!(&row["reject_reason"], reason, "{case}: row {id}'s reason");
        for column in engine_header.iter().filter(|c| c.starts_with("posterior_")) {
            assert_eq!(row[column], "", "{case}: a rejected row has a posterior");
        }
    }
    assert_eq!(produced.len(), scored.len() + set_aside.len(), "{case}: row count");
    (scored.len(), worst)
}

fn with<'a>(mut base: Vec<&'a str>, more: &[&'a str]) -> Vec<&'a str> {
    base.extend(more);
    base
}

/// `fit STATS --from-stats --family F EXTRA... -o MODEL`, which must succeed.
fn fit_from_stats(dir: &Path, stats: &Path, family: &str, extra: &[&str], model: &Path) {
    let mut args = vec!["fit", stats.to_str().expect("path"), "--from-stats", "--family", family];
    args.extend(extra);
    args.extend(["-o", model.to_str().expect("path")]);
    let (code, _, stderr) = run(dir, &args);
    assert_eq!(code, 0, "fit --from-stats --family {family}: {stderr}");
}

/// `fit` on the demo's lending training file, as the demo fits it.
fn fit_lending<'a>(train: &'a str, family: &'a str) -> Vec<&'a str> {
    let id = "application_id,application_month";
    vec!["fit", train, "--target", "outcome", "--family", family, "--id", id, "--missing", "impute"]
}

/// The demo scenarios, generated once per test.
fn demo(dir: &Path) -> PathBuf {
    let out = dir.join("demo");
    let (code, _, stderr) = run(dir, &["demo", "--out", out.to_str().expect("path")]);
    assert_eq!(code, 0, "{stderr}");
    out
}

fn numeric_columns(model: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(model).expect("model");
    let json: serde_json::Value = serde_json::from_str(&text).expect("json");
    json["schema"]["columns"]
        .as_array()
        .expect("columns")
        .iter()
        .filter(|c| c["kind"] == "numeric")
        .map(|c| c["name"].as_str().unwrap_or("").to_string())
        .collect()
}

/// One scoring case: fit, score with `score_flags`, export with the same
/// flags, run in the engine, compare.
struct Case<'a> {
    name: &'a str,
    fit: Vec<&'a str>,
    flags: Vec<&'a str>,
    table: &'a str,
    data: &'a Path,
    key: &'a str,
}

/// What one case leaves for an engine: `score`'s outputs and the statement.
struct Prepared {
    name: String,
    scores: PathBuf,
    rejects: PathBuf,
    sql: PathBuf,
}

/// Fits the case's model, scores its data and exports the statement, all
/// under file names ending in `tag`.
fn prepare(dir: &Path, case: &Case<'_>, tag: &str, dialect: &str) -> Prepared {
    let name = format!("{} ({})", case.name, case.table);
    let file = |stem: &str, extension: &str| dir.join(format!("{stem}{tag}.{extension}"));
    let (model, scores, rejects, sql) =
        (file("case", "json"), file("scores", "csv"), file("rejects", "csv"), file("job", "sql"));
    let mut fit = case.fit.clone();
    fit.extend(["-o", model.to_str().expect("path")]);
    let (code, _, stderr) = run(dir, &fit);
    assert_eq!(code, 0, "{name}: fit: {stderr}");
    let mut score = vec!["score", model.to_str().expect("path"), case.data.to_str().expect("path")];
    score.extend(["-o", scores.to_str().expect("path"), "--rejects", rejects.to_str().expect("path"), "-q"]);
    score.extend(case.flags.iter().copied());
    let (code, _, stderr) = run(dir, &score);
    assert_eq!(code, 0, "{name}: score: {stderr}");
    let mut export = vec!["export-sql", model.to_str().expect("path"), "--table", case.table, "--dialect", dialect];
    export.extend(["-o", sql.to_str().expect("path")]);
    export.extend(case.flags.iter().copied());
    let (code, _, stderr) = run(dir, &export);
    assert_eq!(code, 0, "{name}: export-sql: {stderr}");
    Prepared { name, scores, rejects, sql }
}

/// Checks an engine's result (CSV text) against the prepared case.
fn check(prepared: &Prepared, engine: &str, key: &str) -> (usize, f64) {
    let result = assert_same(
        &prepared.name,
        &std::fs::read_to_string(&prepared.scores).expect("scores"),
        Some(&std::fs::read_to_string(&prepared.rejects).expect("rejects")),
        engine,
        key,
    );
    eprintln!("{}: {} rows, worst posterior difference {:.1e}", prepared.name, result.0, result.1);
    result
}

fn run_case(engine: &mut dyn Engine, dir: &Path, case: &Case<'_>) -> (usize, f64) {
    let prepared = prepare(dir, case, "", engine.dialect());
    let result = engine.query_csv(&std::fs::read_to_string(&prepared.sql).expect("sql"));
    check(&prepared, &result, case.key)
}

#[test]
fn exported_sql_reproduces_score_in_postgresql() {
    let Some(mut pg) = postgres() else { return };
    exported_sql_reproduces_score(&mut pg);
}

/// The same cases in Apache Spark (local mode is the engine a cluster
/// runs), from statements in the Spark dialect.
#[test]
fn exported_sql_reproduces_score_in_spark() {
    let Some(mut spark) = Spark::shared() else { return };
    exported_sql_reproduces_score(&mut *spark);
}

/// Every family, calibration map, prior and cost option, in one engine.
fn exported_sql_reproduces_score(pg: &mut dyn Engine) {
    let dir = temp_dir();
    let d = dir.path();
    let demo = demo(d);
    let lending = demo.join("lending");
    let train = lending.join("train.csv");
    let portfolio = lending.join("new_portfolio.csv");
    let lending_costs = lending.join("costs.toml");
    let payments = demo.join("payments").join("transactions.csv");
    let payments_costs = demo.join("payments").join("costs.toml");
    let (train, portfolio, payments) =
        (train.to_str().unwrap(), portfolio.to_str().unwrap(), payments.to_str().unwrap());
    let (lending_costs, payments_costs) = (lending_costs.to_str().unwrap(), payments_costs.to_str().unwrap());

    // A capacity as a share, and a costs file for four classes.
    let share_costs = write(
        d,
        "share.toml",
        b"[actions.pass]\ngenuine = 0\nfraud = { rate = 1.0, column = \"amount\" }\n\n[actions.review]\ngenuine = 4\nfraud = { fixed = 4, rate = 0.1, column = \"amount\" }\ncapacity_share = 0.004\n\n[actions.block]\ngenuine = { fixed = 5, rate = 0.03, column = \"amount\" }\nfraud = 0\ncapacity = 40\n",
    );
    let share_costs = share_costs.to_str().unwrap();
    let purpose_costs = write(
        d,
        "purpose.toml",
        b"[actions.standard]\ncar = 0\ndebt_consolidation = 3\nhome_improvement = 1\nother = 2\n\n[actions.specialist]\ncar = 2\ndebt_consolidation = 0\nhome_improvement = { fixed = 0.5, rate = 0.0001, column = \"amount_requested\" }\nother = 1\n",
    );
    let purpose_costs = purpose_costs.to_str().unwrap();

    let lending_fit = |family| fit_lending(train, family);
    // The tables, typed by a model's schema.
    let probe = d.join("probe.json");
    let mut fit = lending_fit("lda");
    fit.extend(["-o", probe.to_str().unwrap()]);
    assert_eq!(run(d, &fit).0, 0);
    pg.load("new_portfolio", Path::new(portfolio), &numeric_columns(&probe));
    let payments_probe = d.join("payments_probe.json");
    let (code, _, stderr) = run(
        d,
        &[
            "fit",
            payments,
            "--target",
            "label",
            "--family",
            "lda",
            "--id",
            "transaction_id,transaction_day",
            "-o",
            payments_probe.to_str().unwrap(),
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    pg.load("transactions", Path::new(payments), &numeric_columns(&payments_probe));

    let mut cases: Vec<Case<'_>> = Vec::new();
    let lending_flags = |more: &[&'static str]| {
        let mut f = vec!["--id", "application_id", "--costs", lending_costs];
        f.extend(more);
        f
    };
    for family in ["lda", "qda", "naive-bayes", "logistic"] {
        cases.push(Case {
            name: family,
            fit: lending_fit(family),
            flags: lending_flags(&[]),
            table: "new_portfolio",
            data: Path::new(portfolio),
            key: "application_id",
        });
    }
    // Both treatments of the categorical inputs, each family's other one.
    cases.push(Case {
        name: "lda, level frequencies",
        fit: with(lending_fit("lda"), &["--category-model", "frequencies"]),
        flags: lending_flags(&[]),
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    cases.push(Case {
        name: "qda, one-hot",
        fit: with(lending_fit("qda"), &["--category-model", "one-hot"]),
        flags: lending_flags(&[]),
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    cases.push(Case {
        name: "qda, base rate 3%",
        fit: lending_fit("qda"),
        flags: lending_flags(&["--base-rate", "0.03"]),
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    cases.push(Case {
        name: "lda with shrinkage, prior stated",
        fit: with(lending_fit("lda"), &["--diagonal-weight", "ledoit-wolf"]),
        flags: lending_flags(&["--prior", "defaulted=0.05,repaid=0.95"]),
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    cases.push(Case {
        name: "naive-bayes + platt, base rate 3%",
        fit: with(lending_fit("naive-bayes"), &["--calibrate", "platt"]),
        flags: lending_flags(&["--base-rate", "0.03"]),
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    cases.push(Case {
        name: "logistic + isotonic",
        fit: with(lending_fit("logistic"), &["--calibrate", "isotonic"]),
        flags: lending_flags(&[]),
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    cases.push(Case {
        name: "qda:reg + isotonic, base rate 2%",
        fit: with(lending_fit("qda"), &["--pooled-weight", "0.2", "--calibrate", "isotonic"]),
        flags: lending_flags(&["--base-rate", "0.02"]),
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    cases.push(Case {
        name: "lasso logistic, no costs",
        fit: with(lending_fit("logistic"), &["--penalty", "lasso", "--lambda", "0.002"]),
        flags: vec!["--id", "application_id"],
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    });
    let payments_fit = |family: &'static str| {
        vec!["fit", payments, "--target", "label", "--family", family, "--id", "transaction_id,transaction_day"]
    };
    for family in ["logistic", "qda"] {
        cases.push(Case {
            name: family,
            fit: payments_fit(family),
            flags: vec!["--id", "transaction_id", "--costs", payments_costs],
            table: "transactions",
            data: Path::new(payments),
            key: "transaction_id",
        });
    }
    cases.push(Case {
        name: "payments naive-bayes, capacities by share and count",
        fit: payments_fit("naive-bayes"),
        flags: vec!["--id", "transaction_id", "--costs", share_costs],
        table: "transactions",
        data: Path::new(payments),
        key: "transaction_id",
    });
    // Four classes: the loan's purpose from the other inputs.
    let purpose_fit = |family: &'static str| {
        vec![
            "fit",
            train,
            "--target",
            "purpose",
            "--family",
            family,
            "--id",
            "application_id,application_month",
            "--exclude",
            "outcome",
            "--missing",
            "impute",
        ]
    };
    for family in ["logistic", "lda", "qda", "naive-bayes"] {
        cases.push(Case {
            name: family,
            fit: purpose_fit(family),
            flags: vec!["--id", "application_id", "--costs", purpose_costs, "--prior", "uniform"],
            table: "new_portfolio",
            data: Path::new(portfolio),
            key: "application_id",
        });
    }
    let mut worst = 0.0f64;
    for case in &cases {
        let (_, w) = run_case(pg, d, case);
        worst = worst.max(w);
    }
    eprintln!("{} cases, worst posterior difference {worst:.1e}", cases.len());
}

/// A copy of a CSV file with some fields changed: `change(row, column
/// name, value)` returns the new value.
fn edited(source: &Path, target: &Path, change: impl Fn(usize, &str, &str) -> String) {
    let mut reader = csv::Reader::from_path(source).expect("read");
    let header: Vec<String> = reader.headers().expect("header").iter().map(String::from).collect();
    let mut writer = csv::Writer::from_path(target).expect("write");
    writer.write_record(&header).expect("header");
    for (i, record) in reader.records().enumerate() {
        let record = record.expect("record");
        let row: Vec<String> = header.iter().zip(record.iter()).map(|(h, v)| change(i + 1, h, v)).collect();
        writer.write_record(&row).expect("row");
    }
    writer.flush().expect("flush");
}

#[test]
fn missing_values_and_unseen_categories_follow_the_policy_of_score() {
    let Some(mut pg) = postgres() else { return };
    missing_values_and_unseen_categories(&mut pg);
}

#[test]
fn missing_values_and_unseen_categories_follow_the_policy_of_score_in_spark() {
    let Some(mut spark) = Spark::shared() else { return };
    missing_values_and_unseen_categories(&mut *spark);
}

fn missing_values_and_unseen_categories(pg: &mut dyn Engine) {
    let dir = temp_dir();
    let d = dir.path();
    let demo = demo(d);
    let lending = demo.join("lending");
    let train = lending.join("train.csv");
    let costs = lending.join("costs.toml");
    // Problems on rows that never share two (the moduli's products exceed
    // the row count): a blank income, an unseen channel, a blank housing
    // (the model has a missing level for it), an unseen housing, a blank
    // months_at_address (an indicator input), a blank amount (read by the
    // costs too).
    let damaged = d.join("damaged.csv");
    edited(&lending.join("new_portfolio.csv"), &damaged, |i, column, value| match column {
        "income" if i % 97 == 0 => String::new(),
        "channel" if i % 89 == 0 => "kiosk".into(),
        "housing" if i % 83 == 0 => String::new(),
        "housing" if i % 79 == 0 => "houseboat".into(),
        "months_at_address" if i % 73 == 0 => String::new(),
        "amount_requested" if i % 71 == 0 => String::new(),
        _ => value.to_string(),
    });
    let model = d.join("probe.json");
    let fit = [
        "fit",
        train.to_str().unwrap(),
        "--target",
        "outcome",
        "--family",
        "lda",
        "--id",
        "application_id,application_month",
        "--missing",
        "impute",
        "-o",
        model.to_str().unwrap(),
    ];
    assert_eq!(run(d, &fit).0, 0);
    pg.load("damaged", &damaged, &numeric_columns(&model));
    let (train, damaged_path, costs) = (train.to_str().unwrap(), damaged.as_path(), costs.to_str().unwrap());
    let fit = |family| fit_lending(train, family);
    let cases = [
        ("unseen set aside, missing imputed", "lda", vec!["--unseen", "reject", "--missing", "impute"]),
        ("unseen as missing", "naive-bayes", vec!["--unseen", "missing", "--missing", "impute"]),
        ("missing values set aside", "qda", vec!["--unseen", "reject", "--missing", "drop-rows"]),
        (
            "logistic, unseen as missing, missing set aside",
            "logistic",
            vec!["--unseen", "missing", "--missing", "drop-rows"],
        ),
    ];
    for (name, family, flags) in cases {
        let flags = with(vec!["--id", "application_id", "--costs", costs], &flags);
        let (scored, _) = run_case(
            pg,
            d,
            &Case { name, fit: fit(family), flags, table: "damaged", data: damaged_path, key: "application_id" },
        );
        assert!(scored < 5000 && scored > 4500, "{name}: {scored} rows scored");
    }
}

#[test]
fn hostile_names_are_only_names() {
    let Some(mut pg) = postgres() else { return };
    hostile_names(&mut pg);
}

/// The same names in Spark: backticks, backslashes in literals.
#[test]
fn hostile_names_are_only_names_in_spark() {
    let Some(mut spark) = Spark::shared() else { return };
    hostile_names(&mut *spark);
}

fn hostile_names(pg: &mut dyn Engine) {
    let dir = temp_dir();
    let d = dir.path();
    let demo = demo(d);
    let lending = demo.join("lending");
    // Every name the SQL carries, made hostile: columns, levels (with a
    // quote and a backslash), classes, the table, the id and cost columns.
    let rename = |column: &str| -> String {
        match column {
            "application_id" => "app id'; --".into(),
            "income" => "x\"; DROP TABLE keepme; --".into(),
            "channel" => "chan'nel\\".into(),
            "amount_requested" => "am\"t".into(),
            other => other.to_string(),
        }
    };
    let hostile = d.join("hostile.csv");
    {
        let mut reader = csv::Reader::from_path(lending.join("train.csv")).expect("read");
        let header: Vec<String> = reader.headers().expect("header").iter().map(rename).collect();
        let mut writer = csv::Writer::from_path(&hostile).expect("write");
        writer.write_record(&header).expect("header");
        for record in reader.records() {
            let row: Vec<String> = record
                .expect("record")
                .iter()
                .map(|v| match v {
                    "online" => "on'line".to_string(),
                    "branch" => "br\\anch'); DROP TABLE keepme; --".to_string(),
                    "repaid" => "it's fine".to_string(),
                    "defaulted" => "de\"fault".to_string(),
                    other => other.to_string(),
                })
                .collect();
            writer.write_record(&row).expect("row");
        }
        writer.flush().expect("flush");
    }
    let costs = write(
        d,
        "hostile.toml",
        "[actions.\"ap'prove\"]\n\"it's fine\" = 0\n'de\"fault' = { fixed = 25, rate = 0.6, column = 'am\"t' }\n\n[actions.decline]\n\"it's fine\" = { rate = 0.08, column = 'am\"t' }\n'de\"fault' = 0\ncapacity = 200\n".as_bytes(),
    );
    let table = "t\"; DROP TABLE keepme; --";
    let model = d.join("probe.json");
    let hostile_str = hostile.to_str().unwrap();
    let fit = [
        "fit",
        hostile_str,
        "--target",
        "outcome",
        "--family",
        "lda",
        "--id",
        "app id'; --,application_month",
        "--missing",
        "impute",
        "-o",
        model.to_str().unwrap(),
    ];
    let (code, _, stderr) = run(d, &fit);
    assert_eq!(code, 0, "{stderr}");
    pg.plant_keepme();
    pg.load(table, &hostile, &numeric_columns(&model));
    let (dialects, aggregate_dialect) = pg.dialects();
    for (i, family) in ["lda", "naive-bayes", "qda", "logistic"].into_iter().enumerate() {
        let dialect = dialects[i % dialects.len()];
        let name = format!("hostile {family} {dialect}");
        let fit = vec![
            "fit",
            hostile_str,
            "--target",
            "outcome",
            "--family",
            family,
            "--id",
            "app id'; --,application_month",
            "--missing",
            "impute",
        ];
        let flags = vec!["--id", "app id'; --", "--costs", costs.to_str().unwrap(), "--dialect", dialect];
        // score takes no --dialect: run_case passes the flags to both, so
        // give score's share through a case without it.
        let model = d.join("hostile.json");
        let mut f = fit.clone();
        f.extend(["-o", model.to_str().unwrap()]);
        assert_eq!(run(d, &f).0, 0, "{name}");
        let scores = d.join("hostile_scores.csv");
        let (code, _, stderr) = run(
            d,
            &[
                "score",
                model.to_str().unwrap(),
                hostile_str,
                "-o",
                scores.to_str().unwrap(),
                "-q",
                "--id",
                "app id'; --",
                "--costs",
                costs.to_str().unwrap(),
            ],
        );
        assert_eq!(code, 0, "{name}: {stderr}");
        let sql = d.join("hostile.sql");
        let mut export = vec!["export-sql", model.to_str().unwrap(), "--table", table, "-o", sql.to_str().unwrap()];
        export.extend(&flags);
        let (code, _, stderr) = run(d, &export);
        assert_eq!(code, 0, "{name}: {stderr}");
        let engine = pg.query_csv(&std::fs::read_to_string(&sql).expect("sql"));
        let (rows, worst) =
            assert_same(&name, &std::fs::read_to_string(&scores).expect("scores"), None, &engine, "app id'; --");
        assert_eq!(rows, 5000);
        eprintln!("{name}: {rows} rows, worst posterior difference {worst:.1e}");
    }
    // The aggregate query with the same names.
    let stats_sql = d.join("hostile_stats.sql");
    let (code, _, stderr) = run(
        d,
        &[
            "stats-sql",
            "--family",
            "lda",
            "--table",
            table,
            "--target",
            "outcome",
            "--categorical",
            "chan'nel\\,housing",
            "--dialect",
            aggregate_dialect,
            "-o",
            stats_sql.to_str().unwrap(),
            "x\"; DROP TABLE keepme; --",
            "am\"t",
            "debt_to_income",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    let stats =
        write(d, "hostile_stats.csv", pg.query_csv(&std::fs::read_to_string(&stats_sql).expect("sql")).as_bytes());
    let from_stats = d.join("hostile_from_stats.json");
    fit_from_stats(d, &stats, "lda", &["--missing", "drop-rows"], &from_stats);
    assert_eq!(pg.query_csv("SELECT count(*) AS n FROM keepme").lines().nth(1), Some("1"), "keepme survived");
}

/// Posteriors of two `score` outputs, row by row: the worst difference.
fn worst_difference(a: &Path, b: &Path, key: &str) -> f64 {
    let (header, left) = rows_by(&std::fs::read_to_string(a).expect("scores"), key);
    let (_, right) = rows_by(&std::fs::read_to_string(b).expect("scores"), key);
    assert_eq!(left.len(), right.len());
    let mut worst = 0.0f64;
    for (id, row) in &left {
        for column in header.iter().filter(|c| c.starts_with("posterior_")) {
            let x: f64 = row[column].parse().expect("p");
            let y: f64 = right[id][column].parse().expect("p");
            worst = worst.max((x - y).abs());
        }
    }
    worst
}

/// Scores `data` with two models (with `flags`) and returns the worst
/// difference of their posteriors, row by row.
fn score_difference(dir: &Path, a: &Path, b: &Path, data: &Path, flags: &[&str], key: &str) -> f64 {
    let outputs = [dir.join("scores-a.csv"), dir.join("scores-b.csv")];
    for (model, out) in [a, b].iter().zip(&outputs) {
        let mut args = vec!["score", model.to_str().expect("path"), data.to_str().expect("path")];
        args.extend(["-o", out.to_str().expect("path"), "-q"]);
        args.extend(flags);
        let (code, _, stderr) = run(dir, &args);
        assert_eq!(code, 0, "score {}: {stderr}", model.display());
    }
    worst_difference(&outputs[0], &outputs[1], key)
}

#[test]
fn fitting_from_postgresql_aggregates_equals_fitting_from_the_file() {
    let Some(mut pg) = postgres() else { return };
    fitting_from_aggregates_equals_fitting_from_the_file(&mut pg);
}

/// The same in Spark, every query in the Spark dialect (with its exact
/// `percentile` deciles).
#[test]
fn fitting_from_spark_aggregates_equals_fitting_from_the_file() {
    let Some(mut spark) = Spark::shared() else { return };
    fitting_from_aggregates_equals_fitting_from_the_file(&mut *spark);
}

fn fitting_from_aggregates_equals_fitting_from_the_file(pg: &mut dyn Engine) {
    let dir = temp_dir();
    let d = dir.path();
    let demo = demo(d);
    let lending = demo.join("lending");
    // A frequency weight of 1, 2 or 3 per row.
    let weighted = d.join("weighted.csv");
    {
        let text = std::fs::read_to_string(lending.join("train.csv")).expect("train");
        let mut out = String::new();
        for (i, line) in text.lines().enumerate() {
            out.push_str(line);
            out.push_str(&if i == 0 { ",w".to_string() } else { format!(",{}", 1 + i % 3) });
            out.push('\n');
        }
        std::fs::write(&weighted, out).expect("write");
    }
    let probe = d.join("probe.json");
    let train = weighted.to_str().unwrap();
    let fit = [
        "fit",
        train,
        "--target",
        "outcome",
        "--family",
        "lda",
        "--id",
        "application_id,application_month",
        "--weight",
        "w",
        "--missing",
        "drop-rows",
        "-o",
        probe.to_str().unwrap(),
    ];
    let (code, _, stderr) = run(d, &fit);
    assert_eq!(code, 0, "{stderr}");
    let mut numeric = numeric_columns(&probe);
    numeric.push("w".into());
    pg.load("train", &weighted, &numeric);
    let portfolio = lending.join("new_portfolio.csv");
    let inputs = ["income", "debt_to_income", "revolving_utilisation", "months_at_address", "amount_requested"];
    let cases: [(&str, &[&str], &[&str], &str); 8] = [
        ("lda", &[], &[], "postgres"),
        // Each family's other treatment of the categorical inputs.
        ("lda", &[], &["--category-model", "frequencies"], "postgres"),
        ("qda", &["--weight", "w"], &["--category-model", "one-hot"], "ansi"),
        ("qda", &[], &[], "postgres"),
        ("naive-bayes", &[], &[], "postgres"),
        ("lda", &["--weight", "w"], &["--diagonal-weight", "0.2"], "ansi"),
        ("qda", &["--weight", "w"], &["--pooled-weight", "0.1"], "postgres"),
        ("naive-bayes", &["--weight", "w"], &["--smoothing", "0.5"], "ansi"),
    ];
    for (family, weight, options, dialect) in cases {
        // Spark reads neither dialect's quoting: every query in its own.
        let dialect = if pg.dialect() == "spark" { "spark" } else { dialect };
        let with_deciles = dialect != "ansi";
        let name = format!("{family} {weight:?} {options:?} {dialect}");
        let sql = d.join("stats.sql");
        let mut args = vec![
            "stats-sql",
            "--family",
            family,
            "--table",
            "train",
            "--target",
            "outcome",
            "--categorical",
            "channel,housing,purpose",
            "--dialect",
            dialect,
            "-o",
            sql.to_str().unwrap(),
        ];
        args.extend(weight);
        args.extend(inputs);
        let (code, _, stderr) = run(d, &args);
        assert_eq!(code, 0, "{name}: {stderr}");
        let stats = write(d, "stats.csv", pg.query_csv(&std::fs::read_to_string(&sql).expect("sql")).as_bytes());
        let (from_stats, direct) = (d.join("from_stats.json"), d.join("direct.json"));
        let mut args =
            vec!["fit", stats.to_str().unwrap(), "--from-stats", "--family", family, "--missing", "drop-rows"];
        args.extend(options);
        args.extend(["-o", from_stats.to_str().unwrap()]);
        let (code, _, stderr) = run(d, &args);
        assert_eq!(code, 0, "{name}: {stderr}");
        // The same rows read from the file (the weight column is an input
        // unless it is named as the weight).
        let mut args = vec![
            "fit",
            train,
            "--target",
            "outcome",
            "--family",
            family,
            "--id",
            "application_id,application_month",
            "--missing",
            "drop-rows",
            "-o",
            direct.to_str().unwrap(),
        ];
        if weight.is_empty() {
            args.extend(["--exclude", "w"]);
        }
        args.extend(weight);
        args.extend(options);
        let (code, _, stderr) = run(d, &args);
        assert_eq!(code, 0, "{name}: {stderr}");
        let rejects = d.join("r.csv");
        let flags = ["--id", "application_id", "--missing", "drop-rows", "--rejects", rejects.to_str().unwrap()];
        let worst = score_difference(d, &from_stats, &direct, &portfolio, &flags, "application_id");
        if !with_deciles {
            let (_, shown, _) = run(d, &["inspect", from_stats.to_str().unwrap()]);
            assert!(shown.contains("no deciles either"), "{name}: {shown}");
        }
        assert!(worst <= POSTERIOR_TOLERANCE, "{name}: posteriors differ by {worst}");
        // The drift reference from counted decile bins is the one `fit`
        // builds from the rows (inputs only: no training scores).
        let drift = |m: &Path| -> serde_json::Value {
            serde_json::from_str::<serde_json::Value>(&std::fs::read_to_string(m).expect("model")).expect("json")
                ["drift_reference"]
                .clone()
        };
        let (ours, theirs) = (drift(&from_stats), drift(&direct));
        if with_deciles {
            assert!(ours["score"].is_null(), "{name}: no score bins from aggregates");
            let features = ours["features"].as_array().expect("features");
            assert_eq!(features.len(), inputs.len() + 3, "{name}");
            for f in features {
                let other = theirs["features"]
                    .as_array()
                    .expect("features")
                    .iter()
                    .find(|g| g["feature"] == f["feature"])
                    .expect("the same feature");
                for key in ["edges", "shares"] {
                    let (x, y) = (f[key].as_array().expect(key), other[key].as_array().expect(key));
                    assert_eq!(x.len(), y.len(), "{name}: {} {key}: {x:?} vs {y:?}", f["feature"]);
                    for (u, v) in x.iter().zip(y) {
                        let (u, v) = (u.as_f64().expect("number"), v.as_f64().expect("number"));
                        assert!(common::close(u, v, 1e-12), "{name}: {} {key}: {x:?} vs {y:?}", f["feature"]);
                    }
                }
            }
        } else {
            assert!(ours.is_null(), "{name}: a drift reference without deciles");
        }
        // Deciles by PostgreSQL's percentile_cont and Spark's exact
        // percentile are the library's type-7 deciles.
        let schema = |m: &Path| -> serde_json::Value {
            serde_json::from_str::<serde_json::Value>(&std::fs::read_to_string(m).expect("model")).expect("json")
                ["schema"]
                .clone()
        };
        let (s, t) = (schema(&from_stats), schema(&direct));
        let deciles = |s: &serde_json::Value, column: &str| -> Vec<f64> {
            s["columns"].as_array().expect("columns").iter().find(|c| c["name"] == column).expect("column")["numeric"]
                ["deciles"]
                .as_array()
                .expect("deciles")
                .iter()
                .map(|v| v.as_f64().expect("number"))
                .collect()
        };
        for column in inputs {
            let (x, y) = (deciles(&s, column), deciles(&t, column));
            if with_deciles {
                assert_eq!(x.len(), 9, "{name}: {column}");
                for (u, v) in x.iter().zip(&y) {
                    assert!(common::close(*u, *v, 1e-12), "{name}: {column} deciles {x:?} vs {y:?}");
                }
            } else {
                assert!(x.is_empty(), "{name}: {column} has deciles without the dialect's percentiles");
            }
        }
        eprintln!("{name}: worst posterior difference against the direct fit {worst:.1e}");
    }
    if pg.dialect() == "spark" {
        approximate_deciles_in_spark(pg, d, &weighted, &inputs);
    }
}

/// Spark's `percentile_approx` (`--deciles approximate`, bounded memory):
/// each decile is a value of the column whose rank among the complete rows
/// is within 1/10,000 of the rows (plus one row) of the decile's, and the
/// model says its deciles are approximate.
fn approximate_deciles_in_spark(spark: &mut dyn Engine, d: &Path, table: &Path, inputs: &[&str]) {
    let sql = d.join("approximate.sql");
    let mut args = vec!["stats-sql", "--family", "lda", "--table", "train", "--target", "outcome"];
    args.extend(["--categorical", "channel,housing,purpose", "--dialect", "spark", "--deciles", "approximate"]);
    args.extend(["-o", sql.to_str().unwrap()]);
    args.extend(inputs);
    let (code, _, stderr) = run(d, &args);
    assert_eq!(code, 0, "{stderr}");
    let stats = write(d, "approximate.csv", spark.query_csv(&std::fs::read_to_string(&sql).expect("sql")).as_bytes());
    let model = d.join("approximate.json");
    let args = ["fit", stats.to_str().unwrap(), "--from-stats", "--family", "lda", "--missing", "drop-rows"];
    let (code, _, stderr) = run(d, &[&args[..], &["-o", model.to_str().unwrap()]].concat());
    assert_eq!(code, 0, "{stderr}");
    let json: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&model).expect("model")).expect("json");
    let warnings = json["diagnostics"]["warnings"].to_string();
    assert!(warnings.contains("the deciles are approximate"), "{warnings}");
    // The complete rows' values of each input, sorted.
    let mut reader = csv::Reader::from_path(table).expect("table");
    let header: Vec<String> = reader.headers().expect("header").iter().map(String::from).collect();
    let needed: Vec<usize> = ["outcome", "channel", "housing", "purpose"]
        .iter()
        .chain(inputs)
        .map(|c| header.iter().position(|h| h == c).expect("column"))
        .collect();
    let missing = |v: &str| ["", "NA", "N/A", "null", "?"].contains(&v.trim());
    let rows: Vec<csv::StringRecord> =
        reader.records().map(|r| r.expect("row")).filter(|r| needed.iter().all(|&i| !missing(&r[i]))).collect();
    let n = rows.len() as f64;
    for column in inputs {
        let at = header.iter().position(|h| h == column).expect("column");
        let mut values: Vec<f64> = rows.iter().map(|r| r[at].trim().parse().expect("number")).collect();
        values.sort_by(f64::total_cmp);
        let summary = json["schema"]["columns"]
            .as_array()
            .expect("columns")
            .iter()
            .find(|c| c["name"] == *column)
            .expect("column")["numeric"]
            .clone();
        let deciles: Vec<f64> =
            summary["deciles"].as_array().expect("deciles").iter().map(|v| v.as_f64().expect("number")).collect();
        assert_eq!(deciles.len(), 9, "{column}");
        for (i, decile) in deciles.iter().enumerate() {
            let p = (i + 1) as f64 / 10.0;
            let below = values.partition_point(|v| v < decile) as f64;
            let through = values.partition_point(|v| v <= decile) as f64;
            assert!(through > below, "{column}: decile {decile} is not a value of the column");
            let slack = n / 10_000.0 + 1.0;
            assert!(
                below <= p * n + slack && through >= p * n - slack,
                "{column}: decile {p} at {decile} has ranks {below}..{through} of {n}"
            );
        }
    }
}

use common::engine::duckdb;

#[test]
fn the_ansi_dialect_runs_in_duckdb_too() {
    if !python_with("duckdb") {
        return;
    }
    let dir = temp_dir();
    let d = dir.path();
    let demo = demo(d);
    let lending = demo.join("lending");
    let (train, portfolio, costs) =
        (lending.join("train.csv"), lending.join("new_portfolio.csv"), lending.join("costs.toml"));
    let payments = demo.join("payments").join("transactions.csv");
    let payments_costs = demo.join("payments").join("costs.toml");
    let (train, portfolio, costs) = (train.to_str().unwrap(), portfolio.to_str().unwrap(), costs.to_str().unwrap());
    let (payments, payments_costs) = (payments.to_str().unwrap(), payments_costs.to_str().unwrap());
    let lending_fit = |family| fit_lending(train, family);
    let lending_flags = |more: &[&'static str]| with(vec!["--id", "application_id", "--costs", costs], more);
    let lending_case = |name, fit, flags| Case {
        name,
        fit,
        flags,
        table: "new_portfolio",
        data: Path::new(portfolio),
        key: "application_id",
    };
    let cases = [
        lending_case("lda, capacity", lending_fit("lda"), lending_flags(&[])),
        lending_case("qda, base rate", lending_fit("qda"), lending_flags(&["--base-rate", "0.03"])),
        lending_case(
            "lda, level frequencies",
            with(lending_fit("lda"), &["--category-model", "frequencies"]),
            lending_flags(&[]),
        ),
        lending_case("qda, one-hot", with(lending_fit("qda"), &["--category-model", "one-hot"]), lending_flags(&[])),
        lending_case(
            "naive-bayes + platt",
            with(lending_fit("naive-bayes"), &["--calibrate", "platt"]),
            lending_flags(&["--base-rate", "0.03"]),
        ),
        lending_case(
            "logistic + isotonic",
            with(lending_fit("logistic"), &["--calibrate", "isotonic"]),
            lending_flags(&[]),
        ),
        lending_case(
            "four classes",
            vec![
                "fit",
                train,
                "--target",
                "purpose",
                "--family",
                "qda",
                "--id",
                "application_id,application_month",
                "--exclude",
                "outcome",
                "--missing",
                "impute",
            ],
            vec!["--id", "application_id", "--prior", "uniform"],
        ),
        Case {
            name: "payments logistic",
            fit: vec![
                "fit",
                payments,
                "--target",
                "label",
                "--family",
                "logistic",
                "--id",
                "transaction_id,transaction_day",
            ],
            flags: vec!["--id", "transaction_id", "--costs", payments_costs],
            table: "transactions",
            data: Path::new(payments),
            key: "transaction_id",
        },
    ];
    let mut arguments = vec![format!("table:new_portfolio={portfolio}"), format!("table:transactions={payments}")];
    let mut expected = Vec::new();
    for (i, case) in cases.iter().enumerate() {
        let prepared = prepare(d, case, &format!("-duckdb{i}"), "ansi");
        let result = d.join(format!("engine{i}.csv"));
        arguments.push(format!("query:{}={}", prepared.sql.display(), result.display()));
        expected.push((prepared, result, case.key));
    }
    // Aggregates for LDA in DuckDB, fitted and compared with the direct fit.
    let stats_sql = d.join("stats.sql");
    let stats = d.join("stats.csv");
    let inputs = ["income", "debt_to_income", "revolving_utilisation", "amount_requested"];
    let mut args = vec![
        "stats-sql",
        "--family",
        "lda",
        "--table",
        "train",
        "--target",
        "outcome",
        "--categorical",
        "channel,housing",
        "-o",
        stats_sql.to_str().unwrap(),
    ];
    args.extend(inputs);
    assert_eq!(run(d, &args).0, 0);
    arguments.push(format!("table:train={train}"));
    arguments.push(format!("query:{}={}", stats_sql.display(), stats.display()));
    duckdb(&arguments);
    for (prepared, result, key) in &expected {
        check(prepared, &std::fs::read_to_string(result).expect("result"), key);
    }
    let (from_stats, direct) = (d.join("from_stats.json"), d.join("direct.json"));
    fit_from_stats(d, &stats, "lda", &["--missing", "drop-rows"], &from_stats);
    let args = [
        "fit",
        train,
        "--target",
        "outcome",
        "--family",
        "lda",
        "--id",
        "application_id,application_month",
        "--exclude",
        "purpose,months_at_address",
        "--missing",
        "drop-rows",
        "-o",
        direct.to_str().unwrap(),
    ];
    let (code, _, stderr) = run(d, &args);
    assert_eq!(code, 0, "{stderr}");
    let rejects = d.join("r.csv");
    let flags = ["--id", "application_id", "--missing", "drop-rows", "--rejects", rejects.to_str().unwrap()];
    let worst = score_difference(d, &from_stats, &direct, Path::new(portfolio), &flags, "application_id");
    assert!(worst <= POSTERIOR_TOLERANCE, "duckdb aggregates: posteriors differ by {worst}");
    eprintln!("duckdb aggregates: worst posterior difference against the direct fit {worst:.1e}");
}

/// Runs a command that must fail with `code`, its message containing
/// `needle`; returns the message.
fn refused(dir: &Path, args: &[&str], code: i32, needle: &str) -> String {
    let (got, _, stderr) = run(dir, args);
    assert_eq!(got, code, "{args:?}: {stderr}");
    assert!(stderr.contains(needle), "{args:?}: expected '{needle}' in: {stderr}");
    stderr
}

/// Aggregates written by hand for six rows (class a: x = 1, 2, 3; class b:
/// x = 4, 6, 8; shifted by K = 1), as the query would return them.
const HAND_STATS: &str = "format,family,target,class,feature_1,rows,incomplete,unlabelled,weight,sum_1,cross_1_1,min_1,max_1,shift_1,missing_1\n\
baserate-stats-1,lda,y,a,x,3,0,0,3,3,5,1,3,1,0\n\
baserate-stats-1,lda,y,b,x,3,0,0,3,15,83,4,8,1,0\n";

#[test]
fn aggregates_written_by_hand_fit_as_the_rows_do_and_bad_ones_are_named() {
    let dir = temp_dir();
    let d = dir.path();
    let stats = write(d, "stats.csv", HAND_STATS.as_bytes());
    let rows = write(d, "rows.csv", b"x,y\n1,a\n2,a\n3,a\n4,b\n6,b\n8,b\n");
    let new = write(d, "new.csv", b"x\n0\n2.5\n5\n9.75\n");
    for family in ["lda", "qda", "naive-bayes"] {
        let (a, b) = (d.join("a.json"), d.join("b.json"));
        let (code, _, stderr) =
            run(d, &["fit", stats.to_str().unwrap(), "--from-stats", "--family", family, "-o", a.to_str().unwrap()]);
        assert_eq!(code, 0, "{family}: {stderr}");
        let (code, _, stderr) =
            run(d, &["fit", rows.to_str().unwrap(), "--target", "y", "--family", family, "-o", b.to_str().unwrap()]);
        assert_eq!(code, 0, "{family}: {stderr}");
        let worst = score_difference(d, &a, &b, &new, &["--keep", "x"], "x");
        assert!(worst <= 1e-12, "{family}: from hand-made aggregates the posteriors differ by {worst}");
    }
    // The pooled variance by hand: (2 + 8) / (6 − 2) = 2.5.
    let model = d.join("a.json");
    assert_eq!(
        run(d, &["fit", stats.to_str().unwrap(), "--from-stats", "--family", "lda", "-o", model.to_str().unwrap()]).0,
        0
    );
    let json: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&model).expect("model")).expect("json");
    let variance = json["model"]["covariances"][0][0].as_f64().expect("variance");
    assert!(common::close(variance, 2.5, 1e-12), "pooled variance {variance}");

    // A corrupt cell is named by line and column; nothing is written.
    let out = d.join("c.json");
    let out = out.to_str().unwrap();
    let corrupt = write(d, "corrupt.csv", HAND_STATS.replace(",15,83,", ",1x5,83,").as_bytes());
    let stderr =
        refused(d, &["fit", corrupt.to_str().unwrap(), "--from-stats", "--family", "lda", "-o", out], 1, "line 3");
    assert!(stderr.contains("'sum_1'") && stderr.contains("1x5"), "{stderr}");
    assert!(!Path::new(out).exists(), "no model file from a failed fit");
    // Not a statistics result at all.
    let not_stats = ["fit", rows.to_str().unwrap(), "--from-stats", "--family", "lda", "-o", out];
    refused(d, &not_stats, 1, "not the result of baserate stats-sql");
    // Naive Bayes aggregates lack what QDA needs; Ledoit–Wolf needs the rows.
    let diagonal = write(d, "nb.csv", HAND_STATS.replace(",lda,", ",naive-bayes,").as_bytes());
    let for_qda = ["fit", diagonal.to_str().unwrap(), "--from-stats", "--family", "qda", "-o", out];
    refused(d, &for_qda, 1, "write the query with --family qda");
    // A result missing its last row, or with a row of an empty class, is
    // refused naming the file, never a panic.
    let lines: Vec<&str> = HAND_STATS.lines().collect();
    let truncated = write(d, "short.csv", (lines[..lines.len() - 1].join("\n") + "\n").as_bytes());
    for family in ["lda", "qda", "naive-bayes"] {
        let args = ["fit", truncated.to_str().unwrap(), "--from-stats", "--family", family, "-o", out];
        refused(d, &args, 1, "the target has only one class");
    }
    let empty_class = write(d, "empty.csv", HAND_STATS.replace(",y,b,", ",y,,").as_bytes());
    let args = ["fit", empty_class.to_str().unwrap(), "--from-stats", "--family", "lda", "-o", out];
    refused(d, &args, 1, "line 3, column 'class': the class is empty");
    let shrunk = [
        "fit",
        stats.to_str().unwrap(),
        "--from-stats",
        "--family",
        "lda",
        "--diagonal-weight",
        "ledoit-wolf",
        "-o",
        out,
    ];
    refused(d, &shrunk, 1, "Ledoit–Wolf shrinkage needs fourth moments");
    // Deciles are cut points: ascending, or the file is not a result of
    // the statistics query.
    let with_deciles = |deciles: &str| {
        let mut lines = HAND_STATS.lines();
        let header = format!("{},deciles_1\n", lines.next().unwrap_or(""));
        header + &lines.map(|l| format!("{l},\"{deciles}\"\n")).collect::<String>()
    };
    let ascending = write(d, "ascending.csv", with_deciles("{1,1,2,3,4,5,6,7,8}").as_bytes());
    assert_eq!(run(d, &["fit", ascending.to_str().unwrap(), "--from-stats", "--family", "lda", "-o", out]).0, 0);
    let descending = write(d, "descending.csv", with_deciles("{9,8,7,6,5,4,3,2,1}").as_bytes());
    let args = ["fit", descending.to_str().unwrap(), "--from-stats", "--family", "lda", "-o", out];
    let stderr = refused(d, &args, 1, "line 2, column 'deciles_1'");
    assert!(stderr.contains("nine finite numbers in ascending order"), "{stderr}");
    // Usage errors: logistic has no aggregates; a malformed table name.
    refused(d, &["stats-sql", "--family", "logistic", "--table", "t", "--target", "y", "x"], 2, "logistic");
    refused(d, &["export-sql", model.to_str().unwrap(), "--table", "mart..t"], 2, "--table");
    // A class name PostgreSQL would cut to 63 bytes is refused in that dialect.
    let long = "c".repeat(70);
    let long_rows = write(d, "long.csv", format!("x,y\n1,a\n2,a\n3,a\n4,{long}\n6,{long}\n8,{long}\n").as_bytes());
    let long_model = d.join("long.json");
    let fit =
        ["fit", long_rows.to_str().unwrap(), "--target", "y", "--family", "lda", "-o", long_model.to_str().unwrap()];
    assert_eq!(run(d, &fit).0, 0);
    refused(d, &["export-sql", long_model.to_str().unwrap(), "--table", "t", "--dialect", "postgres"], 2, "63");
    let (code, sql, _) = run(d, &["export-sql", long_model.to_str().unwrap(), "--table", "t"]);
    assert_eq!(code, 0);
    assert!(sql.contains("decision support, not a decision"), "the statement carries the caution");
}

/// Values far from the data, in every family, in PostgreSQL and DuckDB as
/// in `score`: a row whose evidence is a double is scored (posteriors to
/// [`POSTERIOR_TOLERANCE`], the same actions), one whose evidence is not is
/// marked `out-of-range` with its column — the query neither aborts on an
/// overflow nor returns NaN.
#[test]
fn extreme_values_are_scored_or_set_aside_in_the_engines_as_in_score() {
    let pg = postgres();
    let with_duckdb = python_with("duckdb");
    if pg.is_none() && !with_duckdb {
        return;
    }
    let dir = temp_dir();
    let d = dir.path();
    let demo = demo(d);
    let lending = demo.join("lending");
    let (train, costs) = (lending.join("train.csv"), lending.join("costs.toml"));
    let extreme = d.join("extreme.csv");
    let values = ["1e21", "1e155", "1e200", "1e300", "-1e300", "-1e21", "-1e155"];
    edited(&lending.join("new_portfolio.csv"), &extreme, |i, column, value| match column {
        "income" if i % 40 < values.len() => values[i % 40].into(),
        "debt_to_income" if i % 40 == 10 => "1e155".into(),
        "amount_requested" if i % 40 == 11 => "1e300".into(),
        _ => value.to_string(),
    });
    let (train, costs) = (train.to_str().unwrap(), costs.to_str().unwrap());
    let flags = || vec!["--id", "application_id", "--costs", costs];
    let cases: Vec<Case<'_>> = ["logistic", "lda", "qda", "naive-bayes"]
        .into_iter()
        .map(|family| Case {
            name: family,
            fit: fit_lending(train, family),
            flags: flags(),
            table: "extreme",
            data: &extreme,
            key: "application_id",
        })
        .chain(std::iter::once(Case {
            name: "naive-bayes + platt",
            fit: with(fit_lending(train, "naive-bayes"), &["--calibrate", "platt"]),
            flags: flags(),
            table: "extreme",
            data: &extreme,
            key: "application_id",
        }))
        .collect();
    let prepared: Vec<Prepared> =
        cases.iter().enumerate().map(|(i, c)| prepare(d, c, &format!("-x{i}"), "ansi")).collect();
    for (case, p) in cases.iter().zip(&prepared) {
        let rejects = std::fs::read_to_string(&p.rejects).expect("rejects");
        let out_of_range = rejects.lines().filter(|l| l.contains(",out-of-range,")).count();
        // The linear families score every finite value of these columns;
        // the Gaussian ones set 1e200 and beyond aside.
        match case.name {
            "logistic" | "lda" => assert_eq!(out_of_range, 0, "{}: {rejects}", case.name),
            _ => assert!(out_of_range >= 3 * 5000 / 40, "{}: {out_of_range} out of range", case.name),
        }
    }
    if let Some(pg) = &pg {
        pg.load("extreme", &extreme, &numeric_columns(&d.join("case-x0.json")));
        for (case, p) in cases.iter().zip(&prepared) {
            let engine = pg.query_csv(&std::fs::read_to_string(&p.sql).expect("sql"));
            check(p, &engine, case.key);
        }
    }
    // Spark from statements in its own dialect, and with ANSI mode on, so
    // an overflow there would be an error rather than a silent infinity.
    if let Some(mut spark) = Spark::shared() {
        spark.load("extreme", &extreme, &numeric_columns(&d.join("case-x0.json")));
        for (i, case) in cases.iter().enumerate() {
            let p = prepare(d, case, &format!("-spark{i}"), "spark");
            let engine = spark.query_csv(&std::fs::read_to_string(&p.sql).expect("sql"));
            assert!(
                !engine.contains("nan") && !engine.contains("inf"),
                "{}: NaN or infinity in Spark's result",
                case.name
            );
            check(&p, &engine, case.key);
        }
    }
    if with_duckdb {
        let mut arguments = vec![format!("table:extreme={}", extreme.display())];
        let results: Vec<PathBuf> = (0..prepared.len()).map(|i| d.join(format!("duck-x{i}.csv"))).collect();
        for (p, result) in prepared.iter().zip(&results) {
            arguments.push(format!("query:{}={}", p.sql.display(), result.display()));
        }
        duckdb(&arguments);
        for ((case, p), result) in cases.iter().zip(&prepared).zip(&results) {
            let engine = std::fs::read_to_string(result).expect("result");
            assert!(!engine.contains("nan") && !engine.contains("NaN"), "{}: NaN in DuckDB's result", case.name);
            check(p, &engine, case.key);
        }
    }
}

/// Spark resolves column names without regard to case: names that differ
/// only in case are refused in its dialect, with the names, and pass in
/// the others.
#[test]
fn names_equal_but_for_case_are_refused_in_the_spark_dialect() {
    let dir = temp_dir();
    let d = dir.path();
    let mut text = String::from("Amount,amount,y\n");
    for i in 0..60 {
        text.push_str(&format!("{},{},{}\n", i % 7, (i * 3) % 11, if i % 3 == 0 { "b" } else { "a" }));
    }
    write(d, "cased.csv", text.as_bytes());
    assert_eq!(run(d, &["fit", "cased.csv", "--target", "y", "--family", "lda", "-o", "m.json"]).0, 0);
    refused(
        d,
        &["export-sql", "m.json", "--table", "t", "--dialect", "spark"],
        2,
        "'Amount' and 'amount' differ only in case",
    );
    assert_eq!(run(d, &["export-sql", "m.json", "--table", "t", "--dialect", "postgres"]).0, 0);
    refused(
        d,
        &["stats-sql", "--family", "lda", "--table", "t", "--target", "y", "--dialect", "spark", "Amount", "amount"],
        2,
        "differ only in case",
    );
}

/// In Spark's ANSI mode a text in a numeric input stops the statement with
/// Spark's own message (naming the value), rather than scoring the row as
/// if the value were missing; the README says so.
#[test]
fn a_text_in_a_numeric_column_stops_the_spark_statement() {
    let Some(mut spark) = Spark::shared() else { return };
    let dir = temp_dir();
    let d = dir.path();
    let demo = demo(d);
    let lending = demo.join("lending");
    let model = d.join("m.json");
    let train = lending.join("train.csv");
    let mut fit = fit_lending(train.to_str().unwrap(), "lda");
    fit.extend(["-o", model.to_str().unwrap()]);
    assert_eq!(run(d, &fit).0, 0);
    let typed = d.join("typed.csv");
    edited(&lending.join("new_portfolio.csv"), &typed, |i, column, value| match column {
        "income" if i == 17 => "n/a".into(),
        _ => value.to_string(),
    });
    // income loaded as text, as a table whose column holds the odd word is.
    let numeric: Vec<String> = numeric_columns(&model).into_iter().filter(|c| c != "income").collect();
    spark.load("typed", &typed, &numeric);
    let sql = d.join("typed.sql");
    let (code, _, stderr) = run(
        d,
        &["export-sql", model.to_str().unwrap(), "--table", "typed", "--dialect", "spark", "-o", sql.to_str().unwrap()],
    );
    assert_eq!(code, 0, "{stderr}");
    let error = spark.try_query_csv(&std::fs::read_to_string(&sql).expect("sql")).expect_err("the cast must fail");
    assert!(error.contains("CAST_INVALID_INPUT") && error.contains("n/a"), "{error}");
}
