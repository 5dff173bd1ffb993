//! Records that once went missing or were split: every record is counted.
//!
//! - Lone-CR line ends (a file saved with classic Mac line ends): `score`
//!   read 0 rows and exited 0, while `describe` and `fit` refused the file.
//! - A quoted field over 1 MiB holding newlines and lines shaped like data
//!   rows (valid RFC 4180): `score` split it and scored the fake lines.

mod common;

use common::{run, temp_dir, write};

fn training() -> String {
    let mut text = String::from("id,x,notes,y\n");
    for i in 0..200 {
        let x = (i % 13) as f64 / 4.0;
        text.push_str(&format!("r{i},{x},plain,{}\n", if (i % 4 == 0) ^ (x > 2.5) { "bad" } else { "good" }));
    }
    text
}

fn summary(dir: &std::path::Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("s.json")).expect("summary")).expect("json")
}

#[test]
fn lone_cr_line_ends_read_every_row() {
    let dir = temp_dir();
    let d = dir.path();
    let text = training();
    write(d, "train.csv", text.as_bytes());
    write(d, "cr.csv", text.replace('\n', "\r").as_bytes());
    let fit =
        ["fit", "train.csv", "--target", "y", "--id", "id", "--exclude", "notes", "--family", "lda", "-o", "m.json"];
    let (code, _, err) = run(d, &fit);
    assert_eq!(code, 0, "{err}");
    let score = ["score", "m.json", "cr.csv", "--id", "id", "-o", "o.csv", "--rejects", "r.csv", "--summary", "s.json"];
    let (code, _, err) = run(d, &score);
    assert_eq!(code, 0, "{err}");
    let s = summary(d);
    assert_eq!(s["rows_read"], 200, "{s}");
    assert_eq!(s["rows_scored"], 200, "{s}");
    let (code, out, err) = run(d, &["describe", "cr.csv", "--target", "y", "--id", "id", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).expect("json");
    assert_eq!(v["schema"]["rows"], 200, "{out}");
}

#[test]
fn a_quoted_field_over_a_mebibyte_stays_one_record() {
    let dir = temp_dir();
    let d = dir.path();
    write(d, "train.csv", training().as_bytes());
    let fit =
        ["fit", "train.csv", "--target", "y", "--id", "id", "--exclude", "notes", "--family", "lda", "-o", "m.json"];
    let (code, _, err) = run(d, &fit);
    assert_eq!(code, 0, "{err}");
    // 300 records; record 150's notes hold 2.2 MB of text with newlines,
    // three of its lines shaped like data rows.
    let mut new = String::from("id,x,notes\n");
    for i in 0..300 {
        if i == 150 {
            let mut notes = String::new();
            while notes.len() < 2_200_000 {
                notes.push_str("call back after the review, see the letter of the 3rd\n");
                if notes.len() % 700_000 < 60 {
                    notes.push_str("fake1,1.5,plain\n");
                }
            }
            notes.push_str("fake2,2.5,plain\nfake3,0.5,plain\n");
            new.push_str(&format!("r{i},1.25,\"{notes}\"\n"));
        } else {
            new.push_str(&format!("r{i},{},plain\n", (i % 7) as f64 / 2.0));
        }
    }
    write(d, "new.csv", new.as_bytes());
    let score =
        ["score", "m.json", "new.csv", "--id", "id", "-o", "o.csv", "--rejects", "r.csv", "--summary", "s.json"];
    let (code, _, err) = run(d, &score);
    assert_eq!(code, 0, "{err}");
    let s = summary(d);
    assert_eq!(s["rows_read"], 300, "{s}");
    assert_eq!(s["rows_scored"], 300, "{s}");
    assert_eq!(s["rows_rejected"], 0, "{s}");
    let scores = std::fs::read_to_string(d.join("o.csv")).expect("scores");
    assert!(!scores.contains("fake"), "a line inside the quoted field was scored as a record");
    assert!(scores.lines().any(|l| l.starts_with("r150,")), "the long record is scored");
    let (code, out, err) = run(d, &["describe", "new.csv", "--target", "x", "--id", "id", "--json", "-"]);
    assert_eq!(code, 0, "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).expect("json");
    assert_eq!(v["schema"]["rows"], 300, "{out}");
}
