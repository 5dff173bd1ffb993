//! A whole file read against a training schema, held in memory: the same
//! header check, fills, unseen-level handling and reject reasons as the
//! streaming job (both go through [`crate::apply::row::read_rows`]), for
//! work that needs every row at once (`shift`).
//!
//! Every column the model needs must be present (an error names the first
//! one missing, before any row is read); other columns are ignored, and
//! columns may come in any order.

use ndarray::Array2;

use crate::apply::plan::{Plan, PlanRequest};
use crate::apply::row::{read_rows, reject_fields, Policies, RowCounts, RowRules, Rows};
use crate::apply::UnseenPolicy;
use crate::data::dataset::Inputs;
use crate::data::options::MissingPolicy;
use crate::error::{Error, Result};
use crate::records::Dialect;
use crate::train::file::ModelFile;

/// How a file to score is read.
#[derive(Debug, Clone)]
pub struct ScoringRequest {
    /// Identifier columns kept with each row.
    pub ids: Vec<String>,
    /// How records are delimited.
    pub dialect: Dialect,
    /// Missing-value tokens; `None`: the training file's.
    pub na_tokens: Option<Vec<String>>,
    /// Missing values; `None`: the training policy.
    pub missing: Option<MissingPolicy>,
    /// Unseen categories.
    pub unseen: UnseenPolicy,
    /// Rows with a problem are set aside (kept in [`ScoringData::rejects`])
    /// instead of stopping the reading.
    pub keep_rejects: bool,
}

impl Default for ScoringRequest {
    fn default() -> Self {
        ScoringRequest {
            ids: Vec::new(),
            dialect: Dialect::default(),
            na_tokens: None,
            missing: None,
            unseen: UnseenPolicy::Error,
            keep_rejects: false,
        }
    }
}

/// Rows ready for a model trained on the schema.
#[derive(Debug, Clone)]
pub struct ScoringData {
    /// Model inputs, one row per kept record (indicator columns included).
    pub numeric: Array2<f64>,
    /// Categorical codes in the schema's levels.
    pub categorical: Vec<Vec<u32>>,
    /// Identifier columns: (name, values).
    pub ids: Vec<(String, Vec<String>)>,
    /// Missing values filled, per column (columns with none left out).
    pub imputed: Vec<(String, u64)>,
    /// Rows read, kept and set aside.
    pub counts: RowCounts,
    /// Rows set aside, in file order: their line and the reject file's
    /// other fields (`column,reason,message,row` and a line end).
    pub rejects: Vec<(u64, Vec<u8>)>,
    /// Each kept row's line in the file.
    pub lines: Vec<u64>,
}

impl ScoringData {
    /// The model inputs.
    pub fn inputs(&self) -> Inputs<'_> {
        Inputs { numeric: self.numeric.view(), categorical: &self.categorical }
    }

    /// Number of rows kept.
    pub fn rows(&self) -> usize {
        self.numeric.nrows()
    }
}

/// Reads `path` (`-` for stdin) for scoring with the model of `file`.
pub fn read_for_scoring(path: &std::path::Path, file: &ModelFile, request: &ScoringRequest) -> Result<ScoringData> {
    let shown = if path.as_os_str() == "-" { "<stdin>".to_string() } else { path.display().to_string() };
    let bytes = if path.as_os_str() == "-" {
        let mut bytes = Vec::new();
        std::io::Read::read_to_end(&mut std::io::stdin(), &mut bytes).map_err(|e| Error::io(&shown, e))?;
        bytes
    } else {
        std::fs::read(path).map_err(|e| Error::io(&shown, e))?
    };
    read_bytes_for_scoring(&shown, &bytes, file, request)
}

/// [`read_for_scoring`] on bytes held in memory; `path` is only used in
/// messages.
pub fn read_bytes_for_scoring(
    path: &str,
    bytes: &[u8],
    file: &ModelFile,
    request: &ScoringRequest,
) -> Result<ScoringData> {
    let schema = &file.schema;
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    let (names, data_start, first_line) = crate::data::csv_read::read_header(path, bytes, &request.dialect)?;
    let missing = request.missing.unwrap_or(schema.missing_policy);
    let plan_request = PlanRequest {
        ids: request.ids.clone(),
        keep: Vec::new(),
        cost_columns: Vec::new(),
        missing,
        input_bounds: file.input_bounds(),
    };
    let plan = Plan::new(path, &names, schema, &plan_request)?;
    let na_tokens = request.na_tokens.as_ref().unwrap_or(&schema.na_tokens);
    let policies = Policies { unseen: request.unseen, missing, keep_rejects: request.keep_rejects };
    let rules = RowRules::new(path, &plan, request.dialect, na_tokens, policies);
    let mut rows = Rows::new(&plan);
    let mut counts = RowCounts::new(&plan);
    let mut rejects = Vec::new();
    let mut on_reject =
        |line: u64, problem: &_, record: &[u8]| rejects.push((first_line + line, reject_fields(problem, record)));
    let data = &bytes[data_start..];
    if let Err((line, problem)) = read_rows(&rules, data, true, &mut rows, &mut counts, &mut on_reject) {
        return Err(rules.error(first_line + line, problem));
    }
    let n = rows.len();
    let numeric = Array2::from_shape_vec((n, plan.input_width), std::mem::take(&mut rows.numeric))
        .map_err(|_| Error::Usage("internal error: the inputs read did not line up".into()))?;
    let texts = plan.text_names.len();
    let ids = plan.text_names[..plan.id_count]
        .iter()
        .enumerate()
        .map(|(t, name)| {
            let values = (0..n)
                .map(|r| {
                    let (a, b) = rows.text_spans[r * texts + t];
                    String::from_utf8_lossy(&rows.text[a..b]).into_owned()
                })
                .collect();
            (name.clone(), values)
        })
        .collect();
    let imputed = counts.imputed(&plan);
    let lines = rows.lines.iter().map(|l| first_line + l).collect();
    Ok(ScoringData {
        numeric,
        categorical: std::mem::take(&mut rows.categorical),
        ids,
        imputed,
        counts,
        rejects,
        lines,
    })
}

/// The class mix of the new portfolio in `path`, estimated from the
/// posteriors `file` gives its rows at the class mix they are calibrated
/// to (see [`crate::prior::shift`]); the rows as read come back too (for
/// their counts and rejects).
pub fn estimate_portfolio_shift(
    file: &ModelFile,
    path: &std::path::Path,
    request: &ScoringRequest,
    options: &crate::prior::shift::ShiftOptions,
) -> Result<(crate::prior::shift::ShiftEstimate, ScoringData)> {
    let data = read_for_scoring(path, file, request)?;
    let base = file.calibrated_to().to_vec();
    let posteriors: Vec<f64> = file.log_posteriors(&data.inputs(), &base).iter().map(|v| v.exp()).collect();
    let confusion = file.held_out.as_ref().map(|h| h.confusion.clone());
    let input = crate::prior::shift::ShiftInput {
        classes: &file.classes,
        positive: file.positive_index(),
        training_prior: &base,
        posteriors: &posteriors,
        confusion: confusion.as_deref(),
    };
    let estimate = crate::prior::shift::estimate_shift(&input, options)?;
    Ok((estimate, data))
}
