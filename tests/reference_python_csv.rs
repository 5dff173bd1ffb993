//! The reader against an independent one: Python's standard `csv` module
//! (RFC 4180 quoting, a BOM via the `utf-8-sig` codec) and Python's
//! `float()`, which is correctly rounded (it uses David Gay's algorithm), so
//! every parsed number must agree to the bit. Skips with a notice when
//! python3 is absent, unless BASERATE_REQUIRE_EXTERNAL=1.

mod common;

use std::process::Command;

use baserate::data::csv_read::{read_bytes, ColumnValues};
use baserate::data::ReadOptions;
use baserate::demo::rng::Rng;

const PYTHON_READER: &str = r#"
import csv, json, sys
with open(sys.argv[1], newline="", encoding="utf-8-sig") as f:
    rows = list(csv.reader(f))
header, body = rows[0], rows[1:]
print(json.dumps({
    "header": header,
    "amount": [repr(float(r[0])) for r in body],
    "note": [r[1] for r in body],
    "y": [r[2] for r in body],
}))
"#;

/// Random decimal text of the kinds found in real files: short and long
/// significands, exponents, signs, leading zeros.
fn random_number(rng: &mut Rng) -> String {
    let digits =
        |rng: &mut Rng, n: u64| -> String { (0..n).map(|_| char::from(b'0' + (rng.next_u64() % 10) as u8)).collect() };
    let sign = ["", "-", "+"][(rng.next_u64() % 3) as usize];
    let whole_len = rng.next_u64() % 12;
    let fraction_len = rng.next_u64() % 22;
    let mut text = format!("{sign}{}", digits(rng, whole_len.max(1)));
    if fraction_len > 0 {
        text.push('.');
        text.push_str(&digits(rng, fraction_len));
    }
    if rng.next_u64().is_multiple_of(4) {
        text.push_str(&format!("e{}", (rng.next_u64() % 80) as i64 - 40));
    }
    text
}

#[test]
fn agrees_with_python_csv_and_float() {
    if !common::external_tool("python3", Command::new("python3").arg("--version")) {
        return;
    }
    let mut rng = Rng::new(99);
    let notes = ["plain", "with, comma", "say \"\"hi\"\"", "two\nlines", " padded ", "ünïcode"];
    let mut text = String::from("\u{feff}amount,note,y\r\n");
    for i in 0..3000 {
        let note = notes[i % notes.len()];
        let quoted = note.contains([',', '"', '\n']) || i % 7 == 0;
        let note = if quoted { format!("\"{note}\"") } else { note.to_string() };
        text.push_str(&format!("{},{note},{}\r\n", random_number(&mut rng), ["a", "b"][i % 2]));
    }
    let dir = common::temp_dir();
    let path = common::write(dir.path(), "tricky.csv", text.as_bytes());
    let output = Command::new("python3").arg("-c").arg(PYTHON_READER).arg(&path).output().expect("python3");
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    let python: serde_json::Value = serde_json::from_slice(&output.stdout).expect("json");

    let mut options = ReadOptions::new("y");
    options.categorical = vec!["note".into()];
    let table = read_bytes("tricky.csv", text.as_bytes(), &options).expect("read");
    let header: Vec<&str> = table.columns.iter().map(|c| c.name.as_str()).collect();
    assert_eq!(serde_json::json!(header), python["header"]);

    let python_amounts = python["amount"].as_array().expect("amounts");
    assert_eq!(table.rows, python_amounts.len());
    let ours = table.numeric.column(0);
    for (i, (value, theirs)) in ours.iter().zip(python_amounts).enumerate() {
        let theirs: f64 = theirs.as_str().and_then(|s| s.parse().ok()).expect("repr");
        assert_eq!(value.to_bits(), theirs.to_bits(), "row {i}: {value} vs {theirs}");
    }
    // baserate trims surrounding whitespace of values (documented); Python
    // keeps it, so compare trimmed.
    let ColumnValues::Categorical { codes, levels, .. } = &table.columns[1].values else {
        panic!("note is categorical");
    };
    for (i, theirs) in python["note"].as_array().expect("notes").iter().enumerate() {
        assert_eq!(levels[codes[i] as usize], theirs.as_str().expect("text").trim(), "row {i}");
    }
}
