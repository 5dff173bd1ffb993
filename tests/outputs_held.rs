//! Outputs are replaced as a set: a second run aimed at outputs another run
//! holds refuses (exit 2) and leaves them alone; SIGINT and SIGTERM remove
//! the run's temporary files and locks, and the old outputs stay whole; a
//! temporary file a killed run left is removed by the next run of the same
//! output, with a warning naming it.

mod common;

use std::io::Write;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use common::{run, temp_dir, write};

fn fitted(dir: &Path) {
    let files = baserate::demo::generate(baserate::demo::DEFAULT_SEED, baserate::demo::DemoSize::uniform(300));
    write(dir, "train.csv", files[0].contents.as_bytes());
    write(dir, "new.csv", files[1].contents.as_bytes());
    let mut args = vec!["fit", "train.csv", "--target", "outcome", "--id", "application_id,application_month"];
    args.extend(["--missing", "impute", "--family", "lda", "-o", "m.json"]);
    let (code, _, err) = run(dir, &args);
    assert_eq!(code, 0, "{err}");
}

/// Hidden files beside the outputs (temporaries and locks).
fn hidden(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .expect("dir")
        .flatten()
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    names.sort();
    names
}

#[test]
fn a_second_run_refuses_outputs_another_holds() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    write(d, "out.csv", b"earlier output\n");
    // This test holds the lock a running `score` would hold.
    let lock = std::fs::File::create(d.join(".out.csv.lock")).expect("lock");
    lock.try_lock().expect("locked");
    (&lock).write_all(b"4242").expect("pid");
    for args in [
        vec!["score", "m.json", "new.csv", "-o", "out.csv"],
        vec!["score", "m.json", "new.csv", "-o", "other.csv", "--rejects", "out.csv"],
        vec!["inspect", "m.json", "--json", "out.csv"],
        vec!["export-sql", "m.json", "--table", "t", "-o", "out.csv"],
        vec!["describe", "train.csv", "--target", "outcome", "--json", "out.csv"],
    ] {
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(err.contains("out.csv: another run (process 4242) is writing this output"), "{args:?}: {err}");
        assert_eq!(std::fs::read(d.join("out.csv")).expect("out"), b"earlier output\n");
        assert!(!d.join("other.csv").exists(), "{args:?} wrote another output while refusing");
    }
    drop(lock);
    let (code, _, err) = run(d, &["score", "m.json", "new.csv", "-o", "out.csv"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(hidden(d), Vec::<String>::new(), "a finished run removes its locks");
}

/// Starts `score` reading its rows from a pipe this test keeps open, and
/// waits until it is writing its temporary output.
fn score_in_progress(dir: &Path) -> std::process::Child {
    let mut child = Command::new(env!("CARGO_BIN_EXE_baserate"))
        .args(["score", "m.json", "-", "-o", "out.csv", "--rejects", "rejects.csv", "--chunk-bytes", "4096"])
        .current_dir(dir)
        .stdin(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn");
    let text = std::fs::read_to_string(dir.join("new.csv")).expect("rows");
    let (header, rows) = text.split_once('\n').expect("header");
    let stdin = child.stdin.as_mut().expect("stdin");
    stdin.write_all(format!("{header}\n").as_bytes()).expect("write header");
    // Enough rows to fill the reader's buffer; the pipe then stays open.
    for _ in 0..40 {
        stdin.write_all(rows.as_bytes()).expect("write rows");
    }
    stdin.flush().expect("flush");
    let started = Instant::now();
    while !hidden(dir).iter().any(|n| n.starts_with(".out.csv.partial-")) {
        assert!(started.elapsed() < Duration::from_secs(30), "score never started writing");
        std::thread::sleep(Duration::from_millis(10));
    }
    child
}

#[test]
fn an_interrupted_run_leaves_nothing_behind() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    write(d, "out.csv", b"earlier output\n");
    for signal in ["INT", "TERM"] {
        let mut child = score_in_progress(d);
        assert!(hidden(d).contains(&".out.csv.lock".to_string()), "{:?}", hidden(d));
        // A second run aimed at the same outputs, while the first runs.
        let (code, _, err) = run(d, &["score", "m.json", "new.csv", "-o", "out.csv", "--rejects", "rejects.csv"]);
        assert_eq!(code, 2, "{err}");
        assert!(err.contains(&format!("(process {}) is writing this output", child.id())), "{err}");
        let status = Command::new("kill").args([&format!("-{signal}"), &child.id().to_string()]).status();
        assert!(status.expect("kill").success());
        let status = child.wait().expect("wait");
        assert!(!status.success(), "SIG{signal}: the run ended by the signal");
        assert_eq!(hidden(d), Vec::<String>::new(), "SIG{signal} left files behind");
        assert_eq!(std::fs::read(d.join("out.csv")).expect("out"), b"earlier output\n");
        assert!(!d.join("rejects.csv").exists());
    }
}

#[test]
fn a_killed_runs_temporary_file_is_removed_by_the_next_run() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    let mut child = score_in_progress(d);
    child.kill().expect("SIGKILL");
    let _ = child.wait();
    let left: Vec<String> = hidden(d).into_iter().filter(|n| n.contains(".partial-")).collect();
    assert!(!left.is_empty(), "SIGKILL cannot be caught: its temporary files stay");
    let (code, _, err) = run(d, &["score", "m.json", "new.csv", "-o", "out.csv", "--rejects", "rejects.csv"]);
    assert_eq!(code, 0, "{err}");
    for name in &left {
        assert!(err.contains(&format!("warning: removed ./{name}, a temporary file left by an earlier run")), "{err}");
    }
    assert!(hidden(d).iter().all(|n| !n.contains(".partial-")), "{:?}", hidden(d));
    // The same for a command that writes one file.
    write(d, ".shift.json.partial-999999", b"half a file");
    let (code, _, err) = run(d, &["shift", "m.json", "new.csv", "--json", "shift.json"]);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("removed ./.shift.json.partial-999999"), "{err}");
    assert_eq!(hidden(d), Vec::<String>::new());
}
