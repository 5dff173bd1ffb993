//! Logistic regression fitted where the data lives: one Newton step per
//! aggregate query.
//!
//! A Newton step of the logistic fit needs the rows only through sums at
//! the current coefficients: the gradient X′W(y − p), the information
//! X′W·diag(p(δ − p))·X and the log-likelihood. The step query
//! (`crate::export::newton_query`) computes them in one pass, per class
//! label, on a design shifted by one row's values (as the class-conditional
//! aggregates are, for the same reason: sums of the size of the spread, not
//! of the values). This module takes the step from those sums exactly as
//! [`crate::model::logistic::fit`] takes it from the rows:
//!
//! - the class weights multiply each class's sums (so `--reweight` needs
//!   nothing from the engine);
//! - the standardisation (weighted mean and standard deviation with divisor
//!   N of every design column) comes from the same sums, and the shifted
//!   design is carried to it by the linear map z = (u − c)/s, applied to
//!   the gradient and the information;
//! - the Newton system, its ridge term, aliased columns, the back-transform
//!   and the covariance are the file fit's own functions;
//! - step halving spans queries: the model a step produced records that
//!   step and the objective before it, and when the query at that model
//!   finds the objective higher, the next model is the half step instead
//!   (one query per halving).
//!
//! Levels the table holds but the start model lacks enter the next model
//! with a coefficient of 0 (the reference level's effect, which is how the
//! query's design counted their rows), in byte order as `fit` orders
//! levels: when a new level sorts first it becomes the reference, and the
//! coefficients are re-based so that every row's linear predictor is
//! unchanged.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Message, Result};
use crate::model::design::Encoding;
use crate::model::linalg::cholesky;
use crate::model::logistic::{
    class_multipliers, covariance_from_information, newton_rhs, newton_system, objective, original_scale, standardised,
    ClassCoefficients, LogisticModel, LogisticParams,
};

/// Step halvings at most before a fit from aggregates gives up (the file
/// fit's own limit).
const MOST_HALVINGS: usize = 30;

/// One class label's sums in a step query's result. Design columns are
/// indexed 0..=d with column 0 the constant 1; `u` is the shifted design.
#[derive(Debug, Clone, Default)]
pub struct LabelSums {
    /// Complete rows with positive weight.
    pub rows: f64,
    /// Σ w over complete rows (row weights before class weights).
    pub weight: f64,
    /// Rows with a missing input.
    pub incomplete: f64,
    /// Rows with a negative weight.
    pub negative: f64,
    /// Σ w·u_a, a = 1..=d.
    pub sums: Vec<f64>,
    /// Σ w·u_a², a = 1..=d.
    pub squares: Vec<f64>,
    /// Σ w·p_k·u_a for each non-reference class position k, a = 0..=d
    /// (`k * (d + 1) + a`).
    pub probability_sums: Vec<f64>,
    /// Σ w·p_c(δ_ce − p_e)·u_a·u_b, the full symmetric matrix of size
    /// q(d + 1), row-major.
    pub information: Vec<f64>,
    /// Σ w·log p(label | x).
    pub log_likelihood: f64,
    /// Per numeric input: smallest and largest value, the shift, rows
    /// missing it, and the unweighted Σu and Σu² of complete rows.
    pub min: Vec<f64>,
    /// Largest values.
    pub max: Vec<f64>,
    /// The shift of each numeric input (one complete row's value).
    pub shift: Vec<f64>,
    /// Rows missing each numeric input.
    pub missing: Vec<f64>,
    /// Unweighted Σu and Σu² per numeric input, complete rows.
    pub plain: Vec<(f64, f64)>,
    /// Rows missing each categorical input.
    pub level_missing: Vec<f64>,
}

/// A step query's result as read.
#[derive(Debug, Clone)]
pub struct StepSums {
    /// The file, as named.
    pub path: String,
    /// Per class label as the engine wrote it.
    pub labels: BTreeMap<String, LabelSums>,
    /// Rows without a label.
    pub unlabelled: f64,
    /// Per categorical input: its levels among complete rows and their row
    /// counts.
    pub levels: Vec<BTreeMap<String, f64>>,
}

/// What a fit from aggregates carries from one query to the next, in the
/// model it wrote.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NewtonState {
    /// Step queries answered so far.
    pub queries: usize,
    /// The objective at the model this one was stepped from.
    pub objective_before: f64,
    /// The ridge λ that objective was taken with.
    pub lambda: f64,
    /// The step (original scale: intercept and slopes per non-reference
    /// class) that led to this model.
    pub step: Vec<f64>,
    /// How many times that step has been halved.
    pub halvings: usize,
    /// The largest standardised step of the last Newton step.
    pub largest_step: f64,
    /// Whether that step was within the tolerance.
    pub converged: bool,
}

/// What one query's step did.
#[derive(Debug, Clone, PartialEq)]
pub enum StepVerdict {
    /// A Newton step was taken; the fit goes on.
    Stepped,
    /// The Newton step was within the tolerance: the model is the fit.
    Converged,
    /// The model queried was worse than the intercept-only model: the next
    /// model is that one.
    Restarted {
        /// The objective at the model queried.
        objective: f64,
        /// The intercept-only model's.
        null: f64,
    },
    /// The objective rose: the step before was halved.
    Halved {
        /// The objective before the step.
        before: f64,
        /// The objective after it.
        after: f64,
    },
}

/// The model after one query, and what happened.
#[derive(Debug, Clone)]
pub struct StepOutcome {
    /// The next model: the one the next query is written for.
    pub model: LogisticModel,
    /// What it records for the next step.
    pub state: NewtonState,
    /// Stepped, converged or halved.
    pub verdict: StepVerdict,
    /// The deviance −2ℓ at the queried model (combined weights).
    pub deviance: f64,
    /// `COLUMN=LEVEL` of every level added.
    pub new_levels: Vec<String>,
    /// The labels' rows, weights (before class weights), in the model's
    /// class order.
    pub class_rows: Vec<f64>,
    /// Σ w per class.
    pub class_weights: Vec<f64>,
    /// Rows left out for a missing input.
    pub incomplete: f64,
    /// Warnings.
    pub warnings: Vec<String>,
}

/// The parameters of a model on the standardised scale of the sums, the
/// sums on that scale, and the objective.
struct Standardised {
    centre: Vec<f64>,
    scale: Vec<f64>,
    gradient: Vec<f64>,
    hessian: Vec<f64>,
    log_likelihood: f64,
    total_weight: f64,
}

/// Takes one Newton step of the logistic fit from the sums of a query at
/// `model` (whose `state` says how it was reached; `None` for a start).
pub fn newton_step(
    model: &LogisticModel,
    state: Option<&NewtonState>,
    sums: &StepSums,
    params: &LogisticParams,
) -> Result<StepOutcome> {
    let bad = |message: String| Error::SchemaMismatch { path: sums.path.clone(), message: Message::from(message) };
    if let Some(label) = sums.labels.keys().find(|l| !model.classes.contains(l)) {
        return Err(bad(format!(
            "the table holds the class '{label}', which the start model does not know ({}); start from a model fitted on a sample holding every class",
            model.classes.join(", ")
        )));
    }
    if sums.unlabelled > 0.0 {
        return Err(bad(format!(
            "{} rows of the table have no label; every training row needs one (filter them in a view)",
            sums.unlabelled
        )));
    }
    let label = |c: usize| sums.labels.get(&model.classes[c]);
    let k = model.classes.len();
    let class_rows: Vec<f64> = (0..k).map(|c| label(c).map_or(0.0, |s| s.rows)).collect();
    let class_weights: Vec<f64> = (0..k).map(|c| label(c).map_or(0.0, |s| s.weight)).collect();
    if let Some(c) = (0..k).find(|&c| !(class_weights[c] > 0.0)) {
        return Err(bad(format!(
            "the class '{}' has no complete row with positive weight in the table",
            model.classes[c]
        )));
    }
    let negative: f64 = sums.labels.values().map(|s| s.negative).sum();
    if negative > 0.0 {
        return Err(bad(format!("{negative} rows have a negative weight; weights must be ≥ 0")));
    }
    let incomplete: f64 = sums.labels.values().map(|s| s.incomplete).sum();
    let multipliers = class_multipliers(&model.classes, &class_weights, &params.class_weight)?;
    let order: Vec<usize> = model.coefficients.iter().map(|c| c.class).collect();
    let d = model.encoding.width();
    let width = d + 1;
    let terms = model.encoding.terms();
    let at = standardise(model, sums, &multipliers, &order).map_err(|j| Error::SingularCovariance {
        family: "logistic".into(),
        whose: "of the inputs".into(),
        columns: vec![terms[j].clone()],
        hint: crate::error::message![
            "the column is constant in the table; remove it with ",
            crate::error::Setting::Exclude
        ],
    })?;
    let lambda = params.l2;
    let theta = standardised(&model.coefficients, &at.centre, &at.scale);
    let current = objective(at.log_likelihood, &theta, width, at.total_weight, lambda);
    let deviance = -2.0 * at.log_likelihood;
    let inert: Vec<bool> = terms.iter().map(|t| model.aliased.contains(t)).collect();
    let queries = state.map_or(0, |s| s.queries) + 1;
    let mut warnings = Vec::new();

    // The objective rose: halve the step that led here (the file fit's
    // acceptance rule, with the same slack).
    if let Some(previous) = state.filter(|s| s.lambda == lambda && !s.step.is_empty()) {
        let before = previous.objective_before;
        if current > before + 1e-12 * before.abs() {
            if previous.halvings >= MOST_HALVINGS {
                return Err(Error::FitFailed {
                    family: "logistic".into(),
                    message: format!(
                        "no Newton step lowered the objective ({MOST_HALVINGS} halvings); the fit stops at the model before the step"
                    )
                    .into(),
                });
            }
            let half: Vec<f64> = previous.step.iter().map(|s| s / 2.0).collect();
            let mut next = model.clone();
            let mut flat = flatten(&model.coefficients);
            flat.iter_mut().zip(&half).for_each(|(v, s)| *v -= s);
            next.coefficients = unflatten(&flat, &order, d);
            next.covariance = None;
            let state = NewtonState {
                queries,
                objective_before: before,
                lambda,
                step: half,
                halvings: previous.halvings + 1,
                largest_step: previous.largest_step / 2.0,
                converged: false,
            };
            return Ok(StepOutcome {
                model: next,
                state,
                verdict: StepVerdict::Halved { before, after: current },
                deviance,
                new_levels: Vec::new(),
                class_rows,
                class_weights,
                incomplete,
                warnings,
            });
        }
    }

    // A start worse than no inputs at all (a fit on a sample small enough to
    // separate, say) lies where Newton's steps overshoot by orders of
    // magnitude: the next model is then the file fit's own start, the
    // intercept-only model, which one more query steps from.
    let class_mix: Vec<f64> = (0..k).map(|c| multipliers[c] * class_weights[c] / at.total_weight).collect();
    let reference = model.reference;
    let null = -class_mix.iter().map(|w| w * w.ln()).sum::<f64>();
    if current > null && model.coefficients.iter().any(|c| c.slopes.iter().any(|b| *b != 0.0)) {
        let coefficients: Vec<ClassCoefficients> = order
            .iter()
            .map(|&class| ClassCoefficients {
                class,
                intercept: (class_mix[class] / class_mix[reference]).ln(),
                slopes: vec![0.0; d],
            })
            .collect();
        let step: Vec<f64> =
            flatten(&coefficients).iter().zip(flatten(&model.coefficients)).map(|(a, b)| a - b).collect();
        let next = LogisticModel { coefficients, covariance: None, class_mix, l2: lambda, ..model.clone() };
        let state = NewtonState {
            queries,
            objective_before: f64::MAX,
            lambda,
            step,
            halvings: 0,
            largest_step: f64::MAX,
            converged: false,
        };
        return Ok(StepOutcome {
            model: next,
            state,
            verdict: StepVerdict::Restarted { objective: current, null },
            deviance,
            new_levels: Vec::new(),
            class_rows,
            class_weights,
            incomplete,
            warnings,
        });
    }

    let system = newton_system(&at.hessian, width, at.total_weight, lambda, &inert);
    let factor = cholesky(&system).map_err(|s| Error::SingularCovariance {
        family: "logistic".into(),
        whose: "of the inputs (the information matrix at the start model)".into(),
        columns: s
            .columns
            .iter()
            .map(|&i| {
                if i % width == 0 {
                    crate::model::design::INTERCEPT.to_string()
                } else {
                    terms[i % width - 1].clone()
                }
            })
            .collect(),
        hint: crate::error::message![
            "these columns are collinear in the table, or the classes are separated: remove one of them (",
            crate::error::Setting::Exclude,
            ") or add ",
            crate::error::Setting::L2
        ],
    })?;
    let rhs = newton_rhs(&at.gradient, &theta, width, at.total_weight, lambda);
    let step: Vec<f64> = factor.solve(&rhs).iter().copied().collect();
    let largest_step = step.iter().fold(0.0f64, |m, s| m.max(s.abs()));
    let converged = largest_step <= params.tolerance;
    let stepped: Vec<f64> = theta.iter().zip(&step).map(|(t, s)| t + s).collect();
    let (coefficients, transform) = original_scale(&stepped, &order, &at.centre, &at.scale);
    let step_original: Vec<f64> =
        flatten(&coefficients).iter().zip(flatten(&model.coefficients)).map(|(a, b)| a - b).collect();
    // Standard errors from the information at the queried model, as `fit`
    // takes them from the last information matrix.
    let covariance = if lambda == 0.0 {
        covariance_from_information(&at.hessian, width, &inert, &transform, &terms, &mut warnings)
    } else {
        None
    };
    let mut next = LogisticModel { coefficients, covariance, class_mix, l2: lambda, ..model.clone() };
    let mut state = NewtonState {
        queries,
        objective_before: current,
        lambda,
        step: step_original,
        halvings: 0,
        largest_step,
        converged,
    };
    let new_levels = add_levels(&mut next, &mut state, sums);
    if !new_levels.is_empty() {
        // The covariance is of the old design; the next query gives the new one's.
        next.covariance = None;
        state.converged = false;
    }
    Ok(StepOutcome {
        model: next,
        verdict: if state.converged { StepVerdict::Converged } else { StepVerdict::Stepped },
        state,
        deviance,
        new_levels,
        class_rows,
        class_weights,
        incomplete,
        warnings,
    })
}

/// The standardisation, gradient, information and log-likelihood on the
/// standardised scale, under the class multipliers. `Err(j)`: design
/// column j is constant.
fn standardise(
    model: &LogisticModel,
    sums: &StepSums,
    multipliers: &[f64],
    order: &[usize],
) -> std::result::Result<Standardised, usize> {
    let d = model.encoding.width();
    let width = d + 1;
    let q = order.len();
    let size = q * width;
    let p = model.encoding.numeric.len();
    let labelled: Vec<(usize, &LabelSums)> =
        (0..model.classes.len()).filter_map(|c| sums.labels.get(&model.classes[c]).map(|s| (c, s))).collect();
    let total_weight: f64 = labelled.iter().map(|(c, s)| multipliers[*c] * s.weight).sum();
    let weighted = |f: &dyn Fn(&LabelSums) -> f64| labelled.iter().map(|(c, s)| multipliers[*c] * f(s)).sum::<f64>();
    // Column a's mean on the shifted scale and its standard deviation.
    let mut shifted_mean = vec![0.0; d];
    let mut scale = vec![0.0; d];
    let mut centre = vec![0.0; d];
    for a in 0..d {
        let mean = weighted(&|s| s.sums[a]) / total_weight;
        let variance = weighted(&|s| s.squares[a]) / total_weight - mean * mean;
        shifted_mean[a] = mean;
        scale[a] = variance.max(0.0).sqrt();
        let shift = if a < p { labelled.first().map_or(0.0, |(_, s)| s.shift[a]) } else { 0.0 };
        centre[a] = shift + mean;
        if !(scale[a] > 0.0) {
            return Err(a);
        }
    }
    // Gradient on the shifted scale: Σ_labels m·(δ(label = k)·Σw·u − Σw·p_k·u).
    let mut gradient = vec![0.0; size];
    let mut hessian = vec![0.0; size * size];
    for (c, s) in &labelled {
        let m = multipliers[*c];
        for (position, &class) in order.iter().enumerate() {
            for a in 0..width {
                let own = if class == *c {
                    if a == 0 {
                        s.weight
                    } else {
                        s.sums[a - 1]
                    }
                } else {
                    0.0
                };
                gradient[position * width + a] += m * (own - s.probability_sums[position * width + a]);
            }
        }
        hessian.iter_mut().zip(&s.information).for_each(|(h, v)| *h += m * v);
    }
    let log_likelihood = weighted(&|s| s.log_likelihood);
    // z = (u − ū)/s: per class block, [1, z] = T·[1, u] with T₀₀ = 1,
    // T_a0 = −ū_a/s_a, T_aa = 1/s_a; g_z = T·g_u, H_z = T·H_u·Tᵀ.
    let map = |i: usize| -> Vec<(usize, f64)> {
        let (block, a) = (i / width, i % width);
        if a == 0 {
            vec![(i, 1.0)]
        } else {
            vec![(block * width, -shifted_mean[a - 1] / scale[a - 1]), (i, 1.0 / scale[a - 1])]
        }
    };
    let maps: Vec<Vec<(usize, f64)>> = (0..size).map(map).collect();
    let gradient_z: Vec<f64> = maps.iter().map(|m| m.iter().map(|&(j, t)| t * gradient[j]).sum()).collect();
    let mut hessian_z = vec![0.0; size * size];
    for i in 0..size {
        for j in 0..size {
            let mut v = 0.0;
            for &(a, ta) in &maps[i] {
                for &(b, tb) in &maps[j] {
                    v += ta * tb * hessian[a * size + b];
                }
            }
            hessian_z[i * size + j] = v;
        }
    }
    Ok(Standardised { centre, scale, gradient: gradient_z, hessian: hessian_z, log_likelihood, total_weight })
}

/// Intercept and slopes of every non-reference class, one after another.
fn flatten(coefficients: &[ClassCoefficients]) -> Vec<f64> {
    coefficients.iter().flat_map(|c| std::iter::once(c.intercept).chain(c.slopes.iter().copied())).collect()
}

/// The inverse of [`flatten`].
fn unflatten(values: &[f64], order: &[usize], d: usize) -> Vec<ClassCoefficients> {
    order
        .iter()
        .enumerate()
        .map(|(position, &class)| {
            let block = &values[position * (d + 1)..(position + 1) * (d + 1)];
            ClassCoefficients { class, intercept: block[0], slopes: block[1..].to_vec() }
        })
        .collect()
}

/// Adds the table's levels the model lacks (coefficient 0, byte order,
/// re-based when a new level becomes the reference), to the model and to
/// the step it records; returns them as `COLUMN=LEVEL`.
fn add_levels(model: &mut LogisticModel, state: &mut NewtonState, sums: &StepSums) -> Vec<String> {
    let old = model.encoding.clone();
    let mut encoding = old.clone();
    let mut added = Vec::new();
    for (h, one_hot) in encoding.one_hot.iter_mut().enumerate() {
        let Some(seen) = sums.levels.get(h) else { continue };
        for (level, rows) in seen {
            if *rows > 0.0 && !one_hot.levels.contains(level) {
                one_hot.levels.push(level.clone());
                added.push(format!("{}={level}", one_hot.column));
            }
        }
        one_hot.levels.sort();
    }
    if added.is_empty() {
        return added;
    }
    let order: Vec<usize> = model.coefficients.iter().map(|c| c.class).collect();
    let rebase = |values: &[f64]| -> Vec<f64> {
        let blocks = unflatten(values, &order, old.width());
        flatten(&blocks.iter().map(|c| rebased(&old, &encoding, c)).collect::<Vec<_>>())
    };
    let coefficients = rebase(&flatten(&model.coefficients));
    // The step is a difference of two parameter vectors: the same linear map.
    state.step = rebase(&state.step);
    model.coefficients = unflatten(&coefficients, &order, encoding.width());
    model.encoding = encoding;
    added
}

/// One class's coefficients under `new` (a superset of `old`'s levels):
/// every level's effect relative to the new reference level, the
/// reference's effect moved into the intercept.
fn rebased(old: &Encoding, new: &Encoding, c: &ClassCoefficients) -> ClassCoefficients {
    let p = old.numeric.len();
    let mut slopes = c.slopes[..p].to_vec();
    let mut intercept = c.intercept;
    let mut offset = p;
    for (h, one_hot) in old.one_hot.iter().enumerate() {
        let effect = |level: &str| -> f64 {
            one_hot.levels.iter().skip(1).position(|l| l == level).map_or(0.0, |i| c.slopes[offset + i])
        };
        let levels = &new.one_hot[h].levels;
        let reference = effect(&levels[0]);
        intercept += reference;
        slopes.extend(levels.iter().skip(1).map(|l| effect(l) - reference));
        offset += one_hot.levels.len().saturating_sub(1);
    }
    ClassCoefficients { class: c.class, intercept, slopes }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::design::OneHot;

    /// A model with one numeric input and two classes (reference "a").
    fn model(intercept: f64, slope: f64) -> LogisticModel {
        LogisticModel {
            encoding: Encoding { numeric: vec!["x".into()], one_hot: Vec::<OneHot>::new() },
            classes: vec!["a".into(), "b".into()],
            reference: 0,
            class_mix: vec![0.5, 0.5],
            coefficients: vec![ClassCoefficients { class: 1, intercept, slopes: vec![slope] }],
            covariance: None,
            l2: 0.0,
            penalty: None,
            diverging: Vec::new(),
            aliased: Vec::new(),
        }
    }

    const ROWS: [(f64, bool); 6] = [(-1.0, false), (0.0, true), (0.5, false), (2.0, true), (3.0, true), (1.0, false)];

    /// The sums the step query computes, by brute force over `ROWS`
    /// (shift: the first row's x).
    fn sums(m: &LogisticModel) -> StepSums {
        let (b0, b1) = (m.coefficients[0].intercept, m.coefficients[0].slopes[0]);
        let shift = ROWS[0].0;
        let mut labels = BTreeMap::new();
        for (x, is_b) in ROWS {
            let label = if is_b { "b" } else { "a" };
            let s = labels.entry(label.to_string()).or_insert_with(|| LabelSums {
                sums: vec![0.0],
                squares: vec![0.0],
                probability_sums: vec![0.0; 2],
                information: vec![0.0; 4],
                min: vec![f64::INFINITY],
                max: vec![f64::NEG_INFINITY],
                shift: vec![shift],
                missing: vec![0.0],
                plain: vec![(0.0, 0.0)],
                ..LabelSums::default()
            });
            let p = 1.0 / (1.0 + (-(b0 + b1 * x)).exp());
            let u = [1.0, x - shift];
            s.rows += 1.0;
            s.weight += 1.0;
            s.sums[0] += u[1];
            s.squares[0] += u[1] * u[1];
            for a in 0..2 {
                s.probability_sums[a] += p * u[a];
                for b in 0..2 {
                    s.information[a * 2 + b] += p * (1.0 - p) * u[a] * u[b];
                }
            }
            s.log_likelihood += if is_b { p.ln() } else { (1.0 - p).ln() };
        }
        StepSums { path: "sums.csv".into(), labels, unlabelled: 0.0, levels: Vec::new() }
    }

    /// Without a penalty the Newton step does not depend on the
    /// standardisation: new β = β + H⁻¹g on the original scale, with
    /// H = Σ p(1 − p)·[1, x][1, x]ᵀ and g = Σ (y − p)·[1, x].
    #[test]
    fn a_step_from_the_sums_is_newtons_step_on_the_rows() {
        let start = model(-0.2, 0.3);
        let outcome = newton_step(&start, None, &sums(&start), &LogisticParams::default()).expect("step");
        let (mut h, mut g) = ([0.0; 4], [0.0; 2]);
        for (x, is_b) in ROWS {
            let p = 1.0 / (1.0 + (0.2 - 0.3 * x).exp());
            let z = [1.0, x];
            for a in 0..2 {
                g[a] += (f64::from(u8::from(is_b)) - p) * z[a];
                for b in 0..2 {
                    h[a * 2 + b] += p * (1.0 - p) * z[a] * z[b];
                }
            }
        }
        let det = h[0] * h[3] - h[1] * h[2];
        let step = [(h[3] * g[0] - h[1] * g[1]) / det, (h[0] * g[1] - h[2] * g[0]) / det];
        let next = &outcome.model.coefficients[0];
        assert!((next.intercept - (-0.2 + step[0])).abs() < 1e-12, "{} vs {}", next.intercept, -0.2 + step[0]);
        assert!((next.slopes[0] - (0.3 + step[1])).abs() < 1e-12, "{} vs {}", next.slopes[0], 0.3 + step[1]);
        assert_eq!(outcome.verdict, StepVerdict::Stepped);
        assert_eq!(outcome.state.queries, 1);
        // The covariance is the inverse information at the queried model.
        let covariance = outcome.model.covariance.expect("covariance");
        assert!((covariance[0] - h[3] / det).abs() < 1e-12 * (h[3] / det).abs());
        assert!((covariance[3] - h[0] / det).abs() < 1e-12 * (h[0] / det).abs());
    }

    /// A query whose objective is above the one before the step halves
    /// that step: the next model is halfway back, and the state says so.
    #[test]
    fn a_rise_in_the_objective_halves_the_step() {
        let at = model(-0.2, 0.3);
        let state = NewtonState {
            queries: 3,
            objective_before: 0.1,
            lambda: 0.0,
            step: vec![0.4, -0.2],
            halvings: 0,
            largest_step: 0.4,
            converged: false,
        };
        let outcome = newton_step(&at, Some(&state), &sums(&at), &LogisticParams::default()).expect("step");
        assert!(matches!(outcome.verdict, StepVerdict::Halved { before, .. } if before == 0.1));
        let next = &outcome.model.coefficients[0];
        assert!((next.intercept - (-0.2 - 0.2)).abs() < 1e-15);
        assert!((next.slopes[0] - (0.3 + 0.1)).abs() < 1e-15);
        assert_eq!((outcome.state.halvings, outcome.state.queries), (1, 4));
        assert_eq!(outcome.state.step, vec![0.2, -0.1]);
        // After the limit the fit stops with an error, not a silent model.
        let spent = NewtonState { halvings: MOST_HALVINGS, ..state };
        assert!(newton_step(&at, Some(&spent), &sums(&at), &LogisticParams::default()).is_err());
    }

    /// A start worse than the intercept-only model is replaced by it.
    #[test]
    fn a_start_worse_than_no_inputs_restarts_from_the_intercept_only_model() {
        let at = model(8.0, -9.0);
        let outcome = newton_step(&at, None, &sums(&at), &LogisticParams::default()).expect("step");
        assert!(matches!(outcome.verdict, StepVerdict::Restarted { .. }), "{:?}", outcome.verdict);
        let next = &outcome.model.coefficients[0];
        // Three rows of each class: log(0.5/0.5) = 0.
        assert_eq!((next.intercept, next.slopes[0]), (0.0, 0.0));
    }
}
