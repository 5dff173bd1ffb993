//! Warehouse benchmark: on the reference workload's distribution
//! (`../shared/bench/gen.py`, 20 Gaussian inputs, about 5% positives), in
//! one run: the exported scoring statement (LDA, QDA, logistic) and the
//! aggregate queries (LDA, QDA, and one logistic Newton step) in
//! PostgreSQL and in Spark local mode on one and on two cores, beside
//! `baserate score` and `baserate fit` on the file. There is no target: the
//! figures say what moving the job into the engine costs or saves.
//!
//! - PostgreSQL: the table loaded by COPY; results back through COPY TO
//!   STDOUT (the scores as CSV, as `score` writes them).
//! - Spark: the CSV file read once into Spark's memory (as a warehouse's
//!   columnar table would be read fast, not parsed at every query); scores
//!   written by Spark's own CSV writer; aggregates collected. Deciles by
//!   `--deciles approximate`: Spark's exact `percentile` holds every value
//!   of a column in memory, more than the session holds at 10,000,000 rows.
//!
//! Run: `cargo bench --bench warehouse` (needs PostgreSQL from Debian's
//! packages, and pyspark for the Spark figures; rows: `BASERATE_BENCH_ROWS`,
//! default 1,000,000; repeats per figure: `BASERATE_BENCH_REPEATS`, default
//! 3, the median reported; Spark's memory: `BASERATE_BENCH_SPARK_MEMORY`,
//! default 8g).

mod common;
#[path = "../tests/common/postgres.rs"]
mod postgres;
#[path = "../tests/common/spark.rs"]
#[allow(dead_code)]
mod spark;

/// What the shared Spark session module asks of its crate.
#[allow(dead_code)]
fn python_with(modules: &str) -> bool {
    common::python_has(modules)
}

use std::process::Command;
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Repeats per figure: `BASERATE_BENCH_REPEATS`, default 3 (the median is
/// reported); 1 for the 10,000,000-row run.
fn repeats() -> usize {
    std::env::var("BASERATE_BENCH_REPEATS").ok().and_then(|v| v.parse().ok()).unwrap_or(3).max(1)
}

fn timed(mut f: impl FnMut()) -> f64 {
    median(
        (0..repeats())
            .map(|_| {
                let start = Instant::now();
                f();
                start.elapsed().as_secs_f64()
            })
            .collect(),
    )
}

fn run(args: &[&str]) {
    let output = Command::new(env!("CARGO_BIN_EXE_baserate")).args(args).output().expect("run baserate");
    assert!(output.status.success(), "{args:?}: {}", String::from_utf8_lossy(&output.stderr));
}

fn main() {
    let rows = common::workload_rows();
    let path = common::workload_file(rows);
    let data = path.display().to_string();
    let Some(pg) = postgres::Postgres::start() else {
        println!("PostgreSQL is not installed (apt-get install postgresql): nothing to measure");
        return;
    };
    let work = pg.dir.path().to_path_buf();
    let file = |name: &str| work.join(name).display().to_string();
    println!("file: {data} ({rows} rows), 2 cores, repeats {} (median)", repeats());
    let numeric: Vec<String> = (1..=20).map(|j| format!("f{j}")).collect();
    let families = ["lda", "qda", "logistic"];

    // On the file: fit and score.
    let mut fit_s = Vec::new();
    let mut score_s = Vec::new();
    for family in families {
        let model = file(&format!("{family}.json"));
        fit_s.push(timed(|| run(&["fit", &data, "--target", "y", "--family", family, "-o", &model])));
        let scores = file("scores.csv");
        score_s.push(timed(|| run(&["score", &model, &data, "-o", &scores, "-q"])));
    }
    let _ = std::fs::remove_file(file("scores.csv"));

    // The statements, written once per dialect.
    let statement = |family: &str, kind: &str, dialect: &str| -> String {
        let model = file(&format!("{family}.json"));
        let out = file("statement.sql");
        match (kind, family) {
            ("scoring", _) => run(&["export-sql", &model, "--table", "reference", "--dialect", dialect, "-o", &out]),
            (_, "logistic") => run(&[
                "stats-sql",
                "--family",
                "logistic",
                "--table",
                "reference",
                "--target",
                "y",
                "--dialect",
                dialect,
                "--start",
                &model,
                "-o",
                &out,
            ]),
            _ => {
                let deciles = if dialect == "spark" { "approximate" } else { "exact" };
                let mut args = vec![
                    "stats-sql",
                    "--family",
                    family,
                    "--table",
                    "reference",
                    "--target",
                    "y",
                    "--dialect",
                    dialect,
                    "--deciles",
                    deciles,
                    "-o",
                    &out,
                ];
                args.extend(numeric.iter().map(String::as_str));
                run(&args);
            }
        }
        std::fs::read_to_string(&out).expect("statement")
    };
    // Fitting from a result: from aggregates, or the Newton step.
    let from_result = |family: &str, result: &str| -> f64 {
        let stats = work.join("result.csv");
        std::fs::write(&stats, result).expect("result");
        let stats = stats.display().to_string();
        let out = file("from_stats.json");
        let start = file(&format!("{family}.json"));
        let mut args = vec!["fit", stats.as_str(), "--from-stats", "--family", family, "-o", &out];
        if family == "logistic" {
            args.extend(["--start", start.as_str()]);
        }
        timed(|| run(&args))
    };

    let load = Instant::now();
    pg.load("reference", &path, &numeric);
    println!("PostgreSQL: loading the table (COPY) {:.1} s", load.elapsed().as_secs_f64());
    let mut pg_scoring = Vec::new();
    let mut pg_aggregates = Vec::new();
    let mut from_stats = Vec::new();
    for family in families {
        let sql = statement(family, "scoring", "postgres");
        pg_scoring.push(timed(|| {
            let _ = pg.query_csv(&sql);
        }));
        let sql = statement(family, "aggregates", "postgres");
        let mut result = String::new();
        pg_aggregates.push(timed(|| result = pg.query_csv(&sql)));
        from_stats.push(from_result(family, &result));
    }

    // Spark local mode on one and on two cores.
    let mut spark_scoring = vec![Vec::new(); 2];
    let mut spark_aggregates = vec![Vec::new(); 2];
    let spark_ran = common::python_has("pyspark");
    if spark_ran {
        let memory = std::env::var("BASERATE_BENCH_SPARK_MEMORY").unwrap_or_else(|_| "8g".into());
        for cores in [1usize, 2] {
            let Some(mut spark) = spark::Spark::start(cores, &memory) else {
                println!("Spark did not start");
                return;
            };
            let load = Instant::now();
            spark.load_table("reference", &path, &numeric, true);
            println!("Spark local[{cores}]: reading the CSV file into memory {:.1} s", load.elapsed().as_secs_f64());
            let out = work.join("spark_scores");
            for family in families {
                let sql = statement(family, "scoring", "spark");
                spark_scoring[cores - 1].push(timed(|| spark.write_csv(&sql, &out)));
                let sql = statement(family, "aggregates", "spark");
                spark_aggregates[cores - 1].push(timed(|| {
                    let _ = spark.query_csv(&sql);
                }));
            }
            let _ = std::fs::remove_dir_all(&out);
        }
    } else {
        println!("pyspark absent: no Spark figures");
    }

    let ratio = |a: f64, b: f64| format!("{:.1}×", a / b);
    println!();
    println!(
        "{:<24} {:>10} {:>10} {:>10} {:>10} {:>9} {:>9} {:>9}",
        "scoring statement", "score (s)", "PG (s)", "Spark1 (s)", "Spark2 (s)", "PG/score", "S2/score", "S1/S2"
    );
    for (i, family) in families.iter().enumerate() {
        let (s1, s2) = if spark_ran { (spark_scoring[0][i], spark_scoring[1][i]) } else { (f64::NAN, f64::NAN) };
        println!(
            "{family:<24} {:>10.2} {:>10.2} {s1:>10.2} {s2:>10.2} {:>9} {:>9} {:>9}",
            score_s[i],
            pg_scoring[i],
            ratio(pg_scoring[i], score_s[i]),
            ratio(s2, score_s[i]),
            ratio(s1, s2)
        );
    }
    println!(
        "{:<24} {:>10} {:>10} {:>10} {:>10} {:>9} {:>9} {:>9}",
        "aggregate query", "fit (s)", "PG (s)", "Spark1 (s)", "Spark2 (s)", "PG/fit", "S2/fit", "S1/S2"
    );
    for (i, family) in families.iter().enumerate() {
        let name = if *family == "logistic" { "logistic, one step".to_string() } else { family.to_string() };
        let (s1, s2) = if spark_ran { (spark_aggregates[0][i], spark_aggregates[1][i]) } else { (f64::NAN, f64::NAN) };
        println!(
            "{name:<24} {:>10.2} {:>10.2} {s1:>10.2} {s2:>10.2} {:>9} {:>9} {:>9}   (fit --from-stats {:.2} s)",
            fit_s[i],
            pg_aggregates[i],
            ratio(pg_aggregates[i], fit_s[i]),
            ratio(s2, fit_s[i]),
            ratio(s1, s2),
            from_stats[i]
        );
    }
    println!("(fit on the file: the whole fit — for logistic all its Newton iterations — against one query)");
}
