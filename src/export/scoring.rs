//! The scoring job as one SQL statement.
//!
//! The statement is a chain of common table expressions, each a plain
//! SELECT over the one before, so any engine with standard SQL runs it and
//! a distributed one runs every stage but the capacity ranking in
//! parallel:
//!
//! 1. `__br_raw`: the table's columns the model reads, cast once
//!    (numbers to DOUBLE PRECISION, categories to their level's code: −1
//!    missing, −2 unseen).
//! 2. `__br_in`: the missing-value and unseen-category policy of `score`
//!    (fills, indicator inputs, the missing level) and the reason a row
//!    cannot be scored, in the words of `score`'s reject file — among them
//!    a value beyond the model's range ([`crate::model::range`]), checked
//!    before any arithmetic, so no row overflows.
//! 3. `__br_ev`: each class's evidence at the class mix the model is
//!    calibrated to — logistic regression's linear predictor (coefficients
//!    already on the original scale), LDA's linear discriminant, QDA's
//!    −½(log|Σₖ| + ‖Lₖ⁻¹(x − μₖ)‖²) through the inverse Cholesky factor
//!    (`__br_wh` holds the whitened deviations), naive Bayes' sum of
//!    Gaussian and categorical log-likelihoods — plus the log prior.
//! 4. `__br_cal` (two classes, with a calibration map): Platt's formula or
//!    the isotonic step as a CASE searched by halves.
//! 5. `__br_u` … `__br_p`: the odds correction to the prior asked for
//!    (added on the log scale), then log-sum-exp with the row maximum
//!    subtracted and a class more than 700 below it given weight 0, so no
//!    row overflows, underflows to an error, or divides by zero.
//! 6. With costs: expected costs Σₖ pₖ·C(a, k, row), the first cheapest
//!    action, and each capacity in the order of the costs file through
//!    `ROW_NUMBER() OVER (ORDER BY saving DESC, ids)` — the same
//!    assignment as `score` when the id columns follow the file's order.
//!
//! A row `score` would stop on or set aside keeps its ids and gets NULL
//! posteriors and a `reject_reason` (SQL has no portable way to stop a
//! query with a message), so no row is dropped silently.

use crate::apply::plan::{output_columns, Fill, OutputShape, Plan, PlanRequest};
use crate::apply::RejectReason;
use crate::apply::UnseenPolicy;
use crate::data::options::MissingPolicy;
use crate::decide::{Capacity, CostSpec};
use crate::error::{Error, Result};
use crate::export::sql::{self, clamp, greatest, ident, number, output_ident, pick_first, string, Dialect};
use crate::model::calibration::CalibrationMap;
use crate::model::design::Encoding;
use crate::model::levels::CategoricalLikelihood;
use crate::model::FittedModel;
use crate::train::file::ModelFile;

use crate::export::sql::EXPONENT_FLOOR;

/// The largest finite double: a value outside ±this is not finite.
const FINITE: f64 = f64::MAX;

/// What to export besides the model.
#[derive(Debug, Clone)]
pub struct ScoringRequest {
    /// The table (or view) to score: NAME or SCHEMA.NAME.
    pub table: String,
    /// The SQL spelling.
    pub dialect: Dialect,
    /// The prior to score with (one probability per class).
    pub prior: Vec<f64>,
    /// Costs: adds `action` and `expected_cost`.
    pub costs: Option<CostSpec>,
    /// Columns passed through first (also the capacity ranking's tie-break).
    pub ids: Vec<String>,
    /// The missing-value policy [default: the model's training policy].
    pub missing: Option<MissingPolicy>,
    /// Unseen categories.
    pub unseen: UnseenPolicy,
    /// Missing-value tokens of text columns [default: the training file's].
    pub na_tokens: Option<Vec<String>>,
    /// How the model file stood against its checksum when loaded (stated
    /// in the statement's header).
    pub integrity: crate::train::file::Integrity,
}

/// A chain of SELECT stages, each reading the one before.
struct Stages {
    stages: Vec<(String, Vec<String>)>,
}

impl Stages {
    /// Adds a stage selecting everything of the previous one plus `columns`
    /// (each `expression AS "alias"`).
    fn push(&mut self, name: &str, columns: Vec<String>) {
        self.stages.push((name.to_string(), columns));
    }

    fn last(&self) -> &str {
        self.stages.last().map_or("", |(n, _)| n.as_str())
    }
}

fn alias(expression: impl AsRef<str>, name: &str) -> String {
    format!("{} AS {name}", expression.as_ref())
}

fn col(name: &str) -> String {
    name.to_string()
}

/// The SQL statement that scores `request.table` as `score` would.
pub fn scoring_sql(file: &ModelFile, request: &ScoringRequest) -> Result<String> {
    let dialect = request.dialect;
    let k = file.classes.len();
    if request.prior.len() != k {
        return Err(Error::Usage("the prior must give one probability per class".into()));
    }
    let missing = request.missing.unwrap_or(file.schema.missing_policy);
    let cost_columns = request.costs.as_ref().map(|s| s.columns()).unwrap_or_default();
    if let Some(spec) = &request.costs {
        file.check_cost_columns(spec, &request.table)?;
    }
    // The plan `score` would make for a table holding exactly the columns
    // named: the same fills, indicators and level codes.
    let mut names: Vec<String> = file.schema.features().map(|f| f.name.clone()).collect();
    for extra in request.ids.iter().chain(&cost_columns) {
        if !names.contains(extra) {
            names.push(extra.clone());
        }
    }
    let plan_request = PlanRequest {
        ids: request.ids.clone(),
        keep: Vec::new(),
        cost_columns: cost_columns.clone(),
        missing,
        input_bounds: file.input_bounds(),
    };
    let plan = Plan::new(&request.table, &names, &file.schema, &plan_request)?;
    let na_tokens = request.na_tokens.clone().unwrap_or_else(|| file.schema.na_tokens.clone());

    let mut stages = Stages { stages: Vec::new() };
    raw_stage(&mut stages, &plan, request, &na_tokens, &cost_columns)?;
    input_stage(&mut stages, &plan, request, &cost_columns)?;
    let base = file.calibrated_to().to_vec();
    let evidence = evidence_stages(&mut stages, file, &plan, &base)?;
    posterior_stages(&mut stages, file, dialect, &evidence, &base, &request.prior)?;
    let decision = match &request.costs {
        Some(spec) => Some(decision_stages(&mut stages, spec, dialect, k, request.ids.len())?),
        None => None,
    };

    // The final SELECT: the output columns of `score`, then the reason.
    let shape =
        OutputShape { classes: &file.classes, decisions: request.costs.is_some(), reasons: 0, reject_reason: true };
    let names = output_columns(&request.ids, shape, &[])?;
    // An engine that folds case cannot tell `Amount` from `amount`, in the
    // table or among the outputs.
    sql::distinct_names(dialect, "input columns", plan.names.iter().map(String::as_str))?;
    sql::distinct_names(dialect, "output columns", names.iter().map(String::as_str))?;
    let mut output = Vec::new();
    for (i, id) in names[..request.ids.len()].iter().enumerate() {
        output.push(format!("{} AS {}", col(&format!("__br_id{i}")), output_ident(dialect, id)?));
    }
    for (c, name) in names[request.ids.len()..request.ids.len() + k].iter().enumerate() {
        output.push(format!("{} AS {}", col(&format!("__br_p{c}")), output_ident(dialect, name)?));
    }
    if let (Some(spec), Some(last)) = (&request.costs, decision) {
        let chosen = col(&format!("__br_a{last}"));
        let names: Vec<String> = spec
            .actions
            .iter()
            .enumerate()
            .map(|(a, action)| Ok(format!(" WHEN {a} THEN {}", string(dialect, &action.name)?)))
            .collect::<Result<_>>()?;
        output.push(format!("CASE {chosen}{} END AS action", names.concat()));
        let costs: String = (0..spec.actions.len()).map(|a| format!(" WHEN {a} THEN __br_e{a}")).collect();
        output.push(format!("CASE {chosen}{costs} END AS expected_cost"));
    }
    output.push("__br_reject AS reject_reason".into());

    let mut text = String::new();
    for line in header(file, request) {
        text.push_str(&sql::comment(&line));
        text.push('\n');
    }
    text.push_str("WITH\n");
    for (i, (name, columns)) in stages.stages.iter().enumerate() {
        let source = if i == 0 { sql::table(dialect, &request.table)? } else { col(&stages.stages[i - 1].0) };
        let all = if i == 0 { Vec::new() } else { vec![format!("{source}.*")] };
        let list: Vec<String> = all.into_iter().chain(columns.iter().cloned()).collect();
        // The fence keeps each stage a stage: without it PostgreSQL pulls
        // every subquery up and pastes each column's expression into every
        // later use, which grows the statement exponentially.
        text.push_str(&format!(
            "{name} AS (\n  SELECT\n    {}\n  FROM {source}{}\n)",
            list.join(",\n    "),
            dialect.stage_fence()
        ));
        text.push_str(if i + 1 < stages.stages.len() { ",\n" } else { "\n" });
    }
    text.push_str(&format!("SELECT\n  {}\nFROM {};\n", output.join(",\n  "), col(stages.last())));
    Ok(text)
}

/// The comment block at the top: what the statement is and the caution.
fn header(file: &ModelFile, request: &ScoringRequest) -> Vec<String> {
    let prior: Vec<String> =
        file.classes.iter().zip(&request.prior).map(|(c, p)| format!("{c}={}", number_text(*p))).collect();
    let capacity = request.costs.as_ref().is_some_and(|s| s.actions.iter().any(|a| a.capacity.is_some()));
    let ties = match (capacity, request.ids.is_empty()) {
        (false, _) => None,
        (true, false) => Some(format!(
            "capacities: rows ranked by saving over the next-best action, ties broken by {} (score breaks them by line: the same when the ids follow the file's order)",
            request.ids.join(", ")
        )),
        (true, true) => Some("capacities: rows ranked by saving; no --id columns, so the engine breaks ties in saving arbitrarily".into()),
    };
    let mut lines = vec![
        format!("baserate {} scoring job for table {}", env!("CARGO_PKG_VERSION"), request.table),
        format!(
            "model: {} on {} rows of {} (sha256 {}), positive class {}",
            file.family.name(),
            file.training.rows,
            file.training.input_path,
            file.training.input_sha256,
            file.positive
        ),
        format!(
            "model file content: {} (checksum {})",
            request.integrity.name(),
            file.checksum.as_deref().unwrap_or("none")
        ),
        format!("prior: {}; dialect: {}", prior.join(", "), request.dialect.name()),
        "output: the id columns, posterior_<class> per class, action and expected_cost with costs, reject_reason (NULL when scored)".into(),
    ];
    lines.extend(ties);
    lines.push(crate::CAUTION.to_string());
    lines
}

fn number_text(v: f64) -> String {
    let mut b = ryu::Buffer::new();
    b.format(v).to_string()
}

/// Stage 1: the columns read from the table, cast once.
fn raw_stage(
    stages: &mut Stages,
    plan: &Plan,
    request: &ScoringRequest,
    na_tokens: &[String],
    cost_columns: &[String],
) -> Result<()> {
    let dialect = request.dialect;
    let mut columns = Vec::new();
    for (i, id) in request.ids.iter().enumerate() {
        columns.push(alias(ident(dialect, id)?, &format!("__br_id{i}")));
    }
    for (j, feature) in plan.numeric.iter().enumerate() {
        columns.push(alias(
            format!("CAST({} AS {})", ident(dialect, &feature.name)?, dialect.double_type()),
            &format!("__br_r{j}"),
        ));
    }
    for (c, feature) in plan.categorical.iter().enumerate() {
        let name = ident(dialect, &feature.name)?;
        let mut branches = String::new();
        for (code, level) in feature.levels.iter().enumerate() {
            if Some(code as u32) != feature.missing_code {
                branches.push_str(&format!(" WHEN {} THEN {code}", string(dialect, level)?));
            }
        }
        for token in std::iter::once("").chain(na_tokens.iter().map(String::as_str)) {
            if !feature.levels.iter().any(|l| l == token) {
                branches.push_str(&format!(" WHEN {} THEN -1", string(dialect, token)?));
            }
        }
        columns.push(alias(
            format!(
                "CASE WHEN {name} IS NULL THEN -1 ELSE CASE TRIM(CAST({name} AS {})){branches} ELSE -2 END END",
                dialect.text_type()
            ),
            &format!("__br_c{c}"),
        ));
    }
    for (m, column) in cost_columns.iter().enumerate() {
        columns.push(alias(
            format!("CAST({} AS {})", ident(dialect, column)?, dialect.double_type()),
            &format!("__br_k{m}"),
        ));
    }
    stages.push("__br_raw", columns);
    Ok(())
}

/// Stage 2: the policies of `score` for missing values and unseen
/// categories, and the reason a row cannot be scored.
fn input_stage(stages: &mut Stages, plan: &Plan, request: &ScoringRequest, cost_columns: &[String]) -> Result<()> {
    let dialect = request.dialect;
    let not_finite =
        |v: &str| format!("({v} IS NOT NULL AND NOT ({v} BETWEEN {} AND {}))", number(-FINITE), number(FINITE));
    let mut reasons = Vec::new();
    let reason = |why: &str, column: &str| string(dialect, &format!("{why}: {column}"));
    let mut columns = Vec::new();
    for (j, feature) in plan.numeric.iter().enumerate() {
        let raw = col(&format!("__br_r{j}"));
        reasons.push(format!(
            "WHEN {} THEN {}",
            not_finite(&raw),
            reason(RejectReason::NotFinite.name(), &feature.name)?
        ));
        if feature.bound < FINITE {
            // Before any arithmetic: PostgreSQL aborts a query on overflow.
            reasons.push(format!(
                "WHEN ABS({raw}) > {} THEN {}",
                number(feature.bound),
                reason(RejectReason::OutOfRange.name(), &feature.name)?
            ));
        }
        match feature.fill {
            Fill::Value(v) => {
                columns.push(alias(format!("COALESCE({raw}, {})", number(v)), &format!("__br_x{j}")));
                if let Some(indicator) = feature.indicator {
                    columns.push(alias(
                        format!("CASE WHEN {raw} IS NULL THEN 1E0 ELSE 0E0 END"),
                        &format!("__br_x{indicator}"),
                    ));
                }
            }
            Fill::Unfillable => {
                reasons.push(format!(
                    "WHEN {raw} IS NULL THEN {}",
                    reason(RejectReason::MissingValue.name(), &feature.name)?
                ));
                columns.push(alias(&raw, &format!("__br_x{j}")));
            }
        }
    }
    for (c, feature) in plan.categorical.iter().enumerate() {
        let code = col(&format!("__br_c{c}"));
        if request.unseen != UnseenPolicy::Missing {
            reasons
                .push(format!("WHEN {code} = -2 THEN {}", reason(RejectReason::UnseenCategory.name(), &feature.name)?));
        }
        match feature.missing_code {
            Some(m) => {
                columns.push(alias(format!("CASE WHEN {code} < 0 THEN {m} ELSE {code} END"), &format!("__br_g{c}")))
            }
            None => {
                reasons.push(format!(
                    "WHEN {code} < 0 THEN {}",
                    reason(RejectReason::MissingValue.name(), &feature.name)?
                ));
                columns.push(alias(&code, &format!("__br_g{c}")));
            }
        }
    }
    for (m, column) in cost_columns.iter().enumerate() {
        let value = col(&format!("__br_k{m}"));
        reasons.push(format!(
            "WHEN {value} IS NULL OR NOT ({value} BETWEEN {} AND {}) THEN {}",
            number(-FINITE),
            number(FINITE),
            reason(RejectReason::CostValue.name(), column)?
        ));
    }
    let reject = if reasons.is_empty() {
        format!("CAST(NULL AS {})", dialect.text_type())
    } else {
        format!("CASE {} ELSE CAST(NULL AS {}) END", reasons.join(" "), dialect.text_type())
    };
    columns.push(alias(reject, "__br_reject"));
    stages.push("__br_in", columns);
    Ok(())
}

/// Design column `j` of an encoding as SQL, and its coefficient term:
/// numeric inputs are `__br_x{j}`; one-hot columns compare the level code.
enum Term {
    Numeric(usize),
    Level { categorical: usize, level: usize },
}

fn design_terms(encoding: &Encoding) -> Vec<Term> {
    let mut terms: Vec<Term> = (0..encoding.numeric.len()).map(Term::Numeric).collect();
    for (c, h) in encoding.one_hot.iter().enumerate() {
        terms.extend((1..h.levels.len()).map(|level| Term::Level { categorical: c, level }));
    }
    terms
}

/// `coefficient × column` for a linear form.
fn linear_term(term: &Term, coefficient: f64) -> String {
    match term {
        Term::Numeric(j) => format!("{} * __br_x{j}", number(coefficient)),
        Term::Level { categorical, level } => {
            format!("CASE WHEN __br_g{categorical} = {level} THEN {} ELSE 0E0 END", number(coefficient))
        }
    }
}

/// The value of a design column (for QDA's deviations).
fn design_value(term: &Term) -> String {
    match term {
        Term::Numeric(j) => format!("__br_x{j}"),
        Term::Level { categorical, level } => {
            format!("CASE WHEN __br_g{categorical} = {level} THEN 1E0 ELSE 0E0 END")
        }
    }
}

/// `intercept + (b₁x₁ + b₂x₂ + …)`: the library's order of summation.
fn linear_form(intercept: f64, terms: &[Term], coefficients: &[f64]) -> String {
    let products: Vec<String> = terms.iter().zip(coefficients).map(|(t, &b)| linear_term(t, b)).collect();
    format!("{} + ({})", number(intercept), sql::sum(&products))
}

fn guarded(expression: String) -> String {
    format!("CASE WHEN __br_reject IS NULL THEN {expression} END")
}

/// Stage 3: `__br_s{k}`, each class's log evidence at the mix `base` (up
/// to a constant shared by the classes).
fn evidence_stages(stages: &mut Stages, file: &ModelFile, plan: &Plan, base: &[f64]) -> Result<Vec<String>> {
    let k = file.classes.len();
    let log_base: Vec<f64> = base.iter().map(|p| p.ln()).collect();
    let mut columns = Vec::new();
    match &file.model {
        FittedModel::Logistic(m) => {
            let terms = design_terms(&m.encoding);
            check_width(file, plan, m.encoding.numeric.len(), m.encoding.one_hot.len())?;
            for class in 0..k {
                let expression = match m.coefficients.iter().find(|c| c.class == class) {
                    Some(c) => guarded(linear_form(c.intercept, &terms, &c.slopes)),
                    None => guarded("0E0".into()),
                };
                columns.push(alias(expression, &format!("__br_s{class}")));
            }
        }
        FittedModel::Lda(m) => {
            // Level-frequency inputs are in the discriminant as one-hot terms.
            let encoding = m.full_encoding();
            check_width(file, plan, encoding.numeric.len(), encoding.one_hot.len())?;
            let terms = design_terms(&encoding);
            let reference = 0;
            let discriminants = m.linear_discriminant(base, reference)?;
            columns.push(alias(guarded("0E0".into()), &format!("__br_s{reference}")));
            for (class, intercept, w) in discriminants {
                columns.push(alias(guarded(linear_form(intercept, &terms, &w)), &format!("__br_s{class}")));
            }
        }
        FittedModel::Qda(m) => {
            check_width(file, plan, m.encoding.numeric.len(), m.encoding.one_hot.len() + m.levels.len())?;
            let terms = design_terms(&m.encoding);
            let d = terms.len();
            let factors = m.factors()?;
            let mut whitened = Vec::new();
            for class in 0..k {
                let factor = &factors[class.min(factors.len() - 1)];
                let inverse = factor
                    .lower
                    .clone()
                    .solve_lower_triangular(&nalgebra::DMatrix::identity(d, d))
                    .ok_or_else(|| Error::ModelFile {
                        path: model_name(file),
                        message: format!("the covariance factor of class '{}' cannot be inverted", file.classes[class]),
                    })?;
                let deviations: Vec<String> = terms
                    .iter()
                    .enumerate()
                    .map(|(j, t)| format!("({} - {})", design_value(t), number(m.means[class][j])))
                    .collect();
                for i in 0..d {
                    let products: Vec<String> =
                        (0..=i).map(|j| format!("{} * {}", number(inverse[(i, j)]), deviations[j])).collect();
                    whitened.push(alias(guarded(sql::sum(&products)), &format!("__br_z{class}_{i}")));
                }
                let squares: Vec<String> = (0..d).map(|i| format!("__br_z{class}_{i} * __br_z{class}_{i}")).collect();
                let mut evidence = vec![
                    format!("{} * ({} + ({}))", number(-0.5), number(factor.log_det), sql::sum(&squares)),
                    number(log_base[class]),
                ];
                evidence.extend(level_terms(&m.levels, class));
                columns.push(alias(sql::sum(&evidence), &format!("__br_s{class}")));
            }
            stages.push("__br_wh", whitened);
        }
        FittedModel::NaiveBayes(m) => {
            let p = m.numeric.len();
            check_width(file, plan, m.numeric.len(), m.categorical.len())?;
            let gaussian_part = m.gaussian_terms();
            for class in 0..k {
                let mut terms = vec![number(gaussian_part.constants[class])];
                for j in (0..p).filter(|&j| gaussian_part.gaussian[j]) {
                    // Scaled before squaring, as in the library.
                    let scaled = format!(
                        "((__br_x{j} - {}) * {})",
                        number(m.means[class][j]),
                        number(gaussian_part.scale[class][j])
                    );
                    terms.push(format!("{} * {scaled} * {scaled}", number(-1.0)));
                }
                for b in &m.bernoulli {
                    let [one, zero] = b.log_probabilities[class];
                    terms.push(format!(
                        "CASE WHEN __br_x{} > 5E-1 THEN {} ELSE {} END",
                        b.index,
                        number(one),
                        number(zero)
                    ));
                }
                terms.extend(level_terms(&m.categorical, class));
                terms.push(number(log_base[class]));
                columns.push(alias(guarded(sql::sum(&terms)), &format!("__br_s{class}")));
            }
        }
    }
    stages.push("__br_ev", columns);
    Ok((0..k).map(|c| col(&format!("__br_s{c}"))).collect())
}

/// log P(level | class) of each level-frequency input, as a `CASE` on its
/// level code (the inputs are the plan's categorical inputs, in order).
fn level_terms(tables: &[CategoricalLikelihood], class: usize) -> Vec<String> {
    tables
        .iter()
        .enumerate()
        .map(|(c, table)| {
            let branches: String = table.log_probabilities[class]
                .iter()
                .enumerate()
                .map(|(level, lp)| format!(" WHEN {level} THEN {}", number(*lp)))
                .collect();
            format!("CASE __br_g{c}{branches} END")
        })
        .collect()
}

/// How errors name the model (the request does not carry its file name).
fn model_name(file: &ModelFile) -> String {
    format!("the {} model trained on {}", file.family.name(), file.training.input_path)
}

/// The model's inputs must be the plan's (a hand-edited model file could
/// disagree with its own schema).
fn check_width(file: &ModelFile, plan: &Plan, numeric: usize, categorical: usize) -> Result<()> {
    if numeric != plan.input_width || categorical != plan.categorical.len() {
        return Err(Error::ModelFile {
            path: model_name(file),
            message: "the model's inputs do not match its schema".into(),
        });
    }
    Ok(())
}

/// Stages 4–5: calibration, the prior, log-sum-exp: `__br_p{k}`.
fn posterior_stages(
    stages: &mut Stages,
    file: &ModelFile,
    dialect: Dialect,
    evidence: &[String],
    base: &[f64],
    prior: &[f64],
) -> Result<()> {
    let k = file.classes.len();
    let shift: Vec<f64> = prior.iter().zip(base).map(|(t, f)| t.ln() - f.ln()).collect();
    let plus_shift = |expression: String, c: usize| {
        if shift[c] == 0.0 {
            expression
        } else {
            format!("{expression} + {}", number(shift[c]))
        }
    };
    let mut scores = Vec::new();
    match (&file.calibration, k) {
        (Some(map), 2) => {
            let positive = file.positive_index();
            let negative = 1 - positive;
            let z = format!("({} - {})", evidence[positive], evidence[negative]);
            let probability = match map {
                CalibrationMap::Platt { a, b } => {
                    let exponent = clamp(
                        dialect,
                        &format!("{} * {z} + {}", number(*a), number(*b)),
                        Some(EXPONENT_FLOOR),
                        Some(-EXPONENT_FLOOR),
                    );
                    format!("1E0 / (1E0 + EXP({exponent}))")
                }
                CalibrationMap::Isotonic { breakpoints, values } => step(&z, breakpoints, values, 0, values.len()),
            };
            // The same clamp as the library: ln p and ln(1 − p) stay finite.
            let clamped = clamp(dialect, &probability, Some(1e-300), Some(1.0 - 1e-16));
            stages.push("__br_cal", vec![alias(clamped, "__br_q")]);
            let mut u = vec![String::new(); 2];
            u[positive] = plus_shift("LN(__br_q)".into(), positive);
            u[negative] = plus_shift("LN(1E0 - __br_q)".into(), negative);
            for (c, expression) in u.into_iter().enumerate() {
                scores.push(alias(expression, &format!("__br_u{c}")));
            }
        }
        _ => {
            for (c, e) in evidence.iter().enumerate() {
                scores.push(alias(plus_shift(e.clone(), c), &format!("__br_u{c}")));
            }
        }
    }
    stages.push("__br_u", scores);
    let u: Vec<String> = (0..k).map(|c| col(&format!("__br_u{c}"))).collect();
    stages.push("__br_m", vec![alias(greatest(dialect, &u), "__br_max")]);
    // Below the floor a class's weight is 0, as the library's exp gives 0
    // far below it (PostgreSQL would raise an underflow instead), so a row
    // decided by evidence of 1e295 gives the losing class exactly 0 — which
    // matters when a cost of 1e300 multiplies it.
    let exponents: Vec<String> = (0..k)
        .map(|c| {
            let exponent = format!("{} - __br_max", u[c]);
            alias(sql::floored_exp(&exponent), &format!("__br_w{c}"))
        })
        .collect();
    stages.push("__br_x", exponents);
    let total = sql::sum(&(0..k).map(|c| col(&format!("__br_w{c}"))).collect::<Vec<_>>());
    // Guarded again: a CASE-spelt clamp turns the NULLs of a rejected row
    // into its bound.
    let posteriors: Vec<String> =
        (0..k).map(|c| alias(guarded(format!("__br_w{c} / ({total})")), &format!("__br_p{c}"))).collect();
    stages.push("__br_p", posteriors);
    Ok(())
}

/// The isotonic step for blocks `lo..hi`, searched by halves: a score
/// takes the value of the last block starting at or below it (the first
/// block's value below every breakpoint).
fn step(z: &str, breakpoints: &[f64], values: &[f64], lo: usize, hi: usize) -> String {
    if hi - lo <= 4 {
        let mut text = String::from("CASE");
        for b in (lo + 1..hi).rev() {
            text.push_str(&format!(" WHEN {z} >= {} THEN {}", number(breakpoints[b]), number(values[b])));
        }
        text.push_str(&format!(" ELSE {} END", number(values[lo])));
        return text;
    }
    let mid = (lo + hi) / 2;
    format!(
        "CASE WHEN {z} >= {} THEN {} ELSE {} END",
        number(breakpoints[mid]),
        step(z, breakpoints, values, mid, hi),
        step(z, breakpoints, values, lo, mid)
    )
}

/// Stage 6: expected costs, the first cheapest action, then each capacity
/// in the order of the costs file. Returns the index of the last choice
/// column (`__br_a{t}`).
fn decision_stages(stages: &mut Stages, spec: &CostSpec, dialect: Dialect, k: usize, ids: usize) -> Result<usize> {
    let m = spec.actions.len();
    let columns = spec.columns();
    let mut expected = Vec::new();
    for (a, action) in spec.actions.iter().enumerate() {
        let terms: Vec<String> = (0..k)
            .map(|c| {
                let cost = &action.costs[c];
                let value = match &cost.column {
                    Some(column) => {
                        let slot = columns.iter().position(|x| x == column).unwrap_or(0);
                        format!("({} + {} * __br_k{slot})", number(cost.fixed), number(cost.rate))
                    }
                    None => number(cost.fixed),
                };
                format!("__br_p{c} * {value}")
            })
            .collect();
        expected.push(alias(sql::sum(&terms), &format!("__br_e{a}")));
    }
    stages.push("__br_cost", expected);
    let e = |a: usize| col(&format!("__br_e{a}"));
    // The first cheapest of a set of actions, as its index.
    let first_cheapest = |open: &[usize]| {
        let values: Vec<String> = open.iter().map(|&a| e(a)).collect();
        let results: Vec<String> = open.iter().map(|a| a.to_string()).collect();
        pick_first(&values, "<=", &results)
    };
    let all: Vec<usize> = (0..m).collect();
    stages.push("__br_pick", vec![alias(guarded(first_cheapest(&all)), "__br_a0"), alias("0", "__br_pin0")]);
    let order: String = (0..ids).map(|i| format!(", __br_id{i}")).collect();
    let mut closed: Vec<usize> = Vec::new();
    let mut t = 0;
    for (a, action) in spec.actions.iter().enumerate() {
        let Some(capacity) = action.capacity else { continue };
        let wanting = format!("(__br_pin{t} = 0 AND __br_a{t} = {a})");
        let others: Vec<usize> = (0..m).filter(|b| *b != a && !closed.contains(b)).collect();
        let saving = if others.is_empty() {
            "0E0".to_string()
        } else {
            format!("{} - {}", sql::least(dialect, &others.iter().map(|&b| e(b)).collect::<Vec<_>>()), e(a))
        };
        let limit = match capacity {
            Capacity::Rows(n) => n.to_string(),
            Capacity::Share(share) => {
                format!("FLOOR({} * SUM(CASE WHEN __br_reject IS NULL THEN 1 ELSE 0 END) OVER ())", number(share))
            }
        };
        stages.push(
            &format!("__br_rank{}", t + 1),
            vec![
                alias(format!("CASE WHEN {wanting} THEN 1 ELSE 0 END"), &format!("__br_want{}", t + 1)),
                alias(
                    format!(
                        "ROW_NUMBER() OVER (ORDER BY CASE WHEN {wanting} THEN 0 ELSE 1 END, CASE WHEN {wanting} THEN {saving} END DESC{order})"
                    ),
                    &format!("__br_rank{}", t + 1),
                ),
                alias(limit, &format!("__br_limit{}", t + 1)),
            ],
        );
        closed.push(a);
        let open: Vec<usize> = (0..m).filter(|b| !closed.contains(b)).collect();
        let moved = if open.is_empty() { a.to_string() } else { first_cheapest(&open) };
        let (want, rank, limit) = (
            col(&format!("__br_want{}", t + 1)),
            col(&format!("__br_rank{}", t + 1)),
            col(&format!("__br_limit{}", t + 1)),
        );
        stages.push(
            &format!("__br_cap{}", t + 1),
            vec![
                alias(
                    format!("CASE WHEN {want} = 1 AND {rank} > {limit} THEN {moved} ELSE __br_a{t} END"),
                    &format!("__br_a{}", t + 1),
                ),
                alias(
                    format!("CASE WHEN {want} = 1 AND {rank} <= {limit} THEN 1 ELSE __br_pin{t} END"),
                    &format!("__br_pin{}", t + 1),
                ),
            ],
        );
        t += 1;
    }
    Ok(t)
}
