//! Long work shows progress on a terminal and nothing elsewhere: `fit` (a
//! penalised path, the out-of-fold fits, a file's read), `compare`
//! (families × folds) and `shift` (its bootstrap) draw a bar on stderr
//! when it is a terminal, and are silent when it is a pipe. The terminal
//! is a pseudo-terminal made by Python's `pty` module.

mod common;

use std::path::Path;
use std::process::Command;

use common::{python_with, run, temp_dir};

/// Runs the binary on a pseudo-terminal and returns all it wrote there.
fn on_a_terminal(dir: &Path, args: &[&str]) -> String {
    let script = r#"
import os, pty, sys
chunks = []
def read(fd):
    data = os.read(fd, 65536)
    chunks.append(data)
    return data
status = pty.spawn(sys.argv[1:], read)
sys.stdout.buffer.write(b"".join(chunks))
sys.exit(os.waitstatus_to_exitcode(status))
"#;
    let output = Command::new("python3")
        .arg("-c")
        .arg(script)
        .arg(env!("CARGO_BIN_EXE_baserate"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("python3");
    let text = String::from_utf8_lossy(&output.stdout).into_owned();
    assert!(output.status.success(), "{args:?} on a terminal:\n{text}{}", String::from_utf8_lossy(&output.stderr));
    text
}

#[test]
fn long_work_draws_progress_on_a_terminal_only() {
    if !python_with("pty") {
        return;
    }
    let dir = temp_dir();
    let (code, _, err) = run(dir.path(), &["demo", "--out", "d", "--rows", "2000"]);
    assert_eq!(code, 0, "{err}");
    let lending = ["d/lending/train.csv", "--target", "outcome", "--id", "application_id,application_month"];
    let with = |rest: &[&'static str]| -> Vec<String> { lending.iter().chain(rest).map(|s| s.to_string()).collect() };
    let cases: Vec<(Vec<String>, &[&str])> = vec![
        (
            [
                vec!["fit".to_string()],
                with(&["--missing", "impute", "--family", "logistic", "--penalty", "lasso", "-o", "m.json"]),
            ]
            .concat(),
            &["λ path", "fits (families × folds)", "reading the file"],
        ),
        ([vec!["compare".to_string()], with(&["--missing", "impute"])].concat(), &["fits (families × folds)"]),
        (
            ["shift", "m.json", "d/lending/new_portfolio.csv"].iter().map(|s| s.to_string()).collect(),
            &["bootstrap draws (EM)"],
        ),
    ];
    for (args, stages) in &cases {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let drawn = on_a_terminal(dir.path(), &args);
        for stage in *stages {
            assert!(drawn.contains(stage), "{args:?} on a terminal shows no '{stage}':\n{drawn}");
        }
        // The bar is cleared at the end: the last thing drawn is output,
        // and a pipe gets none of it.
        let (code, out, err) = run(dir.path(), &args);
        assert_eq!(code, 0, "{err}");
        for stage in *stages {
            assert!(!out.contains(stage) && !err.contains(stage), "{args:?} through a pipe shows '{stage}':\n{err}");
        }
    }
}
