//! A row's problems are found in one documented order (field count first);
//! with a place for rejects every row-level problem sets the row aside and
//! never stops the run; a reject keeps the row's bytes exactly as read, and
//! invalid UTF-8 has a reason of its own.

mod common;

use common::{run, temp_dir, write};

/// A model fitted with `missing` on training rows with no missing values
/// (so it has no fill for `channel`), and the header of the rows it scores.
fn fitted(dir: &std::path::Path, missing: &str) -> String {
    let mut text = String::from("id,channel,income,y\n");
    for i in 0..200 {
        let channel = ["online", "branch", "broker"][i % 3];
        let income = 20 + (i * 37) % 90;
        let y = if (i * 7) % 10 < 2 + (income > 80) as usize * 3 { "bad" } else { "good" };
        text.push_str(&format!("a{i},{channel},{income},{y}\n"));
    }
    write(dir, "train.csv", text.as_bytes());
    let args = ["fit", "train.csv", "--target", "y", "--id", "id", "--family", "naive-bayes", "--missing", missing];
    let mut args = args.to_vec();
    args.extend(["-o", "m.json"]);
    let (code, _, err) = run(dir, &args);
    assert_eq!(code, 0, "{err}");
    "id,channel,income\n".to_string()
}

/// The reject file's records: (line, column, reason, row bytes).
fn rejects(dir: &std::path::Path) -> Vec<(String, String, String, Vec<u8>)> {
    let bytes = std::fs::read(dir.join("rejects.csv")).expect("rejects");
    let mut reader = csv::ReaderBuilder::new().from_reader(bytes.as_slice());
    reader
        .byte_records()
        .map(|r| {
            let r = r.expect("record");
            let text = |i: usize| String::from_utf8_lossy(&r[i]).into_owned();
            (text(0), text(1), text(2), r[4].to_vec())
        })
        .collect()
}

#[test]
fn the_field_count_comes_first() {
    let dir = temp_dir();
    let d = dir.path();
    let header = fitted(d, "error");
    // More fields than the header, one of them empty: the width is the
    // problem, not the empty field.
    let data = format!("{header}b1,online,50\nb2,,50,extra\nb3,branch\n");
    write(d, "new.csv", data.as_bytes());
    let (code, _, err) = run(d, &["score", "m.json", "new.csv", "-o", "out.csv", "--rejects", "rejects.csv"]);
    assert_eq!(code, 0, "{err}");
    let found = rejects(d);
    assert_eq!(found.len(), 2, "{found:?}");
    assert_eq!((found[0].0.as_str(), found[0].2.as_str()), ("3", "field-count"));
    assert_eq!((found[1].0.as_str(), found[1].2.as_str()), ("4", "field-count"));
    // Without a reject file the same row stops the run, with the same reason.
    let (code, _, err) = run(d, &["score", "m.json", "new.csv", "-o", "out.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("line 3") && err.contains("4 fields but the header has 3"), "{err}");
}

#[test]
fn with_a_reject_file_no_row_stops_the_run() {
    let dir = temp_dir();
    let d = dir.path();
    let header = fitted(d, "error");
    let data = format!("{header}b1,online,50\nb2,,50\nb3,kiosk,50\nb4,branch,\nb5,broker,lots\nb6,online,inf\n");
    write(d, "new.csv", data.as_bytes());
    // The policies are `error` (the model's training policy, and the
    // default for unseen levels), and still nothing stops the run.
    let (code, _, err) =
        run(d, &["score", "m.json", "new.csv", "-o", "out.csv", "--rejects", "rejects.csv", "--summary", "s.json"]);
    assert_eq!(code, 0, "{err}");
    let reasons: Vec<(String, String)> = rejects(d).into_iter().map(|r| (r.0, r.2)).collect();
    let expected = [
        ("3", "missing-value"),
        ("4", "unseen-category"),
        ("5", "missing-value"),
        ("6", "not-a-number"),
        ("7", "not-finite"),
    ];
    let expected: Vec<(String, String)> = expected.iter().map(|(l, r)| (l.to_string(), r.to_string())).collect();
    assert_eq!(reasons, expected);
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("s.json")).expect("summary")).expect("json");
    assert_eq!((summary["rows_read"].as_u64(), summary["rows_scored"].as_u64()), (Some(6), Some(1)));
    // Without it, the first stops the run, as the policy says.
    let (code, _, err) = run(d, &["score", "m.json", "new.csv", "-o", "out.csv"]);
    assert_eq!(code, 1);
    assert!(err.contains("line 3") && err.contains("column 'channel'") && err.contains("--missing impute"), "{err}");
}

#[test]
fn an_unseen_level_taken_as_missing_without_a_fill_says_so() {
    let dir = temp_dir();
    let d = dir.path();
    let header = fitted(d, "error");
    write(d, "new.csv", format!("{header}b1,kiosk,50\n").as_bytes());
    let args = ["score", "m.json", "new.csv", "-o", "out.csv", "--rejects", "rejects.csv", "--unseen", "missing"];
    let (code, _, err) = run(d, &args);
    assert_eq!(code, 0, "{err}");
    let text = std::fs::read_to_string(d.join("rejects.csv")).expect("rejects");
    assert!(
        text.contains("missing-value,\"the level 'kiosk' was not seen in training and was taken as missing, as asked, but the model has no fill"),
        "{text}"
    );
}

#[test]
fn rejects_keep_the_raw_bytes_and_invalid_utf8_is_an_encoding_problem() {
    let dir = temp_dir();
    let d = dir.path();
    let header = fitted(d, "error");
    let mut data = header.into_bytes();
    let bad_level: &[u8] = b"b1,onl\xffine,50\n";
    let bad_number: &[u8] = b"b2,online,5\xfe0\n";
    let bad_id: &[u8] = b"b3\xc3,online,50\n";
    let quoted: &[u8] = b"\"b4 \xe2\x82\xac\",\"on\xffline\",50\r\n";
    for row in [bad_level, bad_number, bad_id, quoted] {
        data.extend_from_slice(row);
    }
    write(d, "new.csv", &data);
    let args = ["score", "m.json", "new.csv", "-o", "out.csv", "--rejects", "rejects.csv", "--id", "id"];
    let (code, _, err) = run(d, &args);
    assert_eq!(code, 0, "{err}");
    let found = rejects(d);
    let columns: Vec<(&str, &str)> = found.iter().map(|r| (r.1.as_str(), r.2.as_str())).collect();
    assert_eq!(columns, [("channel", "encoding"), ("income", "encoding"), ("id", "encoding"), ("channel", "encoding")]);
    // The row field holds each record's bytes as read (line end aside).
    let raw: Vec<&[u8]> = [bad_level, bad_number, bad_id].iter().map(|r| &r[..r.len() - 1]).collect();
    for (found, raw) in found.iter().zip(raw) {
        assert_eq!(found.3, raw);
    }
    assert_eq!(found[3].3, &quoted[..quoted.len() - 2]);
}
