//! No output of a run may be one of its inputs, by name, through a symlink
//! or as a hard link: every command refuses such a run with exit 2, naming
//! both, before any work, and the input is left as it was.

mod common;

use common::{run, temp_dir, write};

fn training_text() -> String {
    let mut text = String::from("id,x,z,y\n");
    for i in 0..120 {
        let x = (i % 11) as f64 / 2.0;
        let z = ((i * 7) % 13) as f64 / 3.0;
        text.push_str(&format!("r{i},{x},{z},{}\n", if (i % 5 == 0) ^ (x > 4.0) { "bad" } else { "good" }));
    }
    text
}

/// Runs `args`; the run must be refused with exit 2, naming both files,
/// and `guarded` must be unchanged.
fn refused(dir: &std::path::Path, args: &[&str], guarded: &str, naming: &str) {
    let before = std::fs::read(dir.join(guarded)).expect("guarded file");
    let (code, _, err) = run(dir, args);
    assert_eq!(code, 2, "{args:?}: {err}");
    assert!(err.contains(naming) && err.contains("write the output elsewhere"), "{args:?}: {err}");
    assert_eq!(std::fs::read(dir.join(guarded)).expect("guarded file"), before, "{args:?} changed {guarded}");
}

#[test]
fn no_command_writes_over_its_input() {
    let dir = temp_dir();
    let d = dir.path();
    write(d, "train.csv", training_text().as_bytes());
    write(d, "costs.toml", b"[actions.approve]\ngood = 0\nbad = 10\n[actions.decline]\ngood = 1\nbad = 0\n");
    let (code, _, err) =
        run(d, &["fit", "train.csv", "--target", "y", "--id", "id", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(d, &["shift", "m.json", "train.csv", "--json", "shift.json"]);
    assert_eq!(code, 0, "{err}");
    let fit = ["fit", "train.csv", "--target", "y", "--id", "id", "--family", "lda", "-o", "train.csv"];
    refused(d, &fit, "train.csv", "-o train.csv is the data file train.csv");
    refused(d, &["describe", "train.csv", "--target", "y", "--json", "train.csv"], "train.csv", "--json");
    refused(d, &["inspect", "m.json", "--json", "m.json"], "m.json", "the model file");
    refused(d, &["export-sql", "m.json", "--table", "t", "-o", "m.json"], "m.json", "the model file");
    refused(d, &["shift", "m.json", "train.csv", "--json", "train.csv"], "train.csv", "--json");
    refused(d, &["shift", "m.json", "train.csv", "--json", "m.json"], "m.json", "--json");
    for flag in ["--report", "--json", "--predictions"] {
        let args = ["compare", "train.csv", "--target", "y", "--id", "id", "--family", "lda", flag, "train.csv"];
        refused(d, &args, "train.csv", flag);
    }
    for flag in ["--report", "--json"] {
        refused(d, &["judge", "train.csv", "--target", "y", "--score", "x", flag, "train.csv"], "train.csv", flag);
    }
    let score = |extra: &[&'static str]| {
        let mut args = vec!["score", "m.json", "train.csv", "-o", "scores.csv"];
        args.extend(extra);
        args
    };
    refused(d, &score(&["--summary", "m.json"]), "m.json", "--summary m.json is the model file");
    refused(d, &score(&["--rejects", "m.json"]), "m.json", "--rejects");
    let onto_costs = ["score", "m.json", "train.csv", "--costs", "costs.toml", "-o", "costs.toml"];
    refused(d, &onto_costs, "costs.toml", "the costs file");
    let onto_shift = ["score", "m.json", "train.csv", "--prior-from", "shift.json:bbse", "-o", "shift.json"];
    refused(d, &onto_shift, "shift.json", "the shift file");
}

#[cfg(unix)]
#[test]
fn links_count_as_the_same_file() {
    let dir = temp_dir();
    let d = dir.path();
    write(d, "train.csv", training_text().as_bytes());
    std::fs::hard_link(d.join("train.csv"), d.join("hard.csv")).expect("hard link");
    std::os::unix::fs::symlink(d.join("train.csv"), d.join("soft.csv")).expect("symlink");
    std::fs::create_dir(d.join("sub")).expect("folder");
    std::os::unix::fs::symlink(d, d.join("sub/up")).expect("folder symlink");
    for out in ["hard.csv", "soft.csv", "sub/up/train.csv", "./sub/../train.csv"] {
        let args = ["fit", "train.csv", "--target", "y", "--id", "id", "--family", "lda", "-o", out];
        refused(d, &args, "train.csv", "is the data file train.csv");
    }
    // Two outputs on one file through a link are refused too.
    let (code, _, err) =
        run(d, &["fit", "train.csv", "--target", "y", "--id", "id", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
    std::os::unix::fs::symlink(d.join("s.csv"), d.join("s-link.csv")).expect("dangling symlink");
    write(d, "s.csv", b"old");
    let args = ["score", "m.json", "train.csv", "-o", "s.csv", "--summary", "s-link.csv"];
    let (code, _, err) = run(d, &args);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("name the same file"), "{err}");
}
