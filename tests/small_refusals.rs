//! Settings that cannot mean anything are refused at once, naming the
//! setting: a quote or a line end as the delimiter, a thread count no
//! machine has, a bootstrap too small for an interval, a fractional count
//! in a family option.

mod common;

use common::{run, temp_dir, write};

fn fitted(dir: &std::path::Path) {
    let mut text = String::from("id,x,y\n");
    for i in 0..120 {
        let x = (i % 13) as f64;
        text.push_str(&format!(
            "r{i},{x},{}\n",
            if (i * 7) % 10 < 2 + (x > 8.0) as usize * 4 { "bad" } else { "good" }
        ));
    }
    write(dir, "train.csv", text.as_bytes());
    let (code, _, err) =
        run(dir, &["fit", "train.csv", "--target", "y", "--id", "id", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn meaningless_settings_are_refused_naming_them() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    let started = std::time::Instant::now();
    for (args, message) in [
        (vec!["describe", "train.csv", "--target", "y", "--delimiter", "\""], "--delimiter cannot be '\"'"),
        (vec!["describe", "train.csv", "--target", "y", "--delimiter", "\n"], "--delimiter cannot be '\\n'"),
        (
            vec!["score", "m.json", "train.csv", "-o", "out.csv", "--threads", "100000"],
            "--threads must be at most 1024",
        ),
        (vec!["shift", "m.json", "train.csv", "--bootstrap", "0"], "--bootstrap must be at least 40 draws"),
        (
            vec!["compare", "train.csv", "--target", "y", "--family", "logistic:max-iterations=2.7"],
            "max-iterations takes a whole number; got '2.7'",
        ),
    ] {
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(err.contains(message), "{args:?}: {err}");
    }
    // Refused at once, not after starting a hundred thousand threads.
    assert!(started.elapsed() < std::time::Duration::from_secs(60));
    assert!(!d.join("out.csv").exists());
}

#[test]
fn judge_names_a_missing_score_column_as_a_score() {
    let dir = temp_dir();
    let d = dir.path();
    fitted(d);
    let (code, _, err) = run(d, &["judge", "train.csv", "--target", "y", "--score", "nocol"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("--score names column 'nocol'") && !err.contains("--numeric"), "{err}");
    // A score column also declared numeric is fine.
    let (code, _, err) =
        run(d, &["judge", "train.csv", "--target", "y", "--score", "x", "--numeric", "x", "--score-type", "rank"]);
    assert_eq!(code, 0, "{err}");
}

#[test]
fn a_weighted_count_in_a_message_is_written_short() {
    let dir = temp_dir();
    let d = dir.path();
    write(d, "w.csv", b"x,w,y\n1,1e-300,a\n2,1e-300,b\n3,1e-300,a\n4,1e-300,b\n");
    let (code, _, err) = run(d, &["fit", "w.csv", "--target", "y", "--weight", "w", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("4.00000e-300 rows (weighted) and 2 classes"), "{err}");
    assert!(err.len() < 300, "{err}");
}

#[test]
fn a_score_that_is_not_a_probability_is_named_by_file_line_and_column() {
    let dir = temp_dir();
    let d = dir.path();
    // Line 5 (the fourth row) holds 1.5.
    write(d, "scored.csv", b"y,s\nyes,0.2\nno,0.3\nyes,0.9\nno,1.5\nno,0.1\n");
    let expected = "scored.csv, line 5, column 's': '1.5' is not a probability from 0 to 1";
    for args in [
        vec!["judge", "scored.csv", "--target", "y", "--score", "s"],
        vec!["shift", "scored.csv", "--score", "s", "--train-prior", "0.3"],
    ] {
        let (code, _, err) = run(d, &args);
        assert_eq!(code, 1, "{args:?}: {err}");
        assert!(err.contains(expected), "{args:?}: {err}");
    }
    // As points, the same column is read as it is.
    let (code, _, err) = run(d, &["judge", "scored.csv", "--target", "y", "--score", "s", "--score-type", "rank"]);
    assert_eq!(code, 0, "{err}");
    // A score column is named as one when a value is not a number.
    write(d, "text.csv", b"y,s\nyes,0.2\nno,abc\n");
    let (code, _, err) = run(d, &["judge", "text.csv", "--target", "y", "--score", "s"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("line 3, column 's': 'abc' is not a number") && err.contains("named by --score"), "{err}");
    // shift needs every row's score.
    write(d, "gap.csv", b"y,s\nyes,0.2\nno,\n");
    let (code, _, err) = run(d, &["shift", "gap.csv", "--score", "s", "--train-prior", "0.3"]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("gap.csv, line 3, column 's': the score is missing"), "{err}");
}
