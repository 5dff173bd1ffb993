//! Shared by the integration tests: running the binary, temporary files,
//! the tolerance policy, and the rule for tests that need outside tools.

#![allow(dead_code)]

pub mod engine;
pub mod postgres;
pub mod spark;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Relative tolerance for closed-form results (see DEVELOPERS.md).
pub const CLOSED_FORM_RELATIVE: f64 = 1e-8;

/// True when `a` and `b` agree to `relative` (relative to the larger
/// magnitude, with an absolute floor of `relative` near zero).
pub fn close(a: f64, b: f64, relative: f64) -> bool {
    (a - b).abs() <= relative * a.abs().max(b.abs()).max(1.0)
}

/// Runs the `baserate` binary with `args` in `dir`.
pub fn baserate(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_baserate")).args(args).current_dir(dir).output().expect("run baserate")
}

/// Runs the binary and returns (exit code, stdout, stderr), failing the
/// test on a panic or an internal error: every outcome must be a clear one.
pub fn run(dir: &Path, args: &[&str]) -> (i32, String, String) {
    let output = baserate(dir, args);
    let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
    assert!(!stderr.contains("panicked") && !stderr.contains("internal error"), "{stderr}");
    (output.status.code().unwrap_or(-1), String::from_utf8_lossy(&output.stdout).into_owned(), stderr)
}

/// A fresh temporary directory.
pub fn temp_dir() -> tempfile::TempDir {
    tempfile::tempdir().expect("temporary directory")
}

/// Writes `contents` to `dir/name` and returns the path.
pub fn write(dir: &Path, name: &str, contents: &[u8]) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, contents).expect("write test file");
    path
}

/// Whether an outside tool a test needs is present. When it is absent the
/// test prints a notice (shown by a plain `cargo test`) and skips — unless `BASERATE_REQUIRE_EXTERNAL=1`
/// (as CI sets), when a missing tool fails the test.
pub fn external_tool(what: &str, probe: &mut Command) -> bool {
    let present = probe.output().map(|o| o.status.success()).unwrap_or(false);
    if !present {
        if std::env::var("BASERATE_REQUIRE_EXTERNAL").as_deref() == Ok("1") {
            panic!("{what} is required (BASERATE_REQUIRE_EXTERNAL=1) but not available");
        }
        // Written to the process's stderr directly, not through eprintln!,
        // which the test harness captures and shows only for failures: a
        // skipped test must look skipped in a plain `cargo test`.
        let _ = writeln!(std::io::stderr(), "notice: {what} not available; test skipped");
    }
    present
}

/// `python3` with the given modules importable.
pub fn python_with(modules: &str) -> bool {
    external_tool(
        &format!("python3 with {modules}"),
        Command::new("python3").args(["-c", &format!("import {modules}")]),
    )
}
