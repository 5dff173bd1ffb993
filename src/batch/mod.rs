//! The batch scoring job: a model applied to a stream of rows in bounded
//! memory, every input row accounted for.
//!
//! - [`source`]: the input (file, `.gz`, stdin) cut into chunks of whole
//!   records;
//! - [`plan`]: the header checked against the model's schema before any row
//!   is read;
//! - [`chunk`]: one chunk parsed, scored, decided and formatted (chunks run
//!   in parallel; their outputs join in file order);
//! - [`capacity`]: capacities settled in passes, exactly as the in-memory
//!   rule settles them;
//! - [`drift`]: population stability of the features and of the score;
//! - [`reasons`]: per-row reason codes.
//!
//! A row that cannot be scored goes to the reject file with its line,
//! column, reason and raw text; without a reject file it stops the run.
//! Outputs are written beside their targets and renamed into place only
//! when the run succeeds.

pub mod capacity;
pub mod chunk;
pub mod reasons;
pub mod source;

use std::collections::BTreeMap;
use std::path::PathBuf;

use serde::Serialize;

use crate::apply::plan::{output_columns, OutputShape, Plan, PlanRequest};
use crate::apply::row::{Policies, RowRules, REJECT_HEADER};
use crate::apply::{RejectReason, UnseenPolicy};
use crate::batch::capacity::{limit, limited_actions, Ranking, Settled};
use crate::batch::chunk::{ChunkResult, ChunkStats, Context, Pass};
use crate::batch::reasons::ReasonCodes;
use crate::batch::source::{open_chunked, shown_path, ChunkReader, RawChunk};
use crate::data::options::MissingPolicy;
use crate::decide::{Capacity, CostSpec};
use crate::error::{Error, Part, Result, Setting};
use crate::io::AtomicFile;
use crate::model::drift;
use crate::train::file::ModelFile;

/// Default chunk size: large enough that per-chunk overhead vanishes,
/// small enough that a few chunks per thread stay in flight.
pub const DEFAULT_CHUNK_BYTES: usize = 1 << 20;

/// The most worker threads a run starts: far more than any machine's cores,
/// few enough that starting them is quick.
pub const MAX_THREADS: usize = 1024;

/// The largest chunk asked for is taken as this (1 GiB).
pub const MAX_CHUNK_BYTES: usize = 1 << 30;

/// A scoring job.
#[derive(Debug, Clone)]
pub struct ScoreJob {
    /// The data (`-` for stdin).
    pub data: PathBuf,
    /// The prior to score with.
    pub prior: Vec<f64>,
    /// The costs, if decisions are wanted.
    pub costs: Option<CostSpec>,
    /// Columns passed through first.
    pub ids: Vec<String>,
    /// Columns passed through last.
    pub keep: Vec<String>,
    /// Field delimiter.
    pub delimiter: u8,
    /// Missing-value tokens (default: the training file's).
    pub na_tokens: Option<Vec<String>>,
    /// Unseen categories.
    pub unseen: UnseenPolicy,
    /// Missing values (default: the training policy).
    pub missing: Option<MissingPolicy>,
    /// Reason codes per row (0 for none).
    pub reasons: usize,
    /// Worker threads (0: one per core).
    pub threads: usize,
    /// Target chunk size in bytes.
    pub chunk_bytes: usize,
    /// The longest record, in bytes (see [`crate::records::Dialect`]).
    pub max_record_bytes: usize,
    /// How the model file stood against its checksum when loaded
    /// (recorded in the summary).
    pub model_integrity: crate::train::file::Integrity,
}

impl ScoreJob {
    /// How the input's records are delimited.
    pub fn dialect(&self) -> crate::records::Dialect {
        crate::records::Dialect { delimiter: self.delimiter, max_record_bytes: self.max_record_bytes }
    }
}

/// Where the job writes.
#[derive(Debug, Clone)]
pub struct Outputs {
    /// The scores (`-` for stdout).
    pub scores: PathBuf,
    /// The reject file, if rows may be set aside.
    pub rejects: Option<PathBuf>,
    /// The summary as JSON, if wanted.
    pub summary: Option<PathBuf>,
}

impl Outputs {
    /// Refuses two outputs on one path, an output on the input, and two
    /// outputs on stdout.
    fn check(&self, data: &std::path::Path) -> Result<()> {
        let named = self.named();
        crate::io::check_outputs(&[("the data file".into(), data)], &named)?;
        let on_stdout: Vec<&Part> = named.iter().filter(|(_, p)| p.as_os_str() == "-").map(|(s, _)| s).collect();
        if let [first, second, ..] = on_stdout.as_slice() {
            return Err(Error::invalid(crate::error::message![
                (*first).clone(),
                " and ",
                (*second).clone(),
                " name the same file, -"
            ]));
        }
        Ok(())
    }

    /// Locks the outputs for the run (see [`crate::io::claim`]).
    fn claim(&self) -> Result<crate::io::OutputClaim> {
        let paths: Vec<&std::path::Path> = self.named().into_iter().map(|(_, p)| p).collect();
        crate::io::claim_outputs(&paths)
    }

    /// The outputs given, each with the setting that names it.
    fn named(&self) -> Vec<(Part, &std::path::Path)> {
        let mut named: Vec<(Part, &std::path::Path)> = vec![(Setting::Scores.into(), self.scores.as_path())];
        named.extend(self.rejects.iter().map(|p| (Setting::Rejects.into(), p.as_path())));
        named.extend(self.summary.iter().map(|p| (Setting::Summary.into(), p.as_path())));
        named
    }
}

/// Progress so far: rows read and input bytes consumed.
pub type Progress<'a> = &'a (dyn Fn(u64, u64) + Sync);

/// One numeric feature's values outside the training range.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OutOfRange {
    /// The feature.
    pub feature: String,
    /// Values below the training minimum.
    pub below: u64,
    /// Values above the training maximum.
    pub above: u64,
}

/// A population stability figure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Stability {
    /// The feature (absent for the score).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub feature: Option<String>,
    /// The population stability index.
    pub psi: f64,
    /// stable, watch or act.
    pub band: String,
}

/// Drift of the scored rows from the training rows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Drift {
    /// The score (the positive class's posterior at the model's prior);
    /// absent when the model has no training score distribution (fitted
    /// from aggregates).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub score: Option<Stability>,
    /// Each feature, in the schema's order.
    pub features: Vec<Stability>,
}

/// What a run did, for stderr and `--summary`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    /// The input as named.
    pub input: String,
    /// The family of the model.
    pub family: String,
    /// Data records read (blank lines are not records).
    pub rows_read: u64,
    /// Rows scored and written.
    pub rows_scored: u64,
    /// Rows set aside.
    pub rows_rejected: u64,
    /// Rows set aside, by reason (reasons with none are left out).
    pub rejected_by_reason: BTreeMap<String, u64>,
    /// rows_rejected / rows_read.
    pub reject_rate: f64,
    /// The prior scored with.
    pub prior: BTreeMap<String, f64>,
    /// Mean posterior of each class over the scored rows.
    pub mean_posterior: BTreeMap<String, f64>,
    /// Rows per action, when costs are given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub actions: Option<BTreeMap<String, u64>>,
    /// Total expected cost of the chosen actions, when costs are given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub total_expected_cost: Option<f64>,
    /// Mean expected cost per scored row, when costs are given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mean_expected_cost: Option<f64>,
    /// Passes over the input (more than one when capacities are settled).
    pub passes: usize,
    /// Missing values filled, per feature (features with none left out).
    pub filled_missing: BTreeMap<String, u64>,
    /// Unseen categories taken as missing, per feature (`--unseen missing`).
    pub unseen_as_missing: BTreeMap<String, u64>,
    /// Numeric values outside the training range, per feature.
    pub out_of_range: Vec<OutOfRange>,
    /// Drift, when the model holds the training distribution and rows were scored.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub drift: Option<Drift>,
    /// The reason codes' reference point, per feature, when asked for.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reason_reference: Option<BTreeMap<String, String>>,
    /// How the model file stood against its checksum when loaded:
    /// `verified`, `no-checksum` (format version 1) or `edit-accepted`.
    pub model_integrity: crate::train::file::Integrity,
    /// Temporary files of earlier, stopped runs removed beside the outputs.
    pub stale_temporaries_removed: Vec<PathBuf>,
    /// The usual caution.
    pub caution: String,
}

/// Runs `job` with `file`, writing `outputs`; the summary comes back.
pub fn run(file: &ModelFile, job: &ScoreJob, outputs: &Outputs, progress: Progress<'_>) -> Result<Summary> {
    let shown = shown_path(&job.data);
    outputs.check(&job.data)?;
    // Held until the outputs are in place: a second run refuses meanwhile.
    let claim = outputs.claim()?;
    let missing = job.missing.unwrap_or(file.schema.missing_policy);
    crate::apply::row::check_place_for_rejects(job.unseen, job.missing, outputs.rejects.is_some())?;
    let limited = job.costs.as_ref().map(limited_actions).unwrap_or_default();
    let regular_file = std::fs::metadata(&job.data).is_ok_and(|m| m.is_file());
    if !limited.is_empty() && (job.data.as_os_str() == "-" || !regular_file) {
        return Err(Error::Usage(
            "a capacity in the costs file needs every row before any is assigned, so the data is read more than once; give it as a regular file, not on stdin or a pipe"
                .into(),
        ));
    }
    let reason_codes = match job.reasons {
        0 => None,
        k => Some(ReasonCodes::new(file, k)?),
    };
    let cost_columns = job.costs.as_ref().map(|s| s.columns()).unwrap_or_default();
    if let Some(spec) = &job.costs {
        file.check_cost_columns(spec, &shown)?;
    }
    let request = PlanRequest {
        ids: job.ids.clone(),
        keep: job.keep.clone(),
        cost_columns,
        missing,
        input_bounds: file.input_bounds(),
    };
    let (names, first_reader) = open_input(job, &shown)?;
    // The first pass reads on from the header already read (stdin can be
    // read only once); later passes (files only) open the file again.
    let mut first_reader = Some(first_reader);
    let mut reader = move || -> Result<ChunkReader> {
        match first_reader.take() {
            Some(r) => Ok(r),
            None => open_input(job, &shown_path(&job.data)).map(|(_, r)| r),
        }
    };
    let plan = Plan::new(&shown, &names, &file.schema, &request)?;
    let shape = OutputShape {
        classes: &file.classes,
        decisions: job.costs.is_some(),
        reasons: reason_codes.as_ref().map_or(0, |c| c.count),
        reject_reason: false,
    };
    let output_names = output_columns(&plan.text_names[..plan.id_count], shape, &plan.text_names[plan.id_count..])?;
    let positive = file.positive_index();
    let drift = file.drift_reference.as_ref().map(|reference| {
        let slots = plan
            .numeric
            .iter()
            .map(|f| &f.name)
            .chain(plan.categorical.iter().map(|f| &f.name))
            .map(|name| reference.features.iter().position(|f| f.feature == *name))
            .collect();
        (reference, slots)
    });
    let policies = Policies { unseen: job.unseen, missing, keep_rejects: outputs.rejects.is_some() };
    let na_tokens = job.na_tokens.as_ref().unwrap_or(&file.schema.na_tokens);
    let context = Context {
        rules: RowRules::new(&shown, &plan, job.dialect(), na_tokens, policies),
        file,
        prior: &job.prior,
        spec: job.costs.as_ref(),
        reasons: reason_codes.as_ref(),
        drift,
        positive,
    };
    if job.threads > MAX_THREADS {
        return Err(Error::invalid(crate::error::message![
            Setting::Threads,
            format!(" must be at most {MAX_THREADS} (0: one per core); got {}", job.threads)
        ]));
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(job.threads)
        .build()
        .map_err(|e| Error::Usage(format!("the worker threads could not be started: {e}")))?;
    let no_progress = |_: u64, _: u64| {};

    // Capacities first: one pass per limited action (and one to count the
    // rows when a limit is a share of them).
    let mut passes = 0;
    let mut settled: Vec<Settled> = Vec::new();
    let mut scored_rows: Option<u64> = None;
    for &(action, capacity) in &limited {
        if scored_rows.is_none() && matches!(capacity, Capacity::Share(_)) {
            let (stats, _) = scan(reader()?, &context, &pool, Pass::Count, None, &no_progress)?;
            passes += 1;
            scored_rows = Some(stats.rows_scored);
        }
        let rows = scored_rows.unwrap_or(0);
        let mut ranking = Ranking::new(limit(capacity, rows));
        let (stats, _) = scan(
            reader()?,
            &context,
            &pool,
            Pass::Rank { settled: &settled, action },
            Some(&mut |result: &ChunkResult, _: &[u8]| {
                for &(saving, line) in &result.candidates {
                    ranking.offer(saving, line);
                }
                Ok(())
            }),
            &no_progress,
        )?;
        passes += 1;
        scored_rows = Some(stats.rows_scored);
        settled.push(Settled { action, cut: ranking.cut() });
    }

    // The pass that writes.
    let mut scores = AtomicFile::create(&outputs.scores)?;
    let mut rejects = match &outputs.rejects {
        Some(path) => Some(AtomicFile::create(path)?),
        None => None,
    };
    scores.write_all(&output_header(&output_names))?;
    if let Some(r) = rejects.as_mut() {
        r.write_all(REJECT_HEADER.as_bytes())?;
    }
    let (stats, _) = scan(
        reader()?,
        &context,
        &pool,
        Pass::Write { settled: &settled },
        Some(&mut |result: &ChunkResult, reject_lines: &[u8]| {
            scores.write_all(&result.output)?;
            if let Some(r) = rejects.as_mut() {
                r.write_all(reject_lines)?;
            }
            Ok(())
        }),
        progress,
    )?;
    passes += 1;
    let mut summary = summarise(file, job, &plan, &context, &stats, passes, reason_codes.as_ref());
    summary.stale_temporaries_removed = claim.stale_removed.clone();
    let mut files = vec![scores];
    files.extend(rejects);
    if let Some(path) = &outputs.summary {
        let text = serde_json::to_string_pretty(&summary)
            .map_err(|e| Error::io(path.display().to_string(), std::io::Error::other(e)))?;
        let mut json = AtomicFile::create(path)?;
        json.write_all(text.as_bytes())?;
        json.write_all(b"\n")?;
        files.push(json);
    }
    AtomicFile::commit_all(files)?;
    Ok(summary)
}

/// Opens the input and reads its header: the names, and the reader
/// positioned at the first record.
fn open_input(job: &ScoreJob, shown: &str) -> Result<(Vec<String>, ChunkReader)> {
    let mut reader = open_chunked(&job.data, job.chunk_bytes.clamp(1, MAX_CHUNK_BYTES), job.dialect())?;
    let Some(header) = reader.header()? else {
        return Err(Error::EmptyFile { path: shown.to_string() });
    };
    let names = crate::data::csv_read::header_names(shown, &header, job.delimiter, 1)?;
    Ok((names, reader))
}

/// The output's header line.
fn output_header(names: &[String]) -> Vec<u8> {
    let mut line = Vec::new();
    for (i, name) in names.iter().enumerate() {
        if i > 0 {
            line.push(b',');
        }
        crate::records::push_field(&mut line, name.as_bytes());
    }
    line.push(b'\n');
    line
}

/// How far back a mapped chunk's release reaches (see
/// [`source::ChunkBytes::release`]): more than the kernel's fault-around
/// window (64 KiB by default).
const RELEASE_MARGIN: usize = 256 * 1024;

/// A callback given each chunk's result, in file order, and its reject
/// records with their lines.
type Consumer<'a> = &'a mut dyn FnMut(&ChunkResult, &[u8]) -> Result<()>;

/// One pass over the input: chunks are read on their own thread, processed
/// in parallel, and handed to `consume` in file order.
fn scan(
    reader: ChunkReader,
    context: &Context<'_>,
    pool: &rayon::ThreadPool,
    pass: Pass<'_>,
    consume: Option<Consumer<'_>>,
    progress: Progress<'_>,
) -> Result<(ChunkStats, u64)> {
    let mut reader = reader;
    let mut joiner = Joiner {
        context,
        consume,
        first_line: reader.first_data_line(),
        rejects: Vec::new(),
        total: ChunkStats::default(),
        bytes: 0,
    };
    if pool.current_num_threads() == 1 {
        // One thread does everything — read, score, write — so that a
        // single-thread run is what it says.
        while let Some(raw) = reader.next_chunk()? {
            let result = pool.install(|| chunk::process(context, &raw, pass));
            joiner.take(result, &raw)?;
            progress(joiner.total.rows_read, joiner.bytes);
        }
        return Ok((joiner.total, joiner.bytes));
    }
    let queue = 2 * pool.current_num_threads();
    // The reader owns its thread and is not waited for on failure: a
    // producer that stalls (a pipe left open) cannot hold an error back.
    let (sender, receiver) = std::sync::mpsc::sync_channel::<Result<RawChunk>>(queue);
    std::thread::spawn(move || loop {
        match reader.next_chunk() {
            Ok(Some(chunk)) => {
                if sender.send(Ok(chunk)).is_err() {
                    return;
                }
            }
            Ok(None) => return,
            Err(e) => {
                let _ = sender.send(Err(e));
                return;
            }
        }
    });
    {
        // Chunks go to the pool as they arrive; results are put back in
        // file order as they finish, so no worker waits for a batch.
        let limit = 4 * pool.current_num_threads();
        type Done = (std::thread::Result<ChunkResult>, RawChunk);
        let (done_sender, done) = std::sync::mpsc::channel::<Done>();
        let mut panicked = None;
        let mut finished: BTreeMap<usize, (ChunkResult, RawChunk)> = BTreeMap::new();
        let mut next = 0usize;
        let mut in_flight = 0usize;
        let mut exhausted = false;
        let mut failure: Option<Error> = None;
        pool.in_place_scope(|scope| loop {
            // Finished chunks waiting for an earlier one count against the
            // limit too, so a slow chunk cannot let memory grow.
            while failure.is_none() && !exhausted && in_flight + finished.len() < limit {
                match receiver.recv() {
                    Ok(Ok(chunk)) => {
                        in_flight += 1;
                        let sender = done_sender.clone();
                        scope.spawn(move |_| {
                            // A panic is caught and sent on, so the loop
                            // below never waits for a result that will not come.
                            let result = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                                chunk::process(context, &chunk, pass)
                            }));
                            let _ = sender.send((result, chunk));
                        });
                    }
                    Ok(Err(e)) => failure = Some(e),
                    Err(_) => exhausted = true,
                }
            }
            if in_flight == 0 {
                break;
            }
            let Ok((result, raw)) = done.recv() else { break };
            in_flight -= 1;
            let result = match result {
                Ok(result) => result,
                Err(payload) => {
                    panicked.get_or_insert(payload);
                    failure.get_or_insert(Error::Usage("internal error in a scoring worker".into()));
                    continue;
                }
            };
            finished.insert(raw.index, (result, raw));
            while let Some((result, raw)) = finished.remove(&next) {
                next += 1;
                if failure.is_none() {
                    if let Err(e) = joiner.take(result, &raw) {
                        failure = Some(e);
                    }
                } else {
                    raw.bytes.release(RELEASE_MARGIN);
                }
            }
            progress(joiner.total.rows_read, joiner.bytes);
        });
        drop(receiver);
        if let Some(payload) = panicked {
            // A bug: let it reach the binary's handler (exit code 4).
            std::panic::resume_unwind(payload);
        }
        if let Some(e) = failure {
            return Err(e);
        }
    }
    Ok((joiner.total, joiner.bytes))
}

/// Takes chunk results in file order: settles their line numbers, hands
/// them on, sums their figures and gives their pages back.
struct Joiner<'a, 'c> {
    context: &'a Context<'a>,
    consume: Option<Consumer<'c>>,
    first_line: u64,
    rejects: Vec<u8>,
    total: ChunkStats,
    bytes: u64,
}

impl Joiner<'_, '_> {
    fn take(&mut self, mut result: ChunkResult, raw: &RawChunk) -> Result<()> {
        raw.bytes.release(RELEASE_MARGIN);
        if let Some(fatal) = result.fatal.take() {
            return Err(fatal.into_error(self.context, self.first_line));
        }
        self.rejects.clear();
        for (line, rest) in &result.rejects {
            crate::apply::row::push_reject(&mut self.rejects, self.first_line + line, rest);
        }
        if let Some(consume) = self.consume.as_mut() {
            consume(&result, &self.rejects)?;
        }
        self.first_line += result.newlines;
        self.total.merge(&result.stats);
        self.bytes += raw.bytes.as_slice().len() as u64;
        Ok(())
    }
}

fn summarise(
    file: &ModelFile,
    job: &ScoreJob,
    plan: &Plan,
    context: &Context<'_>,
    stats: &ChunkStats,
    passes: usize,
    reason_codes: Option<&ReasonCodes>,
) -> Summary {
    let rows_rejected: u64 = stats.rejected.iter().sum();
    let per_row = |x: f64| if stats.rows_scored == 0 { f64::NAN } else { x / stats.rows_scored as f64 };
    let named = |values: &[f64]| file.classes.iter().cloned().zip(values.iter().copied()).collect();
    let mean_posterior: Vec<f64> = file
        .classes
        .iter()
        .enumerate()
        .map(|(c, _)| per_row(stats.posterior_sum.get(c).copied().unwrap_or(0.0)))
        .collect();
    let feature_names: Vec<&String> =
        plan.numeric.iter().map(|f| &f.name).chain(plan.categorical.iter().map(|f| &f.name)).collect();
    let drift = context.drift.as_ref().and_then(|(reference, _)| {
        let score = match &reference.score {
            Some(bins) => Some(drift::psi(&bins.shares, &stats.score_bins)?),
            None => None,
        };
        let features = reference
            .features
            .iter()
            .zip(&stats.feature_bins)
            .filter_map(|(f, counts)| {
                drift::psi(&f.shares, counts).map(|psi| Stability {
                    feature: Some(f.feature.clone()),
                    psi,
                    band: drift::band(psi).into(),
                })
            })
            .collect();
        let score = score.map(|psi| Stability { feature: None, psi, band: drift::band(psi).into() });
        Some(Drift { score, features })
    });
    Summary {
        input: shown_path(&job.data),
        family: file.family.name().into(),
        rows_read: stats.rows_read,
        rows_scored: stats.rows_scored,
        rows_rejected,
        rejected_by_reason: RejectReason::ALL
            .iter()
            .zip(&stats.rejected)
            .filter(|(_, &n)| n > 0)
            .map(|(r, &n)| (r.name().to_string(), n))
            .collect(),
        reject_rate: if stats.rows_read == 0 { 0.0 } else { rows_rejected as f64 / stats.rows_read as f64 },
        prior: named(&job.prior),
        mean_posterior: named(&mean_posterior),
        actions: job
            .costs
            .as_ref()
            .map(|spec| spec.actions.iter().zip(&stats.actions).map(|(a, &n)| (a.name.clone(), n)).collect()),
        total_expected_cost: job.costs.as_ref().map(|_| stats.expected_cost),
        mean_expected_cost: job.costs.as_ref().map(|_| per_row(stats.expected_cost)),
        passes,
        filled_missing: feature_names
            .iter()
            .zip(&stats.filled)
            .filter(|(_, &n)| n > 0)
            .map(|(f, &n)| ((*f).clone(), n))
            .collect(),
        unseen_as_missing: plan
            .categorical
            .iter()
            .zip(&stats.unseen_as_missing)
            .filter(|(_, &n)| n > 0)
            .map(|(f, &n)| (f.name.clone(), n))
            .collect(),
        out_of_range: plan
            .numeric
            .iter()
            .enumerate()
            .map(|(j, f)| OutOfRange {
                feature: f.name.clone(),
                below: stats.below_range.get(j).copied().unwrap_or(0),
                above: stats.above_range.get(j).copied().unwrap_or(0),
            })
            .collect(),
        drift,
        reason_reference: reason_codes.map(|codes| codes.reference_text().into_iter().collect()),
        model_integrity: job.model_integrity,
        stale_temporaries_removed: Vec::new(),
        caution: crate::CAUTION.to_string(),
    }
}
