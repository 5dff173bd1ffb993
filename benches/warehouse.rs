//! Warehouse benchmark: the exported scoring SQL and the aggregate query
//! run in PostgreSQL on the reference workload (1,000,000 × 20,
//! `../shared/bench/gen.py`), beside `baserate score` and `baserate fit` on
//! the same rows, in one run, medians of three. There is no target: the
//! figures say what moving the job into the database costs or saves.
//!
//! Spark (pyspark, local mode on one and on two cores) runs the LDA and
//! QDA scoring and aggregate statements of its dialect on the same rows,
//! read from the CSV file by each statement.
//!
//! Run: `cargo bench --bench warehouse` (needs PostgreSQL from Debian's
//! packages, and pyspark for the Spark figures; rows: `BASERATE_BENCH_ROWS`;
//! repeats per figure: `BASERATE_BENCH_REPEATS`, default 3).

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
    println!("file: {data} ({rows} rows), 2 cores, PostgreSQL defaults (parallel workers as configured)");
    let numeric: Vec<String> = (1..=20).map(|j| format!("f{j}")).collect();
    let load = Instant::now();
    pg.load("reference", &path, &numeric);
    println!("loading the table (COPY from psql): {:.2} s", load.elapsed().as_secs_f64());
    let costs = work.join("costs.toml");
    std::fs::write(
        &costs,
        "[actions.pass]\n\"0\" = 0\n\"1\" = { rate = 1.0, column = \"f1\" }\n\n[actions.review]\n\"0\" = 2\n\"1\" = { fixed = 2, rate = 0.1, column = \"f1\" }\ncapacity_share = 0.01\n\n[actions.block]\n\"0\" = 8\n\"1\" = 0\n",
    )
    .expect("costs");
    let costs = costs.display().to_string();
    println!("{:<28} {:>10} {:>12} {:>8}", "scoring job", "SQL (s)", "score (s)", "ratio");
    for family in ["logistic", "naive-bayes", "lda", "qda"] {
        let model = file(&format!("{family}.json"));
        run(&["fit", &data, "--target", "y", "--family", family, "-o", &model]);
        for with_costs in [false, true] {
            let sql_path = file("job.sql");
            let scores = file("scores.csv");
            let mut export =
                vec!["export-sql", model.as_str(), "--table", "reference", "--dialect", "postgres", "-o", &sql_path];
            let mut score = vec!["score", model.as_str(), data.as_str(), "-o", &scores, "-q"];
            if with_costs {
                export.extend(["--costs", &costs]);
                score.extend(["--costs", &costs]);
            }
            run(&export);
            let statement = std::fs::read_to_string(&sql_path).expect("sql");
            let sql = timed(|| {
                let _ = pg.query_csv(&statement);
            });
            let baserate = timed(|| run(&score));
            let name = format!("{family}{}", if with_costs { " + costs, capacity" } else { "" });
            println!("{name:<28} {sql:>10.2} {baserate:>12.2} {:>7.1}×", sql / baserate);
        }
    }
    println!("{:<28} {:>10} {:>12} {:>8}", "fit", "SQL (s)", "fit (s)", "ratio");
    for family in ["naive-bayes", "lda", "qda"] {
        for dialect in ["ansi", "postgres"] {
            let stats_path = file("stats.sql");
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
                "-o",
                &stats_path,
            ];
            args.extend(numeric.iter().map(String::as_str));
            run(&args);
            let statement = std::fs::read_to_string(&stats_path).expect("sql");
            let mut result = String::new();
            let sql = timed(|| result = pg.query_csv(&statement));
            let stats = work.join("stats.csv");
            std::fs::write(&stats, &result).expect("stats");
            let model = file("from_stats.json");
            let from =
                timed(|| run(&["fit", &stats.display().to_string(), "--from-stats", "--family", family, "-o", &model]));
            let direct_model = file("direct.json");
            let direct = timed(|| run(&["fit", &data, "--target", "y", "--family", family, "-o", &direct_model]));
            println!(
                "{:<28} {:>10.2} {:>12.2} {:>7.1}×   (fit --from-stats {:.3} s)",
                format!("{family} aggregates, {dialect}"),
                sql,
                direct,
                sql / direct,
                from
            );
        }
    }
    // The same jobs in Spark local mode, on one and on two cores, each
    // statement reading the CSV file (a cluster would read its own
    // columnar tables, faster); every statement in the Spark dialect.
    if !common::python_has("pyspark") {
        println!("pyspark absent: no Spark figures");
        return;
    }
    for cores in [1usize, 2] {
        let Some(mut spark) = spark::Spark::start(cores, "8g") else {
            println!("Spark did not start");
            return;
        };
        let load = Instant::now();
        spark.load_table("reference", &path, &numeric, false);
        println!("Spark local[{cores}]: registering the CSV file as a table {:.2} s", load.elapsed().as_secs_f64());
        for family in ["lda", "qda"] {
            let model = file(&format!("{family}.json"));
            let sql_path = file("job.sql");
            run(&["export-sql", &model, "--table", "reference", "--dialect", "spark", "-o", &sql_path]);
            let statement = std::fs::read_to_string(&sql_path).expect("sql");
            let scoring = timed(|| {
                let _ = spark.query_csv(&statement);
            });
            let stats_path = file("stats.sql");
            let mut args =
                vec!["stats-sql", "--family", family, "--table", "reference", "--target", "y", "--dialect", "spark"];
            args.extend(["-o", &stats_path]);
            args.extend(numeric.iter().map(String::as_str));
            run(&args);
            let statement = std::fs::read_to_string(&stats_path).expect("sql");
            let aggregates = timed(|| {
                let _ = spark.query_csv(&statement);
            });
            println!("Spark local[{cores}] {family}: scoring query {scoring:.2} s, aggregate query {aggregates:.2} s");
        }
    }
}
