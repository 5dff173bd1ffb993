//! A local Apache Spark session (`local[N]`, through the `pyspark`
//! package) for tests and benchmarks: one long-lived Python process per test binary,
//! started on first use, fed one JSON command per line on stdin and
//! answering one line on stdout. Spark's own ANSI mode is on (the default
//! from Spark 4), so a failed cast is an error, not a NULL.

use std::io::{BufRead, BufReader, Write};
use std::path::Path;
use std::process::{Child, ChildStdin, ChildStdout, Command, Stdio};
use std::sync::{Mutex, MutexGuard, OnceLock};

/// The server: loads CSV files as tables (named columns as DOUBLE, the
/// rest as STRING, empty fields NULL, RFC 4180 quoting) and runs SQL
/// files, writing each result as CSV (doubles in their shortest
/// round-trip form, NULL as an empty field).
const SERVER: &str = r#"
import csv, json, re, sys
from pyspark.sql import SparkSession
from pyspark.sql.types import StructType, StructField, DoubleType, StringType
spark = (SparkSession.builder.master("local[" + sys.argv[1] + "]").appName("baserate")
         .config("spark.ui.enabled", "false").config("spark.sql.shuffle.partitions", "2")
         .config("spark.sql.ansi.enabled", "true").config("spark.driver.memory", sys.argv[2]).getOrCreate())
spark.sparkContext.setLogLevel("ERROR")
print("ready", flush=True)
for line in sys.stdin:
    command = json.loads(line)
    try:
        if command["op"] == "table":
            with open(command["csv"], newline="") as f:
                header = next(csv.reader(f))
            numeric = set(command["numeric"])
            schema = StructType([StructField(h, DoubleType() if h in numeric else StringType(), True) for h in header])
            frame = (spark.read.option("header", "true").option("escape", '"').option("multiLine", "true")
                     .schema(schema).csv(command["csv"]))
            if command.get("cache"):
                frame = frame.cache()
                frame.count()
            frame.createOrReplaceTempView("`" + command["name"].replace("`", "``") + "`")
        elif command["op"] == "write":
            # Spark's own writer, in parallel: how a batch job keeps its output.
            statement = open(command["sql"]).read().rstrip().rstrip(";")
            spark.sql(statement).write.mode("overwrite").option("header", "true").csv(command["out"])
        else:
            statement = open(command["sql"]).read().rstrip().rstrip(";")
            result = spark.sql(statement)
            with open(command["out"], "w", newline="") as out:
                writer = csv.writer(out)
                writer.writerow(result.columns)
                for row in result.collect():
                    writer.writerow(["" if v is None else repr(v) if isinstance(v, float) else v for v in row])
        print("ok", flush=True)
    except Exception as error:
        # Spark's own message (`[ERROR_CLASS] text`) first, wherever the
        # Java trace put it.
        text = str(error)
        found = re.search(r"\[[A-Z][A-Z_.]+\][^\n]*", text)
        print("error " + " ".join((found.group(0) if found else text).split())[:2000], flush=True)
"#;

/// The running session.
pub struct Spark {
    _child: Child,
    stdin: ChildStdin,
    stdout: BufReader<ChildStdout>,
    dir: tempfile::TempDir,
    queries: usize,
}

static SESSION: OnceLock<Option<Mutex<Spark>>> = OnceLock::new();

impl Spark {
    /// The test binary's one session (`local[2]`), or `None` when pyspark
    /// (or Java) is absent.
    pub fn shared() -> Option<MutexGuard<'static, Spark>> {
        SESSION
            .get_or_init(|| if super::python_with("pyspark") { Spark::start(2, "2g").map(Mutex::new) } else { None })
            .as_ref()
            .map(|m| m.lock().unwrap_or_else(|poisoned| poisoned.into_inner()))
    }

    /// A session of its own on `cores` local cores (`local[cores]`), its
    /// one JVM (driver and executors in local mode) given `memory` of heap
    /// (`2g`, say; Spark's default of 1g is too little to hold a
    /// million-row table in memory and plan a long statement beside it).
    pub fn start(cores: usize, memory: &str) -> Option<Spark> {
        let mut child = Command::new("python3")
            .args(["-c", SERVER, &cores.to_string(), memory])
            .stdin(Stdio::piped())
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .ok()?;
        let stdin = child.stdin.take()?;
        let mut stdout = BufReader::new(child.stdout.take()?);
        let mut line = String::new();
        stdout.read_line(&mut line).ok()?;
        if line.trim() != "ready" {
            return None;
        }
        let dir = tempfile::tempdir().ok()?;
        Some(Spark { _child: child, stdin, stdout, dir, queries: 0 })
    }

    fn send(&mut self, command: serde_json::Value) -> Result<(), String> {
        writeln!(self.stdin, "{command}").map_err(|e| e.to_string())?;
        self.stdin.flush().map_err(|e| e.to_string())?;
        let mut line = String::new();
        self.stdout.read_line(&mut line).map_err(|e| e.to_string())?;
        match line.trim_end() {
            "ok" => Ok(()),
            other => Err(other.trim_start_matches("error ").to_string()),
        }
    }

    /// Registers a CSV file as table `name`: `numeric` columns as DOUBLE,
    /// the rest as STRING.
    pub fn load(&mut self, name: &str, csv: &Path, numeric: &[String]) {
        self.load_table(name, csv, numeric, false);
    }

    /// As [`Spark::load`]; with `cache`, the table is read once into
    /// Spark's memory (as a warehouse's columnar table would be read
    /// fast), not from the CSV file at every query.
    pub fn load_table(&mut self, name: &str, csv: &Path, numeric: &[String], cache: bool) {
        let command = serde_json::json!({"op": "table", "name": name, "csv": csv, "numeric": numeric, "cache": cache});
        if let Err(message) = self.send(command) {
            panic!("Spark could not load {}: {message}", csv.display());
        }
    }

    /// Runs one statement; its rows as CSV with a header, or Spark's error.
    pub fn try_query_csv(&mut self, sql: &str) -> Result<String, String> {
        self.queries += 1;
        let (file, out) = (
            self.dir.path().join(format!("q{}.sql", self.queries)),
            self.dir.path().join(format!("q{}.csv", self.queries)),
        );
        std::fs::write(&file, sql).map_err(|e| e.to_string())?;
        self.send(serde_json::json!({"op": "query", "sql": file, "out": out}))?;
        std::fs::read_to_string(&out).map_err(|e| e.to_string())
    }

    /// Runs one statement and has Spark write its rows as CSV files in
    /// the directory `out` (replaced).
    pub fn write_csv(&mut self, sql: &str, out: &Path) {
        self.queries += 1;
        let file = self.dir.path().join(format!("q{}.sql", self.queries));
        std::fs::write(&file, sql).expect("write statement");
        if let Err(message) = self.send(serde_json::json!({"op": "write", "sql": file, "out": out})) {
            panic!("Spark refused the statement: {message}");
        }
    }

    /// Runs one statement; its rows as CSV with a header.
    pub fn query_csv(&mut self, sql: &str) -> String {
        self.try_query_csv(sql).unwrap_or_else(|message| panic!("Spark refused the statement: {message}"))
    }
}
