//! What `inspect` shows of a model file: for people (tables) and for
//! scripts (JSON with the fields of the command-line contract).

use std::collections::BTreeMap;

use serde::Serialize;

use crate::format::{count, number, percent};
use crate::model::design::INTERCEPT;
use crate::model::discriminant::{CategoryModel, DiscriminantModel};
use crate::model::levels::CategoricalLikelihood;
use crate::model::logistic::{reference_class, LogisticModel};
use crate::model::FittedModel;
use crate::report::table::{Align, Table};
use crate::report::{wrap, CAUTION};
use crate::train::file::{Integrity, ModelFile};

pub use crate::tails::{two_sided_p, NORMAL_975};

/// One coefficient: estimate, and for unpenalised logistic fits its Wald
/// inference. `class` is set for multinomial fits (that class against the
/// reference class).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Coefficient {
    /// `<intercept>`, a numeric input, or `COLUMN=LEVEL`.
    #[serde(rename = "input")]
    pub term: String,
    /// The class this row belongs to (multinomial fits and LDA with more
    /// than two classes).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub class: Option<String>,
    /// The estimate, on the original scale.
    #[serde(rename = "coefficient")]
    pub estimate: f64,
    /// Standard error from the inverse Fisher information.
    #[serde(rename = "se", skip_serializing_if = "Option::is_none")]
    pub std_error: Option<f64>,
    /// estimate / std_error.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub z: Option<f64>,
    /// Two-sided p-value of z under the standard normal.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub p_value: Option<f64>,
    /// Lower end of the 95% Wald interval.
    #[serde(rename = "interval_low", skip_serializing_if = "Option::is_none")]
    pub ci_low: Option<f64>,
    /// Upper end of the 95% Wald interval.
    #[serde(rename = "interval_high", skip_serializing_if = "Option::is_none")]
    pub ci_high: Option<f64>,
    /// exp(estimate × step), for logistic slopes: the factor on the odds
    /// when the input rises by `odds_ratio_step` (absent where it diverges).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub odds_ratio: Option<f64>,
    /// The rise in the input the odds ratio is for: one training standard
    /// deviation by default, a step the user gave, or 1 for a level.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub odds_ratio_step: Option<f64>,
    /// What the step is: `sd`, `given`, `level` (against the column's first
    /// level) or `indicator` (a missing-value indicator from 0 to 1).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub odds_ratio_per: Option<&'static str>,
    /// Under separation: the estimate grows without bound, so it and its
    /// odds ratio are where the fit stopped, not values.
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub diverges: bool,
    /// Dropped from the fit as an exact linear combination of earlier
    /// terms: the estimate is 0 by construction and has no error.
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub aliased: bool,
}

/// `inspect --json`.
#[derive(Debug, Clone, Serialize)]
pub struct InspectJson {
    /// The family.
    pub family: String,
    /// Classes in order.
    pub classes: Vec<String>,
    /// The event class.
    pub positive: String,
    /// The prior applied when scoring without `--prior`.
    pub priors: BTreeMap<String, f64>,
    /// The weighted class shares of the training rows.
    pub training_class_mix: BTreeMap<String, f64>,
    /// Training rows per class.
    pub training_class_counts: BTreeMap<String, usize>,
    /// Training rows.
    pub training_rows: usize,
    /// Logistic coefficients.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub coefficients: Vec<Coefficient>,
    /// LDA's linear discriminant coefficients.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub discriminant_coefficients: Vec<Coefficient>,
    /// A penalised logistic fit: λ, how it was chosen, the sparsity.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub penalty: Option<PenaltyJson>,
    /// How LDA or QDA takes its categorical inputs (`one-hot` or
    /// `frequencies`); absent without categorical inputs.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub category_model: Option<String>,
    /// Iterations of the fit.
    pub iterations: usize,
    /// Whether the fit converged.
    pub converged: bool,
    /// Log-likelihood at the fit.
    pub log_likelihood: f64,
    /// Warnings from the fit.
    pub warnings: Vec<String>,
    /// Model file format version.
    pub format_version: u32,
    /// Tool version that wrote the file.
    pub tool_version: String,
    /// When it was written.
    pub created: String,
    /// SHA-256 of the training file.
    pub input_sha256: String,
    /// The checksum the file carries (`sha256:…`; absent in version 1 files).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub checksum: Option<String>,
    /// How the file stood against its checksum when loaded: `verified`,
    /// `no-checksum` or `edit-accepted`.
    pub integrity: String,
}

/// What `inspect --json` says of a penalised fit.
#[derive(Debug, Clone, Serialize)]
pub struct PenaltyJson {
    /// ridge, lasso or elastic-net.
    pub penalty: String,
    /// α.
    pub mixing: f64,
    /// The λ used.
    pub lambda: f64,
    /// The rule that chose it: sparsest-within-se or min (absent when λ was given).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rule: Option<String>,
    /// The λ of the smallest cross-validated deviance.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub lambda_lowest_deviance: Option<f64>,
    /// The largest λ within one standard error of it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub lambda_sparsest_within_se: Option<f64>,
    /// The smallest λ with every slope zero.
    pub lambda_max: f64,
    /// Folds of the cross-validation (0 when λ was given).
    pub folds: usize,
    /// Points on the path.
    pub path_length: usize,
    /// Slopes not zero at the λ used.
    pub nonzero: usize,
    /// Slopes in all.
    pub slopes: usize,
}

fn penalty_json(m: &LogisticModel) -> Option<PenaltyJson> {
    let record = m.penalty.as_ref()?;
    Some(PenaltyJson {
        penalty: record.penalty.name().to_string(),
        mixing: record.mixing,
        lambda: record.lambda,
        rule: record.rule.map(|r| r.name().to_string()),
        lambda_lowest_deviance: record.lambda_lowest_deviance,
        lambda_sparsest_within_se: record.lambda_sparsest_within_se,
        lambda_max: record.lambda_max,
        folds: record.folds,
        path_length: record.path.len(),
        nonzero: m.coefficients.iter().flat_map(|c| &c.slopes).filter(|b| **b != 0.0).count(),
        slopes: m.coefficients.iter().map(|c| c.slopes.len()).sum(),
    })
}

/// The rise in each input that an odds ratio is stated for, by input
/// name: `inspect --odds-ratio-per COL=STEP,...`. Inputs not named get
/// one training standard deviation, since a per-unit odds ratio of an
/// amount in currency units prints as 1.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct OddsRatioSteps(pub BTreeMap<String, f64>);

impl std::str::FromStr for OddsRatioSteps {
    type Err = String;

    fn from_str(text: &str) -> Result<Self, String> {
        let mut steps = BTreeMap::new();
        for part in text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
            let (column, value) = part.rsplit_once('=').ok_or_else(|| format!("'{part}' is not COLUMN=STEP"))?;
            let step: f64 = value
                .trim()
                .parse()
                .ok()
                .filter(|s: &f64| s.is_finite() && *s > 0.0)
                .ok_or_else(|| format!("'{part}': the step must be a positive number"))?;
            if steps.insert(column.trim().to_string(), step).is_some() {
                return Err(format!("'{}' is named twice", column.trim()));
            }
        }
        Ok(OddsRatioSteps(steps))
    }
}

/// What `inspect` is asked to show beyond the file itself.
#[derive(Debug, Clone, Default)]
pub struct InspectOptions {
    /// Steps for the logistic odds ratios.
    pub odds_ratio_per: OddsRatioSteps,
}

impl InspectOptions {
    /// Refuses a step for a column that is not a numeric input of the model.
    pub fn check(&self, file: &ModelFile) -> crate::Result<()> {
        let numeric = file.schema.numeric_inputs();
        for column in self.odds_ratio_per.0.keys() {
            if !numeric.contains(column) {
                return Err(crate::Error::Usage(format!(
                    "--odds-ratio-per: '{column}' is not a numeric input of this model{}",
                    match crate::data::suggest::closest(column, &numeric) {
                        Some(near) => format!(" (did you mean '{near}'?)"),
                        None => format!(" (numeric inputs: {})", numeric.join(", ")),
                    }
                )));
            }
        }
        Ok(())
    }
}

/// The step an odds ratio of `term` is for, and what kind of step it is.
fn odds_ratio_step(
    term: &str,
    file_schema: &crate::data::schema::Schema,
    steps: &OddsRatioSteps,
) -> (f64, &'static str) {
    if let Some(step) = steps.0.get(term) {
        return (*step, "given");
    }
    match file_schema.columns.iter().find(|c| c.name == term).and_then(|c| c.numeric.as_ref()) {
        Some(summary) if summary.std_dev.is_finite() && summary.std_dev > 0.0 => (summary.std_dev, "sd"),
        Some(_) => (1.0, "given"),
        // A missing-value indicator the imputation added, or COLUMN=LEVEL.
        None if term.contains('=') => (1.0, "level"),
        None => (1.0, "indicator"),
    }
}

/// The logistic coefficient table, odds ratios per the steps of `steps`
/// (one training standard deviation for inputs it does not name).
pub fn logistic_coefficients(
    model: &LogisticModel,
    schema: &crate::data::schema::Schema,
    steps: &OddsRatioSteps,
) -> Vec<Coefficient> {
    let terms = model.encoding.terms();
    let standard_errors = model.standard_errors();
    let multinomial = model.coefficients.len() > 1;
    let mut out = Vec::new();
    for (q, c) in model.coefficients.iter().enumerate() {
        let values = std::iter::once(c.intercept).chain(c.slopes.iter().copied());
        let names = std::iter::once(INTERCEPT.to_string()).chain(terms.iter().cloned());
        for (a, (term, estimate)) in names.zip(values).enumerate() {
            let diverges = a > 0 && model.diverging.contains(&term);
            let aliased = a > 0 && model.aliased.contains(&term);
            let se = standard_errors.as_ref().map(|s| s[q][a]).filter(|_| !aliased);
            let z = se.map(|s| estimate / s);
            let (step, per) = odds_ratio_step(&term, schema, steps);
            let has_ratio = a > 0 && !aliased;
            out.push(Coefficient {
                term,
                class: multinomial.then(|| model.classes[c.class].clone()),
                estimate,
                std_error: se,
                z,
                p_value: z.map(two_sided_p),
                ci_low: se.map(|s| estimate - NORMAL_975 * s),
                ci_high: se.map(|s| estimate + NORMAL_975 * s),
                odds_ratio: (has_ratio && !diverges)
                    .then(|| (estimate * step).exp())
                    .filter(|r| r.is_finite() && *r > 0.0),
                odds_ratio_step: has_ratio.then_some(step),
                odds_ratio_per: has_ratio.then_some(per),
                diverges,
                aliased,
            });
        }
    }
    out
}

/// LDA's discriminant coefficients at `prior`, against the reference class.
pub fn discriminant_coefficients(model: &DiscriminantModel, prior: &[f64], positive: usize) -> Vec<Coefficient> {
    let reference = reference_class(model.classes.len(), positive);
    let terms = model.full_encoding().terms();
    let Ok(functions) = model.linear_discriminant(prior, reference) else {
        return Vec::new();
    };
    let several = functions.len() > 1;
    let mut out = Vec::new();
    for (class, intercept, w) in functions {
        let names = std::iter::once(INTERCEPT.to_string()).chain(terms.iter().cloned());
        for (term, estimate) in names.zip(std::iter::once(intercept).chain(w)) {
            let aliased = model.aliased.contains(&term);
            out.push(Coefficient {
                term,
                class: several.then(|| model.classes[class].clone()),
                estimate,
                std_error: None,
                z: None,
                p_value: None,
                ci_low: None,
                ci_high: None,
                odds_ratio: None,
                odds_ratio_step: None,
                odds_ratio_per: None,
                diverges: false,
                aliased,
            });
        }
    }
    out
}

/// The line under a coefficient table naming the aliased terms.
fn aliased_note(aliased: &[String], pooled_means: bool) -> String {
    if aliased.is_empty() {
        return String::new();
    }
    format!(
        "(aliased: {} — an exact linear combination of earlier inputs in the training rows, dropped from the fit; it carries no evidence{})\n",
        aliased.iter().map(|t| format!("'{t}'")).collect::<Vec<_>>().join(", "),
        if pooled_means { ", and its class means are the pooled mean" } else { "" }
    )
}

fn by_class<T: Clone>(classes: &[String], values: &[T]) -> BTreeMap<String, T> {
    classes.iter().cloned().zip(values.iter().cloned()).collect()
}

/// The JSON view of a model file.
pub fn inspect_json(file: &ModelFile, integrity: Integrity, options: &InspectOptions) -> InspectJson {
    let positive = file.positive_index();
    let (coefficients, discriminant) = match &file.model {
        FittedModel::Logistic(m) => (logistic_coefficients(m, &file.schema, &options.odds_ratio_per), Vec::new()),
        FittedModel::Lda(m) => (Vec::new(), discriminant_coefficients(m, &file.prior, positive)),
        _ => (Vec::new(), Vec::new()),
    };
    InspectJson {
        family: file.family.name().to_string(),
        classes: file.classes.clone(),
        positive: file.positive.clone(),
        priors: by_class(&file.classes, &file.prior),
        training_class_mix: by_class(&file.classes, &file.training_class_mix),
        training_class_counts: by_class(&file.classes, &file.training.class_counts),
        training_rows: file.training.rows,
        coefficients,
        discriminant_coefficients: discriminant,
        penalty: match &file.model {
            FittedModel::Logistic(m) => penalty_json(m),
            _ => None,
        },
        category_model: match &file.model {
            FittedModel::Lda(m) | FittedModel::Qda(m) => m.category_model().map(|c| c.name().to_string()),
            _ => None,
        },
        iterations: file.diagnostics.iterations,
        converged: file.diagnostics.converged,
        log_likelihood: file.diagnostics.log_likelihood,
        warnings: file.diagnostics.warnings.clone(),
        format_version: file.format_version,
        tool_version: file.tool_version.clone(),
        created: file.created.clone(),
        input_sha256: file.training.input_sha256.clone(),
        checksum: file.checksum.clone(),
        integrity: integrity.name().to_string(),
    }
}

fn optional(value: Option<f64>, significant: usize) -> String {
    value.map_or_else(String::new, |v| number(v, significant))
}

fn p_text(p: Option<f64>) -> String {
    match p {
        Some(p) if p < 1e-4 => "<0.0001".to_string(),
        Some(p) => format!("{p:.4}"),
        None => String::new(),
    }
}

/// The text view of a model file.
pub fn inspect_text(path: &str, file: &ModelFile, integrity: Integrity, options: &InspectOptions) -> String {
    let json = inspect_json(file, integrity, options);
    let mut out = format!(
        "{path}: {} model, format {} (written by baserate {} on {})\n",
        json.family, json.format_version, json.tool_version, json.created
    );
    out.push_str(&match (integrity, &file.checksum) {
        (Integrity::Verified, Some(sum)) => format!("content checksum verified ({}…)\n", &sum[..sum.len().min(19)]),
        (Integrity::EditAccepted, _) => {
            "content EDITED since it was fitted (checksum does not match; accepted)\n".into()
        }
        _ => "no content checksum (format version 1); edits cannot be detected\n".into(),
    });
    let mix: Vec<String> = file
        .classes
        .iter()
        .zip(&file.training.class_counts)
        .zip(&file.training_class_mix)
        .map(|((c, n), share)| format!("{c} {} ({})", count(*n), percent(*share)))
        .collect();
    out.push_str(&wrap(
        &format!(
            "trained on {} rows of {} (sha256 {}…): {}",
            count(file.training.rows),
            file.training.input_path,
            &file.training.input_sha256.chars().take(12).collect::<String>(),
            mix.join(", ")
        ),
        100,
        0,
    ));
    out.push('\n');
    let prior: Vec<String> =
        file.classes.iter().zip(&file.prior).map(|(c, p)| format!("{c} {}", number(*p, 4))).collect();
    out.push_str(&wrap(
        &format!(
            "positive class: {}; prior when scoring: {}{}",
            file.positive,
            prior.join(", "),
            if file.family.is_class_conditional() {
                " (applied by Bayes' rule)"
            } else {
                " (logistic posteriors are corrected from the training class mix by the odds ratio)"
            }
        ),
        100,
        0,
    ));
    out.push('\n');
    out.push_str(&format!("fit: {}\n", fit_summary(file)));
    for w in &file.diagnostics.warnings {
        out.push_str(&format!("warning: {}\n", wrap(w, 100, 9)));
    }
    out.push('\n');
    match &file.model {
        FittedModel::Logistic(m) => {
            let reference = &m.classes[m.reference];
            if let Some(p) = &json.penalty {
                let chosen = match (&p.rule, p.lambda_lowest_deviance, p.lambda_sparsest_within_se) {
                    (Some(rule), Some(min), Some(one_se)) => format!(
                        "chosen by {}-fold cross-validated deviance, {} rule (lowest deviance at λ {}, sparsest within one SE at λ {})",
                        p.folds,
                        rule,
                        number(min, 6),
                        number(one_se, 6)
                    ),
                    _ => "as given".to_string(),
                };
                out.push_str(&format!(
                    "penalty: {} (α = {}), λ = {} {chosen}; λ_max {}; {} of {} slopes not zero (zero ones not shown)\n",
                    p.penalty,
                    number(p.mixing, 4),
                    number(p.lambda, 6),
                    number(p.lambda_max, 6),
                    p.nonzero,
                    p.slopes
                ));
                out.push_str("objective: (1/N)·Σ weighted negative log-likelihood + λ·(α‖β‖₁ + (1−α)/2·‖β‖²₂), β on standardised inputs\n");
            }
            out.push_str(&logistic_tables(
                &json.coefficients,
                json.penalty.is_some(),
                reference,
                m.coefficients.len() > 1,
            ));
            out.push_str(&aliased_note(&m.aliased, false));
            if m.penalty.is_some() {
                out.push_str("(penalised fit: no standard errors; a penalised estimate's sampling error is not the inverse information)\n");
            } else if !m.diverging.is_empty() {
                out.push_str(&format!(
                    "(separation: the estimates of {} grow without bound, so the maximum-likelihood fit does not exist and no standard errors are given; fit with a penalty, --newton-ridge or --penalty)\n",
                    m.diverging.iter().map(|t| format!("'{t}'")).collect::<Vec<_>>().join(", ")
                ));
            } else if m.covariance.is_none() && m.l2 > 0.0 {
                out.push_str(&format!("(penalised fit, --newton-ridge {}: no standard errors)\n", m.l2));
            } else if m.covariance.is_none() {
                out.push_str("(no standard errors: the fit's warnings say why)\n");
            }
        }
        FittedModel::Lda(m) => {
            out.push_str(&format!(
                "linear discriminant (log posterior odds = intercept + Σ coefficient × input, at the prior above){}:\n",
                if m.shrinkage > 0.0 { format!("; shrinkage α = {:.4}", m.shrinkage) } else { String::new() }
            ));
            let mut table =
                Table::new(&[("input", Align::Left), ("class", Align::Left), ("coefficient", Align::Right)]);
            for c in &json.discriminant_coefficients {
                table.row(vec![
                    c.term.clone(),
                    c.class.clone().unwrap_or_else(|| file.positive.clone()),
                    if c.aliased { "aliased".into() } else { number(c.estimate, 6) },
                ]);
            }
            out.push_str(&table.render());
            out.push_str(&aliased_note(&m.aliased, true));
            out.push_str(&category_model_line(m));
            out.push_str(&class_means(&m.classes, &m.encoding.terms(), &m.means));
            out.push_str(&level_tables(&m.classes, &m.levels));
        }
        FittedModel::Qda(m) => {
            out.push_str(&category_model_line(m));
            out.push_str(&class_means(&m.classes, &m.encoding.terms(), &m.means));
            out.push_str(&level_tables(&m.classes, &m.levels));
            let factors = m.factors().map(|f| f.iter().map(|f| f.log_det).collect::<Vec<_>>()).unwrap_or_default();
            let dets: Vec<String> =
                m.classes.iter().zip(factors).map(|(c, l)| format!("{c} {}", number(l, 6))).collect();
            out.push_str(&format!("log-determinant of each class covariance: {}\n", dets.join(", ")));
        }
        FittedModel::NaiveBayes(m) => {
            let mut headers: Vec<(String, Align)> = vec![("input".into(), Align::Left)];
            for c in &m.classes {
                headers.push((format!("mean | {c}"), Align::Right));
                headers.push((format!("sd | {c}"), Align::Right));
            }
            let headers_ref: Vec<(&str, Align)> = headers.iter().map(|(h, a)| (h.as_str(), *a)).collect();
            let mut table = Table::new(&headers_ref);
            for (j, name) in m.numeric.iter().enumerate() {
                let mut row = vec![name.clone()];
                for k in 0..m.classes.len() {
                    row.push(number(m.means[k][j], 5));
                    row.push(number(m.variances[k][j].sqrt(), 4));
                }
                table.row(row);
            }
            out.push_str("Gaussian class-conditional inputs:\n");
            out.push_str(&table.render());
            out.push_str(&level_tables(&m.classes, &m.categorical));
        }
    }
    out.push('\n');
    out.push_str(&wrap(CAUTION, 100, 0));
    out.push('\n');
    out
}

/// The logistic coefficient table, then the odds-ratio table: each odds
/// ratio for a rise of one training standard deviation unless the user
/// gave a step, with its 95% interval (the Wald interval's ends,
/// exponentiated). A penalised fit hides its zero slopes; the class
/// column shows only for multinomial fits.
fn logistic_tables(coefficients: &[Coefficient], penalised: bool, reference: &str, multinomial: bool) -> String {
    let shown: Vec<&Coefficient> =
        coefficients.iter().filter(|c| !(penalised && c.term != INTERCEPT && c.estimate == 0.0)).collect();
    let with_class = |mut headers: Vec<(&'static str, Align)>| {
        if multinomial {
            headers.insert(1, ("class", Align::Left));
        }
        headers
    };
    let class_cell = |c: &Coefficient, row: &mut Vec<String>| {
        if multinomial {
            row.insert(1, c.class.clone().unwrap_or_default());
        }
    };
    let mut table = Table::new(&with_class(vec![
        ("input", Align::Left),
        ("coefficient", Align::Right),
        ("se", Align::Right),
        ("z", Align::Right),
        ("p", Align::Right),
        ("95% interval", Align::Right),
    ]));
    for c in &shown {
        let mut row = if c.aliased {
            vec![c.term.clone(), "aliased".into()]
        } else {
            let interval = match (c.ci_low, c.ci_high) {
                (Some(a), Some(b)) => format!("{} … {}", number(a, 4), number(b, 4)),
                _ => String::new(),
            };
            vec![
                c.term.clone(),
                number(c.estimate, 6),
                optional(c.std_error, 4),
                optional(c.z, 4),
                p_text(c.p_value),
                interval,
            ]
        };
        class_cell(c, &mut row);
        table.row(row);
    }
    let mut out = format!("coefficients (log-odds against '{reference}', original scale):\n{}", table.render());
    let mut ratios = Table::new(&with_class(vec![
        ("input", Align::Left),
        ("per", Align::Right),
        ("odds ratio", Align::Right),
        ("95% interval", Align::Right),
    ]));
    for c in shown.iter().filter(|c| c.term != INTERCEPT && !c.aliased) {
        let step = c.odds_ratio_step.unwrap_or(1.0);
        let ratio = match (c.diverges, c.odds_ratio) {
            (true, _) => "diverges".to_string(),
            // exp overflows or underflows a double: an input on an
            // extreme scale, per its step.
            (false, None) => if c.estimate > 0.0 { "> 1e308" } else { "< 1e-308" }.to_string(),
            (false, Some(r)) => number(r, 4),
        };
        let interval = match (c.diverges, c.ci_low, c.ci_high) {
            (false, Some(a), Some(b)) => format!("{} … {}", number((a * step).exp(), 4), number((b * step).exp(), 4)),
            _ => String::new(),
        };
        let per = match c.odds_ratio_per {
            Some("sd") => format!("sd {}", number(step, 4)),
            Some("level") => "level".to_string(),
            Some("indicator") => "0 → 1".to_string(),
            _ => number(step, 6),
        };
        let mut row = vec![c.term.clone(), per, ratio, interval];
        class_cell(c, &mut row);
        ratios.row(row);
    }
    if !ratios.is_empty() {
        out.push_str(&format!(
            "\n{}\n{}",
            wrap("odds ratios: the factor on the odds when the input rises by 'per' — one training standard deviation (sd) unless --odds-ratio-per gives a step; a level against the column's first level:", 100, 0),
            ratios.render()
        ));
    }
    out
}

/// P(level | class) of each input modelled by its level frequencies.
fn level_tables(classes: &[String], tables: &[CategoricalLikelihood]) -> String {
    let mut out = String::new();
    for c in tables {
        out.push_str(&format!("\n'{}': P(level | class)\n", c.column));
        let mut headers: Vec<(String, Align)> = vec![("level".into(), Align::Left)];
        headers.extend(classes.iter().map(|k| (k.clone(), Align::Right)));
        let headers_ref: Vec<(&str, Align)> = headers.iter().map(|(h, a)| (h.as_str(), *a)).collect();
        let mut table = Table::new(&headers_ref);
        for (l, level) in c.levels.iter().enumerate() {
            let mut row = vec![level.clone()];
            row.extend((0..classes.len()).map(|k| number(c.log_probabilities[k][l].exp(), 4)));
            table.row(row);
        }
        out.push_str(&table.render());
    }
    out
}

/// The line saying how LDA or QDA takes its categorical inputs.
/// How the fit went, in figures every family shares: the training log
/// loss of the posteriors (comparable across families), and for logistic
/// regression its iterations and convergence. The class-conditional
/// families are closed forms; their joint-density likelihood is not shown
/// here, since it cannot be set beside logistic regression's.
pub fn fit_summary(file: &ModelFile) -> String {
    let d = &file.diagnostics;
    let how = if file.family.is_class_conditional() {
        "closed form".to_string()
    } else {
        format!(
            "{} iteration{}, {}",
            d.iterations,
            if d.iterations == 1 { "" } else { "s" },
            if d.converged { "converged" } else { "NOT converged" }
        )
    };
    match d.training_log_loss {
        Some(loss) => format!("{how}; training log loss {}", number(loss, 4)),
        None => format!("{how} (from aggregates: no training log loss)"),
    }
}

fn category_model_line(model: &DiscriminantModel) -> String {
    match model.category_model() {
        Some(CategoryModel::Frequencies) => format!(
            "categorical inputs ({}): smoothed class-conditional level frequencies beside the Gaussian numeric inputs (--category-model frequencies)\n",
            model.levels.iter().map(|t| format!("'{}'", t.column)).collect::<Vec<_>>().join(", ")
        ),
        Some(CategoryModel::OneHot) => format!(
            "categorical inputs ({}): one-hot columns, Gaussian with the numeric inputs (--category-model one-hot)\n",
            model.encoding.one_hot.iter().map(|h| format!("'{}'", h.column)).collect::<Vec<_>>().join(", ")
        ),
        None => String::new(),
    }
}

fn class_means(classes: &[String], terms: &[String], means: &[Vec<f64>]) -> String {
    let mut headers: Vec<(String, Align)> = vec![("input".into(), Align::Left)];
    headers.extend(classes.iter().map(|c| (format!("mean | {c}"), Align::Right)));
    let headers_ref: Vec<(&str, Align)> = headers.iter().map(|(h, a)| (h.as_str(), *a)).collect();
    let mut table = Table::new(&headers_ref);
    for (j, term) in terms.iter().enumerate() {
        let mut row = vec![term.clone()];
        row.extend(means.iter().map(|m| number(m[j], 5)));
        table.row(row);
    }
    format!("\nclass means:\n{}", table.render())
}
