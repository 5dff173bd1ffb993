//! Parsing one chunk of a delimited file: the per-field work of the reader.
//!
//! A chunk is a byte range that starts and ends on record boundaries. Its
//! numeric features are written straight into their rows of the final
//! column-major matrix (the caller hands each chunk its slices), so a number
//! is touched once between the file and the training matrix. Categorical
//! codes, identifiers and weights go to chunk-local vectors that the caller
//! joins.
//!
//! Two paths, one meaning: a chunk with no quote byte is split by hand in a
//! single pass (a number is scanned and converted where it stands); a chunk
//! with quotes is read record by record through [`crate::records`], the
//! rules every reader shares. Both skip empty lines and end a record at LF,
//! CRLF or a lone CR.

use std::collections::HashMap;

use crate::data::number::{parse_f64, scan_f64};
use crate::error::{Error, Position, Setting};

/// Code for a missing categorical value.
pub const MISSING_CODE: u32 = u32::MAX;

/// How a column is parsed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Parse {
    Skip,
    /// Numbers. `forced` (the setting that declared the column numeric)
    /// makes a non-number an error instead of a switch to categorical;
    /// `probability` makes a number outside [0, 1] an error.
    Numeric {
        forced: Option<Setting>,
        probability: bool,
    },
    Categorical,
    Text,
    Target,
    Weight,
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
    pub(crate) fn merge(&mut self, other: &ColumnFacts) {
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

/// Recognises missing-value tokens quickly: most fields are rejected on
/// their first byte.
pub(crate) struct NaMatcher {
    tokens: Vec<Vec<u8>>,
    first_bytes: [bool; 256],
}

impl NaMatcher {
    pub(crate) fn new(tokens: &[String]) -> Self {
        let tokens: Vec<Vec<u8>> =
            tokens.iter().map(|t| t.trim().as_bytes().to_vec()).filter(|t| !t.is_empty()).collect();
        let mut first_bytes = [false; 256];
        for token in &tokens {
            first_bytes[token[0] as usize] = true;
        }
        NaMatcher { tokens, first_bytes }
    }

    /// False when no token starts with `first`: the field is not missing.
    #[inline]
    pub(crate) fn may_be_missing(&self, first: u8) -> bool {
        self.first_bytes[first as usize]
    }

    #[inline]
    pub(crate) fn is_missing(&self, field: &[u8]) -> bool {
        match field.first() {
            None => true,
            Some(&b) if self.first_bytes[b as usize] => self.tokens.iter().any(|t| t == field),
            Some(_) => false,
        }
    }
}

/// A callback given each parsed chunk's bytes.
pub(crate) type Release<'a> = &'a (dyn Fn(&[u8]) + Sync);

/// What every chunk of one file shares.
pub(crate) struct ParseContext<'a> {
    pub(crate) path: &'a str,
    pub(crate) names: &'a [String],
    pub(crate) dialect: crate::records::Dialect,
    pub(crate) na: NaMatcher,
    /// Called with each chunk's bytes once parsed, so a memory-mapped file
    /// can give its pages back (resident memory stays at a few chunks).
    pub(crate) release: Option<Release<'a>>,
}

impl ParseContext<'_> {
    pub(crate) fn at(&self, line: u64) -> Position {
        Position { path: self.path.to_string(), line }
    }
}

/// Local dictionary of a categorical column within one chunk. Few levels
/// are found by a linear scan (faster than hashing); past
/// [`LINEAR_SCAN_LEVELS`] a hash index takes over.
#[derive(Default)]
pub(crate) struct LocalLevels {
    pub(crate) codes: Vec<u32>,
    keys: Vec<Box<[u8]>>,
    index: HashMap<Box<[u8]>, u32>,
    pub(crate) levels: Vec<String>,
    /// The line each level first appears on.
    pub(crate) first_lines: Vec<u64>,
}

const LINEAR_SCAN_LEVELS: usize = 16;

impl LocalLevels {
    /// The code of a value, adding it as a new level when unseen; `None`
    /// when a new value is not valid UTF-8.
    #[inline]
    fn code_of(&mut self, field: &[u8], line: u64) -> Option<u32> {
        let found = if self.index.is_empty() {
            self.keys.iter().position(|k| **k == *field).map(|i| i as u32)
        } else {
            self.index.get(field).copied()
        };
        if found.is_some() {
            return found;
        }
        let text = std::str::from_utf8(field).ok()?;
        let code = self.levels.len() as u32;
        self.levels.push(text.to_string());
        self.first_lines.push(line);
        self.keys.push(field.into());
        if !self.index.is_empty() {
            self.index.insert(field.into(), code);
        } else if self.keys.len() > LINEAR_SCAN_LEVELS {
            self.index = self.keys.iter().enumerate().map(|(i, k)| (k.clone(), i as u32)).collect();
        }
        Some(code)
    }
}

/// Each column's index within the storage its plan puts it in (numeric
/// matrix, weights, categorical or text), and the count of numeric,
/// categorical and text columns.
pub(crate) fn slots(plan: &[Parse]) -> (Vec<usize>, usize, usize, usize) {
    let (mut n, mut c, mut t, mut w) = (0, 0, 0, 0);
    let slots = plan
        .iter()
        .map(|p| {
            let counter = match p {
                Parse::Skip => return usize::MAX,
                Parse::Numeric { .. } => &mut n,
                Parse::Weight => &mut w,
                Parse::Categorical | Parse::Target => &mut c,
                Parse::Text => &mut t,
            };
            *counter += 1;
            *counter - 1
        })
        .collect();
    (slots, n, c, t)
}

/// The result of parsing one chunk under one plan.
pub(crate) struct ChunkOut {
    /// The plan after the chunk: numeric columns that met text are
    /// categorical here.
    pub(crate) plan: Vec<Parse>,
    pub(crate) rows: usize,
    pub(crate) weights: Vec<f64>,
    pub(crate) categorical: Vec<LocalLevels>,
    pub(crate) text: Vec<Vec<String>>,
    pub(crate) facts: Vec<ColumnFacts>,
    /// The first fatal problem of the chunk (its line, the error).
    pub(crate) fatal: Option<(u64, Error)>,
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
    match parse_f64(field) {
        Some(v) if v.is_finite() => NumberField::Value(v),
        Some(_) => NumberField::NonFinite,
        None => NumberField::Text,
    }
}

fn lossy(field: &[u8]) -> String {
    String::from_utf8_lossy(field).into_owned()
}

/// Parses one chunk under `plan`, writing numeric feature `j` of the chunk's
/// row `i` to `numeric[j][i]` (each slice holds at least as many rows as the
/// chunk has lines).
///
/// When an unforced numeric column meets text, the column becomes
/// categorical in the returned plan and its later values are skipped; the
/// rest of the chunk is still read, so one pass finds every such column.
/// The chunk must then be parsed again under the new plan.
pub(crate) fn parse_chunk(
    context: &ParseContext<'_>,
    bytes: &[u8],
    first_line: u64,
    plan: &[Parse],
    numeric: Vec<&mut [f64]>,
) -> ChunkOut {
    let (slot_of, _, categorical_count, text_count) = slots(plan);
    let width = plan.len();
    let mut sink = RecordSink {
        context,
        plan: plan.to_vec(),
        slot_of,
        numeric,
        out: ChunkOut {
            plan: plan.to_vec(),
            rows: 0,
            weights: Vec::new(),
            categorical: (0..categorical_count).map(|_| LocalLevels::default()).collect(),
            text: vec![Vec::new(); text_count],
            facts: vec![ColumnFacts::default(); width],
            fatal: None,
        },
    };
    if memchr::memchr(b'"', bytes).is_none() {
        parse_plain(&mut sink, bytes, first_line);
    } else {
        parse_quoted(&mut sink, bytes, first_line);
    }
    sink.out
}

/// A chunk with quotes, record by record through the record layer.
fn parse_quoted(sink: &mut RecordSink<'_, '_>, bytes: &[u8], first_line: u64) {
    let context = sink.context;
    let mut fields = crate::records::Fields::new();
    for record in crate::records::records(bytes, &context.dialect, first_line) {
        let line = record.line;
        let malformed = if record.oversized {
            Some(crate::data::csv_read::oversized_message(&context.dialect))
        } else if record.unclosed {
            Some(crate::records::FieldError::UnclosedQuote.message().to_string())
        } else {
            fields.split(record.bytes, context.dialect.delimiter).err().map(|e| e.message().to_string())
        };
        if let Some(message) = malformed {
            sink.fail(line, Error::Malformed { at: context.at(line), column: "(row)".to_string(), message });
            return;
        }
        if fields.len() != sink.plan.len() {
            sink.ragged(line, fields.len());
            return;
        }
        for (column, field) in fields.iter(record.bytes).enumerate() {
            if !sink.field(line, column, field) {
                return;
            }
        }
        sink.out.rows += 1;
    }
}

/// A chunk without quote bytes, in one pass: a number field is scanned and
/// converted where it stands, so an all-numeric row never looks at a byte
/// twice; any other field is delimited with memchr and goes through
/// [`RecordSink::field`].
fn parse_plain(sink: &mut RecordSink<'_, '_>, bytes: &[u8], first_line: u64) {
    let delimiter = sink.context.dialect.delimiter;
    let width = sink.plan.len();
    let mut position = 0;
    let mut line = first_line;
    while position < bytes.len() {
        let line_end = |from: usize| memchr::memchr2(b'\n', b'\r', &bytes[from..]).map_or(bytes.len(), |o| from + o);
        // After the line end at `at` (LF, CRLF or a lone CR).
        let after_line_end = |at: usize| at + 1 + usize::from(bytes[at] == b'\r' && bytes.get(at + 1) == Some(&b'\n'));
        // Empty lines are skipped.
        if matches!(bytes[position], b'\n' | b'\r') {
            position = after_line_end(position);
            line += 1;
            continue;
        }
        let record_start = position;
        for column in 0..width {
            let last = column + 1 == width;
            let fast = match (sink.plan[column], bytes.get(position)) {
                (Parse::Numeric { probability: false, .. }, Some(&first))
                    if !sink.context.na.first_bytes[first as usize] =>
                {
                    scan_f64(&bytes[position..]).filter(|(_, used)| {
                        let end = position + used;
                        end == bytes.len() || matches!(bytes[end], b'\n' | b'\r') || bytes[end] == delimiter
                    })
                }
                _ => None,
            };
            let field_end = match fast {
                Some((value, used)) => {
                    sink.numeric_value(column, value);
                    position + used
                }
                None => {
                    let end = memchr::memchr3(delimiter, b'\n', b'\r', &bytes[position..])
                        .map_or(bytes.len(), |o| position + o);
                    if !sink.field(line, column, &bytes[position..end]) {
                        return;
                    }
                    end
                }
            };
            // What ends the field must fit its place in the record.
            let terminator = bytes.get(field_end).copied();
            let fits =
                if last { matches!(terminator, None | Some(b'\n' | b'\r')) } else { terminator == Some(delimiter) };
            if !fits {
                let end = line_end(record_start);
                let found = 1 + bytes[record_start..end].iter().filter(|&&b| b == delimiter).count();
                sink.ragged(line, found);
                return;
            }
            position = if !last {
                field_end + 1
            } else if field_end < bytes.len() {
                after_line_end(field_end)
            } else {
                bytes.len()
            };
        }
        sink.out.rows += 1;
        line += 1;
    }
}

/// Turns fields into column values for one chunk.
struct RecordSink<'a, 'b> {
    context: &'a ParseContext<'b>,
    plan: Vec<Parse>,
    slot_of: Vec<usize>,
    numeric: Vec<&'a mut [f64]>,
    out: ChunkOut,
}

impl RecordSink<'_, '_> {
    fn fail(&mut self, line: u64, error: Error) {
        self.out.fatal = Some((line, error));
    }

    fn ragged(&mut self, line: u64, found: usize) {
        let error = Error::RaggedRow { at: self.context.at(line), expected: self.plan.len(), found };
        self.fail(line, error);
    }

    /// Stores a parsed number of a numeric column in the current row.
    #[inline]
    fn numeric_value(&mut self, column: usize, value: f64) {
        let row = self.out.rows;
        self.numeric[self.slot_of[column]][row] = value;
    }

    /// Takes one field of the current record; false when parsing must stop.
    #[inline]
    fn field(&mut self, line: u64, column: usize, raw: &[u8]) -> bool {
        let context = self.context;
        let field = raw.trim_ascii();
        let slot = self.slot_of[column];
        let facts = &mut self.out.facts[column];
        let fatal = match self.plan[column] {
            Parse::Skip => None,
            Parse::Numeric { forced, probability } => match read_number(&context.na, field) {
                NumberField::Value(v) if probability && !(0.0..=1.0).contains(&v) => Some(Error::NotAProbability {
                    at: context.at(line),
                    column: context.names[column].clone(),
                    value: lossy(field),
                }),
                NumberField::Value(v) => {
                    self.numeric_value(column, v);
                    None
                }
                NumberField::Missing => {
                    facts.missing += 1;
                    facts.first_missing_line.get_or_insert(line);
                    self.numeric_value(column, f64::NAN);
                    None
                }
                NumberField::NonFinite if forced.is_some() => Some(Error::NonFiniteValue {
                    at: context.at(line),
                    column: context.names[column].clone(),
                    value: lossy(field),
                }),
                NumberField::NonFinite => {
                    facts.first_non_finite.get_or_insert_with(|| (line, lossy(field)));
                    self.numeric_value(column, f64::NAN);
                    None
                }
                NumberField::Text if forced.is_some() => Some(Error::NotANumber {
                    at: context.at(line),
                    column: context.names[column].clone(),
                    value: lossy(field),
                    hint: crate::error::message![
                        " (named by ",
                        forced.unwrap_or(Setting::Numeric),
                        "; use ",
                        Setting::NaTokens,
                        " to declare a missing-value token)"
                    ],
                }),
                NumberField::Text => {
                    // Settled as categorical; the chunk is parsed again.
                    facts.first_text.get_or_insert_with(|| (line, lossy(field)));
                    self.out.plan[column] = Parse::Categorical;
                    self.plan[column] = Parse::Skip;
                    None
                }
            },
            Parse::Weight => {
                let problem = match read_number(&context.na, field) {
                    NumberField::Value(v) if v >= 0.0 => {
                        self.out.weights.push(v);
                        None
                    }
                    NumberField::Value(_) => Some("weights must not be negative"),
                    NumberField::Missing => Some("the weight is missing"),
                    NumberField::NonFinite => Some("weights must be finite"),
                    NumberField::Text => Some("weights must be numbers"),
                };
                problem.map(|reason| Error::InvalidWeight {
                    at: context.at(line),
                    column: context.names[column].clone(),
                    value: lossy(field),
                    reason: reason.to_string(),
                })
            }
            kind @ (Parse::Categorical | Parse::Target) => {
                let local = &mut self.out.categorical[slot];
                if context.na.is_missing(field) {
                    if kind == Parse::Target {
                        Some(Error::MissingTarget { at: context.at(line), column: context.names[column].clone() })
                    } else {
                        facts.missing += 1;
                        facts.first_missing_line.get_or_insert(line);
                        local.codes.push(MISSING_CODE);
                        None
                    }
                } else {
                    match local.code_of(field, line) {
                        None => Some(Error::Malformed {
                            at: context.at(line),
                            column: context.names[column].clone(),
                            message: "the value is not valid UTF-8".to_string(),
                        }),
                        Some(code) => {
                            local.codes.push(code);
                            if kind == Parse::Categorical {
                                match read_number(&context.na, field) {
                                    NumberField::Value(_) => facts.number_like += 1,
                                    _ => {
                                        facts.first_text.get_or_insert_with(|| (line, lossy(field)));
                                    }
                                }
                            }
                            None
                        }
                    }
                }
            }
            Parse::Text => match std::str::from_utf8(field) {
                Ok(text) => {
                    self.out.text[slot].push(text.to_string());
                    None
                }
                Err(_) => Some(Error::Malformed {
                    at: context.at(line),
                    column: context.names[column].clone(),
                    message: "the value is not valid UTF-8".to_string(),
                }),
            },
        };
        match fatal {
            Some(error) => {
                self.fail(line, error);
                false
            }
            None => true,
        }
    }
}
