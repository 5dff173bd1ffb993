//! Reading a delimited text file into typed columns, in parallel.
//!
//! The whole file is read into memory, split into chunks at record
//! boundaries (a newline outside quotes, found by a quote-parity scan), and
//! each chunk is parsed on its own thread by the csv crate. Every chunk knows
//! the line it starts on, so errors name the true line of the file.
//!
//! Kinds are settled per column: a feature column is numeric when every
//! non-missing value parses as a finite `f64`, otherwise categorical. A chunk
//! that meets text in a column it was parsing as numbers parses itself again
//! with that column categorical; once every chunk is done, chunks that parsed
//! a column as numbers which another chunk found to be text are parsed again
//! too, so every chunk agrees on every kind. Mixed columns are rare, so the
//! second pass costs nothing in the common case.
//!
//! Errors are reported for the first offending line of the file, whatever
//! the chunking: each chunk stops at its own first fatal problem, and the
//! earliest one over all chunks wins.

use std::collections::HashMap;

use rayon::prelude::*;

use crate::data::options::ReadOptions;
use crate::data::schema::ColumnRole;
use crate::error::{Error, Position, Result};

/// Target bytes per chunk: large enough that per-chunk overhead vanishes,
/// small enough that two cores stay balanced on a 200 MB file.
const CHUNK_BYTES: usize = 4 << 20;

/// Code for a missing categorical value.
pub const MISSING_CODE: u32 = u32::MAX;

/// How a column is parsed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Parse {
    Skip,
    /// Numbers; `forced` makes a non-number an error instead of a switch to
    /// categorical.
    Numeric {
        forced: bool,
    },
    Categorical,
    Text,
    Target,
    Weight,
}

/// What was read from one column.
#[derive(Debug, Clone)]
pub enum ColumnValues {
    /// Numbers, `NaN` where missing.
    Numeric(Vec<f64>),
    /// Codes into `levels` (sorted), [`MISSING_CODE`] where missing.
    Categorical {
        /// Per-row level codes.
        codes: Vec<u32>,
        /// The distinct values, in byte order.
        levels: Vec<String>,
    },
    /// Raw text (identifier columns).
    Text(Vec<String>),
    /// Not read.
    Skipped,
}

/// Facts gathered while reading one column, used for errors and warnings.
#[derive(Debug, Clone, Default)]
pub struct ColumnFacts {
    /// Count of missing values.
    pub missing: usize,
    /// Line of the first missing value.
    pub first_missing_line: Option<u64>,
    /// First `inf`/`nan` literal (line, text).
    pub first_non_finite: Option<(u64, String)>,
    /// First value that is not a number (line, text), for columns that
    /// ended up categorical although they were not declared so.
    pub first_text: Option<(u64, String)>,
    /// Non-missing values that parse as finite numbers.
    pub number_like: usize,
}

impl ColumnFacts {
    fn merge(&mut self, other: &ColumnFacts) {
        self.missing += other.missing;
        self.number_like += other.number_like;
        if self.first_missing_line.is_none() {
            self.first_missing_line = other.first_missing_line;
        }
        if self.first_non_finite.is_none() {
            self.first_non_finite.clone_from(&other.first_non_finite);
        }
        if self.first_text.is_none() {
            self.first_text.clone_from(&other.first_text);
        }
    }
}

/// One column as read.
#[derive(Debug, Clone)]
pub struct ReadColumn {
    /// Header name.
    pub name: String,
    /// Its role.
    pub role: ColumnRole,
    /// Its values.
    pub values: ColumnValues,
    /// Facts for errors and warnings.
    pub facts: ColumnFacts,
    /// True when the user forced the kind (`--numeric` / `--categorical`).
    pub kind_forced: bool,
}

/// A whole file as read: every header column, typed.
#[derive(Debug, Clone)]
pub struct ReadTable {
    /// The path as the user gave it.
    pub path: String,
    /// Number of data rows.
    pub rows: usize,
    /// Columns in header order.
    pub columns: Vec<ReadColumn>,
}

impl ReadTable {
    /// Index of the column with this name.
    pub fn index_of(&self, name: &str) -> Option<usize> {
        self.columns.iter().position(|c| c.name == name)
    }
}

/// Reads a file from disk (see [`read_bytes`]).
pub fn read_path(path: &std::path::Path, options: &ReadOptions) -> Result<ReadTable> {
    let shown = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| Error::io(&shown, e))?;
    read_bytes(&shown, &bytes, options)
}

/// Parses a whole delimited file held in memory. `path` is only used in
/// messages.
pub fn read_bytes(path: &str, bytes: &[u8], options: &ReadOptions) -> Result<ReadTable> {
    read_bytes_chunked(path, bytes, options, CHUNK_BYTES)
}

/// [`read_bytes`] with a stated chunk size (tests use tiny chunks to show
/// that chunking changes nothing).
pub(crate) fn read_bytes_chunked(path: &str, bytes: &[u8], options: &ReadOptions, chunk_bytes: usize) -> Result<ReadTable> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    if bytes.iter().all(|b| b.is_ascii_whitespace()) {
        return Err(Error::EmptyFile {
            path: path.to_string(),
        });
    }
    let (names, data_start, data_first_line) = read_header(path, bytes, options.delimiter)?;
    let roles = settle_roles(path, &names, options)?;
    let mut plan: Vec<Parse> = names
        .iter()
        .zip(&roles)
        .map(|(_, (role, forced))| match role {
            ColumnRole::Excluded => Parse::Skip,
            ColumnRole::Target => Parse::Target,
            ColumnRole::Id => Parse::Text,
            ColumnRole::Weight => Parse::Weight,
            ColumnRole::Feature => match forced {
                Some(ForcedKind::Categorical) => Parse::Categorical,
                Some(ForcedKind::Numeric) => Parse::Numeric { forced: true },
                None => Parse::Numeric { forced: false },
            },
        })
        .collect();

    let data = &bytes[data_start..];
    let chunks = split_chunks(data, chunk_bytes);
    let first_lines = chunk_first_lines(data, &chunks, data_first_line);
    let context = ParseContext {
        path,
        names: &names,
        delimiter: options.delimiter,
        na: NaMatcher::new(&options.na_tokens),
    };

    let mut outs: Vec<ChunkOut> = chunks
        .par_iter()
        .zip(first_lines.par_iter())
        .map(|(range, &first_line)| parse_chunk_settling(&context, &data[range.clone()], first_line, plan.clone()))
        .collect();

    // Columns any chunk found to be text are categorical everywhere.
    let mut flipped = vec![false; names.len()];
    for out in &outs {
        for (column, kind) in out.plan.iter().enumerate() {
            if *kind == Parse::Categorical && plan[column] != Parse::Categorical {
                flipped[column] = true;
            }
        }
    }
    if flipped.iter().any(|&f| f) {
        for (column, f) in flipped.iter().enumerate() {
            if *f {
                plan[column] = Parse::Categorical;
            }
        }
        let redo: Vec<usize> = (0..outs.len()).filter(|&i| outs[i].plan != plan).collect();
        let redone: Vec<(usize, ChunkOut)> = redo
            .par_iter()
            .map(|&i| {
                let range = chunks[i].clone();
                (i, parse_chunk(&context, &data[range], first_lines[i], &plan))
            })
            .collect();
        for (i, out) in redone {
            outs[i] = out;
        }
    }

    // The first fatal problem in file order: a chunk's own fatal error, or
    // an inf/nan literal in a column that turned out numeric.
    let mut problems: Vec<(u64, Error)> = outs.iter_mut().filter_map(|o| o.fatal.take()).collect();
    for (column, kind) in plan.iter().enumerate() {
        if let Parse::Numeric { .. } = kind {
            if let Some((line, value)) = outs.iter().find_map(|o| o.facts[column].first_non_finite.clone()) {
                problems.push((
                    line,
                    Error::NonFiniteValue {
                        at: context.at(line),
                        column: names[column].clone(),
                        value,
                    },
                ));
            }
        }
    }
    if let Some((_, error)) = problems.into_iter().min_by_key(|(line, _)| *line) {
        return Err(error);
    }

    let rows: usize = outs.iter().map(|o| o.rows).sum();
    if rows == 0 {
        return Err(Error::HeaderOnly {
            path: path.to_string(),
        });
    }
    let columns = assemble(&names, &roles, &plan, outs);
    Ok(ReadTable {
        path: path.to_string(),
        rows,
        columns,
    })
}

/// Reads the header record; returns the names, the byte offset where data
/// starts and the line number of the first data line.
fn read_header(path: &str, bytes: &[u8], delimiter: u8) -> Result<(Vec<String>, usize, u64)> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .delimiter(delimiter)
        .flexible(true)
        .from_reader(bytes);
    let mut record = csv::ByteRecord::new();
    let header_at = Position {
        path: path.to_string(),
        line: 1,
    };
    match reader.read_byte_record(&mut record) {
        Ok(true) => {}
        Ok(false) => {
            return Err(Error::EmptyFile {
                path: path.to_string(),
            })
        }
        Err(e) => {
            return Err(Error::Malformed {
                at: header_at,
                column: "(header)".to_string(),
                message: e.to_string(),
            })
        }
    }
    let mut names = Vec::with_capacity(record.len());
    let mut seen: HashMap<String, usize> = HashMap::new();
    for (i, field) in record.iter().enumerate() {
        let name = std::str::from_utf8(field)
            .map_err(|_| Error::Malformed {
                at: header_at.clone(),
                column: format!("#{}", i + 1),
                message: "the header is not valid UTF-8".to_string(),
            })?
            .trim()
            .to_string();
        if name.is_empty() {
            return Err(Error::EmptyColumnName {
                at: header_at,
                position: i + 1,
            });
        }
        if let Some(&first) = seen.get(&name) {
            return Err(Error::DuplicateColumn {
                at: header_at,
                column: name,
                first: first + 1,
                second: i + 1,
            });
        }
        seen.insert(name.clone(), i);
        names.push(name);
    }
    let position = reader.position();
    Ok((names, position.byte() as usize, position.line()))
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum ForcedKind {
    Numeric,
    Categorical,
}

/// Turns the role and kind options into one (role, forced kind) per column,
/// checking every named column exists and has one role and one kind.
fn settle_roles(
    path: &str,
    names: &[String],
    options: &ReadOptions,
) -> Result<Vec<(ColumnRole, Option<ForcedKind>)>> {
    let mut roles: Vec<Option<(ColumnRole, &'static str)>> = vec![None; names.len()];
    let mut kinds: Vec<Option<(ForcedKind, &'static str)>> = vec![None; names.len()];
    let find = |flag: &str, column: &str| -> Result<usize> {
        names.iter().position(|n| n == column).ok_or_else(|| Error::UnknownColumn {
            path: path.to_string(),
            flag: flag.to_string(),
            column: column.to_string(),
            suggestion: crate::data::suggest::closest(column, names),
        })
    };
    let mut assign_role = |flag: &'static str, column: &str, role: ColumnRole| -> Result<()> {
        let i = find(flag, column)?;
        match roles[i] {
            Some((_, first)) if first != flag || role != ColumnRole::Excluded => {
                Err(Error::ConflictingRoles {
                    column: column.to_string(),
                    first: first.to_string(),
                    second: flag.to_string(),
                })
            }
            _ => {
                roles[i] = Some((role, flag));
                Ok(())
            }
        }
    };
    assign_role("--target", &options.target, ColumnRole::Target)?;
    for id in &options.ids {
        assign_role("--id", id, ColumnRole::Id)?;
    }
    if let Some(weight) = &options.weight {
        assign_role("--weight", weight, ColumnRole::Weight)?;
    }
    for excluded in &options.exclude {
        assign_role("--exclude", excluded, ColumnRole::Excluded)?;
    }
    let mut assign_kind = |flag: &'static str, column: &str, kind: ForcedKind| -> Result<()> {
        let i = find(flag, column)?;
        if let Some((_, first)) = kinds[i] {
            if first != flag {
                return Err(Error::ConflictingRoles {
                    column: column.to_string(),
                    first: first.to_string(),
                    second: flag.to_string(),
                });
            }
        }
        if let Some((role, first)) = roles[i] {
            if role != ColumnRole::Feature && role != ColumnRole::Excluded {
                return Err(Error::ConflictingRoles {
                    column: column.to_string(),
                    first: first.to_string(),
                    second: flag.to_string(),
                });
            }
        }
        kinds[i] = Some((kind, flag));
        Ok(())
    };
    for column in &options.categorical {
        assign_kind("--categorical", column, ForcedKind::Categorical)?;
    }
    for column in &options.numeric {
        assign_kind("--numeric", column, ForcedKind::Numeric)?;
    }
    Ok(roles
        .into_iter()
        .zip(kinds)
        .map(|(role, kind)| {
            (
                role.map_or(ColumnRole::Feature, |(r, _)| r),
                kind.map(|(k, _)| k),
            )
        })
        .collect())
}

/// Splits `data` into byte ranges that each end just after a record
/// terminator (a newline outside quotes), each about `target` bytes long.
pub(crate) fn split_chunks(data: &[u8], target: usize) -> Vec<std::ops::Range<usize>> {
    let mut ranges = Vec::new();
    if data.is_empty() {
        return ranges;
    }
    let mut start = 0;
    if memchr::memchr(b'"', data).is_none() {
        // No quotes anywhere: every newline ends a record.
        while start < data.len() {
            let want = start + target;
            let end = if want >= data.len() {
                data.len()
            } else {
                match memchr::memchr(b'\n', &data[want..]) {
                    Some(offset) => want + offset + 1,
                    None => data.len(),
                }
            };
            ranges.push(start..end);
            start = end;
        }
        return ranges;
    }
    // Quotes present: a newline ends a record only when an even number of
    // quote bytes precede it (doubled quotes inside fields keep the parity).
    let mut in_quotes = false;
    let mut next_cut = target;
    for position in memchr::memchr2_iter(b'"', b'\n', data) {
        if data[position] == b'"' {
            in_quotes = !in_quotes;
        } else if !in_quotes && position + 1 >= next_cut {
            ranges.push(start..position + 1);
            start = position + 1;
            next_cut = start + target;
        }
    }
    if start < data.len() {
        ranges.push(start..data.len());
    }
    ranges
}

/// The line number each chunk starts on.
fn chunk_first_lines(data: &[u8], chunks: &[std::ops::Range<usize>], data_first_line: u64) -> Vec<u64> {
    let counts: Vec<u64> = chunks
        .par_iter()
        .map(|r| memchr::memchr_iter(b'\n', &data[r.clone()]).count() as u64)
        .collect();
    let mut lines = Vec::with_capacity(chunks.len());
    let mut line = data_first_line;
    for count in counts {
        lines.push(line);
        line += count;
    }
    lines
}

/// Recognises missing-value tokens quickly: most fields are rejected on
/// their first byte.
struct NaMatcher {
    tokens: Vec<Vec<u8>>,
    first_bytes: [bool; 256],
}

impl NaMatcher {
    fn new(tokens: &[String]) -> Self {
        let tokens: Vec<Vec<u8>> = tokens
            .iter()
            .map(|t| t.trim().as_bytes().to_vec())
            .filter(|t| !t.is_empty())
            .collect();
        let mut first_bytes = [false; 256];
        for token in &tokens {
            first_bytes[token[0] as usize] = true;
        }
        NaMatcher { tokens, first_bytes }
    }

    #[inline]
    fn is_missing(&self, field: &[u8]) -> bool {
        match field.first() {
            None => true,
            Some(&b) if self.first_bytes[b as usize] => self.tokens.iter().any(|t| t == field),
            Some(_) => false,
        }
    }
}

struct ParseContext<'a> {
    path: &'a str,
    names: &'a [String],
    delimiter: u8,
    na: NaMatcher,
}

impl ParseContext<'_> {
    fn at(&self, line: u64) -> Position {
        Position {
            path: self.path.to_string(),
            line,
        }
    }
}

/// Local dictionary of a categorical column within one chunk.
#[derive(Default)]
struct LocalLevels {
    codes: Vec<u32>,
    index: HashMap<Box<[u8]>, u32>,
    levels: Vec<String>,
}

/// The result of parsing one chunk under one plan.
struct ChunkOut {
    plan: Vec<Parse>,
    rows: usize,
    /// Row-major values of the numeric-plan columns (and the weight).
    numeric: Vec<f64>,
    numeric_width: usize,
    categorical: Vec<LocalLevels>,
    text: Vec<Vec<String>>,
    facts: Vec<ColumnFacts>,
    fatal: Option<(u64, Error)>,
}

/// Each column's index within the storage its plan puts it in (numeric,
/// categorical or text), and the number of columns of each storage.
fn slots(plan: &[Parse]) -> (Vec<usize>, usize, usize, usize) {
    let (mut n, mut c, mut t) = (0, 0, 0);
    let slots = plan
        .iter()
        .map(|p| {
            let counter = match p {
                Parse::Skip => return usize::MAX,
                Parse::Numeric { .. } | Parse::Weight => &mut n,
                Parse::Categorical | Parse::Target => &mut c,
                Parse::Text => &mut t,
            };
            *counter += 1;
            *counter - 1
        })
        .collect();
    (slots, n, c, t)
}

/// Parses a chunk, switching columns that turn out to hold text to
/// categorical and starting again until the plan holds for the chunk.
fn parse_chunk_settling(context: &ParseContext<'_>, bytes: &[u8], first_line: u64, mut plan: Vec<Parse>) -> ChunkOut {
    loop {
        let out = parse_chunk(context, bytes, first_line, &plan);
        if out.plan == plan {
            return out;
        }
        plan = out.plan;
    }
}

/// Outcome of reading one numeric field.
enum NumberField {
    Missing,
    Value(f64),
    NonFinite,
    Text,
}

#[inline]
fn read_number(na: &NaMatcher, field: &[u8]) -> NumberField {
    if na.is_missing(field) {
        return NumberField::Missing;
    }
    match std::str::from_utf8(field).ok().and_then(|s| s.parse::<f64>().ok()) {
        Some(v) if v.is_finite() => NumberField::Value(v),
        Some(_) => NumberField::NonFinite,
        None => NumberField::Text,
    }
}

fn lossy(field: &[u8]) -> String {
    String::from_utf8_lossy(field).into_owned()
}

/// Parses one chunk under `plan`. When an unforced numeric column meets
/// text, parsing stops and the returned plan has that column categorical
/// (the caller parses again).
fn parse_chunk(context: &ParseContext<'_>, bytes: &[u8], first_line: u64, plan: &[Parse]) -> ChunkOut {
    let (slot_of, numeric_width, categorical_count, text_count) = slots(plan);
    let width = plan.len();
    let mut out = ChunkOut {
        plan: plan.to_vec(),
        rows: 0,
        numeric: Vec::with_capacity(bytes.len() / (width.max(1) * 8) * numeric_width),
        numeric_width,
        categorical: (0..categorical_count).map(|_| LocalLevels::default()).collect(),
        text: vec![Vec::new(); text_count],
        facts: vec![ColumnFacts::default(); width],
        fatal: None,
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .delimiter(context.delimiter)
        .flexible(true)
        .from_reader(bytes);
    let mut record = csv::ByteRecord::new();
    loop {
        match reader.read_byte_record(&mut record) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                let line = e.position().map_or(first_line, |p| first_line + p.line() - 1);
                out.fatal = Some((
                    line,
                    Error::Malformed {
                        at: context.at(line),
                        column: "(row)".to_string(),
                        message: e.to_string(),
                    },
                ));
                return out;
            }
        }
        let line = record.position().map_or(first_line, |p| first_line + p.line() - 1);
        if record.len() != width {
            // A lone empty line with a one-column header is an empty value;
            // anything else of the wrong length is ragged.
            out.fatal = Some((
                line,
                Error::RaggedRow {
                    at: context.at(line),
                    expected: width,
                    found: record.len(),
                },
            ));
            return out;
        }
        for (column, raw) in record.iter().enumerate() {
            let field = raw.trim_ascii();
            let facts = &mut out.facts[column];
            let slot = slot_of[column];
            match plan[column] {
                Parse::Skip => {}
                Parse::Numeric { forced } => {
                    let value = match read_number(&context.na, field) {
                        NumberField::Value(v) => v,
                        NumberField::Missing => {
                            facts.missing += 1;
                            facts.first_missing_line.get_or_insert(line);
                            f64::NAN
                        }
                        NumberField::NonFinite => {
                            if forced {
                                out.fatal = Some((
                                    line,
                                    Error::NonFiniteValue {
                                        at: context.at(line),
                                        column: context.names[column].clone(),
                                        value: lossy(field),
                                    },
                                ));
                                return out;
                            }
                            facts.first_non_finite.get_or_insert_with(|| (line, lossy(field)));
                            f64::NAN
                        }
                        NumberField::Text => {
                            if forced {
                                out.fatal = Some((
                                    line,
                                    Error::NotANumber {
                                        at: context.at(line),
                                        column: context.names[column].clone(),
                                        value: lossy(field),
                                        hint: " (declared with --numeric; use --na to declare a missing-value token)"
                                            .to_string(),
                                    },
                                ));
                                return out;
                            }
                            out.plan[column] = Parse::Categorical;
                            return out;
                        }
                    };
                    out.numeric.push(value);
                }
                Parse::Weight => {
                    let problem = match read_number(&context.na, field) {
                        NumberField::Value(v) if v >= 0.0 => {
                            out.numeric.push(v);
                            None
                        }
                        NumberField::Value(_) => Some("weights must not be negative"),
                        NumberField::Missing => Some("the weight is missing"),
                        NumberField::NonFinite => Some("weights must be finite"),
                        NumberField::Text => Some("weights must be numbers"),
                    };
                    if let Some(reason) = problem {
                        out.fatal = Some((
                            line,
                            Error::InvalidWeight {
                                at: context.at(line),
                                column: context.names[column].clone(),
                                value: lossy(field),
                                reason: reason.to_string(),
                            },
                        ));
                        return out;
                    }
                }
                Parse::Categorical | Parse::Target => {
                    let local = &mut out.categorical[slot];
                    if context.na.is_missing(field) {
                        if plan[column] == Parse::Target {
                            out.fatal = Some((
                                line,
                                Error::MissingTarget {
                                    at: context.at(line),
                                    column: context.names[column].clone(),
                                },
                            ));
                            return out;
                        }
                        facts.missing += 1;
                        facts.first_missing_line.get_or_insert(line);
                        local.codes.push(MISSING_CODE);
                        continue;
                    }
                    let code = match local.index.get(field) {
                        Some(&code) => code,
                        None => {
                            let Ok(text) = std::str::from_utf8(field) else {
                                out.fatal = Some((
                                    line,
                                    Error::Malformed {
                                        at: context.at(line),
                                        column: context.names[column].clone(),
                                        message: "the value is not valid UTF-8".to_string(),
                                    },
                                ));
                                return out;
                            };
                            let code = local.levels.len() as u32;
                            local.levels.push(text.to_string());
                            local.index.insert(field.into(), code);
                            code
                        }
                    };
                    local.codes.push(code);
                    if plan[column] == Parse::Categorical {
                        match read_number(&context.na, field) {
                            NumberField::Value(_) => facts.number_like += 1,
                            _ => {
                                facts.first_text.get_or_insert_with(|| (line, lossy(field)));
                            }
                        }
                    }
                }
                Parse::Text => match std::str::from_utf8(raw) {
                    Ok(text) => out.text[slot].push(text.to_string()),
                    Err(_) => {
                        out.fatal = Some((
                            line,
                            Error::Malformed {
                                at: context.at(line),
                                column: context.names[column].clone(),
                                message: "the value is not valid UTF-8".to_string(),
                            },
                        ));
                        return out;
                    }
                },
            }
        }
        out.rows += 1;
    }
    out
}

/// Joins the chunks into whole columns, mapping local category codes to
/// one sorted level list per column.
fn assemble(
    names: &[String],
    roles: &[(ColumnRole, Option<ForcedKind>)],
    plan: &[Parse],
    mut outs: Vec<ChunkOut>,
) -> Vec<ReadColumn> {
    let (slot_of, numeric_width, _, _) = slots(plan);
    let rows: usize = outs.iter().map(|o| o.rows).sum();
    let mut columns = Vec::with_capacity(names.len());
    // Numeric columns: de-interleave the row-major chunk buffers in parallel,
    // one column per task.
    let numeric_columns: Vec<Vec<f64>> = (0..numeric_width)
        .into_par_iter()
        .map(|slot| {
            let mut column = Vec::with_capacity(rows);
            for out in &outs {
                column.extend(out.numeric.iter().skip(slot).step_by(out.numeric_width.max(1)).copied());
            }
            column
        })
        .collect();
    let mut numeric_columns: Vec<Option<Vec<f64>>> = numeric_columns.into_iter().map(Some).collect();
    for (column, name) in names.iter().enumerate() {
        let mut facts = ColumnFacts::default();
        for out in &outs {
            facts.merge(&out.facts[column]);
        }
        let slot = slot_of[column];
        let values = match plan[column] {
            Parse::Skip => ColumnValues::Skipped,
            Parse::Numeric { .. } | Parse::Weight => ColumnValues::Numeric(numeric_columns[slot].take().unwrap_or_default()),
            Parse::Categorical | Parse::Target => {
                let mut all: Vec<&str> = outs
                    .iter()
                    .flat_map(|o| o.categorical[slot].levels.iter().map(String::as_str))
                    .collect();
                all.sort_unstable();
                all.dedup();
                let levels: Vec<String> = all.iter().map(|s| s.to_string()).collect();
                let mut codes = Vec::with_capacity(rows);
                for out in &outs {
                    let local = &out.categorical[slot];
                    let map: Vec<u32> = local
                        .levels
                        .iter()
                        .map(|l| levels.binary_search(l).map_or(MISSING_CODE, |i| i as u32))
                        .collect();
                    codes.extend(local.codes.iter().map(|&c| if c == MISSING_CODE { c } else { map[c as usize] }));
                }
                ColumnValues::Categorical { codes, levels }
            }
            Parse::Text => {
                let mut all = Vec::with_capacity(rows);
                for out in outs.iter_mut() {
                    all.append(&mut out.text[slot]);
                }
                ColumnValues::Text(all)
            }
        };
        columns.push(ReadColumn {
            name: name.clone(),
            role: roles[column].0,
            values,
            facts,
            kind_forced: roles[column].1.is_some(),
        });
    }
    columns
}

#[cfg(test)]
mod tests {
    use super::*;

    fn options() -> ReadOptions {
        ReadOptions::new("y")
    }

    #[test]
    fn reads_numbers_and_categories() {
        let table = read_bytes("t.csv", b"a,b,y\n1.5,x,0\n2,y,1\n-3e2,x,0\n", &options()).unwrap();
        assert_eq!(table.rows, 3);
        match &table.columns[0].values {
            ColumnValues::Numeric(v) => assert_eq!(v, &vec![1.5, 2.0, -300.0]),
            other => panic!("{other:?}"),
        }
        match &table.columns[1].values {
            ColumnValues::Categorical { codes, levels } => {
                assert_eq!(levels, &vec!["x".to_string(), "y".to_string()]);
                assert_eq!(codes, &vec![0, 1, 0]);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn tolerates_bom_quotes_and_crlf() {
        let table = read_bytes("t.csv", b"\xEF\xBB\xBFa,\"b c\",y\r\n\"1\",\"x, \"\"q\"\"\",0\r\n2,z,1\r\n", &options()).unwrap();
        assert_eq!(table.columns[0].name, "a");
        assert_eq!(table.columns[1].name, "b c");
        match &table.columns[1].values {
            ColumnValues::Categorical { levels, .. } => assert_eq!(levels[0], "x, \"q\""),
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn chunks_split_only_outside_quotes() {
        let data = b"1,\"a\nb\",2\n3,\"c\",4\n5,6,7\n";
        for target in 1..data.len() + 2 {
            let ranges = split_chunks(data, target);
            let mut joined = Vec::new();
            for r in &ranges {
                joined.extend_from_slice(&data[r.clone()]);
                let piece = &data[r.clone()];
                assert!(piece.iter().filter(|&&b| b == b'"').count() % 2 == 0, "target {target}");
            }
            assert_eq!(joined, data.to_vec());
        }
    }

    #[test]
    fn chunking_changes_nothing() {
        let mut text = String::from("a,b,y,c\n");
        for i in 0..500 {
            let b = if i == 333 { "word".to_string() } else { format!("{}", i % 7) };
            let c = if i % 50 == 7 { "\"q\nr\"" } else { "s" };
            text.push_str(&format!("{}.25,{},{},{}\n", i, b, i % 3, c));
        }
        let whole = read_bytes_chunked("t.csv", text.as_bytes(), &options(), 1 << 20).unwrap();
        for chunk in [1, 7, 64, 300] {
            let chunked = read_bytes_chunked("t.csv", text.as_bytes(), &options(), chunk).unwrap();
            assert_eq!(format!("{chunked:?}"), format!("{whole:?}"), "chunk size {chunk}");
        }
        match &whole.columns[1].values {
            ColumnValues::Categorical { levels, codes } => {
                assert_eq!(levels.len(), 8);
                assert_eq!(codes.len(), 500);
            }
            other => panic!("{other:?}"),
        }
        // Line 1 is the header; row i is on line i + 2 plus one per earlier
        // embedded newline (rows 7, 57, ..., 307 hold one each).
        assert_eq!(whole.columns[1].facts.first_text, Some((333 + 2 + 7, "word".to_string())));
        assert_eq!(whole.columns[1].facts.number_like, 499);
    }

    #[test]
    fn first_error_in_file_order_whatever_the_chunking() {
        let mut text = String::from("a,y\n");
        for i in 0..200 {
            let a = if i == 150 || i == 20 { "1,2".to_string() } else { format!("{i}") };
            text.push_str(&format!("{a},{}\n", i % 2));
        }
        for chunk in [1, 16, 1 << 20] {
            match read_bytes_chunked("t.csv", text.as_bytes(), &options(), chunk) {
                Err(Error::RaggedRow { at, .. }) => assert_eq!(at.line, 22),
                other => panic!("{other:?}"),
            }
        }
    }
}
