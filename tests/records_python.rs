//! The one record layer against an independent reader: Python's standard
//! `csv` module (default dialect, files opened with `newline=""` and the
//! `utf-8-sig` codec). On generated valid files — RFC 4180 in UTF-8, with
//! quoted delimiters and line ends, doubled quotes, stray quotes inside
//! unquoted fields (which Python reads as literal characters), LF, CRLF
//! and lone CR line ends mixed, and sometimes a byte-order mark — the
//! library's reader at chunk sizes 1 to 64 and about fifty random sizes up
//! to 1 MiB, and `score --chunk-bytes` at the same sizes, must give the
//! records Python gives. Skips with a notice where python3 is absent,
//! unless BASERATE_REQUIRE_EXTERNAL=1 (as in CI).

mod common;

use std::path::Path;
use std::process::Command;

use baserate::demo::rng::Rng;
use baserate::records::{read_all, Dialect};

/// Prints the records Python's csv module reads, as JSON; blank lines
/// (which Python gives as empty lists) hold no record.
const PYTHON_RECORDS: &str = r#"
import csv, json, sys
with open(sys.argv[1], newline="", encoding="utf-8-sig") as f:
    print(json.dumps([r for r in csv.reader(f) if r]))
"#;

fn python_records(path: &Path) -> Vec<Vec<String>> {
    let output = Command::new("python3").arg("-c").arg(PYTHON_RECORDS).arg(path).output().expect("python3");
    assert!(output.status.success(), "{}", String::from_utf8_lossy(&output.stderr));
    serde_json::from_slice(&output.stdout).expect("python's records as JSON")
}

/// A field's text: no surrounding white space (score trims it), drawn from
/// an alphabet with every byte that matters to the rules.
fn random_text(rng: &mut Rng) -> String {
    const PIECES: [&str; 14] = ["a", "Z", "7", "-", ".", " ", "é", "€", ",", "\"", "\n", "\r", "\r\n", "x y"];
    let length = (rng.next_u64() % 9) as usize;
    let mut text = String::from("w");
    for _ in 0..length {
        text.push_str(PIECES[(rng.next_u64() % PIECES.len() as u64) as usize]);
    }
    text.push('q');
    text
}

/// The field as written: quoted when it must be (or by chance), else as it
/// is — which leaves stray quotes inside unquoted fields.
fn written(rng: &mut Rng, text: &str) -> String {
    let must = text.contains([',', '\n', '\r']);
    if must || rng.next_u64().is_multiple_of(5) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

/// A generated file of `rows` records (columns a, b, c as text and x as a
/// number) and the records it holds.
fn generate(seed: u64, rows: usize) -> (Vec<u8>, Vec<Vec<String>>) {
    let mut rng = Rng::new(seed);
    let line_ends = ["\n", "\r\n", "\r"];
    let mut text = String::new();
    if rng.next_u64().is_multiple_of(2) {
        text.push('\u{feff}');
    }
    let mut records = vec![vec!["a".to_string(), "b".to_string(), "c".to_string(), "x".to_string()]];
    text.push_str("a,b,c,x");
    for i in 0..rows {
        text.push_str(line_ends[(rng.next_u64() % 3) as usize]);
        let fields: Vec<String> =
            vec![random_text(&mut rng), random_text(&mut rng), random_text(&mut rng), format!("{}.5", i % 97)];
        let shown: Vec<String> = fields.iter().map(|f| written(&mut rng, f)).collect();
        text.push_str(&shown.join(","));
        records.push(fields);
    }
    if rng.next_u64().is_multiple_of(2) {
        text.push_str(line_ends[(rng.next_u64() % 3) as usize]);
    }
    (text.into_bytes(), records)
}

/// Chunk sizes 1..=64 and `random` more drawn up to 1 MiB.
fn chunk_sizes(random: usize) -> Vec<usize> {
    let mut rng = Rng::new(7);
    let mut sizes: Vec<usize> = (1..=64).collect();
    sizes.extend((0..random).map(|_| 65 + (rng.next_u64() % (1 << 20)) as usize));
    sizes
}

#[test]
fn the_library_reader_gives_pythons_records_at_every_chunk_size() {
    if !common::external_tool("python3", Command::new("python3").arg("--version")) {
        return;
    }
    let dir = common::temp_dir();
    for (seed, rows) in [(1, 300), (2, 300), (3, 40_000)] {
        let (bytes, generated) = generate(seed, rows);
        let path = common::write(dir.path(), &format!("g{seed}.csv"), &bytes);
        let python = python_records(&path);
        // The generator's own account and Python's must agree first.
        assert_eq!(python, generated, "seed {seed}: the generator and Python disagree");
        let sizes = if rows > 1000 { chunk_sizes(50)[60..].to_vec() } else { chunk_sizes(0) };
        for chunk in sizes {
            let ours = read_all(&bytes, &Dialect::default(), chunk).expect("valid file");
            assert!(ours == python, "seed {seed}, chunk size {chunk}: the records differ from Python's");
        }
    }
}

#[test]
fn score_passes_pythons_records_through_at_every_chunk_size() {
    if !common::external_tool("python3", Command::new("python3").arg("--version")) {
        return;
    }
    let dir = common::temp_dir();
    let train: String = std::iter::once("x,y\n".to_string())
        .chain((0..200).map(|i| format!("{}.5,{}\n", i % 97, u8::from(i % 3 == 0))))
        .collect();
    common::write(dir.path(), "train.csv", train.as_bytes());
    let (code, _, stderr) =
        common::run(dir.path(), &["fit", "train.csv", "--target", "y", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 0, "{stderr}");
    for (seed, rows, sizes) in [(4, 300, chunk_sizes(0)), (5, 30_000, chunk_sizes(50)[60..].to_vec())] {
        let (bytes, _) = generate(seed, rows);
        let path = common::write(dir.path(), "new.csv", &bytes);
        let python = python_records(&path);
        for chunk in sizes {
            let chunk_flag = chunk.to_string();
            let args = ["score", "m.json", "new.csv", "--id", "a,b,c", "-o", "out.csv", "--chunk-bytes", &chunk_flag];
            let (code, _, stderr) = common::run(dir.path(), &args);
            assert_eq!(code, 0, "chunk size {chunk}: {stderr}");
            let out = python_records(&dir.path().join("out.csv"));
            assert_eq!(out.len(), python.len(), "seed {seed}, chunk size {chunk}: rows");
            let same = out.iter().zip(&python).skip(1).all(|(o, p)| o[..3] == p[..3]);
            assert!(same, "seed {seed}, chunk size {chunk}: score's records differ from Python's");
        }
    }
}

/// A stray quote inside an unquoted field (`5"x`) followed, more than one
/// reading chunk later, by rows holding quoted line ends: `describe` (the
/// parallel reader, 4 MiB chunks) and `score` read the rows Python reads.
#[test]
fn a_stray_quote_before_quoted_line_ends_reads_the_same_everywhere() {
    if !common::external_tool("python3", Command::new("python3").arg("--version")) {
        return;
    }
    let dir = common::temp_dir();
    let mut text = String::from("note,x,y\n");
    text.push_str("5\"x,1.5,0\n");
    let mut i = 0;
    while text.len() < 9 << 20 {
        if i % 3 == 0 {
            text.push_str(&format!("\"line one\nline, two {i}\",{}.25,{}\n", i % 50, i % 2));
        } else {
            text.push_str(&format!("plain {i},{}.75,{}\n", i % 40, i % 2));
        }
        i += 1;
    }
    let path = common::write(dir.path(), "stray.csv", text.as_bytes());
    let python = python_records(&path);
    let rows = python.len() - 1;

    let (code, stdout, stderr) = common::run(dir.path(), &["describe", "stray.csv", "--target", "y", "--json", "-"]);
    assert_eq!(code, 0, "{stderr}");
    let described: serde_json::Value = serde_json::from_str(&stdout).expect("describe JSON");
    assert_eq!(described["rows"].as_u64(), Some(rows as u64), "describe");

    let train = "x,y\n1,0\n2,1\n3,0\n4,1\n5,0\n6,1\n2.5,0\n";
    common::write(dir.path(), "train.csv", train.as_bytes());
    let (code, _, stderr) =
        common::run(dir.path(), &["fit", "train.csv", "--target", "y", "--family", "lda", "-o", "m.json"]);
    assert_eq!(code, 0, "{stderr}");
    let (code, _, stderr) = common::run(
        dir.path(),
        &["score", "m.json", "stray.csv", "--id", "note", "-o", "out.csv", "--summary", "s.json"],
    );
    assert_eq!(code, 0, "{stderr}");
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("s.json")).expect("summary")).expect("summary JSON");
    assert_eq!(summary["rows_read"].as_u64(), Some(rows as u64), "score: {summary}");
    assert_eq!(summary["rows_scored"].as_u64(), Some(rows as u64), "score: {summary}");
}
