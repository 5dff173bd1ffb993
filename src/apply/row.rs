//! One record turned into model inputs by a model's schema: fields parsed
//! by what they feed, missing values filled, unseen levels handled, and a
//! row with a problem either set aside with its reason or made the error
//! that stops the reading. The streaming job and whole-file reading use the
//! same [`read_rows`], so a file gives the same rows and the same rejects
//! through either.

use crate::apply::plan::{Fill, Plan};
use crate::apply::{RejectReason, UnseenPolicy};
use crate::data::csv_chunk::NaMatcher;
use crate::data::number::{parse_f64, scan_f64};
use crate::data::options::MissingPolicy;
use crate::error::{Error, Position, Result, Setting};
use crate::records::{push_field, records, Dialect, Fields};

/// A row-level problem: the reason, the column (if one) and the detail.
#[derive(Debug)]
pub struct Problem {
    /// Why.
    pub reason: RejectReason,
    /// The column, or empty when the problem is the record's.
    pub column: String,
    /// The detail (for an unseen category: the level).
    pub message: String,
}

/// Trims spaces, tabs and carriage returns from both ends.
#[inline]
fn trim(mut bytes: &[u8]) -> &[u8] {
    while let [b' ' | b'\t' | b'\r', rest @ ..] = bytes {
        bytes = rest;
    }
    while let [rest @ .., b' ' | b'\t' | b'\r'] = bytes {
        bytes = rest;
    }
    bytes
}

/// Parsed rows, ready to score: row-major model inputs and the passed-through
/// text, costs and lines of the rows that were read without a problem.
#[derive(Debug, Clone)]
pub struct Rows {
    /// Model inputs, [`Plan::input_width`] per row (indicator columns included).
    pub numeric: Vec<f64>,
    /// Per row and numeric feature: the value was missing and filled.
    pub numeric_missing: Vec<bool>,
    /// Per categorical feature: each row's level code.
    pub categorical: Vec<Vec<u32>>,
    /// The passed-through fields' bytes.
    pub text: Vec<u8>,
    /// Per row, each passed-through field's range in `text`.
    pub text_spans: Vec<(usize, usize)>,
    /// Per row, each cost column's value.
    pub costs: Vec<f64>,
    /// Per row, its line, counted from the start of the bytes read.
    pub lines: Vec<u64>,
}

impl Rows {
    /// No rows yet, shaped for `plan`.
    pub fn new(plan: &Plan) -> Self {
        Rows {
            numeric: Vec::new(),
            numeric_missing: Vec::new(),
            categorical: vec![Vec::new(); plan.categorical.len()],
            text: Vec::new(),
            text_spans: Vec::new(),
            costs: Vec::new(),
            lines: Vec::new(),
        }
    }

    /// How many rows were read.
    pub fn len(&self) -> usize {
        self.lines.len()
    }

    /// True when no row was read.
    pub fn is_empty(&self) -> bool {
        self.lines.is_empty()
    }

    fn mark(&self) -> [usize; 5] {
        [self.numeric.len(), self.numeric_missing.len(), self.text.len(), self.text_spans.len(), self.costs.len()]
    }

    /// Drops what a row that failed part way wrote.
    fn roll_back(&mut self, mark: [usize; 5]) {
        self.numeric.truncate(mark[0]);
        self.numeric_missing.truncate(mark[1]);
        self.text.truncate(mark[2]);
        self.text_spans.truncate(mark[3]);
        self.costs.truncate(mark[4]);
        let rows = self.lines.len();
        self.categorical.iter_mut().for_each(|c| c.truncate(rows));
    }
}

/// Counts of one reading: rows read, read and kept, set aside (per
/// reason), and values filled.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct RowCounts {
    /// Data records read.
    pub rows_read: u64,
    /// Records turned into model inputs.
    pub rows_kept: u64,
    /// Rows set aside, per [`RejectReason::ALL`].
    pub rejected: [u64; RejectReason::ALL.len()],
    /// Per feature (numeric, then categorical): missing values filled.
    pub filled: Vec<u64>,
    /// Per categorical feature: unseen levels taken as missing.
    pub unseen_as_missing: Vec<u64>,
}

impl RowCounts {
    /// Zero counts, shaped for `plan`.
    pub fn new(plan: &Plan) -> Self {
        RowCounts {
            filled: vec![0; plan.numeric.len() + plan.categorical.len()],
            unseen_as_missing: vec![0; plan.categorical.len()],
            ..RowCounts::default()
        }
    }

    /// The features with missing values filled, and how many, in the
    /// plan's order (numeric, then categorical).
    pub fn imputed(&self, plan: &Plan) -> Vec<(String, u64)> {
        let names = plan.numeric.iter().map(|f| &f.name).chain(plan.categorical.iter().map(|f| &f.name));
        names
            .zip(&self.filled)
            .filter(|(_, &filled)| filled > 0)
            .map(|(name, &filled)| (name.clone(), filled))
            .collect()
    }
}

/// The rules for turning one file's records into model inputs: the plan
/// (what each field feeds), the dialect, the missing-value tokens and the
/// policies for missing and unseen values.
pub struct RowRules<'a> {
    /// The path as shown in messages.
    pub path: &'a str,
    /// What each field feeds.
    pub plan: &'a Plan,
    /// How records are delimited.
    pub dialect: Dialect,
    /// The missing-value tokens.
    pub(crate) na: NaMatcher,
    /// Unseen categories.
    pub unseen: UnseenPolicy,
    /// Missing values the model has no fill for.
    pub missing: MissingPolicy,
    /// Rows with a problem may be set aside (there is somewhere to put
    /// them); otherwise every problem stops the reading.
    pub keep_rejects: bool,
}

impl<'a> RowRules<'a> {
    /// The rules for `plan` with the given tokens and policies.
    pub fn new(path: &'a str, plan: &'a Plan, dialect: Dialect, na_tokens: &[String], policies: Policies) -> Self {
        RowRules {
            path,
            plan,
            dialect,
            na: NaMatcher::new(na_tokens),
            unseen: policies.unseen,
            missing: policies.missing,
            keep_rejects: policies.keep_rejects,
        }
    }

    /// True when a row's problem stops the reading instead of setting the
    /// row aside: only when there is nowhere to put it. With a place for
    /// rejects every row-level problem sets the row aside, whatever the
    /// policy; a policy of `error` decides what the stop says.
    pub fn stops(&self, _problem: &Problem) -> bool {
        !self.keep_rejects
    }

    /// The error that stops a reading at `line` for `problem`.
    pub fn error(&self, line: u64, problem: Problem) -> Error {
        fatal_error(self, line, problem)
    }
}

/// Refuses a policy that sets rows aside when there is no place to put
/// them. `missing` is the missing-value policy asked for (not the training
/// default, which never sets rows aside unasked).
pub fn check_place_for_rejects(
    unseen: UnseenPolicy,
    missing: Option<MissingPolicy>,
    has_reject_place: bool,
) -> Result<()> {
    let policy = match (unseen, missing) {
        (UnseenPolicy::Reject, _) => Setting::Unseen.set_to("reject"),
        (_, Some(MissingPolicy::DropRows)) => Setting::Missing.set_to("drop-rows"),
        _ => return Ok(()),
    };
    if has_reject_place {
        return Ok(());
    }
    Err(Error::invalid(crate::error::message![
        policy,
        " sets rows aside, so it needs ",
        Setting::Rejects,
        " FILE to put them in"
    ]))
}

/// The policies a reading applies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Policies {
    /// Unseen categories.
    pub unseen: UnseenPolicy,
    /// Missing values the model has no fill for.
    pub missing: MissingPolicy,
    /// Rows with a problem may be set aside.
    pub keep_rejects: bool,
}

/// Reads every record of `bytes` (whole records; `last` when they end the
/// input) into `rows` under `rules`, counting in `counts`. A row with a
/// problem that may be set aside is given to `on_reject` (its line from the
/// start of `bytes`, the problem, the record) and left out of `rows`.
/// Returns the line ends in `bytes`, or the first problem that stops the
/// reading with its line.
pub fn read_rows(
    rules: &RowRules<'_>,
    bytes: &[u8],
    last: bool,
    rows: &mut Rows,
    counts: &mut RowCounts,
    on_reject: &mut dyn FnMut(u64, &Problem, &[u8]),
) -> std::result::Result<u64, (u64, Problem)> {
    let mut fields = Fields::new();
    let mut records = records(bytes, &rules.dialect, 0);
    for found in records.by_ref() {
        let (record, record_line) = (found.bytes, found.line);
        // A record cut inside quotes before the end of the input was cut
        // by the size cap.
        let oversized = found.oversized || (found.unclosed && !last);
        counts.rows_read += 1;
        let mark = rows.mark();
        let parsed = if oversized {
            Err(Problem {
                reason: RejectReason::RecordSize,
                column: String::new(),
                message: crate::data::csv_read::oversized_message(&rules.dialect),
            })
        } else {
            parse_row(rules, record, &mut fields, rows, counts)
        };
        match parsed {
            Ok(()) => {
                rows.lines.push(record_line);
                counts.rows_kept += 1;
            }
            Err(problem) => {
                rows.roll_back(mark);
                if rules.stops(&problem) {
                    return Err((record_line, problem));
                }
                let reason = RejectReason::ALL.iter().position(|r| *r == problem.reason).unwrap_or(0);
                counts.rejected[reason] += 1;
                on_reject(record_line, &problem, record);
            }
        }
    }
    Ok(records.line())
}

/// Appends one reject record: its line, then the fields
/// [`reject_fields`] made. The one place the reject file's `line` column
/// is written.
pub fn push_reject(out: &mut Vec<u8>, line: u64, fields: &[u8]) {
    out.extend_from_slice(line.to_string().as_bytes());
    out.push(b',');
    out.extend_from_slice(fields);
}

/// A whole reject file: the header, then each (line, fields) record.
pub fn reject_file(rejects: &[(u64, Vec<u8>)]) -> Vec<u8> {
    let mut out = REJECT_HEADER.as_bytes().to_vec();
    for (line, fields) in rejects {
        push_reject(&mut out, *line, fields);
    }
    out
}

/// A reject record without its line: `column,reason,message,row` and a
/// line end (the reject file's columns after `line`).
pub fn reject_fields(problem: &Problem, record: &[u8]) -> Vec<u8> {
    let mut out = Vec::new();
    push_field(&mut out, problem.column.as_bytes());
    out.push(b',');
    out.extend_from_slice(problem.reason.name().as_bytes());
    out.push(b',');
    push_field(&mut out, problem.message.as_bytes());
    out.push(b',');
    // The row's bytes as read, invalid UTF-8 and all.
    push_field(&mut out, record);
    out.push(b'\n');
    out
}

/// The reject file's header line.
pub const REJECT_HEADER: &str = "line,column,reason,message,row\n";

/// The error that stops a run at a row it cannot set aside.
fn fatal_error(rules: &RowRules<'_>, line: u64, problem: Problem) -> Error {
    let at = Position { path: rules.path.to_string(), line };
    match problem.reason {
        RejectReason::UnseenCategory if rules.unseen == UnseenPolicy::Error => {
            let known = rules
                .plan
                .categorical
                .iter()
                .find(|c| c.name == problem.column)
                .map(|c| {
                    c.levels.iter().filter(|l| l.as_str() != crate::data::dataset::MISSING_LEVEL).cloned().collect()
                })
                .unwrap_or_default();
            let level = problem.message.clone();
            Error::UnseenCategory { at, column: problem.column, level, known }
        }
        RejectReason::MissingValue if rules.missing == MissingPolicy::Error => Error::UnfillableMissing {
            at,
            column: problem.column,
            reason: crate::error::message![
                "the missing-value policy is 'error' (",
                Setting::Missing.set_to("impute"),
                " fills it with the training median, ",
                Setting::Missing.set_to("drop-rows"),
                " sets the row aside)"
            ],
        },
        _ => Error::BadRow { at, column: problem.column, message: problem.message },
    }
}

/// Where one row's values go in [`Rows`].
struct Slots {
    numeric: usize,
    missing: usize,
    text: usize,
    cost: usize,
}

/// Parses one record into `rows`; on a problem the caller rolls back.
/// (Most callers want [`read_rows`].)
///
/// A row's problems are found in a fixed order, and the first is the one
/// reported: the record's size (`record-size`, found by the record
/// layer), its quoting (`quoting`), its field count (`field-count`), then
/// its fields from left to right, each checked for its bytes
/// (`encoding`) before its value (`not-a-number`, `not-finite`,
/// `out-of-range`, `unseen-category`, `missing-value`, `cost-value`).
pub fn parse_row(
    rules: &RowRules<'_>,
    record: &[u8],
    fields: &mut crate::records::Fields,
    rows: &mut Rows,
    counts: &mut RowCounts,
) -> Result<(), Problem> {
    let plan = rules.plan;
    let width = plan.fields.len();
    let delimiter = rules.dialect.delimiter;
    let field_count = |found: usize| Problem {
        reason: RejectReason::FieldCount,
        column: String::new(),
        message: format!("the row has {found} fields but the header has {width}"),
    };
    let slots = Slots {
        numeric: rows.numeric.len(),
        missing: rows.numeric_missing.len(),
        text: rows.text_spans.len(),
        cost: rows.costs.len(),
    };
    rows.numeric.resize(slots.numeric + plan.input_width, 0.0);
    rows.numeric_missing.resize(slots.missing + plan.numeric.len(), false);
    rows.text_spans.resize(slots.text + plan.text_names.len(), (0, 0));
    rows.costs.resize(slots.cost + plan.cost_columns.len(), 0.0);
    // Filled counts wait until the row is known to be good.
    let mut filled: Vec<usize> = Vec::new();
    let mut unseen: Vec<usize> = Vec::new();
    if memchr::memchr(b'"', record).is_none() {
        // The common case, one pass: a plain number is scanned and converted
        // where it stands; anything else is cut at the next delimiter.
        let n = record.len();
        let found = || 1 + memchr::memchr_iter(delimiter, record).count();
        let mut position = 0;
        for i in 0..width {
            if position > n {
                return Err(field_count(found()));
            }
            let usage = &plan.fields[i];
            if let (Some(j), None, None, None) = (usage.numeric, usage.categorical, usage.text, usage.cost) {
                if let Some(&first) = record.get(position) {
                    if !rules.na.may_be_missing(first) {
                        if let Some((value, used)) = scan_f64(&record[position..]) {
                            let end = position + used;
                            // Beyond the model's range, the slow path says so.
                            if (end == n || record[end] == delimiter) && value.abs() <= plan.numeric[j].bound {
                                rows.numeric[slots.numeric + j] = value;
                                position = end + 1;
                                continue;
                            }
                        }
                    }
                }
            }
            let end = memchr::memchr(delimiter, &record[position..]).map_or(n, |o| position + o);
            if let Err(problem) = take_field(rules, i, &record[position..end], rows, &slots, &mut filled, &mut unseen) {
                // The field count comes first: a problem in a field of a
                // row of the wrong width is the width.
                return Err(if found() == width { problem } else { field_count(found()) });
            }
            position = end + 1;
        }
        if position <= n {
            return Err(field_count(found()));
        }
    } else {
        fields.split(record, delimiter).map_err(|e| Problem {
            reason: RejectReason::Quoting,
            column: String::new(),
            message: e.message().into(),
        })?;
        if fields.len() != width {
            return Err(field_count(fields.len()));
        }
        for (i, field) in fields.iter(record).enumerate() {
            take_field(rules, i, field, rows, &slots, &mut filled, &mut unseen)?;
        }
    }
    for f in filled {
        counts.filled[f] += 1;
    }
    for c in unseen {
        counts.unseen_as_missing[c] += 1;
    }
    Ok(())
}

/// One field of a row, by what the plan says it feeds.
fn take_field(
    rules: &RowRules<'_>,
    i: usize,
    field: &[u8],
    rows: &mut Rows,
    slots: &Slots,
    filled: &mut Vec<usize>,
    unseen: &mut Vec<usize>,
) -> Result<(), Problem> {
    let plan = rules.plan;
    let (row_start, missing_start, text_start, cost_start) = (slots.numeric, slots.missing, slots.text, slots.cost);
    let usage = &plan.fields[i];
    let field = trim(field);
    let column = || plan.names[i].clone();
    // Checked where a value was not understood, so valid rows pay nothing.
    let encoding = || {
        std::str::from_utf8(field).is_err().then(|| Problem {
            reason: RejectReason::Encoding,
            column: column(),
            message: "the value is not valid UTF-8".into(),
        })
    };
    if let Some(j) = usage.numeric {
        let feature = &plan.numeric[j];
        if rules.na.is_missing(field) {
            match feature.fill {
                Fill::Value(v) => {
                    rows.numeric[row_start + j] = v;
                    rows.numeric_missing[missing_start + j] = true;
                    if let Some(indicator) = feature.indicator {
                        rows.numeric[row_start + indicator] = 1.0;
                    }
                    filled.push(j);
                }
                Fill::Unfillable => {
                    return Err(Problem {
                        reason: RejectReason::MissingValue,
                        column: column(),
                        message: "the value is missing and the model has no fill for it".into(),
                    })
                }
            }
        } else {
            match parse_f64(field) {
                Some(x) => {
                    rows.numeric[row_start + j] =
                        feature.check_value(x, || String::from_utf8_lossy(field).into_owned())?
                }
                None => {
                    if let Some(problem) = encoding() {
                        return Err(problem);
                    }
                    return Err(Problem {
                        reason: RejectReason::NotANumber,
                        column: column(),
                        message: format!("'{}' is not a number", String::from_utf8_lossy(field)),
                    });
                }
            }
        }
    }
    if let Some(c) = usage.categorical {
        let feature = &plan.categorical[c];
        let code = if rules.na.is_missing(field) {
            feature.missing_code.map(|m| (m, false))
        } else {
            match feature.codes.get(field) {
                Some(&code) => Some((code, true)),
                None => {
                    if let Some(problem) = encoding() {
                        return Err(problem);
                    }
                    let level = || String::from_utf8_lossy(field).into_owned();
                    match (rules.unseen, feature.missing_code) {
                        (UnseenPolicy::Missing, Some(m)) => {
                            unseen.push(c);
                            // Counted as unseen, not as a missing value filled.
                            Some((m, true))
                        }
                        (UnseenPolicy::Missing, None) => {
                            return Err(Problem {
                                reason: RejectReason::MissingValue,
                                column: column(),
                                message: format!(
                                    "the level '{}' was not seen in training and was taken as missing, as asked, but the model has no fill for a missing value in this column",
                                    level()
                                ),
                            })
                        }
                        _ => {
                            return Err(Problem {
                                reason: RejectReason::UnseenCategory,
                                column: column(),
                                message: level(),
                            })
                        }
                    }
                }
            }
        };
        match code {
            Some((code, known)) => {
                if !known {
                    filled.push(plan.numeric.len() + c);
                }
                rows.categorical[c].push(code);
            }
            None => {
                return Err(Problem {
                    reason: RejectReason::MissingValue,
                    column: column(),
                    message: "the value is missing and the model has no level for missing values".into(),
                })
            }
        }
    }
    if let Some(t) = usage.text {
        if let Some(problem) = encoding() {
            return Err(problem);
        }
        let start = rows.text.len();
        rows.text.extend_from_slice(field);
        rows.text_spans[text_start + t] = (start, rows.text.len());
    }
    if let Some(slot) = usage.cost {
        match parse_f64(field).filter(|x| x.is_finite()) {
            Some(x) => rows.costs[cost_start + slot] = x,
            None => {
                if let Some(problem) = encoding() {
                    return Err(problem);
                }
                return Err(Problem {
                    reason: RejectReason::CostValue,
                    column: column(),
                    message: format!(
                        "the costs read this column, and '{}' is not a finite number",
                        String::from_utf8_lossy(field)
                    ),
                });
            }
        }
    }
    Ok(())
}
