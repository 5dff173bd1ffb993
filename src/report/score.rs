//! The summary `score` prints when the run ends: rows scored and set
//! aside, values filled, inputs outside the training range, drift, the
//! decisions and their cost, the equivalent cutoff, and the caution.

use crate::batch::{ScoreJob, Summary};
use crate::train::file::ModelFile;

/// Features shown on the drift line, largest PSI first; the run summary has
/// them all.
const DRIFT_SHOWN: usize = 5;

/// Scored rows below which the drift line says PSI means little: with ten
/// bins, about 50 rows a bin (our rule).
const FEWEST_ROWS_FOR_PSI: u64 = 500;

/// The end-of-run summary of `score` (`target` names where the posteriors
/// went).
pub fn render_score_summary(file: &ModelFile, job: &ScoreJob, summary: &Summary, target: &str) -> String {
    let positive = file.positive_index();
    let mut lines: Vec<String> = Vec::new();
    let set_aside = if summary.rows_rejected == 0 {
        String::new()
    } else {
        let reasons: Vec<String> = summary.rejected_by_reason.iter().map(|(r, n)| format!("{r} {n}")).collect();
        format!(" ({} set aside: {})", summary.rows_rejected, reasons.join(", "))
    };
    if summary.rows_scored == summary.rows_read {
        lines.push(format!(
            "scored {} rows with the {} model; posteriors written to {target}",
            summary.rows_scored,
            file.family.name()
        ));
    } else {
        lines.push(format!(
            "scored {} of {} rows with the {} model{set_aside}; posteriors written to {target}",
            summary.rows_scored,
            summary.rows_read,
            file.family.name()
        ));
    }
    for (column, n) in &summary.filled_missing {
        lines.push(format!("note: column '{column}': {n} missing values filled as in training"));
    }
    for (column, n) in &summary.unseen_as_missing {
        lines.push(format!("note: column '{column}': {n} unseen categories taken as missing"));
    }
    let outside: Vec<String> = summary
        .out_of_range
        .iter()
        .filter(|o| o.below + o.above > 0)
        .map(|o| format!("{} {} below, {} above", o.feature, o.below, o.above))
        .collect();
    if !outside.is_empty() {
        lines.push(format!("outside the training range: {}", outside.join("; ")));
    }
    if let Some(drift) = &summary.drift {
        let mut flagged: Vec<&crate::batch::Stability> = drift.features.iter().filter(|s| s.band != "stable").collect();
        flagged.sort_by(|a, b| b.psi.total_cmp(&a.psi));
        let features = if flagged.is_empty() {
            "every feature stable".to_string()
        } else {
            let shown: Vec<String> = flagged
                .iter()
                .take(DRIFT_SHOWN)
                .map(|s| format!("{} {:.3} {}", s.feature.as_deref().unwrap_or(""), s.psi, s.band))
                .collect();
            let rest = flagged.len().saturating_sub(DRIFT_SHOWN);
            let more = if rest > 0 {
                format!(" and {rest} more not stable (every feature's PSI is in the run summary, --summary)")
            } else {
                String::new()
            };
            format!("{}{more}", shown.join(", "))
        };
        let few = if summary.rows_scored < FEWEST_ROWS_FOR_PSI {
            format!(
                " — on {} rows, too few for PSI to mean much (below {FEWEST_ROWS_FOR_PSI} rows, about 50 a bin, it is mostly sampling noise)",
                summary.rows_scored
            )
        } else {
            String::new()
        };
        let score = match &drift.score {
            Some(s) => format!("score {:.3} {}", s.psi, s.band),
            None => "score not available (no training score distribution in the model)".into(),
        };
        lines.push(format!("drift (PSI vs training): {score}; {features}{few}"));
    }
    if let (Some(spec), Some(actions), Some(total)) = (&job.costs, &summary.actions, summary.total_expected_cost) {
        let counts: Vec<String> =
            spec.actions.iter().map(|a| format!("{} {}", a.name, actions.get(&a.name).copied().unwrap_or(0))).collect();
        lines.push(format!(
            "decisions: {}; total expected cost {total:.2} ({:.4} per row)",
            counts.join(", "),
            total / summary.rows_scored.max(1) as f64
        ));
        if let Some((action, cutoff)) = spec.cutoff(positive) {
            let base = file.calibrated_to()[positive];
            let on_model_scale = if (job.prior[positive] - base).abs() > 1e-12 {
                format!(
                    " (on the model's own scale, at its class mix {base:.4}: {:.6})",
                    crate::decide::cutoff_on_training_scale(cutoff, base, job.prior[positive])
                )
            } else {
                String::new()
            };
            lines.push(format!("equivalent rule: {action} when p({}) >= {cutoff:.6}{on_model_scale}", file.positive));
        }
        lines.push(crate::report::wrap(crate::CAUTION, 100, 0));
    } else if job.reasons > 0 {
        lines.push(crate::report::wrap(crate::CAUTION, 100, 0));
    }
    let mut text = lines.join("\n");
    text.push('\n');
    text
}

/// The line `export-sql` ends with: where the SQL went and the columns its
/// SELECT returns.
pub fn sql_written(
    file: &crate::train::file::ModelFile,
    request: &crate::export::scoring::ScoringRequest,
    shown: &str,
) -> String {
    let mut columns: Vec<String> = request.ids.clone();
    columns.extend(file.classes.iter().map(|c| crate::model::posterior_column(c)));
    if request.costs.is_some() {
        columns.extend(["action".to_string(), "expected_cost".to_string()]);
    }
    columns.push("reject_reason".into());
    format!(
        "wrote {shown}: one SELECT over {} ({} dialect) returning {}",
        request.table,
        request.dialect.name(),
        columns.join(", ")
    )
}
