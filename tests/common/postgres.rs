//! A throwaway PostgreSQL cluster for tests and benchmarks: initialised in
//! a temporary directory, listening only on a socket there, run as the
//! `postgres` system user when the caller is root (PostgreSQL refuses to
//! run as root), stopped and removed when dropped.

use std::path::{Path, PathBuf};
use std::process::Command;

use baserate::export::sql::ident;

/// A throwaway PostgreSQL cluster, stopped when dropped.
pub struct Postgres {
    /// The cluster's directory: data, socket, log.
    pub dir: tempfile::TempDir,
    bin: PathBuf,
    as_postgres: bool,
}

impl Postgres {
    fn find_bin() -> Option<PathBuf> {
        let mut found: Vec<PathBuf> = std::fs::read_dir("/usr/lib/postgresql")
            .ok()?
            .filter_map(|e| e.ok().map(|e| e.path().join("bin")))
            .filter(|p| p.join("initdb").exists())
            .collect();
        found.sort_by_key(|p| {
            p.parent().and_then(|v| v.file_name()).and_then(|v| v.to_str()).and_then(|v| v.parse::<u32>().ok())
        });
        found.pop()
    }

    /// Initialises and starts a cluster; `None` when PostgreSQL is not
    /// installed (the caller decides whether that skips or fails).
    pub fn start() -> Option<Postgres> {
        let bin = Self::find_bin()?;
        if !Command::new(bin.join("initdb")).arg("--version").output().is_ok_and(|o| o.status.success()) {
            return None;
        }
        let dir = tempfile::tempdir().expect("temporary directory");
        // PostgreSQL refuses to run as root: the cluster belongs to the
        // postgres system user then.
        let root = Command::new("id").arg("-u").output().map(|o| o.stdout == b"0\n").unwrap_or(false);
        if root {
            let status = Command::new("chown").args(["-R", "postgres"]).arg(dir.path()).status().expect("chown");
            assert!(status.success(), "chown of the cluster directory failed");
        }
        let pg = Postgres { dir, bin, as_postgres: root };
        let data = pg.dir.path().join("data");
        pg.server_command(
            "initdb",
            &["-D", data.to_str().unwrap_or(""), "-A", "trust", "-U", "postgres", "-E", "UTF8"],
        );
        let options = format!("-c listen_addresses='' -k {} -p 54329 -c fsync=off", pg.dir.path().display());
        let log = pg.dir.path().join("log");
        pg.server_command(
            "pg_ctl",
            &["-D", data.to_str().unwrap_or(""), "-o", &options, "-l", log.to_str().unwrap_or(""), "-w", "start"],
        );
        Some(pg)
    }

    fn server_command(&self, program: &str, args: &[&str]) {
        let path = self.bin.join(program);
        let output = if self.as_postgres {
            Command::new("runuser").args(["-u", "postgres", "--"]).arg(&path).args(args).output()
        } else {
            Command::new(&path).args(args).output()
        }
        .expect("run a PostgreSQL server program");
        assert!(
            output.status.success(),
            "{program} failed: {}{}",
            String::from_utf8_lossy(&output.stdout),
            String::from_utf8_lossy(&output.stderr)
        );
    }

    /// Runs SQL text with psql; returns stdout.
    pub fn psql(&self, sql: &str) -> String {
        let file = self.dir.path().join(format!("statement-{}.sql", std::process::id()));
        std::fs::write(&file, sql).expect("write SQL");
        let output = Command::new(self.bin.join("psql"))
            .args(["-X", "-q", "-v", "ON_ERROR_STOP=1", "-U", "postgres", "-p", "54329", "-h"])
            .arg(self.dir.path())
            .arg("-f")
            .arg(&file)
            .output()
            .expect("run psql");
        assert!(output.status.success(), "psql failed: {}", String::from_utf8_lossy(&output.stderr));
        String::from_utf8_lossy(&output.stdout).into_owned()
    }

    /// Loads a CSV file into a new table: `numeric` columns as double
    /// precision, the rest as text (empty fields are NULL).
    pub fn load(&self, table: &str, csv: &Path, numeric: &[String]) {
        let header = csv::Reader::from_path(csv).expect("read csv").headers().expect("header").clone();
        let columns: Vec<String> = header
            .iter()
            .map(|h| {
                let kind = if numeric.iter().any(|n| n == h) { "DOUBLE PRECISION" } else { "TEXT" };
                format!("{} {kind}", ident(baserate::export::Dialect::Postgres, h).expect("name"))
            })
            .collect();
        let name = ident(baserate::export::Dialect::Postgres, table).expect("table");
        let copy = format!(
            "COPY {name} FROM STDIN WITH (FORMAT csv, HEADER true);\n{}\\.\n",
            std::fs::read_to_string(csv).expect("read csv")
        );
        self.psql(&format!("DROP TABLE IF EXISTS {name};\nCREATE TABLE {name} ({});\n{copy}", columns.join(", ")));
    }

    /// The rows a query returns, as CSV with a header.
    pub fn query_csv(&self, sql: &str) -> String {
        let statement = sql.trim_end().trim_end_matches(';');
        self.psql(&format!("COPY (\n{statement}\n) TO STDOUT WITH (FORMAT csv, HEADER true);\n"))
    }
}

impl Drop for Postgres {
    fn drop(&mut self) {
        let data = self.dir.path().join("data");
        let path = self.bin.join("pg_ctl");
        let args = ["-D", data.to_str().unwrap_or(""), "-m", "immediate", "stop"];
        let _ = if self.as_postgres {
            Command::new("runuser").args(["-u", "postgres", "--"]).arg(&path).args(args).output()
        } else {
            Command::new(&path).args(args).output()
        };
    }
}
