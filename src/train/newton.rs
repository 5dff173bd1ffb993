//! The model file of one Newton step of a logistic fit from in-engine
//! aggregates: the step ([`crate::model::logistic_aggregates`]) and the
//! schema the table's sums describe, as `fit` would have recorded it for
//! the rows (levels and their counts, the numeric inputs' counts, means,
//! spreads and ranges; no deciles, so no median imputation and no drift
//! reference).

use crate::data::options::MissingPolicy;
use crate::data::schema::Schema;
use crate::error::{Error, Result, Setting};
use crate::model::logistic::{LogisticModel, LogisticParams};
use crate::model::logistic_aggregates::{newton_step, StepOutcome, StepSums};
use crate::model::{Diagnostics, FamilyParams, FittedModel};
use crate::prior::PriorSpec;
use crate::train::file::{ModelFile, TrainingInfo};

/// How to take the step and what the model file says of it.
#[derive(Debug, Clone)]
pub struct NewtonRequest {
    /// The fit's parameters (`--newton-ridge`, `--reweight`, the tolerance).
    pub params: LogisticParams,
    /// `Error` refuses a table with incomplete rows; `DropRows` leaves them out.
    pub missing: MissingPolicy,
    /// The prior [default: the training class mix].
    pub prior: Option<PriorSpec>,
}

/// Takes the Newton step from `sums` (the query's result at `start`) and
/// writes the next model's file.
pub fn newton_from_aggregates(
    start: &ModelFile,
    sums: &StepSums,
    request: &NewtonRequest,
    input_sha256: String,
) -> Result<(ModelFile, StepOutcome)> {
    let model = newton_start(start)?;
    if request.params.penalty != crate::model::penalised::Penalty::None {
        return Err(Error::invalid(crate::error::message![
            Setting::Penalty,
            " walks a λ path with cross-validation, which needs the rows; from aggregates the logistic fit is Newton's, with ",
            Setting::L2,
            " for a ridge penalty"
        ]));
    }
    let outcome = newton_step(model, start.newton.as_ref(), sums, &request.params)?;
    if outcome.incomplete > 0.0 && request.missing != MissingPolicy::DropRows {
        let columns = incomplete_columns(start, sums);
        return Err(Error::SchemaMismatch {
            path: sums.path.clone(),
            message: crate::error::message![
                format!("{} rows have a missing value ({columns}); refit with ", outcome.incomplete),
                Setting::Missing.set_to("drop-rows"),
                " to leave them out, as fit would",
            ],
        });
    }
    let schema = table_schema(start, sums, &outcome, request.missing);
    let class_mix = outcome.model.class_mix.clone();
    let target = &schema.target;
    let prior = request.prior.clone().unwrap_or(PriorSpec::Empirical).resolve(
        &target.classes,
        &class_mix,
        target.positive_index(),
    )?;
    let mut warnings = outcome.warnings.clone();
    if !outcome.new_levels.is_empty() {
        warnings.push(format!(
            "levels the start model lacked entered with a coefficient of 0: {}",
            outcome.new_levels.join(", ")
        ));
    }
    warnings.push(format!(
        "fitted from aggregates ({}): no out-of-fold predictions (so no BBSE shift estimate and no calibration) and no deciles (so no drift reference)",
        sums.path
    ));
    let diagnostics = Diagnostics {
        iterations: outcome.state.queries,
        converged: outcome.state.converged,
        log_likelihood: -outcome.deviance / 2.0,
        warnings,
        training_log_loss: None,
    };
    let training = TrainingInfo {
        input_path: sums.path.clone(),
        input_sha256,
        rows: schema.rows,
        class_counts: target.counts.clone(),
        weighted_class_counts: target.weighted_counts.clone(),
    };
    let file = ModelFile::builder(
        FamilyParams::Logistic(request.params.clone()),
        schema,
        FittedModel::Logistic(outcome.model.clone()),
        diagnostics,
        training,
    )
    .prior(prior)
    .training_class_mix(class_mix)
    .newton(outcome.state.clone())
    .build()?;
    Ok((file, outcome))
}

/// `'income' 3, 'region' 1`: the inputs with missing values in the table.
fn incomplete_columns(start: &ModelFile, sums: &StepSums) -> String {
    let Ok(model) = newton_start(start) else { return String::new() };
    let numeric = model
        .encoding
        .numeric
        .iter()
        .enumerate()
        .map(|(j, n)| (n, sums.labels.values().map(|s| s.missing[j]).sum::<f64>()));
    let categorical = model
        .encoding
        .one_hot
        .iter()
        .enumerate()
        .map(|(g, h)| (&h.column, sums.labels.values().map(|s| s.level_missing[g]).sum::<f64>()));
    numeric
        .chain(categorical)
        .filter(|(_, m)| *m > 0.0)
        .map(|(n, m)| format!("'{n}' {m}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The start's schema with the table's classes, levels and summaries.
fn table_schema(start: &ModelFile, sums: &StepSums, outcome: &StepOutcome, missing: MissingPolicy) -> Schema {
    let mut schema = start.schema.clone();
    let model = &outcome.model;
    schema.target.counts = outcome.class_rows.iter().map(|r| *r as usize).collect();
    schema.target.weighted_counts = outcome.class_weights.clone();
    let rows: f64 = outcome.class_rows.iter().sum();
    schema.rows = rows as usize;
    schema.missing_policy = missing;
    schema.rows_dropped = if missing == MissingPolicy::DropRows { outcome.incomplete as usize } else { 0 };
    let labels: Vec<&crate::model::logistic_aggregates::LabelSums> = sums.labels.values().collect();
    for column in schema.columns.iter_mut() {
        if let Some(j) = model.encoding.numeric.iter().position(|n| n == &column.name) {
            let shift = labels.first().map_or(0.0, |s| s.shift[j]);
            let (sum, square) = labels.iter().fold((0.0, 0.0), |(s, q), l| (s + l.plain[j].0, q + l.plain[j].1));
            let variance = if rows > 1.0 { ((square - sum * sum / rows) / (rows - 1.0)).max(0.0) } else { 0.0 };
            column.missing = labels.iter().map(|l| l.missing[j]).sum::<f64>() as usize;
            if let Some(summary) = column.numeric.as_mut() {
                summary.count = rows as usize;
                summary.mean = shift + sum / rows;
                summary.std_dev = variance.sqrt();
                summary.min = labels.iter().map(|l| l.min[j]).fold(f64::INFINITY, f64::min);
                summary.max = labels.iter().map(|l| l.max[j]).fold(f64::NEG_INFINITY, f64::max);
                summary.deciles = Vec::new();
                summary.median = 0.0;
            }
        }
        if let Some(g) = model.encoding.one_hot.iter().position(|h| h.column == column.name) {
            column.missing = labels.iter().map(|l| l.level_missing[g]).sum::<f64>() as usize;
            if let Some(summary) = column.categorical.as_mut() {
                summary.levels = model.encoding.one_hot[g].levels.clone();
                summary.counts =
                    summary.levels.iter().map(|l| sums.levels[g].get(l).copied().unwrap_or(0.0) as usize).collect();
            }
        }
    }
    schema
}

/// The start model's fingerprint: the first 16 hex digits of the SHA-256
/// of its fitted parameters as JSON (not of the file, whose creation time
/// differs between two writes of the same model).
pub fn fingerprint(file: &ModelFile) -> Result<String> {
    let json = serde_json::to_string(&file.model)
        .map_err(|e| Error::Usage(format!("the model cannot be written as JSON: {e}")))?;
    Ok(crate::io::sha256_hex(json.as_bytes())[..16].to_string())
}

/// The logistic model of a start model file, or a usage error.
pub fn newton_start(file: &ModelFile) -> Result<&LogisticModel> {
    match &file.model {
        FittedModel::Logistic(m) if m.penalty.is_none() => Ok(m),
        FittedModel::Logistic(_) => Err(Error::Usage(
            "the start model was fitted with a penalty path (--penalty); a Newton start is a logistic fit without one (--newton-ridge is supported)".into(),
        )),
        _ => Err(Error::Usage(format!(
            "the start model is a {} model; a Newton step starts from a logistic fit (e.g. fit on a sample of the table)",
            file.family.name()
        ))),
    }
}
