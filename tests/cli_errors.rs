//! Every bad input the data layer knows gets exit code 1 and one message
//! naming the file, the line and the column where those exist — never a
//! panic. Each test runs the real binary in a temporary directory.

mod common;

use common::{baserate, temp_dir, write};

/// Runs `describe` on a file holding `contents` and returns (exit code, stderr).
fn describe(contents: &[u8], extra: &[&str]) -> (i32, String) {
    let dir = temp_dir();
    write(dir.path(), "data.csv", contents);
    let mut args = vec!["describe", "data.csv", "--target", "y"];
    args.extend_from_slice(extra);
    let output = baserate(dir.path(), &args);
    let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
    assert!(!stderr.contains("panicked"), "panic: {stderr}");
    (output.status.code().unwrap_or(-1), stderr)
}

fn assert_names(stderr: &str, parts: &[&str]) {
    for part in parts {
        assert!(stderr.contains(part), "expected '{part}' in: {stderr}");
    }
    assert_eq!(stderr.trim().lines().count(), 1, "one paragraph: {stderr}");
}

#[test]
fn rejects_a_ragged_row() {
    let (code, err) = describe(b"a,b,y\n1,2,0\n3,4\n5,6,1\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "2 fields", "header has 3"]);
}

#[test]
fn rejects_a_ragged_row_in_a_quoted_file() {
    let (code, err) = describe(b"a,b,y\n\"1\",2,0\n3,\"4\",1,9\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "4 fields"]);
}

#[test]
fn rejects_text_in_a_declared_numeric_column() {
    let (code, err) = describe(b"a,y\n1.5,0\nabc,1\n", &["--numeric", "a"]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "column 'a'", "'abc' is not a number"]);
}

#[test]
fn rejects_an_inf_literal() {
    let (code, err) = describe(b"a,y\n1.5,0\n2,1\ninf,0\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 4", "column 'a'", "'inf'", "--na"]);
}

#[test]
fn rejects_a_nan_literal() {
    let (code, err) = describe(b"a,b,y\n1.5,x,0\n2,NaN,1\n3,y,0\n4,z,1\n", &[]);
    // 'b' holds text, so it is categorical and NaN is a level; 'a' is fine.
    assert_eq!(code, 0, "{err}");
    let (code, err) = describe(b"a,y\n1.5,0\nNaN,1\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "column 'a'", "'NaN'"]);
}

#[test]
fn rejects_a_missing_target_value() {
    let (code, err) = describe(b"a,y\n1,0\n2,\n3,1\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "column 'y'", "target value is missing"]);
}

#[test]
fn rejects_a_single_class() {
    let (code, err) = describe(b"a,y\n1,good\n2,good\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "column 'y'", "only one class", "good"]);
}

#[test]
fn rejects_duplicate_column_names() {
    let (code, err) = describe(b"a,b,a,y\n1,2,3,0\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 1", "'a' appears twice", "columns 1 and 3"]);
}

#[test]
fn rejects_an_empty_column_name() {
    let (code, err) = describe(b"a,,y\n1,2,0\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 1", "column 2", "empty"]);
}

#[test]
fn rejects_an_empty_file() {
    let (code, err) = describe(b"", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "empty"]);
    let (code, err) = describe(b"\xEF\xBB\xBF", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "empty"]);
}

#[test]
fn rejects_a_header_only_file() {
    let (code, err) = describe(b"a,y\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "header row but no data rows"]);
}

#[test]
fn rejects_an_unknown_column_with_a_suggestion() {
    let (code, err) = describe(b"income,y\n1,0\n2,1\n", &["--exclude", "incme"]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "--exclude", "'incme'", "did you mean 'income'"]);
    let dir = temp_dir();
    write(dir.path(), "data.csv", b"income,outcome\n1,0\n2,1\n");
    let output = baserate(dir.path(), &["describe", "data.csv", "--target", "Outcome"]);
    assert_eq!(output.status.code(), Some(1));
    assert_names(&String::from_utf8_lossy(&output.stderr), &["--target", "did you mean 'outcome'"]);
}

#[test]
fn rejects_a_missing_value_under_the_default_policy() {
    let (code, err) = describe(b"a,b,y\n1,x,0\n2,,1\n,z,0\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "column 'b'", "--missing impute"]);
}

#[test]
fn rejects_a_negative_weight() {
    let (code, err) = describe(b"a,w,y\n1,1,0\n2,-1,1\n", &["--weight", "w"]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "column 'w'", "negative"]);
}

#[test]
fn rejects_an_unknown_positive_class() {
    let (code, err) = describe(b"a,y\n1,good\n2,bad\n", &["--positive", "default"]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "column 'y'", "'default'", "bad, good"]);
}

#[test]
fn rejects_invalid_utf8_in_a_category() {
    let (code, err) = describe(b"a,b,y\n1,ok,0\n2,\xFF\xFE,1\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["data.csv", "line 3", "column 'b'", "UTF-8"]);
}

#[test]
fn rejects_a_missing_file() {
    let (code, err) = {
        let dir = temp_dir();
        let output = baserate(dir.path(), &["describe", "nowhere.csv", "--target", "y"]);
        (output.status.code().unwrap_or(-1), String::from_utf8_lossy(&output.stderr).into_owned())
    };
    assert_eq!(code, 1);
    assert_names(&err, &["nowhere.csv"]);
}

#[test]
fn usage_errors_exit_with_2() {
    let dir = temp_dir();
    let output = baserate(dir.path(), &["describe", "x.csv", "--target", "y", "--no-such-flag"]);
    assert_eq!(output.status.code(), Some(2));
    write(dir.path(), "data.csv", b"a,y\n1,0\n2,1\n");
    let output =
        baserate(dir.path(), &["describe", "data.csv", "--target", "y", "--categorical", "a", "--numeric", "a"]);
    assert_eq!(output.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&output.stderr).contains("'a' is named by both --categorical and --numeric"));
}

#[test]
fn error_lines_count_quoted_newlines() {
    // The record on line 3 spans two lines; the bad value is on line 5.
    let (code, err) = describe(b"a,note,y\n1,plain,0\n2,\"two\nlines\",1\nnan,x,0\n", &[]);
    assert_eq!(code, 1);
    assert_names(&err, &["line 5", "column 'a'"]);
}
