//! The SQL engines the warehouse tests run statements in: PostgreSQL (a
//! throwaway cluster), Apache Spark (pyspark, local mode) and DuckDB
//! (through its Python package), behind one trait.

use std::path::{Path, PathBuf};
use std::process::Command;

use super::external_tool;
use super::postgres::Postgres;
use super::spark::Spark;

/// The cluster, or `None` (a notice, or a failure under
/// BASERATE_REQUIRE_EXTERNAL=1) when PostgreSQL is not installed.
pub fn postgres() -> Option<Postgres> {
    let started = Postgres::start();
    if started.is_none() {
        external_tool("PostgreSQL (initdb)", &mut Command::new("false"));
    }
    started
}

/// An engine the exported statements run in.
pub trait Engine {
    /// The `--dialect` its statements are written in.
    fn dialect(&self) -> &'static str;
    /// Loads a CSV file as a table, `numeric` columns as doubles.
    fn load(&mut self, table: &str, csv: &Path, numeric: &[String]);
    /// Runs one statement; its rows as CSV with a header.
    fn query_csv(&mut self, sql: &str) -> String;
    /// The dialects to write scoring statements in, in turn, and the one
    /// for aggregate queries (with deciles).
    fn dialects(&self) -> (&'static [&'static str], &'static str);
    /// Creates the table `keepme` with one row, which hostile names try
    /// to drop.
    fn plant_keepme(&mut self);
}

impl Engine for Postgres {
    fn dialect(&self) -> &'static str {
        "ansi"
    }
    fn load(&mut self, table: &str, csv: &Path, numeric: &[String]) {
        Postgres::load(self, table, csv, numeric);
    }
    fn query_csv(&mut self, sql: &str) -> String {
        Postgres::query_csv(self, sql)
    }
    fn dialects(&self) -> (&'static [&'static str], &'static str) {
        (&["postgres", "ansi"], "postgres")
    }
    fn plant_keepme(&mut self) {
        self.psql("CREATE TABLE keepme (x INTEGER); INSERT INTO keepme VALUES (1);");
    }
}

impl Engine for Spark {
    fn dialect(&self) -> &'static str {
        "spark"
    }
    fn load(&mut self, table: &str, csv: &Path, numeric: &[String]) {
        Spark::load(self, table, csv, numeric);
    }
    fn query_csv(&mut self, sql: &str) -> String {
        Spark::query_csv(self, sql)
    }
    fn dialects(&self) -> (&'static [&'static str], &'static str) {
        (&["spark"], "spark")
    }
    fn plant_keepme(&mut self) {
        self.query_csv("CREATE OR REPLACE TEMPORARY VIEW keepme AS SELECT 1 AS x");
    }
}

/// Loads CSV files into DuckDB tables and runs SQL files, each result
/// written as CSV (floats in their shortest round-trip form).
const DUCKDB_RUNNER: &str = r#"
import csv, sys, duckdb
con = duckdb.connect()
for arg in sys.argv[1:]:
    kind, rest = arg.split(':', 1)
    left, right = rest.split('=', 1)
    if kind == 'table':
        con.execute('CREATE TABLE "' + left.replace('"', '""') + '" AS SELECT * FROM read_csv(?, header = true)', [right])
    else:
        statement = open(left).read().rstrip().rstrip(';')
        cursor = con.execute(statement)
        with open(right, 'w', newline='') as out:
            writer = csv.writer(out)
            writer.writerow([d[0] for d in cursor.description])
            for row in cursor.fetchall():
                writer.writerow(['' if v is None else repr(v) if isinstance(v, float) else v for v in row])
"#;

pub fn duckdb(arguments: &[String]) {
    let output = Command::new("python3").arg("-c").arg(DUCKDB_RUNNER).args(arguments).output().expect("python3");
    assert!(output.status.success(), "duckdb: {}", String::from_utf8_lossy(&output.stderr));
}

/// DuckDB as an [`Engine`]: each statement runs in a fresh in-memory
/// database that loads the tables first (the test tables are small).
#[derive(Default)]
pub struct DuckDb {
    tables: Vec<(String, PathBuf)>,
    scratch: Option<tempfile::TempDir>,
}

impl DuckDb {
    /// `None` (a notice, or a failure under BASERATE_REQUIRE_EXTERNAL=1)
    /// when the duckdb Python package is absent.
    pub fn start() -> Option<DuckDb> {
        super::python_with("duckdb").then(DuckDb::default)
    }
}

impl Engine for DuckDb {
    fn dialect(&self) -> &'static str {
        "ansi"
    }
    fn load(&mut self, table: &str, csv: &Path, _numeric: &[String]) {
        self.tables.push((table.to_string(), csv.to_path_buf()));
    }
    fn query_csv(&mut self, sql: &str) -> String {
        let dir =
            self.scratch.get_or_insert_with(|| tempfile::tempdir().expect("temporary directory")).path().to_path_buf();
        let (statement, result) = (dir.join("statement.sql"), dir.join("result.csv"));
        std::fs::write(&statement, sql).expect("write statement");
        let mut arguments: Vec<String> =
            self.tables.iter().map(|(t, p)| format!("table:{t}={}", p.display())).collect();
        arguments.push(format!("query:{}={}", statement.display(), result.display()));
        duckdb(&arguments);
        std::fs::read_to_string(&result).expect("result")
    }
    fn dialects(&self) -> (&'static [&'static str], &'static str) {
        (&["ansi"], "ansi")
    }
    fn plant_keepme(&mut self) {}
}
