//! A whole evaluation as one call: families compared on the same splits
//! ([`compare_families`]), or scores made elsewhere judged the same way
//! ([`judge_scores`]). Each returns a [`Study`]: the evaluation with its
//! cost figures, the figures reweighted to a target class mix, the learning
//! curve, the penalised fits' paths, and the out-of-fold predictions as CSV
//! when asked for. Rendering is the caller's (see `report::evaluation`).

use std::path::Path;

use crate::data::split::{assign, Assignment, SplitPlan};
use crate::data::Dataset;
use crate::decide::CostSpec;
use crate::error::{Error, Result, Setting, SettingNames};
use crate::evaluate::cost_figures::{cost_figures, CostFigures};
use crate::evaluate::cross_validation::{cross_predict, Candidate, CandidateFailure, Predictions};
use crate::evaluate::learning_curve::{learning_curve, LearningPoint};
use crate::evaluate::metrics::ScoreKind;
use crate::evaluate::paired::{
    evaluate, evaluate_reweighted, log_odds_of, multiclass, Evaluation, EvaluationOptions, TestedScore,
};
use crate::model::penalised::{Penalty, PenaltyFit};
use crate::model::{FamilyParams, FittedModel};
use crate::prior::PriorSpec;

/// Probabilities are clipped to [1e-15, 1 − 1e-15] before the log odds are
/// taken, so that a score of exactly 0 or 1 gives a finite (large) log loss.
pub const PROBABILITY_CLIP: f64 = 1e-15;

/// Learning-curve points drawn when a curve is asked for.
const LEARNING_CURVE_POINTS: usize = 8;

/// What a comparison and a judgement of outside scores share.
#[derive(Debug, Clone, Default)]
pub struct StudyOptions {
    /// Seed of the splits and the bootstrap.
    pub seed: u64,
    /// Paired-bootstrap draws (see [`EvaluationOptions::bootstrap`]).
    pub bootstrap: Option<usize>,
    /// A numeric column of amounts, for amount-weighted capture.
    pub amount: Option<String>,
    /// A column whose values are segments: every figure per segment.
    pub by: Option<String>,
    /// The class mix to restate the figures at.
    pub target_prior: Option<PriorSpec>,
    /// A loss specification (TOML): the Bayes-rule decisions and their cost.
    pub costs: Option<std::path::PathBuf>,
}

/// How rows are split into training and test.
#[derive(Debug, Clone)]
pub enum SplitChoice {
    /// Stratified K-fold cross-validation, repeated.
    KFold {
        /// Folds.
        folds: usize,
        /// Repeats with fresh shuffles.
        repeats: usize,
    },
    /// A stratified holdout of this share of rows.
    Holdout {
        /// The test share.
        test_fraction: f64,
    },
    /// Out of time: rows with `column` at or after `test_from` are tested.
    OutOfTime {
        /// The column (read as an identifier).
        column: String,
        /// First value of the test set.
        test_from: String,
        /// Training ends before this value (a label-maturity gap).
        gap_from: Option<String>,
    },
    /// The first `training_rows` rows train, the rest test (a holdout file,
    /// see `Dataset::read_with_holdout`).
    TrainThenTest {
        /// Rows that train.
        training_rows: usize,
        /// For people: "trained on A, tested on B".
        description: String,
    },
}

/// A comparison of families.
#[derive(Debug, Clone)]
pub struct ComparisonRequest {
    /// The candidates, each with a unique name.
    pub candidates: Vec<Candidate>,
    /// The split.
    pub split: SplitChoice,
    /// What every study takes.
    pub options: StudyOptions,
    /// Also fit on growing training sizes.
    pub learning_curve: bool,
    /// Also refit penalised logistic candidates on all rows, for their
    /// coefficient path and cross-validation curve.
    pub penalised_paths: bool,
    /// Also return the out-of-fold predictions (first repeat) as CSV.
    pub predictions: bool,
    /// The most memory one candidate's fit may take, in bytes (`None`:
    /// half the machine's); a candidate estimated above it fails at once.
    pub memory_limit: Option<u64>,
    /// Where the counts of finished fits go.
    pub progress: crate::progress::Progress,
}

/// How external scores are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScoreScale {
    /// Probabilities of the positive class, in [0, 1]; clipped to
    /// [`PROBABILITY_CLIP`] from either end before taking log odds.
    Probability,
    /// Log posterior odds of the positive class, any finite number: read
    /// as they are, so nothing is lost to rounding near 0 or 1 (the
    /// `:log_odds` columns of a comparison's predictions file).
    LogOdds,
    /// Points or grades, only their order meaningful.
    Rank,
}

impl ScoreScale {
    /// The metrics a score of this scale gets.
    pub fn kind(self) -> ScoreKind {
        match self {
            ScoreScale::Probability | ScoreScale::LogOdds => ScoreKind::Probability,
            ScoreScale::Rank => ScoreKind::Rank,
        }
    }
}

/// Scores made elsewhere, to be judged like a comparison's candidates.
#[derive(Debug, Clone)]
pub struct JudgeRequest {
    /// Numeric score columns of the dataset.
    pub scores: Vec<String>,
    /// What the scores are: probabilities or log odds (every metric), or
    /// ranks (rank metrics only).
    pub scale: ScoreScale,
    /// Lower scores mean more likely positive (credit points, say).
    pub lower_positive: bool,
    /// The positive class's share in the data the probability scores are
    /// calibrated to (needed to restate them at a target prior).
    pub train_prior: Option<f64>,
    /// What every study takes.
    pub options: StudyOptions,
}

/// A candidate that could not be evaluated, and why.
#[derive(Debug, Clone)]
pub struct FailedCandidate {
    /// Its name.
    pub name: String,
    /// Its family.
    pub family: crate::model::Family,
    /// The first fold where its fit failed, and the error.
    pub failure: CandidateFailure,
}

impl FailedCandidate {
    /// `in fold F: the error`, settings named by `names`.
    pub fn reason(&self, names: SettingNames<'_>) -> String {
        format!("in {}: {}", self.failure.place, self.failure.error.describe(names))
    }
}

/// A penalised logistic fit on all rows: name, term names, path.
pub type PenalisedPath = (String, Vec<String>, PenaltyFit);

/// Everything an evaluation found.
#[derive(Debug, Clone)]
pub struct Study {
    /// The measured figures (cost figures included when costs were given).
    pub evaluation: Evaluation,
    /// The target class mix, when one was asked for.
    pub target_prior: Option<Vec<f64>>,
    /// The figures with the test rows reweighted to the target mix.
    pub reweighted: Option<Evaluation>,
    /// The class names.
    pub classes: Vec<String>,
    /// The learning curve (empty unless asked for).
    pub learning: Vec<LearningPoint>,
    /// Penalised fits' paths (empty unless asked for).
    pub penalised: Vec<PenalisedPath>,
    /// Notes for the user (a path that could not be drawn).
    pub notes: Vec<String>,
    /// Out-of-fold predictions as CSV (when asked for).
    pub predictions_csv: Option<Vec<u8>>,
    /// Candidates whose fit failed (left out of every figure, paired
    /// comparison and chart).
    pub failed: Vec<FailedCandidate>,
}

impl Study {
    /// Every figure as one JSON value (the `--json` output); a failed
    /// candidate is a result with `"status": "failed"` and its `error`
    /// (settings named by `names`), and the paired comparisons left out
    /// for it are listed in `paired_left_out`.
    pub fn json(&self, names: SettingNames<'_>) -> Result<serde_json::Value> {
        let to_value = |v: serde_json::Result<serde_json::Value>| v.map_err(|e| Error::Usage(e.to_string()));
        let mut value = to_value(serde_json::to_value(&self.evaluation))?;
        if !self.failed.is_empty() {
            if let Some(results) = value.get_mut("results").and_then(|r| r.as_array_mut()) {
                for f in &self.failed {
                    results.push(serde_json::json!({
                        "name": f.name,
                        "family": f.family.name(),
                        "status": "failed",
                        "error": f.reason(names),
                    }));
                }
            }
            let evaluated: Vec<&str> = self.evaluation.results.iter().map(|r| r.name.as_str()).collect();
            let left_out: Vec<serde_json::Value> = self
                .failed
                .iter()
                .flat_map(|f| {
                    evaluated.iter().map(move |other| serde_json::json!({"a": other, "b": f.name, "reason": format!("{} failed", f.name)}))
                })
                .collect();
            value["paired_left_out"] = serde_json::Value::Array(left_out);
        }
        if !self.learning.is_empty() {
            value["learning_curve"] = to_value(serde_json::to_value(&self.learning))?;
        }
        if let (Some(to), Some(r)) = (&self.target_prior, &self.reweighted) {
            value["target_prior"] = to_value(serde_json::to_value(to))?;
            value["reweighted"] = to_value(serde_json::to_value(r))?;
        }
        Ok(value)
    }

    /// The reweighted figures with the mix and the class names, as the
    /// screen shows them.
    pub fn reweighted_view(&self) -> Option<(&Evaluation, &[f64], &[String])> {
        match (&self.reweighted, &self.target_prior) {
            (Some(r), Some(to)) => Some((r, to.as_slice(), self.classes.as_slice())),
            _ => None,
        }
    }
}

/// The costs and the values of the columns they read (taken before the
/// inputs matrix is freed).
#[derive(Debug, Clone)]
pub struct CostInputs {
    /// The loss specification.
    pub spec: CostSpec,
    /// (column, value of each row).
    pub columns: Vec<(String, Vec<f64>)>,
}

/// Reads a costs file for an evaluation of `dataset` and the columns it
/// uses (two classes only).
pub fn read_costs(path: &Path, dataset: &Dataset) -> Result<CostInputs> {
    let shown = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(&shown, e))?;
    let spec = CostSpec::parse(&shown, &text, &dataset.schema.target.classes)?;
    if dataset.schema.target.classes.len() != 2 {
        return Err(Error::Usage(format!(
            "{shown}: cost figures of an evaluation need a two-class target; this one has {} classes (scoring applies costs to any number)",
            dataset.schema.target.classes.len()
        )));
    }
    let mut columns: Vec<(String, Vec<f64>)> = Vec::new();
    for column in spec.columns() {
        let values = column_text(dataset, &column).ok_or_else(|| Error::SchemaMismatch {
            path: shown.clone(),
            message: format!("the costs use column '{column}', which the data does not have (or which was excluded)")
                .into(),
        })?;
        let parsed: Option<Vec<f64>> = values
            .iter()
            .map(|v| crate::data::number::parse_f64(v.trim().as_bytes()).filter(|x| x.is_finite()))
            .collect();
        let parsed = parsed.ok_or_else(|| Error::SchemaMismatch {
            path: shown.clone(),
            message: format!("the costs use column '{column}', which is not numeric").into(),
        })?;
        columns.push((column, parsed));
    }
    Ok(CostInputs { spec, columns })
}

/// Values of a column for every row, as text: an id column, a categorical
/// feature's levels, or a numeric feature's numbers.
pub fn column_text(dataset: &Dataset, column: &str) -> Option<Vec<String>> {
    if let Some((_, values)) = dataset.ids.iter().find(|(name, _)| name == column) {
        return Some(values.clone());
    }
    if let Some(c) = dataset.schema.categorical_inputs().iter().position(|c| c.name == column) {
        let levels = dataset.schema.categorical_inputs()[c].categorical.as_ref()?.levels.clone();
        return Some(dataset.categorical[c].iter().map(|&code| levels[code as usize].clone()).collect());
    }
    let j = dataset.schema.numeric_inputs().iter().position(|n| n == column)?;
    (j < dataset.numeric.ncols()).then(|| dataset.numeric.column(j).iter().map(|v| format!("{v}")).collect())
}

/// The amounts column: a numeric feature's values, or an identifier
/// column's when every one of them is a number.
fn amounts(dataset: &Dataset, column: &str) -> Result<Vec<f64>> {
    if let Some(j) = dataset.schema.numeric_inputs().iter().position(|n| n == column) {
        return Ok(dataset.numeric.column(j).to_vec());
    }
    let from_text = dataset
        .ids
        .iter()
        .find(|(name, _)| name == column)
        .and_then(|(_, values)| values.iter().map(|x| x.trim().parse::<f64>().ok()).collect::<Option<Vec<f64>>>());
    from_text.ok_or_else(|| {
        Error::invalid(crate::error::message![
            Setting::Amount,
            format!(" must name a numeric column; '{column}' is not one")
        ])
    })
}

/// The segments column's values.
fn segments(dataset: &Dataset, column: &str) -> Result<Vec<String>> {
    column_text(dataset, column).ok_or_else(|| {
        Error::invalid(crate::error::message![
            Setting::By,
            format!(" names column '{column}', which was not read (name it with "),
            Setting::Ids,
            ", or as a feature)"
        ])
    })
}

/// The study's target class mix, resolved on the dataset's classes.
fn resolve_target_prior(dataset: &Dataset, options: &StudyOptions) -> Result<Option<Vec<f64>>> {
    let target = &dataset.schema.target;
    options
        .target_prior
        .as_ref()
        .map(|spec| spec.resolve(&target.classes, &target.class_mix(), target.positive_index()))
        .transpose()
}

/// Adds each result's cost figures to its metrics (`expected_cost`, the
/// mean cost per row, and the rest) and to the evaluation's cost table.
/// `fold_of`: each row's test fold, so capacity applies per fold.
fn apply_costs(
    inputs: &CostInputs,
    scores: &[TestedScore],
    options: &EvaluationOptions<'_>,
    evaluation: &mut Evaluation,
    fold_of: Option<&[u32]>,
) {
    let value = |c: &str, r: usize| inputs.columns.iter().find(|(n, _)| n == c).map_or(0.0, |(_, v)| v[r]);
    let figures: Vec<CostFigures> = cost_figures(scores, options, &inputs.spec, &value, fold_of);
    // With costs, a segment's flag rate is the share its decisions flag
    // (any action but the one that costs least for a negative row).
    if let Some((_, values)) = options.segments {
        for (f, s) in figures.iter().zip(scores) {
            let rows = &s.rows[0];
            let w = |i: usize| options.weights.map_or(1.0, |w| w[rows[i]]);
            for entry in evaluation.segments.iter_mut().filter(|e| e.name == f.name) {
                let (mut total, mut flagged) = (0.0, 0.0);
                for i in (0..rows.len()).filter(|&i| values[rows[i]] == entry.segment) {
                    total += w(i);
                    if f.flagged.get(i).copied().unwrap_or(false) {
                        flagged += w(i);
                    }
                }
                entry.flag_rate = if total > 0.0 { flagged / total } else { 0.0 };
                entry.flag_rule = match &f.below_cutoff_action {
                    Some(pass) => format!("the decisions under the costs: any action but {pass}"),
                    None => "the decisions under the costs: any action but the cheapest for a negative row".into(),
                };
            }
        }
    }
    for f in &figures {
        if let Some(r) = evaluation.results.iter_mut().find(|r| r.name == f.name) {
            if let (Some(object), Ok(serde_json::Value::Object(extra))) =
                (r.metrics.as_object_mut(), serde_json::to_value(f))
            {
                for (key, value) in extra {
                    if key != "name" {
                        object.insert(key, value);
                    }
                }
            }
        }
    }
    evaluation.costs = figures;
}

/// The split of a comparison, over `dataset`'s rows.
fn assignment(dataset: &Dataset, split: &SplitChoice, seed: u64) -> Result<Assignment> {
    let k = dataset.schema.target.classes.len();
    let plan = match split {
        SplitChoice::TrainThenTest { training_rows, description } => {
            return Ok(Assignment {
                folds: vec![(0..dataset.rows()).map(|i| u32::from(i < *training_rows)).collect()],
                tested_folds: 1,
                description: description.clone(),
            })
        }
        SplitChoice::KFold { folds, repeats } => SplitPlan::KFold { folds: *folds, repeats: *repeats },
        SplitChoice::Holdout { test_fraction } => SplitPlan::Holdout { test_fraction: *test_fraction },
        SplitChoice::OutOfTime { column, test_from, gap_from } => SplitPlan::OutOfTime {
            values: column_text(dataset, column).unwrap_or_default(),
            column: column.clone(),
            test_from: test_from.clone(),
            gap_from: gap_from.clone(),
        },
    };
    assign(&plan, &dataset.target, k, seed)
}

/// The out-of-fold predictions of the first repeat as CSV: the id columns,
/// the fold, the label, then each candidate's posteriors and, at full
/// precision, what the figures are computed from: the log odds of the
/// positive class (`NAME:log_odds`) for two classes, each class's log
/// posterior (`NAME:log_posterior_CLASS`) for more. Posteriors round to
/// exactly 0 or 1 far from the boundary; the logs do not.
fn predictions_csv(dataset: &Dataset, predictions: &[Predictions], assignment: &Assignment) -> Vec<u8> {
    let target = &dataset.schema.target;
    let k = target.classes.len();
    let mut out = Vec::new();
    let mut write = |fields: &[String]| {
        for (i, field) in fields.iter().enumerate() {
            if i > 0 {
                out.push(b',');
            }
            crate::records::push_field(&mut out, field.as_bytes());
        }
        out.push(b'\n');
    };
    let mut header: Vec<String> = dataset.ids.iter().map(|(n, _)| n.clone()).collect();
    header.push("fold".into());
    header.push(target.column.clone());
    let positive = target.positive_index();
    for p in predictions {
        header.extend(target.classes.iter().map(|c| format!("{}:{}", p.name, crate::model::posterior_column(c))));
        if k == 2 {
            header.push(format!("{}:log_odds", p.name));
        } else {
            header.extend(target.classes.iter().map(|c| format!("{}:log_posterior_{c}", p.name)));
        }
    }
    write(&header);
    for i in 0..dataset.rows() {
        if predictions[0].log_posteriors[0][(i, 0)].is_nan() {
            continue;
        }
        let mut record: Vec<String> = dataset.ids.iter().map(|(_, v)| v[i].clone()).collect();
        record.push((assignment.folds[0][i] + 1).to_string());
        record.push(target.classes[dataset.target[i] as usize].clone());
        for p in predictions {
            let row: Vec<f64> = (0..k).map(|c| p.log_posteriors[0][(i, c)]).collect();
            record.extend(row.iter().map(|lp| crate::format::exact(lp.exp())));
            if k == 2 {
                record.push(crate::format::exact(log_odds_of(&row, positive)));
            } else {
                record.extend(row.iter().map(|&lp| crate::format::exact(lp)));
            }
        }
        write(&record);
    }
    out
}

/// Penalised logistic candidates fitted on all rows, for their path charts.
fn penalised_paths(
    dataset: &Dataset,
    candidates: &[Candidate],
    notes: &mut Vec<String>,
    progress: &crate::progress::Progress,
) -> Vec<PenalisedPath> {
    let mut paths = Vec::new();
    for candidate in candidates {
        let FamilyParams::Logistic(p) = &candidate.params else { continue };
        if p.penalty == Penalty::None {
            continue;
        }
        match crate::model::fit_weighted(dataset, &candidate.params, dataset.weights.as_deref(), None, progress) {
            Ok((FittedModel::Logistic(m), _)) => {
                if let Some(record) = m.penalty {
                    paths.push((candidate.name.clone(), m.encoding.terms(), record));
                }
            }
            Ok(_) => {}
            Err(e) => notes.push(format!("{}: the path chart could not be drawn: {e}", candidate.name)),
        }
    }
    paths
}

/// Fits `request.candidates` on the same splits of `dataset` and evaluates
/// them out of sample. The dataset is taken by value: its inputs matrix is
/// freed before the evaluation, which needs only the log odds.
pub fn compare_families(mut dataset: Dataset, request: &ComparisonRequest) -> Result<Study> {
    for (i, c) in request.candidates.iter().enumerate() {
        if request.candidates[..i].iter().any(|d| d.name == c.name) {
            return Err(Error::invalid(crate::error::message![Setting::Family, format!(" {} is given twice", c.name)]));
        }
    }
    let options = &request.options;
    let assignment = assignment(&dataset, &request.split, options.seed)?;
    let target_prior = resolve_target_prior(&dataset, options)?;
    // What the schema, the counts and the memory estimate rule out fails
    // before any fold, and costs no pass over the rows.
    let mut failed: Vec<FailedCandidate> = Vec::new();
    let mut runnable: Vec<Candidate> = Vec::new();
    for c in &request.candidates {
        let checked = crate::model::check_before_fitting(&dataset, &c.params, dataset.weights.as_deref())
            .and_then(|()| crate::model::check_memory(&dataset, &c.params, request.memory_limit));
        match checked {
            Ok(()) => runnable.push(c.clone()),
            Err(e) => failed.push(FailedCandidate {
                name: c.name.clone(),
                family: c.params.family(),
                failure: CandidateFailure { place: "the checks before fitting".into(), error: std::sync::Arc::new(e) },
            }),
        }
    }
    let (predictions, failed_in_folds): (Vec<Predictions>, Vec<Predictions>) =
        cross_predict(&dataset, &runnable, &assignment, target_prior.as_deref(), &request.progress)?
            .into_iter()
            .partition(|p| p.failure.is_none());
    failed.extend(
        failed_in_folds
            .into_iter()
            .filter_map(|p| Some(FailedCandidate { name: p.name, family: p.family?, failure: p.failure? })),
    );
    // In the order the candidates were given.
    failed.sort_by_key(|f| request.candidates.iter().position(|c| c.name == f.name));
    if predictions.is_empty() {
        return Err(Error::EveryCandidateFailed(
            failed.into_iter().map(|f| (f.name, f.failure.place, f.failure.error)).collect(),
        ));
    }
    // The failed are left out of everything that follows.
    let candidates: Vec<Candidate> =
        request.candidates.iter().filter(|c| !failed.iter().any(|f| f.name == c.name)).cloned().collect();
    let candidates = &candidates;
    let amounts = options.amount.as_deref().map(|c| amounts(&dataset, c)).transpose()?;
    let segments = options.by.as_deref().map(|c| segments(&dataset, c)).transpose()?;
    let learning = if request.learning_curve {
        learning_curve(&dataset, candidates, &assignment, options.seed, LEARNING_CURVE_POINTS, &request.progress)
    } else {
        Vec::new()
    };
    let predictions_csv = request.predictions.then(|| predictions_csv(&dataset, &predictions, &assignment));
    let k = dataset.schema.target.classes.len();
    let positive = dataset.schema.target.positive_index();
    let multiclass_figures = if k > 2 { multiclass(&predictions, &dataset) } else { Vec::new() };
    let scores: Vec<TestedScore> = predictions.iter().map(|p| TestedScore::from_predictions(p, positive)).collect();
    let mut notes = Vec::new();
    let penalised = if request.penalised_paths {
        penalised_paths(&dataset, candidates, &mut notes, &request.progress)
    } else {
        Vec::new()
    };
    // What the evaluation does not need is freed first: the inputs matrix
    // and the full posterior tables (the scores keep the log odds).
    drop(predictions);
    let cost_inputs = options.costs.as_deref().map(|path| read_costs(path, &dataset)).transpose()?;
    dataset.numeric = ndarray::Array2::zeros((0, 0));
    let mut study = judge(
        &dataset,
        &scores,
        options,
        assignment.description.clone(),
        target_prior,
        cost_inputs.as_ref(),
        assignment.folds.first().map(Vec::as_slice),
        amounts.as_deref(),
        segments.as_deref(),
    );
    if k > 2 {
        study.evaluation.set_multiclass(multiclass_figures);
    }
    study.learning = learning;
    study.penalised = penalised;
    study.notes = notes;
    study.predictions_csv = predictions_csv;
    study.failed = failed;
    Ok(study)
}

/// The evaluation of tested scores: measured, reweighted to the target
/// mix, and under the costs.
#[allow(clippy::too_many_arguments)]
fn judge(
    dataset: &Dataset,
    scores: &[TestedScore],
    options: &StudyOptions,
    split: String,
    target_prior: Option<Vec<f64>>,
    costs: Option<&CostInputs>,
    fold_of: Option<&[u32]>,
    amounts: Option<&[f64]>,
    segments: Option<&[String]>,
) -> Study {
    let target = &dataset.schema.target;
    let evaluation_options = EvaluationOptions {
        target: &dataset.target,
        positive: target.positive_index(),
        classes: &target.classes,
        weights: dataset.weights.as_deref(),
        amounts,
        bootstrap: options.bootstrap,
        seed: options.seed,
        segments: segments.map(|v| (options.by.as_deref().unwrap_or(""), v)),
        split,
    };
    let mut evaluation = evaluate(scores, &evaluation_options);
    // With a target prior: the same figures with the test rows reweighted by
    // class (importance weights π′ₖ/πₖ, π the tested rows' class mix), so
    // they describe a portfolio at the target mix.
    let reweighted = target_prior.as_ref().map(|to| evaluate_reweighted(scores, &evaluation_options, to));
    if let Some(inputs) = costs {
        apply_costs(inputs, scores, &evaluation_options, &mut evaluation, fold_of);
    }
    Study {
        evaluation,
        target_prior,
        reweighted,
        classes: target.classes.clone(),
        learning: Vec::new(),
        penalised: Vec::new(),
        notes: Vec::new(),
        predictions_csv: None,
        failed: Vec::new(),
    }
}

/// Judges score columns made elsewhere (a bureau score, another team's
/// model) on every row of `dataset`, with the paired tests between them.
/// Rank scores get the rank metrics only.
pub fn judge_scores(dataset: &Dataset, request: &JudgeRequest) -> Result<Study> {
    let options = &request.options;
    let target = &dataset.schema.target;
    let positive = target.positive_index();
    let target_prior = resolve_target_prior(dataset, options)?;
    // The odds correction of probability scores from the prior they are
    // calibrated to (the train prior) to the target prior.
    let shift = match (&target_prior, request.train_prior) {
        (Some(_), _) if target.classes.len() != 2 => {
            return Err(Error::invalid(crate::error::message![
                Setting::Prior,
                " with external scores is for two classes"
            ]))
        }
        (Some(to), Some(from)) if from > 0.0 && from < 1.0 => {
            (to[positive] / (1.0 - to[positive])).ln() - (from / (1.0 - from)).ln()
        }
        (Some(_), Some(_)) => {
            return Err(Error::invalid(crate::error::message![
                Setting::TrainPrior,
                " must lie strictly between 0 and 1"
            ]))
        }
        (Some(_), None) if request.scale != ScoreScale::Rank => {
            return Err(Error::invalid(crate::error::message![
                Setting::Prior,
                " and ",
                Setting::BaseRate,
                " need ",
                Setting::TrainPrior,
                ": the class mix the scores are calibrated to"
            ]))
        }
        _ => 0.0,
    };
    let inputs = dataset.schema.numeric_inputs();
    let rows: Vec<usize> = (0..dataset.rows()).collect();
    let sign = if request.lower_positive { -1.0 } else { 1.0 };
    let mut scores = Vec::new();
    for name in &request.scores {
        let j = inputs.iter().position(|n| n == name).ok_or_else(|| {
            Error::invalid(crate::error::message![Setting::ScoreColumns, format!(" {name} is not a numeric column")])
        })?;
        let column = dataset.numeric.column(j);
        let log_odds: Vec<f64> = match request.scale {
            ScoreScale::Rank => column.iter().map(|v| sign * v).collect(),
            ScoreScale::LogOdds => column.iter().map(|v| sign * v + shift).collect(),
            ScoreScale::Probability => {
                if let Some((i, v)) = column.iter().enumerate().find(|(_, v)| !(0.0..=1.0).contains(*v)) {
                    return Err(Error::invalid(crate::error::message![
                        Setting::ScoreColumns,
                        format!(" {name}: row {} holds {v}, not a probability; use ", i + 1),
                        Setting::ScoreKind.set_to("rank"),
                        " for points or grades"
                    ]));
                }
                column
                    .iter()
                    .map(|&p| {
                        let p = if sign < 0.0 { 1.0 - p } else { p };
                        let p = p.clamp(PROBABILITY_CLIP, 1.0 - PROBABILITY_CLIP);
                        (p / (1.0 - p)).ln() + shift
                    })
                    .collect()
            }
        };
        scores.push(TestedScore {
            name: name.clone(),
            family: None,
            log_odds: vec![log_odds],
            rows: vec![rows.clone()],
            kind: request.scale.kind(),
            warnings: Vec::new(),
        });
    }
    let amounts = options.amount.as_deref().map(|c| amounts(dataset, c)).transpose()?;
    let segments = options.by.as_deref().map(|c| segments(dataset, c)).transpose()?;
    let costs = options.costs.as_deref().map(|path| read_costs(path, dataset)).transpose()?;
    Ok(judge(
        dataset,
        &scores,
        options,
        "scores made elsewhere, every row".into(),
        target_prior,
        costs.as_ref(),
        None,
        amounts.as_deref(),
        segments.as_deref(),
    ))
}
