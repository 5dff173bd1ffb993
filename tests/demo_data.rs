//! The committed demo data equals the generator's output for the default
//! seed, and `baserate demo` gives the same bytes on every run.

mod common;

use baserate::demo::{generate, DemoSize, DEFAULT_SEED};

#[test]
fn committed_demo_data_matches_the_generator() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-data");
    for file in generate(DEFAULT_SEED, DemoSize::standard()) {
        let committed = std::fs::read_to_string(root.join(file.path)).unwrap_or_else(|e| {
            panic!("demo-data/{}: {e} (regenerate with `cargo run --release -- demo --out demo-data`)", file.path)
        });
        assert!(
            committed == file.contents,
            "demo-data/{} differs from the generator's output; regenerate it",
            file.path
        );
    }
}

#[test]
fn demo_sizes_and_rates_are_as_documented() {
    let files = generate(DEFAULT_SEED, DemoSize::standard());
    let rows = |i: usize| files[i].contents.lines().count() - 1;
    assert_eq!((rows(0), rows(1), rows(2), rows(4)), (5_000, 5_000, 5_000, 50_000));
    let share = |text: &str, label: &str| {
        text.lines().skip(1).filter(|l| l.ends_with(label)).count() as f64 / (text.lines().count() - 1) as f64
    };
    // Binomial sampling error at n = 5,000 and p = 0.10 is 0.0042; at
    // n = 50,000 and p = 0.005 it is 0.0003. Allow four of them.
    assert!((share(&files[0].contents, ",defaulted") - 0.10).abs() < 0.017);
    assert!((share(&files[2].contents, ",defaulted") - 0.03).abs() < 0.01);
    assert!((share(&files[4].contents, ",fraud") - 0.005).abs() < 0.0013);
    assert!(!files[1].contents.lines().next().unwrap_or("").contains("outcome"), "labels are withheld");
}

#[test]
fn the_demo_command_is_deterministic() {
    let dir = common::temp_dir();
    let run = |out: &str, seed: &str| {
        let output = common::baserate(dir.path(), &["demo", "--out", out, "--seed", seed, "--rows", "300"]);
        assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
        String::from_utf8_lossy(&output.stdout).into_owned()
    };
    let first = run("a", "7");
    let second = run("b", "7");
    run("c", "8");
    assert_eq!(first.replace("a/", ""), second.replace("b/", ""));
    for path in [
        "lending/train.csv",
        "lending/new_portfolio.csv",
        "lending/new_portfolio_answers.csv",
        "payments/transactions.csv",
    ] {
        let a = std::fs::read(dir.path().join("a").join(path)).expect("a");
        let b = std::fs::read(dir.path().join("b").join(path)).expect("b");
        let c = std::fs::read(dir.path().join("c").join(path)).expect("c");
        assert_eq!(a, b, "{path}: same seed, same bytes");
        assert_ne!(a, c, "{path}: another seed, other data");
    }
    assert!(first.contains("decision support, not a decision"));
}

/// Each note about the training file is printed once, with the first step
/// that reads it.
#[test]
fn the_demo_prints_each_training_note_once() {
    let dir = common::temp_dir();
    let output = common::baserate(dir.path(), &["demo", "--out", "d", "--rows", "600"]);
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    let stderr = String::from_utf8_lossy(&output.stderr);
    let notes: Vec<&str> = stderr.lines().filter(|l| l.contains("set to the median")).collect();
    let mut unique = notes.clone();
    unique.sort_unstable();
    unique.dedup();
    assert!(!notes.is_empty(), "{stderr}");
    assert_eq!(notes.len(), unique.len(), "{stderr}");
}

/// The demo's scored portfolio carries the decisions, as the SQL job for
/// the same work returns them.
#[test]
fn the_demo_scores_carry_the_actions_of_the_sql_job() {
    let dir = common::temp_dir();
    let output = common::baserate(dir.path(), &["demo", "--out", "d", "--rows", "600"]);
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    let scores = std::fs::read_to_string(dir.path().join("d/lending/new_portfolio_scores.csv")).expect("scores");
    let header: Vec<&str> = scores.lines().next().unwrap_or("").split(',').collect();
    let sql = std::fs::read_to_string(dir.path().join("d/lending/new_portfolio_scoring.sql")).expect("sql");
    for column in ["application_id", "posterior_defaulted", "posterior_repaid", "action", "expected_cost"] {
        assert!(header.contains(&column), "{column} in {header:?}");
        assert!(sql.contains(column), "{column} in the SQL");
    }
    let actions = header.iter().position(|c| *c == "action").expect("action");
    assert!(scores
        .lines()
        .skip(1)
        .all(|l| ["approve", "refer", "decline"].contains(&l.split(',').nth(actions).unwrap_or(""))));
}
