//! The work on one chunk: records split into fields, each row either
//! parsed into model inputs or set aside with its reason, then scored,
//! decided and formatted — everything that depends only on the chunk's own
//! rows, so chunks run in parallel and their outputs join in file order.

use ndarray::Array2;

use crate::apply::plan::{Fill, Plan};
use crate::apply::{RejectReason, UnseenPolicy};
use crate::batch::capacity::{choose, Settled};
use crate::batch::reasons::ReasonCodes;
use crate::batch::source::RawChunk;
use crate::data::csv_chunk::NaMatcher;
use crate::data::number::{parse_f64, scan_f64};
use crate::data::options::MissingPolicy;
use crate::data::Inputs;
use crate::decide::CostSpec;
use crate::error::{Error, Position};
use crate::model::drift::{value_bin, DriftReference};
use crate::train::file::ModelFile;

/// What a pass over the file does with each chunk.
#[derive(Debug, Clone, Copy)]
pub enum Pass<'a> {
    /// Counts the rows that can be scored (for a capacity given as a share).
    Count,
    /// Offers the rows that reach the ranking of a limited action.
    Rank {
        /// The cuts found so far.
        settled: &'a [Settled],
        /// The limited action being ranked.
        action: usize,
    },
    /// Scores, decides and formats every row.
    Write {
        /// Every limited action's cut.
        settled: &'a [Settled],
    },
}

/// What every chunk of one run shares.
pub struct Context<'a> {
    pub(crate) path: &'a str,
    pub(crate) file: &'a ModelFile,
    pub(crate) plan: &'a Plan,
    pub(crate) prior: &'a [f64],
    pub(crate) dialect: crate::records::Dialect,
    pub(crate) na: NaMatcher,
    pub(crate) unseen: UnseenPolicy,
    pub(crate) missing: MissingPolicy,
    pub(crate) keep_rejects: bool,
    pub(crate) spec: Option<&'a CostSpec>,
    pub(crate) reasons: Option<&'a ReasonCodes>,
    /// The drift reference and, per plan feature (numeric then
    /// categorical), its entry in the reference.
    pub(crate) drift: Option<(&'a DriftReference, Vec<Option<usize>>)>,
    pub(crate) positive: usize,
}

/// Figures of one chunk, summed over chunks in file order.
#[derive(Debug, Clone, Default)]
pub struct ChunkStats {
    /// Data records read.
    pub rows_read: u64,
    /// Rows scored.
    pub rows_scored: u64,
    /// Rows set aside, per [`RejectReason::ALL`].
    pub rejected: [u64; RejectReason::ALL.len()],
    /// Per numeric feature: values below the training minimum.
    pub below_range: Vec<u64>,
    /// Per numeric feature: values above the training maximum.
    pub above_range: Vec<u64>,
    /// Per feature (numeric, then categorical): missing values filled.
    pub filled: Vec<u64>,
    /// Per categorical feature: unseen levels taken as missing.
    pub unseen_as_missing: Vec<u64>,
    /// Rows per action.
    pub actions: Vec<u64>,
    /// Sum of the chosen actions' expected costs.
    pub expected_cost: f64,
    /// Per class: sum of the posteriors.
    pub posterior_sum: Vec<f64>,
    /// Per drift-reference feature: rows per bin.
    pub feature_bins: Vec<Vec<u64>>,
    /// Rows per score bin.
    pub score_bins: Vec<u64>,
}

impl ChunkStats {
    fn new(context: &Context<'_>) -> Self {
        let plan = context.plan;
        let (feature_bins, score_bins) = match &context.drift {
            Some((reference, _)) => (
                reference.features.iter().map(|f| vec![0; f.shares.len()]).collect(),
                vec![0; reference.score.as_ref().map_or(0, |s| s.shares.len())],
            ),
            None => (Vec::new(), Vec::new()),
        };
        ChunkStats {
            below_range: vec![0; plan.numeric.len()],
            above_range: vec![0; plan.numeric.len()],
            filled: vec![0; plan.numeric.len() + plan.categorical.len()],
            unseen_as_missing: vec![0; plan.categorical.len()],
            actions: vec![0; context.spec.map_or(0, |s| s.actions.len())],
            posterior_sum: vec![0.0; context.file.classes.len()],
            feature_bins,
            score_bins,
            ..ChunkStats::default()
        }
    }

    /// Adds another chunk's figures.
    pub fn merge(&mut self, other: &ChunkStats) {
        fn add(a: &mut Vec<u64>, b: &[u64]) {
            if a.len() < b.len() {
                a.resize(b.len(), 0);
            }
            a.iter_mut().zip(b).for_each(|(x, y)| *x += y);
        }
        self.rows_read += other.rows_read;
        self.rows_scored += other.rows_scored;
        self.rejected.iter_mut().zip(&other.rejected).for_each(|(x, y)| *x += y);
        add(&mut self.below_range, &other.below_range);
        add(&mut self.above_range, &other.above_range);
        add(&mut self.filled, &other.filled);
        add(&mut self.unseen_as_missing, &other.unseen_as_missing);
        add(&mut self.actions, &other.actions);
        self.expected_cost += other.expected_cost;
        if self.posterior_sum.len() < other.posterior_sum.len() {
            self.posterior_sum.resize(other.posterior_sum.len(), 0.0);
        }
        self.posterior_sum.iter_mut().zip(&other.posterior_sum).for_each(|(x, y)| *x += y);
        if self.feature_bins.len() < other.feature_bins.len() {
            self.feature_bins.resize(other.feature_bins.len(), Vec::new());
        }
        self.feature_bins.iter_mut().zip(&other.feature_bins).for_each(|(x, y)| add(x, y));
        add(&mut self.score_bins, &other.score_bins);
    }
}

/// What one chunk produced.
#[derive(Debug, Default)]
pub struct ChunkResult {
    /// The output rows, formatted.
    pub output: Vec<u8>,
    /// The reject rows: line within the chunk (0 = its first line) and the
    /// rest of the reject record, formatted.
    pub rejects: Vec<(u64, Vec<u8>)>,
    /// Newlines in the chunk: where the next chunk's lines start.
    pub newlines: u64,
    /// The chunk's figures.
    pub stats: ChunkStats,
    /// Candidates (saving, place) of a ranking pass.
    pub candidates: Vec<(f64, u128)>,
    /// What stops the run, if anything.
    pub fatal: Option<Fatal>,
}

/// What stops a run.
#[derive(Debug)]
pub enum Fatal {
    /// A row that cannot be set aside: its line within the chunk, and why.
    Row(u64, Problem),
    /// Anything else.
    Error(Error),
}

impl Fatal {
    /// The error, with the row's line made absolute.
    pub fn into_error(self, context: &Context<'_>, first_line: u64) -> Error {
        match self {
            Fatal::Row(line, problem) => fatal_error(context, first_line + line, problem),
            Fatal::Error(e) => e,
        }
    }
}

/// A row's place in the file, for ranking: the chunk's index, then the
/// line within it. It orders rows as the file does, and the chunks are
/// the same in every pass.
#[inline]
fn place(chunk: usize, line: u64) -> u128 {
    ((chunk as u128) << 64) | u128::from(line)
}

/// A row-level problem: the reason, the column (if one) and the detail.
#[derive(Debug)]
pub struct Problem {
    reason: RejectReason,
    column: String,
    message: String,
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

/// Parsed rows of a chunk, ready to score.
struct Rows {
    numeric: Vec<f64>,
    numeric_missing: Vec<bool>,
    categorical: Vec<Vec<u32>>,
    text: Vec<u8>,
    text_spans: Vec<(usize, usize)>,
    costs: Vec<f64>,
    lines: Vec<u64>,
}

/// Processes one chunk.
pub fn process(context: &Context<'_>, chunk: &RawChunk, pass: Pass<'_>) -> ChunkResult {
    let plan = context.plan;
    let mut result = ChunkResult { stats: ChunkStats::new(context), ..ChunkResult::default() };
    let mut rows = Rows {
        numeric: Vec::new(),
        numeric_missing: Vec::new(),
        categorical: vec![Vec::new(); plan.categorical.len()],
        text: Vec::new(),
        text_spans: Vec::new(),
        costs: Vec::new(),
        lines: Vec::new(),
    };
    let width = plan.input_width;
    let bytes = chunk.bytes.as_slice();
    let mut fields = crate::records::Fields::new();
    let mut position = 0;
    let mut line = 0u64;
    while let Some(end) = crate::records::record_end(bytes, position, &context.dialect, true) {
        let record = &bytes[position..end.end];
        let record_line = line;
        line += crate::records::count_line_ends(&bytes[position..end.next]);
        position = end.next;
        if record.is_empty() {
            continue;
        }
        // A record cut at the chunk's end inside quotes, in a chunk that
        // does not end the input, was cut by the size cap.
        let oversized = end.oversized || (end.unclosed && !chunk.last);
        result.stats.rows_read += 1;
        let marks = (rows.numeric.len(), rows.numeric_missing.len(), rows.text.len(), rows.text_spans.len());
        let cost_mark = rows.costs.len();
        let parsed = if oversized {
            Err(Problem {
                reason: RejectReason::RecordSize,
                column: String::new(),
                message: crate::data::csv_read::oversized_message(&context.dialect),
            })
        } else {
            parse_row(context, record, &mut fields, &mut rows, &mut result.stats)
        };
        match parsed {
            Ok(()) => {
                rows.lines.push(record_line);
                result.stats.rows_scored += 1;
            }
            Err(problem) => {
                rows.numeric.truncate(marks.0);
                rows.numeric_missing.truncate(marks.1);
                rows.text.truncate(marks.2);
                rows.text_spans.truncate(marks.3);
                rows.costs.truncate(cost_mark);
                let scored = rows.lines.len();
                rows.categorical.iter_mut().for_each(|c| c.truncate(scored));
                let fatal = !context.keep_rejects
                    || (problem.reason == RejectReason::MissingValue && context.missing == MissingPolicy::Error)
                    || (problem.reason == RejectReason::UnseenCategory && context.unseen == UnseenPolicy::Error);
                if fatal {
                    result.fatal = Some(Fatal::Row(record_line, problem));
                    return result;
                }
                let reason = RejectReason::ALL.iter().position(|r| *r == problem.reason).unwrap_or(0);
                result.stats.rejected[reason] += 1;
                if matches!(pass, Pass::Write { .. }) {
                    let mut out = Vec::new();
                    crate::records::push_field(&mut out, problem.column.as_bytes());
                    out.push(b',');
                    out.extend_from_slice(problem.reason.name().as_bytes());
                    out.push(b',');
                    crate::records::push_field(&mut out, problem.message.as_bytes());
                    out.push(b',');
                    crate::records::push_field(&mut out, String::from_utf8_lossy(record).as_bytes());
                    out.push(b'\n');
                    result.rejects.push((record_line, out));
                }
            }
        }
    }
    result.newlines = line;
    if matches!(pass, Pass::Count) {
        return result;
    }
    let n = rows.lines.len();
    let Ok(numeric) = Array2::from_shape_vec((n, width), std::mem::take(&mut rows.numeric)) else {
        result.fatal = Some(Fatal::Error(Error::Usage("internal error: a chunk's inputs did not line up".into())));
        return result;
    };
    let inputs = Inputs { numeric: numeric.view(), categorical: &rows.categorical };
    let mut posteriors = context.file.log_posteriors(&inputs, context.prior);
    posteriors.mapv_inplace(f64::exp);
    let k = context.file.classes.len();
    let costs_of = |r: usize| -> Option<Vec<f64>> {
        let spec = context.spec?;
        let row: Vec<f64> = posteriors.row(r).to_vec();
        let values = &rows.costs[r * plan.cost_columns.len()..(r + 1) * plan.cost_columns.len()];
        Some(spec.expected_costs(&row, &|c| plan.cost_columns.iter().position(|n| n == c).map_or(0.0, |i| values[i])))
    };
    let settled = match pass {
        Pass::Rank { settled, action } => {
            for r in 0..n {
                if let Some(costs) = costs_of(r) {
                    let at = place(chunk.index, rows.lines[r]);
                    if let (_, Some(saving)) = choose(&costs, at, settled, Some(action)) {
                        result.candidates.push((saving, at));
                    }
                }
            }
            return result;
        }
        Pass::Write { settled } => settled,
        Pass::Count => return result,
    };
    let stats = &mut result.stats;
    for r in 0..n {
        for (c, total) in stats.posterior_sum.iter_mut().enumerate().take(k) {
            *total += posteriors[(r, c)];
        }
    }
    // Range and drift figures of the scored rows, one pass over them.
    let features = plan.numeric.len();
    let numeric_bins: Vec<Option<(usize, &[f64])>> = match &context.drift {
        Some((reference, slots)) => {
            slots.iter().take(features).map(|slot| slot.map(|f| (f, reference.features[f].edges.as_slice()))).collect()
        }
        None => vec![None; features],
    };
    let values = numeric.as_slice().unwrap_or(&[]);
    for r in 0..n {
        let row = &values[r * width..r * width + features];
        let missing = &rows.numeric_missing[r * features..(r + 1) * features];
        for (j, feature) in plan.numeric.iter().enumerate() {
            let x = row[j];
            if !missing[j] {
                stats.below_range[j] += u64::from(x < feature.min);
                stats.above_range[j] += u64::from(x > feature.max);
            }
            if let Some((f, edges)) = numeric_bins[j] {
                let bin = if missing[j] { edges.len() + 1 } else { value_bin(edges, x) };
                if let Some(b) = stats.feature_bins[f].get_mut(bin) {
                    *b += 1;
                }
            }
        }
    }
    if let Some((reference, slots)) = &context.drift {
        for (c, slot) in slots.iter().skip(plan.numeric.len()).enumerate() {
            let Some(f) = *slot else { continue };
            let bins = &mut stats.feature_bins[f];
            let other = bins.len().saturating_sub(1);
            for &code in &rows.categorical[c] {
                if let Some(b) = bins.get_mut((code as usize).min(other)) {
                    *b += 1;
                }
            }
        }
        // The score at the model's own prior, as the training deciles were.
        if let Some(score) = &reference.score {
            let own: Vec<f64> = if context.prior == context.file.prior.as_slice() {
                (0..n).map(|r| posteriors[(r, context.positive)]).collect()
            } else {
                let lp = context.file.log_posteriors(&inputs, &context.file.prior);
                (0..n).map(|r| lp[(r, context.positive)].exp()).collect()
            };
            for s in own {
                if let Some(b) = stats.score_bins.get_mut(value_bin(&score.edges, s)) {
                    *b += 1;
                }
            }
        }
    }
    let reasons = context.reasons.map(|codes| codes.reasons(context.file, &inputs));
    let texts = plan.text_names.len();
    let out = &mut result.output;
    for r in 0..n {
        let spans = &rows.text_spans[r * texts..(r + 1) * texts];
        let mut first = true;
        let mut separate = |out: &mut Vec<u8>| {
            if !first {
                out.push(b',');
            }
            first = false;
        };
        for &(a, b) in &spans[..plan.id_count] {
            separate(out);
            crate::records::push_field(out, &rows.text[a..b]);
        }
        for c in 0..k {
            separate(out);
            crate::format::push_number(out, posteriors[(r, c)]);
        }
        if let (Some(spec), Some(costs)) = (context.spec, costs_of(r)) {
            let (action, _) = choose(&costs, place(chunk.index, rows.lines[r]), settled, None);
            stats.actions[action] += 1;
            stats.expected_cost += costs[action];
            separate(out);
            crate::records::push_field(out, spec.actions[action].name.as_bytes());
            separate(out);
            crate::format::push_number(out, costs[action]);
        }
        if let (Some(codes), Some(reasons)) = (context.reasons, &reasons) {
            for i in 0..codes.count {
                separate(out);
                if let Some(&f) = reasons[r].get(i) {
                    crate::records::push_field(out, codes.features[f].as_bytes());
                }
            }
        }
        for &(a, b) in &spans[plan.id_count..] {
            separate(out);
            crate::records::push_field(out, &rows.text[a..b]);
        }
        out.push(b'\n');
    }
    result
}

/// The error that stops a run at a row it cannot set aside.
fn fatal_error(context: &Context<'_>, line: u64, problem: Problem) -> Error {
    let at = Position { path: context.path.to_string(), line };
    match problem.reason {
        RejectReason::UnseenCategory if context.unseen == UnseenPolicy::Error => {
            let known = context
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
        RejectReason::MissingValue if context.missing == MissingPolicy::Error => Error::UnfillableMissing {
            at,
            column: problem.column,
            reason: "the missing-value policy is 'error' (--missing impute fills it with the training median, --missing drop-rows sets the row aside)".into(),
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
fn parse_row(
    context: &Context<'_>,
    record: &[u8],
    fields: &mut crate::records::Fields,
    rows: &mut Rows,
    stats: &mut ChunkStats,
) -> Result<(), Problem> {
    let plan = context.plan;
    let width = plan.fields.len();
    let delimiter = context.dialect.delimiter;
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
                    if !context.na.may_be_missing(first) {
                        if let Some((value, used)) = scan_f64(&record[position..]) {
                            let end = position + used;
                            if end == n || record[end] == delimiter {
                                rows.numeric[slots.numeric + j] = value;
                                position = end + 1;
                                continue;
                            }
                        }
                    }
                }
            }
            let end = memchr::memchr(delimiter, &record[position..]).map_or(n, |o| position + o);
            take_field(context, i, &record[position..end], rows, &slots, &mut filled, &mut unseen)?;
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
            take_field(context, i, field, rows, &slots, &mut filled, &mut unseen)?;
        }
    }
    for f in filled {
        stats.filled[f] += 1;
    }
    for c in unseen {
        stats.unseen_as_missing[c] += 1;
    }
    Ok(())
}

/// One field of a row, by what the plan says it feeds.
fn take_field(
    context: &Context<'_>,
    i: usize,
    field: &[u8],
    rows: &mut Rows,
    slots: &Slots,
    filled: &mut Vec<usize>,
    unseen: &mut Vec<usize>,
) -> Result<(), Problem> {
    let plan = context.plan;
    let (row_start, missing_start, text_start, cost_start) = (slots.numeric, slots.missing, slots.text, slots.cost);
    let usage = &plan.fields[i];
    let field = trim(field);
    let column = || plan.names[i].clone();
    if let Some(j) = usage.numeric {
        let feature = &plan.numeric[j];
        if context.na.is_missing(field) {
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
                Some(x) if x.is_finite() => rows.numeric[row_start + j] = x,
                Some(_) => {
                    return Err(Problem {
                        reason: RejectReason::NotFinite,
                        column: column(),
                        message: format!("'{}' is not a finite number", String::from_utf8_lossy(field)),
                    })
                }
                None => {
                    return Err(Problem {
                        reason: RejectReason::NotANumber,
                        column: column(),
                        message: format!("'{}' is not a number", String::from_utf8_lossy(field)),
                    })
                }
            }
        }
    }
    if let Some(c) = usage.categorical {
        let feature = &plan.categorical[c];
        let code = if context.na.is_missing(field) {
            feature.missing_code.map(|m| (m, false))
        } else {
            match feature.codes.get(field) {
                Some(&code) => Some((code, true)),
                None => match context.unseen {
                    UnseenPolicy::Missing => {
                        unseen.push(c);
                        // Counted as unseen, not as a missing value filled.
                        feature.missing_code.map(|m| (m, true))
                    }
                    _ => {
                        return Err(Problem {
                            reason: RejectReason::UnseenCategory,
                            column: column(),
                            message: String::from_utf8_lossy(field).into_owned(),
                        })
                    }
                },
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
        if std::str::from_utf8(field).is_err() {
            return Err(Problem {
                reason: RejectReason::Encoding,
                column: column(),
                message: "the value is not valid UTF-8".into(),
            });
        }
        let start = rows.text.len();
        rows.text.extend_from_slice(field);
        rows.text_spans[text_start + t] = (start, rows.text.len());
    }
    if let Some(slot) = usage.cost {
        match parse_f64(field).filter(|x| x.is_finite()) {
            Some(x) => rows.costs[cost_start + slot] = x,
            None => {
                return Err(Problem {
                    reason: RejectReason::CostValue,
                    column: column(),
                    message: format!(
                        "the costs read this column, and '{}' is not a finite number",
                        String::from_utf8_lossy(field)
                    ),
                })
            }
        }
    }
    Ok(())
}
