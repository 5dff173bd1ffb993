//! The Newton step query: one statement that computes, at a logistic
//! model's coefficients, the sums one Newton step needs (see
//! [`crate::model::logistic_aggregates`] for the step taken from them).
//!
//! The design is the model's own — numeric inputs, then each categorical
//! input one-hot past its reference level — shifted by one complete row's
//! numeric values (the class-conditional aggregates' shift, for the same
//! reason). The linear predictors are the model's, on the raw values, as
//! the exported scoring statement computes them. Per class label the
//! statement sums the row weights, Σw·u, Σw·u², Σw·p_k·u, the information
//! Σw·p_c(δ_ce − p_e)·u_a·u_b (upper triangle) and Σw·log p(label);
//! class weights are applied afterwards, per label. A second, small
//! GROUPING SETS aggregate counts the rows of every level of every
//! categorical input, which is how levels the model lacks are found.
//!
//! The result is the sums' rows (`kind` = `class`) followed by the level
//! rows (`kind` = `level`), with generated column names; every row carries
//! the start model's fingerprint, so a result is never read against
//! another model.

use crate::error::{Error, Result};
use crate::export::sql::{self, greatest, number, string, Dialect};
use crate::export::stats_query::RowInputs;
use crate::train::file::ModelFile;
use crate::train::newton::{fingerprint, newton_start};

/// The value of the `format` column of a step result.
pub const NEWTON_FORMAT: &str = "baserate-newton-1";

/// Result columns at most: PostgreSQL allows 1,664 entries in a select
/// list, and a margin keeps the statement clear of it.
const MOST_COLUMNS: usize = 1600;

/// A result column: its name, its expression in the sums or level
/// branch, and whether it holds text (for the other branch's NULL).
struct Column {
    name: String,
    expression: String,
    text: bool,
}

fn column(name: impl Into<String>, expression: impl Into<String>) -> Column {
    Column { name: name.into(), expression: expression.into(), text: false }
}

/// The step query at the coefficients of `file` (a logistic model) over `table`.
pub fn newton_sql(file: &ModelFile, table: &str, dialect: Dialect) -> Result<String> {
    let model = newton_start(file)?;
    let schema = &file.schema;
    if schema.features().any(|c| c.imputation.is_some()) {
        return Err(Error::Usage(
            "the start model imputes missing numbers (--missing impute); the step query treats a row with a missing value as incomplete, so fit the start with --missing drop-rows or error".into(),
        ));
    }
    let encoding = &model.encoding;
    let numeric = &encoding.numeric;
    let categorical: Vec<String> = encoding.one_hot.iter().map(|h| h.column.clone()).collect();
    let p = numeric.len();
    let d = encoding.width();
    let order: Vec<usize> = model.coefficients.iter().map(|c| c.class).collect();
    let q = order.len();
    let inputs = RowInputs {
        table,
        target: &schema.target.column,
        numeric,
        categorical: &categorical,
        weight: schema.weight_column(),
        na_tokens: &schema.na_tokens,
    };
    let mut text = String::new();
    for line in [
        format!(
            "baserate {} Newton step for logistic regression on table {table}, at the coefficients of model {}",
            env!("CARGO_PKG_VERSION"),
            fingerprint(file)?
        ),
        "save the result as CSV with a header, then: baserate fit RESULT.csv --from-stats --family logistic --start MODEL -o NEXT".into(),
        "numeric values are shifted by one complete row's values before summing, so one pass keeps the sums accurate".into(),
    ] {
        text.push_str(&sql::comment(&line));
        text.push('\n');
    }
    text.push_str(&inputs.stages(dialect)?);
    let fence = dialect.stage_fence();
    let mut stage = |name: &str, from: &str, columns: Vec<String>| {
        text.push_str(&format!(
            "{name} AS (\n  SELECT\n    {from}.*,\n    {}\n  FROM {from}{fence}\n),\n",
            columns.join(",\n    ")
        ));
    };

    // The shifted design u_a, the weight, and the values for the summaries.
    let mut rows = vec!["CASE WHEN __br_ok = 1 THEN __br_raw_w ELSE 0E0 END AS __br_w".to_string()];
    if schema.weight_column().is_some() {
        rows.push("CASE WHEN __br_raw_w < 0E0 THEN 1 ELSE 0 END AS __br_negative".into());
    }
    for j in 1..=p {
        rows.push(format!("CASE WHEN __br_ok = 1 THEN __br_raw{j} - __br_s{j} ELSE 0E0 END AS __br_u{j}"));
        rows.push(format!("CASE WHEN __br_ok = 1 THEN __br_raw{j} END AS __br_v{j}"));
    }
    let mut a = p;
    for (g, h) in encoding.one_hot.iter().enumerate() {
        for level in h.levels.iter().skip(1) {
            a += 1;
            rows.push(format!(
                "CASE WHEN __br_ok = 1 AND __br_g{} = {} THEN 1E0 ELSE 0E0 END AS __br_u{a}",
                g + 1,
                string(dialect, level)?
            ));
        }
    }
    stage("__br_rows", "__br_flags", rows);

    // The linear predictors at the model's coefficients, raw scale.
    let eta: Vec<String> = model
        .coefficients
        .iter()
        .enumerate()
        .map(|(k, c)| {
            let mut terms = vec![number(c.intercept)];
            for (j, b) in c.slopes.iter().enumerate() {
                if *b != 0.0 {
                    let value = if j < p { format!("__br_raw{}", j + 1) } else { format!("__br_u{}", j + 1) };
                    terms.push(format!("{} * {value}", number(*b)));
                }
            }
            format!("CASE WHEN __br_ok = 1 THEN {} ELSE 0E0 END AS __br_e{}", sql::sum(&terms), k + 1)
        })
        .collect();
    stage("__br_eta", "__br_rows", eta);
    let e: Vec<String> = (1..=q).map(|k| format!("__br_e{k}")).collect();
    let top = std::iter::once("0E0".to_string()).chain(e.iter().cloned()).collect::<Vec<_>>();
    stage("__br_top", "__br_eta", vec![format!("{} AS __br_mx", greatest(dialect, &top))]);
    let exps: Vec<String> = std::iter::once(sql::floored_exp("0E0 - __br_mx"))
        .chain(e.iter().map(|e| sql::floored_exp(&format!("{e} - __br_mx"))))
        .collect();
    stage("__br_lse", "__br_top", vec![format!("__br_mx + LN({}) AS __br_lse", sql::sum(&exps))]);
    // p_k, the log-likelihood term, and the weighted products the sums take.
    let mut observed = Vec::new();
    for (k, &class) in order.iter().enumerate() {
        observed.push(format!("WHEN {} THEN __br_e{}", string(dialect, &file.classes[class])?, k + 1));
    }
    let mut probabilities = vec![format!("(CASE __br_y {} ELSE 0E0 END) - __br_lse AS __br_ly", observed.join(" "))];
    probabilities
        .extend((1..=q).map(|k| format!("{} AS __br_p{k}", sql::floored_exp(&format!("__br_e{k} - __br_lse")))));
    stage("__br_prob", "__br_lse", probabilities);
    let mut products = Vec::new();
    for c in 1..=q {
        products.push(format!("__br_w * __br_p{c} AS __br_wp{c}"));
        for e in c..=q {
            let delta = if c == e { "1E0" } else { "0E0" };
            products.push(format!("__br_w * __br_p{c} * ({delta} - __br_p{e}) AS __br_wh{c}_{e}"));
        }
    }
    stage("__br_weighted", "__br_prob", products);

    // Per class label: the sums.
    let u = |a: usize| format!("__br_u{a}");
    let mut sums = vec![
        column("class", "__br_y"),
        column("rows", "SUM(CASE WHEN __br_w > 0E0 THEN 1 ELSE 0 END)"),
        column("incomplete", "SUM(1 - __br_ok)"),
        column("unlabelled", "SUM(__br_nolabel)"),
        column("weight", "SUM(__br_w)"),
        column("log_likelihood", "SUM(__br_w * __br_ly)"),
    ];
    sums[0].text = true;
    if schema.weight_column().is_some() {
        sums.push(column("negative_weights", "SUM(__br_negative)"));
    }
    for a in 1..=d {
        sums.push(column(format!("sum_{a}"), format!("SUM(__br_w * {})", u(a))));
        sums.push(column(format!("square_{a}"), format!("SUM(__br_w * {} * {})", u(a), u(a))));
    }
    for k in 1..=q {
        sums.push(column(format!("p_sum_{k}_0"), format!("SUM(__br_wp{k})")));
        for a in 1..=d {
            sums.push(column(format!("p_sum_{k}_{a}"), format!("SUM(__br_wp{k} * {})", u(a))));
        }
    }
    for c in 1..=q {
        for e in c..=q {
            for a in 0..=d {
                for b in a..=d {
                    let factors: Vec<String> = [a, b].iter().filter(|&&x| x > 0).map(|&x| u(x)).collect();
                    let product = std::iter::once(format!("__br_wh{c}_{e}")).chain(factors).collect::<Vec<_>>();
                    sums.push(column(format!("information_{c}_{e}_{a}_{b}"), format!("SUM({})", product.join(" * "))));
                }
            }
        }
    }
    for j in 1..=p {
        sums.push(column(format!("min_{j}"), format!("MIN(__br_v{j})")));
        sums.push(column(format!("max_{j}"), format!("MAX(__br_v{j})")));
        sums.push(column(format!("shift_{j}"), format!("MIN(__br_s{j})")));
        sums.push(column(format!("missing_{j}"), format!("SUM(__br_n{j})")));
        sums.push(column(format!("plain_sum_{j}"), format!("SUM(__br_ok * {})", u(j))));
        sums.push(column(format!("plain_square_{j}"), format!("SUM(__br_ok * {} * {})", u(j), u(j))));
    }
    for g in 1..=categorical.len() {
        sums.push(column(format!("level_missing_{g}"), format!("SUM(__br_m{g})")));
    }
    // Per categorical input: the rows of each level among complete rows
    // (counted, not filtered: a WHERE over the aliased stages sets off
    // Spark's constraint propagation; see the aggregates' deciles).
    let mut levels = Vec::new();
    for g in 1..=categorical.len() {
        levels.push(column(format!("grouped_{g}"), format!("1 - GROUPING(__br_g{g})")));
        levels.push(Column { name: format!("level_{g}"), expression: format!("__br_g{g}"), text: true });
    }
    if !categorical.is_empty() {
        levels.push(column("level_rows", "SUM(CASE WHEN __br_w > 0E0 THEN 1 ELSE 0 END)"));
    }
    let total = 4 + sums.len() + levels.len();
    if total > MOST_COLUMNS {
        return Err(Error::Usage(format!(
            "the step query for this model would return {total} columns, more than the engines take ({MOST_COLUMNS}; PostgreSQL's limit is 1,664): {d} design columns and {} classes; fit with fewer inputs or categorical levels",
            file.classes.len()
        )));
    }
    let listed = |columns: &[Column]| {
        columns.iter().map(|c| format!("{} AS {}", c.expression, c.name)).collect::<Vec<_>>().join(",\n    ")
    };
    text.push_str(&format!(
        "__br_sums AS (\n  SELECT\n    {}\n  FROM __br_weighted\n  GROUP BY __br_y\n)",
        listed(&sums)
    ));
    if !categorical.is_empty() {
        let sets: Vec<String> = (1..=categorical.len()).map(|g| format!("(__br_g{g})")).collect();
        text.push_str(&format!(
            ",\n__br_levels AS (\n  SELECT\n    {}\n  FROM __br_rows\n  GROUP BY GROUPING SETS ({})\n)",
            listed(&levels),
            sets.join(", ")
        ));
    }
    let (double, text_type) = (dialect.double_type(), dialect.text_type());
    let null = |c: &Column| format!("CAST(NULL AS {}) AS {}", if c.text { text_type } else { double }, c.name);
    let head = [
        format!("{} AS format", string(dialect, NEWTON_FORMAT)?),
        format!("{} AS start_model", string(dialect, &fingerprint(file)?)?),
        format!("{} AS target", string(dialect, &schema.target.column)?),
    ];
    let branch = |kind: &str, filled: &[Column], empty: &[Column], from: &str, first_filled: bool| {
        let mut list = vec![format!("'{kind}' AS kind")];
        list.extend(head.iter().cloned());
        let present = filled.iter().map(|c| c.name.clone());
        let absent = empty.iter().map(null);
        if first_filled {
            list.extend(present.chain(absent));
        } else {
            list.extend(absent.chain(present));
        }
        format!("SELECT\n  {}\nFROM {from}", list.join(",\n  "))
    };
    text.push_str(&format!("\n{}", branch("class", &sums, &levels, "__br_sums", true)));
    if !categorical.is_empty() {
        text.push_str(&format!("\nUNION ALL\n{}", branch("level", &levels, &sums, "__br_levels", false)));
    }
    text.push_str(";\n");
    Ok(text)
}
