//! The work on one chunk: records split into fields, each row either
//! parsed into model inputs or set aside with its reason, then scored,
//! decided and formatted — everything that depends only on the chunk's own
//! rows, so chunks run in parallel and their outputs join in file order.

use ndarray::Array2;

use crate::apply::row::{read_rows, Problem, RowCounts, RowRules, Rows};
use crate::batch::capacity::{choose, Settled};
use crate::batch::reasons::ReasonCodes;
use crate::batch::source::RawChunk;
use crate::data::Inputs;
use crate::decide::CostSpec;
use crate::error::Error;
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
    /// The schema's rules for turning records into model inputs.
    pub(crate) rules: RowRules<'a>,
    pub(crate) file: &'a ModelFile,
    pub(crate) prior: &'a [f64],
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
    pub rejected: [u64; crate::apply::RejectReason::ALL.len()],
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
        let plan = context.rules.plan;
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

    /// Adds the counts of a chunk's reading.
    fn add_counts(&mut self, counts: &RowCounts) {
        self.rows_read += counts.rows_read;
        self.rows_scored += counts.rows_kept;
        self.rejected.iter_mut().zip(&counts.rejected).for_each(|(x, y)| *x += y);
        self.filled.iter_mut().zip(&counts.filled).for_each(|(x, y)| *x += y);
        self.unseen_as_missing.iter_mut().zip(&counts.unseen_as_missing).for_each(|(x, y)| *x += y);
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
            Fatal::Row(line, problem) => context.rules.error(first_line + line, problem),
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

/// Processes one chunk.
pub fn process(context: &Context<'_>, chunk: &RawChunk, pass: Pass<'_>) -> ChunkResult {
    let plan = context.rules.plan;
    let mut result = ChunkResult { stats: ChunkStats::new(context), ..ChunkResult::default() };
    let mut counts = RowCounts::new(plan);
    let mut rows = Rows::new(plan);
    let width = plan.input_width;
    let bytes = chunk.bytes.as_slice();
    let rules = &context.rules;
    let write = matches!(pass, Pass::Write { .. });
    let mut on_reject = |line: u64, problem: &Problem, record: &[u8]| {
        if write {
            result.rejects.push((line, crate::apply::row::reject_fields(problem, record)));
        }
    };
    let read = read_rows(rules, bytes, chunk.last, &mut rows, &mut counts, &mut on_reject);
    result.stats.add_counts(&counts);
    let line = match read {
        Ok(lines) => lines,
        Err((line, problem)) => {
            result.fatal = Some(Fatal::Row(line, problem));
            return result;
        }
    };
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
