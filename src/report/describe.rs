//! The `describe` screen: each column's role, kind, missing values, levels
//! and summaries, the class mix and the positive class, and the notices.

use crate::data::schema::{ColumnKind, ColumnRole, PositiveRule, Schema};
use crate::format::{count, number, percent};
use crate::report::table::{Align, Table};

/// The schema as text for people.
pub fn render_schema(path: &str, schema: &Schema, notices: &[String]) -> String {
    let features: Vec<_> = schema.features().collect();
    let numeric = features.iter().filter(|c| c.kind == Some(ColumnKind::Numeric)).count();
    let mut out = format!(
        "{path}: {} rows, {} columns ({} features: {numeric} numeric, {} categorical)\n",
        count(schema.rows),
        schema.columns.len(),
        features.len(),
        features.len() - numeric
    );
    if schema.rows_dropped > 0 {
        out.push_str(&format!("{} rows dropped for missing values\n", count(schema.rows_dropped)));
    }
    let target = &schema.target;
    let mix = target.class_mix();
    let classes: Vec<String> = target
        .classes
        .iter()
        .zip(&target.counts)
        .zip(&mix)
        .map(|((c, n), share)| format!("{c} {} ({})", count(*n), percent(*share)))
        .collect();
    out.push_str(&format!("target '{}': {}\n", target.column, classes.join(", ")));
    out.push_str(&format!(
        "positive class: {} ({})\n\n",
        target.positive,
        match target.positive_rule {
            PositiveRule::Stated => "set with --positive",
            PositiveRule::Minority => "the minority class; set another with --positive",
        }
    ));
    let mut table = Table::new(&[
        ("column", Align::Left),
        ("role", Align::Left),
        ("kind", Align::Left),
        ("missing", Align::Right),
        ("summary", Align::Left),
    ]);
    for column in &schema.columns {
        let role = match column.role {
            ColumnRole::Feature => "feature",
            ColumnRole::Target => "target",
            ColumnRole::Id => "id",
            ColumnRole::Weight => "weight",
            ColumnRole::Excluded => "excluded",
        };
        let kind = match column.kind {
            Some(ColumnKind::Numeric) => "numeric",
            Some(ColumnKind::Categorical) => "categorical",
            None => "",
        };
        let summary = if let Some(s) = &column.numeric {
            format!(
                "mean {}  sd {}  min {}  median {}  max {}",
                number(s.mean, 4),
                number(s.std_dev, 3),
                number(s.min, 4),
                number(s.median, 4),
                number(s.max, 4)
            )
        } else if let Some(c) = &column.categorical {
            let shown: Vec<String> =
                c.levels.iter().zip(&c.counts).take(6).map(|(l, n)| format!("{l} {}", count(*n))).collect();
            let more = if c.levels.len() > 6 { format!(" (+{} more)", c.levels.len() - 6) } else { String::new() };
            format!("{} levels: {}{more}", c.levels.len(), shown.join(", "))
        } else {
            String::new()
        };
        table.row(vec![column.name.clone(), role.into(), kind.into(), count(column.missing), summary]);
    }
    out.push_str(&table.render());
    if !notices.is_empty() {
        out.push_str("\nnotes:\n");
        for n in notices {
            out.push_str(&format!("- {n}\n"));
        }
    }
    out
}
