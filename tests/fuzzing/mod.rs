//! The fuzz harness, on the stable toolchain: cases are generated and
//! mutated from a seed and run in-process through the library, each under
//! `catch_unwind`, and checked against invariants.
//!
//! - CSV cases: a small valid file of the harness's own schema, then
//!   mutations (quotes in odd places, CR/LF/CRLF mixes, a BOM, NUL,
//!   invalid UTF-8, huge quoted fields, ragged rows, truncation, odd
//!   values). Each is scored by `batch::run` and read as `describe` reads
//!   it. Invariants: no panic; rows read = scored + rejected; the records
//!   counted are those of a slow, separate reading of the rules in
//!   `records` (so every reject points at the line where its record
//!   starts, and carries that record's bytes); `describe` counts the same
//!   records; a refused run leaves no file behind; outputs do not depend
//!   on the chunk size.
//! - Model cases: the harness's model file with bit flips, truncation,
//!   an edited number, an inserted array, a deleted byte. Invariants: no
//!   panic; a file either loads with its checksum verified and exactly
//!   the original content, or is refused with exit code 1.
//!
//! Used by `tests/fuzz.rs` (a bounded number of cases, in CI) and
//! `examples/fuzz.rs` (any number, with the rate).

#![allow(dead_code)]

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};

use baserate::apply::UnseenPolicy;
use baserate::batch::{Outputs, ScoreJob};
use baserate::data::options::MissingPolicy;
use baserate::data::{Dataset, ReadOptions};
use baserate::model::{Family, FamilyParams};
use baserate::rng::Rng;
use baserate::train::file::{Integrity, ModelFile};

/// What a case was, for a failure's report.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A CSV file scored and described.
    Csv,
    /// A model file loaded.
    Model,
}

/// The case of `seed`: one in four is a model file.
pub fn kind_of(seed: u64) -> Kind {
    if seed % 4 == 3 {
        Kind::Model
    } else {
        Kind::Csv
    }
}

/// A harness: a fitted model and a folder of its own for the cases' files.
pub struct Harness {
    /// The model cases are scored with.
    pub model: ModelFile,
    /// Its file's bytes, as written.
    pub model_bytes: Vec<u8>,
    /// Where cases write (a fresh folder, on a memory file system when
    /// there is one).
    pub dir: PathBuf,
    _keep: tempfile::TempDir,
}

const HEADER: &str = "id,channel,income,ratio,y\n";
const CHANNELS: [&str; 3] = ["online", "branch", "broker"];

impl Harness {
    /// Fits the harness's model (naive Bayes, missing values imputed) on a
    /// training file of its own schema.
    pub fn new() -> Harness {
        let base = Path::new("/dev/shm");
        let keep = if base.is_dir() { tempfile::tempdir_in(base) } else { tempfile::tempdir() }.expect("folder");
        let dir = keep.path().to_path_buf();
        let mut rng = Rng::new(17);
        let mut text = String::from(HEADER);
        for i in 0..300 {
            let income = 20.0 + 90.0 * rng.uniform();
            let ratio = rng.uniform();
            let bad = rng.bernoulli(if income > 70.0 { 0.4 } else { 0.1 });
            text.push_str(&format!(
                "t{i},{},{income:.1},{ratio:.3},{}\n",
                CHANNELS[i % 3],
                if bad { "bad" } else { "good" }
            ));
        }
        let train = dir.join("train.csv");
        std::fs::write(&train, text).expect("training file");
        let mut options = ReadOptions::new("y");
        options.ids = vec!["id".into()];
        options.missing = MissingPolicy::Impute;
        let (dataset, _) = Dataset::read(&train, &options).expect("training data");
        let request = baserate::train::TrainRequest::new(FamilyParams::defaults(Family::NaiveBayes));
        let fitted = baserate::train::train(&dataset, &request).expect("fit");
        let path = dir.join("model.json");
        fitted.save(&path).expect("save");
        let model_bytes = std::fs::read(&path).expect("model bytes");
        let (model, integrity) = ModelFile::open(&path, false).expect("load");
        assert_eq!(integrity, Integrity::Verified);
        Harness { model, model_bytes, dir, _keep: keep }
    }

    /// Runs case `seed` in a folder of its own (`slot` tells concurrent
    /// runners apart); an `Err` says which invariant broke. With `binary`,
    /// the case is also run by the program, whose exit code and message
    /// must agree with the library's outcome.
    pub fn run(&self, seed: u64, slot: usize, binary: Option<&Path>) -> Result<(), String> {
        let dir = self.dir.join(format!("slot{slot}"));
        std::fs::create_dir_all(&dir).map_err(|e| e.to_string())?;
        let outcome = catch_unwind(AssertUnwindSafe(|| match kind_of(seed) {
            Kind::Csv => {
                let case = csv_case(seed);
                let refused = self.check_csv(&dir, &case)?;
                match binary {
                    Some(program) => self.check_score_program(program, &dir, &case, refused),
                    None => Ok(()),
                }
            }
            Kind::Model => {
                let bytes = model_case(&self.model_bytes, seed);
                let refused = self.check_model(&bytes)?;
                match binary {
                    Some(program) => check_inspect_program(program, &dir, &bytes, refused),
                    None => Ok(()),
                }
            }
        }));
        match outcome {
            Ok(result) => result,
            Err(panic) => Err(format!(
                "panicked: {}",
                panic
                    .downcast_ref::<String>()
                    .cloned()
                    .or_else(|| panic.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default()
            )),
        }
    }

    /// Checks a CSV case; `Ok(true)` when `score` refused the file.
    fn check_csv(&self, dir: &Path, case: &CsvCase) -> Result<bool, String> {
        let data = dir.join("data.csv");
        std::fs::write(&data, &case.bytes).map_err(|e| e.to_string())?;
        // What an earlier case that failed may have left.
        let _ = std::fs::remove_file(dir.join("scores.csv"));
        let _ = std::fs::remove_file(dir.join("rejects.csv"));
        let reference = reference_records(&case.bytes, case.max_record_bytes);
        let score = |chunk_bytes: usize| -> Result<ScoreRun, String> {
            let outputs =
                Outputs { scores: dir.join("scores.csv"), rejects: Some(dir.join("rejects.csv")), summary: None };
            let job = ScoreJob {
                data: data.clone(),
                prior: self.model.prior.clone(),
                costs: None,
                ids: vec!["id".into()],
                keep: Vec::new(),
                delimiter: b',',
                na_tokens: None,
                unseen: case.unseen,
                missing: None,
                reasons: 0,
                threads: case.threads,
                chunk_bytes,
                max_record_bytes: case.max_record_bytes,
                model_integrity: Integrity::Verified,
            };
            let result = baserate::batch::run(&self.model, &job, &outputs, &|_, _| {});
            let left = leftovers(dir)?;
            match result {
                Ok(summary) => {
                    if !left.is_empty() {
                        return Err(format!("a finished run left {left:?}"));
                    }
                    let scores = std::fs::read(&outputs.scores).map_err(|e| e.to_string())?;
                    let rejects = std::fs::read(dir.join("rejects.csv")).map_err(|e| e.to_string())?;
                    Ok(ScoreRun::Done { summary: Box::new(summary), scores, rejects })
                }
                Err(error) => {
                    let text = error.to_string();
                    if text.is_empty() {
                        return Err("an error without a message".into());
                    }
                    let written: Vec<_> =
                        ["scores.csv", "rejects.csv"].iter().filter(|n| dir.join(n).exists()).collect();
                    if !written.is_empty() || !left.is_empty() {
                        return Err(format!("a refused run left {written:?} {left:?}: {text}"));
                    }
                    Ok(ScoreRun::Refused(text))
                }
            }
        };
        let first = score(case.chunk_bytes)?;
        if let ScoreRun::Done { summary, scores, rejects } = &first {
            if summary.rows_read != summary.rows_scored + summary.rows_rejected {
                return Err(format!(
                    "rows read {} != scored {} + rejected {}",
                    summary.rows_read, summary.rows_scored, summary.rows_rejected
                ));
            }
            let written = csv_records(scores)?;
            if written.len() as u64 != summary.rows_scored + 1 {
                return Err(format!("{} scored but {} output rows", summary.rows_scored, written.len() - 1));
            }
            let set_aside = csv_records(rejects)?;
            if set_aside.len() as u64 != summary.rows_rejected + 1 {
                return Err(format!("{} rejected but {} reject rows", summary.rows_rejected, set_aside.len() - 1));
            }
            if let Some(reference) = &reference {
                let data_records = reference.len().saturating_sub(1) as u64;
                if summary.rows_read != data_records {
                    return Err(format!("{} rows read; the rules give {data_records} records", summary.rows_read));
                }
                for reject in &set_aside[1..] {
                    let line: u64 = String::from_utf8_lossy(&reject[0]).parse().map_err(|_| "a reject's line")?;
                    match reference.iter().skip(1).find(|r| r.line == line) {
                        None => return Err(format!("a reject at line {line}, where no record starts")),
                        Some(record) if record.bytes != reject[4] => {
                            return Err(format!("the reject at line {line} does not hold its record's bytes"))
                        }
                        Some(_) => {}
                    }
                }
            }
            // The same file in other chunk sizes gives the same bytes.
            if case.compare_chunks {
                for chunk_bytes in [37, 1 << 20] {
                    match score(chunk_bytes)? {
                        ScoreRun::Done { scores: s, rejects: r, .. } if s == *scores && r == *rejects => {}
                        _ => return Err(format!("chunks of {chunk_bytes} bytes give other outputs")),
                    }
                }
            }
        }
        // `describe` reads the file whole: when it reads it, it counts the
        // records `score` counted.
        let mut options = ReadOptions::new("y");
        options.ids = vec!["id".into()];
        options.missing = MissingPolicy::Impute;
        options.max_record_bytes = case.max_record_bytes;
        if let Ok((dataset, _)) = Dataset::read(&data, &options) {
            if let ScoreRun::Done { summary, .. } = &first {
                if dataset.rows() as u64 != summary.rows_read {
                    return Err(format!("describe read {} rows, score {}", dataset.rows(), summary.rows_read));
                }
            }
        }
        let _ = std::fs::remove_file(dir.join("scores.csv"));
        let _ = std::fs::remove_file(dir.join("rejects.csv"));
        Ok(matches!(first, ScoreRun::Refused(_)))
    }

    /// The program on the same case: exit 0 where the library scored, 1
    /// with an error naming the data file where it refused.
    fn check_score_program(&self, program: &Path, dir: &Path, case: &CsvCase, refused: bool) -> Result<(), String> {
        std::fs::write(dir.join("model.json"), &self.model_bytes).map_err(|e| e.to_string())?;
        let unseen = match case.unseen {
            UnseenPolicy::Error => "error",
            UnseenPolicy::Reject => "reject",
            UnseenPolicy::Missing => "missing",
        };
        let cap = case.max_record_bytes.to_string();
        let args = ["score", "model.json", "data.csv", "-o", "out.csv", "--rejects", "r.csv", "--id", "id", "-q"];
        let mut args = args.to_vec();
        args.extend(["--unseen", unseen, "--max-record-bytes", &cap]);
        let output =
            std::process::Command::new(program).args(&args).current_dir(dir).output().map_err(|e| e.to_string())?;
        let stderr = String::from_utf8_lossy(&output.stderr);
        let code = output.status.code().unwrap_or(-1);
        let _ = ["out.csv", "r.csv", "model.json"].map(|n| std::fs::remove_file(dir.join(n)));
        match (refused, code) {
            (false, 0) => Ok(()),
            (true, 1) if stderr.starts_with("error: ") && stderr.contains("data.csv") => Ok(()),
            _ => Err(format!(
                "score exited {code} where the library {}: {stderr}",
                if refused { "refused" } else { "scored" }
            )),
        }
    }

    /// Checks a model case; `Ok(true)` when the file was refused without
    /// accepting edits.
    fn check_model(&self, bytes: &[u8]) -> Result<bool, String> {
        let mut refused = false;
        for accept_edited in [false, true] {
            match ModelFile::from_bytes("case.json", bytes, accept_edited) {
                Ok((file, Integrity::Verified)) => {
                    if file != self.model {
                        return Err("a file with its checksum intact loaded other content".into());
                    }
                }
                Ok((_, Integrity::EditAccepted)) if accept_edited => {}
                Ok((_, integrity)) => return Err(format!("loaded as {integrity:?} without accepting edits")),
                Err(e) if e.exit_code() == 1 && !e.to_string().is_empty() => refused |= !accept_edited,
                Err(e) => return Err(format!("refused with exit {}: {e}", e.exit_code())),
            }
        }
        Ok(refused)
    }
}

impl Default for Harness {
    fn default() -> Self {
        Harness::new()
    }
}

enum ScoreRun {
    Done { summary: Box<baserate::batch::Summary>, scores: Vec<u8>, rejects: Vec<u8> },
    Refused(String),
}

/// `inspect` on a model case: exit 0 where the library loaded the file, 1
/// with an error naming it where it refused.
fn check_inspect_program(program: &Path, dir: &Path, bytes: &[u8], refused: bool) -> Result<(), String> {
    std::fs::write(dir.join("case.json"), bytes).map_err(|e| e.to_string())?;
    let output = std::process::Command::new(program)
        .args(["inspect", "case.json", "--json", "/dev/null"])
        .current_dir(dir)
        .output()
        .map_err(|e| e.to_string())?;
    let stderr = String::from_utf8_lossy(&output.stderr);
    let code = output.status.code().unwrap_or(-1);
    match (refused, code) {
        (false, 0) => Ok(()),
        (true, 1) if stderr.starts_with("error: case.json: ") => Ok(()),
        _ => Err(format!(
            "inspect exited {code} where the library {}: {stderr}",
            if refused { "refused" } else { "loaded" }
        )),
    }
}

/// Hidden files left in a case's folder (temporaries, locks).
fn leftovers(dir: &Path) -> Result<Vec<String>, String> {
    let entries = std::fs::read_dir(dir).map_err(|e| e.to_string())?;
    Ok(entries.flatten().map(|e| e.file_name().to_string_lossy().into_owned()).filter(|n| n.starts_with('.')).collect())
}

/// The records of a file the library wrote, by a general-purpose reader.
fn csv_records(bytes: &[u8]) -> Result<Vec<csv::ByteRecord>, String> {
    let mut reader = csv::ReaderBuilder::new().has_headers(false).flexible(true).from_reader(bytes);
    reader.byte_records().map(|r| r.map_err(|e| format!("an output is not CSV: {e}"))).collect()
}

/// A generated CSV case.
#[derive(Debug, Clone)]
pub struct CsvCase {
    /// The file.
    pub bytes: Vec<u8>,
    /// The record-size cap.
    pub max_record_bytes: usize,
    /// The chunk size.
    pub chunk_bytes: usize,
    /// Worker threads.
    pub threads: usize,
    /// The unseen-category policy.
    pub unseen: UnseenPolicy,
    /// Whether to compare outputs across chunk sizes.
    pub compare_chunks: bool,
}

/// The CSV case of `seed`.
pub fn csv_case(seed: u64) -> CsvCase {
    let mut rng = Rng::new(seed);
    let rows = rng.next_u64() % 30;
    let line_end: &[u8] = match rng.next_u64() % 4 {
        0 => b"\r\n",
        1 => b"\r",
        _ => b"\n",
    };
    let mut bytes = HEADER.trim_end().as_bytes().to_vec();
    bytes.extend_from_slice(line_end);
    for i in 0..rows {
        let mut fields: Vec<String> = vec![
            format!("a{i}"),
            CHANNELS[(rng.next_u64() % 3) as usize].into(),
            format!("{:.1}", 20.0 + 90.0 * rng.uniform()),
            format!("{:.3}", rng.uniform()),
            if rng.bernoulli(0.2) { "bad" } else { "good" }.into(),
        ];
        for field in fields.iter_mut() {
            if rng.bernoulli(0.1) {
                *field = format!("\"{field}\"");
            }
        }
        bytes.extend_from_slice(fields.join(",").as_bytes());
        bytes.extend_from_slice(line_end);
    }
    let mutations = rng.next_u64() % 5;
    for _ in 0..mutations {
        mutate_csv(&mut bytes, &mut rng);
    }
    let max_record_bytes = if rng.bernoulli(0.125) {
        16 + (rng.next_u64() % 512) as usize
    } else {
        baserate::records::DEFAULT_MAX_RECORD_BYTES
    };
    CsvCase {
        bytes,
        max_record_bytes,
        // Mostly the default size; small chunks (a handoff per record or
        // two) often enough to cut records and quotes at every place.
        chunk_bytes: match rng.next_u64() % 20 {
            0 => 64,
            1 | 2 => 300,
            3..=5 => 4096,
            _ => 1 << 20,
        },
        threads: if rng.bernoulli(0.25) { 2 } else { 1 },
        unseen: [UnseenPolicy::Error, UnseenPolicy::Reject, UnseenPolicy::Missing][(rng.next_u64() % 3) as usize],
        compare_chunks: rng.bernoulli(0.05),
    }
}

fn position(bytes: &[u8], rng: &mut Rng) -> usize {
    (rng.next_u64() % (bytes.len() as u64 + 1)) as usize
}

fn mutate_csv(bytes: &mut Vec<u8>, rng: &mut Rng) {
    let at = position(bytes, rng);
    match rng.next_u64() % 14 {
        0 => bytes.insert(at, b'"'),
        1 => {
            let end: &[u8] = [&b"\n"[..], b"\r", b"\r\n"][(rng.next_u64() % 3) as usize];
            bytes.splice(at..at, end.iter().copied());
        }
        2 => {
            // Every line end of one kind becomes another.
            let text: Vec<u8> = std::mem::take(bytes);
            let to: &[u8] = [&b"\n"[..], b"\r", b"\r\n"][(rng.next_u64() % 3) as usize];
            for &b in &text {
                if b == b'\n' {
                    bytes.extend_from_slice(to);
                } else {
                    bytes.push(b);
                }
            }
        }
        3 => {
            bytes.splice(0..0, b"\xEF\xBB\xBF".iter().copied());
        }
        4 => bytes.insert(at, 0),
        5 => {
            let bad: &[u8] = [&b"\xff"[..], b"\xc3", b"\xe2\x82", b"\xed\xa0\x80"][(rng.next_u64() % 4) as usize];
            bytes.splice(at..at, bad.iter().copied());
        }
        6 => {
            // A huge quoted field, with line ends and data-shaped lines.
            let mut field = b"\"notes ".to_vec();
            let size = 1000 + rng.next_u64() % 200_000;
            while (field.len() as u64) < size {
                field.extend_from_slice(b"x9,online,50,0.5,good\nlorem \"\"quoted\"\" ipsum\r\n");
            }
            field.push(b'"');
            bytes.splice(at..at, field);
        }
        7 => {
            if let Some(comma) = bytes.iter().skip(at).position(|&b| b == b',') {
                bytes.remove(at + comma);
            }
        }
        8 => bytes.insert(at, b','),
        9 => bytes.truncate(at),
        10 => {
            // A line repeated.
            let start = bytes[..at].iter().rposition(|&b| b == b'\n').map_or(0, |p| p + 1);
            let end = bytes[at..].iter().position(|&b| b == b'\n').map_or(bytes.len(), |p| at + p + 1);
            let line = bytes[start..end].to_vec();
            bytes.splice(end..end, line);
        }
        11 => {
            bytes.splice(at..at, b"\n\n".iter().copied());
        }
        12 => {
            let value: &[u8] = [&b"nan"[..], b"inf", b"", b"NA", b"kiosk", b"-", b"1e999", b" 5 ", b"\"\""]
                [(rng.next_u64() % 9) as usize];
            bytes.splice(at..at, value.iter().copied());
        }
        _ => {
            if at < bytes.len() {
                bytes[at] ^= 1 << (rng.next_u64() % 8);
            }
        }
    }
}

/// A record by the rules, as the slow reading finds it.
#[derive(Debug, Clone, PartialEq)]
pub struct Record {
    /// The line it starts on (1 is the file's first).
    pub line: u64,
    /// Its bytes, line end excluded.
    pub bytes: Vec<u8>,
}

/// The records of `bytes` by the rules in the `records` module, read one
/// byte at a time: a record ends at LF, CRLF or a lone CR outside quotes;
/// a quote opens a quoted field only as a field's first byte; `""` inside
/// is a quote; a quote still open at the end of the file leaves its record
/// ending at its first line end (the lines after it are read); empty lines
/// hold no record; a BOM before the header is not part of it. `None` when
/// a record would pass the size cap (those rules are checked by the counts
/// alone).
pub fn reference_records(bytes: &[u8], max_record_bytes: usize) -> Option<Vec<Record>> {
    let mut out = Vec::new();
    let mut i = if bytes.starts_with(b"\xEF\xBB\xBF") { 3 } else { 0 };
    let mut line = 1u64;
    while i < bytes.len() {
        let (start, start_line) = (i, line);
        let (mut quoted, mut field_start) = (false, true);
        let mut end;
        loop {
            if i >= bytes.len() {
                end = i;
                break;
            }
            let b = bytes[i];
            if quoted {
                if b == b'"' {
                    if bytes.get(i + 1) == Some(&b'"') {
                        i += 2;
                        continue;
                    }
                    quoted = false;
                } else if b == b'\n' || (b == b'\r' && bytes.get(i + 1) != Some(&b'\n')) {
                    line += 1;
                }
                i += 1;
                continue;
            }
            if b == b'\n' || b == b'\r' {
                end = i;
                break;
            }
            if b == b'"' && field_start {
                quoted = true;
            }
            field_start = b == b',';
            i += 1;
        }
        if quoted {
            // Open at the end: back to the record's first line end.
            end = bytes[start..].iter().position(|&b| b == b'\n' || b == b'\r').map_or(bytes.len(), |p| start + p);
            i = end;
            line = start_line;
        }
        // The line end.
        if bytes.get(i) == Some(&b'\r') && bytes.get(i + 1) == Some(&b'\n') {
            i += 2;
            line += 1;
        } else if i < bytes.len() {
            i += 1;
            line += 1;
        }
        if end > start {
            if end - start > max_record_bytes {
                return None;
            }
            out.push(Record { line: start_line, bytes: bytes[start..end].to_vec() });
        }
    }
    Some(out)
}

/// The model case of `seed`: the model file's bytes, mutated.
pub fn model_case(original: &[u8], seed: u64) -> Vec<u8> {
    let mut rng = Rng::new(seed ^ 0x9e37_79b9_7f4a_7c15);
    let mut bytes = original.to_vec();
    match rng.next_u64() % 6 {
        0 => {
            for _ in 0..1 + rng.next_u64() % 3 {
                let at = (rng.next_u64() % bytes.len() as u64) as usize;
                bytes[at] ^= 1 << (rng.next_u64() % 8);
            }
        }
        1 => bytes.truncate((rng.next_u64() % bytes.len() as u64) as usize),
        2 => {
            // A digit changed: an edited number.
            let digits: Vec<usize> =
                bytes.iter().enumerate().filter(|(_, b)| b.is_ascii_digit()).map(|(i, _)| i).collect();
            if !digits.is_empty() {
                let at = digits[(rng.next_u64() % digits.len() as u64) as usize];
                bytes[at] = b'0' + ((bytes[at] - b'0' + 1 + (rng.next_u64() % 9) as u8) % 10);
            }
        }
        3 => {
            // An array inserted after some opening bracket.
            let opens: Vec<usize> = bytes.iter().enumerate().filter(|(_, &b)| b == b'[').map(|(i, _)| i).collect();
            if !opens.is_empty() {
                let at = opens[(rng.next_u64() % opens.len() as u64) as usize] + 1;
                let n = 1 + rng.next_u64() % 20_000;
                let zeros = vec!["0"; n as usize].join(",") + ",";
                bytes.splice(at..at, zeros.into_bytes());
            }
        }
        4 => {
            let at = (rng.next_u64() % bytes.len() as u64) as usize;
            bytes.remove(at);
        }
        _ => {
            // Layout only: the content, and its checksum, unchanged.
            let text = String::from_utf8_lossy(&bytes).replace("\n  ", "\n\t");
            bytes = text.into_bytes();
        }
    }
    bytes
}
