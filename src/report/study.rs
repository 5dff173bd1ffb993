//! A study (comparison or judgement of outside scores) for the terminal and the HTML
//! report: the evaluation screen with the decisions table under costs, and
//! the one-line description of the data the report opens with.

use crate::data::schema::ColumnKind;
use crate::data::Dataset;
use crate::error::SettingNames;
use crate::evaluate::cost_figures::CostFigures;
use crate::evaluate::study::Study;
use crate::report::evaluation::{evaluation_html, evaluation_screen, FailedRow, ReportContext};
use crate::report::header::ReportHeader;
use crate::report::table::{Align, Table};

/// The decisions table for the terminal.
pub fn costs_text(figures: &[CostFigures]) -> String {
    let mut table = Table::new(&[
        ("name", Align::Left),
        ("cost per row", Align::Right),
        ("± SE", Align::Right),
        ("95% interval", Align::Right),
        ("total", Align::Right),
        ("cutoff (theory)", Align::Right),
        ("cutoff (best here)", Align::Right),
        ("actions", Align::Left),
    ]);
    for f in figures {
        table.row(vec![
            f.name.clone(),
            crate::format::fixed(f.expected_cost, 4),
            crate::format::fixed(f.expected_cost_se, 4),
            format!("{:.4} – {:.4}", f.expected_cost_ci[0], f.expected_cost_ci[1]),
            crate::format::fixed(f.total_cost, 2),
            f.theoretical_cutoff.map_or("–".into(), |c| crate::format::fixed(c, 4)),
            f.best_cutoff_on_holdout.map_or("–".into(), |c| crate::format::fixed(c, 4)),
            f.actions.iter().map(|(a, n)| format!("{a} {n:.0}")).collect::<Vec<_>>().join(", "),
        ]);
    }
    format!(
        "\ndecisions under the costs (realised cost of the Bayes-rule action on the tested rows):\n{}",
        table.render()
    )
}

/// The study on the terminal; `caution` adds the caution at the end.
/// Failed candidates are rows under the results table, their reasons
/// naming settings by `names`.
pub fn study_screen(study: &Study, names: SettingNames<'_>, caution: bool) -> String {
    let costs = &study.evaluation.costs;
    let cost_table = if costs.is_empty() { String::new() } else { costs_text(costs) };
    evaluation_screen(&study.evaluation, study.reweighted_view(), &cost_table, &failed_rows(study, names), caution)
}

/// The study as a self-contained HTML page: the governance `header`
/// (given its warnings and the study's own notes and warnings here), then
/// `data_description`. Failed candidates are listed in the header and under
/// the results table.
pub fn study_html(study: &Study, names: SettingNames<'_>, data_description: &str, header: &ReportHeader) -> String {
    let failed = failed_rows(study, names);
    let mut header = header.clone();
    header.warnings.extend(study.notes.iter().cloned());
    for r in &study.evaluation.results {
        header.warnings.extend(r.warnings.iter().map(|w| format!("{}: {w}", r.name)));
    }
    evaluation_html(
        &study.evaluation,
        &ReportContext {
            header: &header,
            learning: &study.learning,
            penalised: &study.penalised,
            failed: &failed,
            data_description,
            classes: &study.classes,
        },
    )
}

fn failed_rows(study: &Study, names: SettingNames<'_>) -> Vec<FailedRow> {
    study.failed.iter().map(|f| (f.name.clone(), f.reason(names))).collect()
}

/// "FILE: N rows; target 'T' with classes A, B; features X (numeric), ..."
pub fn compared_data_description(shown: &str, dataset: &Dataset) -> String {
    let target = &dataset.schema.target;
    format!(
        "{shown}: {} rows; target '{}' with classes {}; features {}.",
        dataset.rows(),
        target.column,
        target.classes.join(", "),
        dataset
            .schema
            .features()
            .map(|c| format!(
                "{} ({})",
                c.name,
                if c.kind == Some(ColumnKind::Numeric) { "numeric" } else { "categorical" }
            ))
            .collect::<Vec<_>>()
            .join(", ")
    )
}
