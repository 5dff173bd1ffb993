//! A column of probabilities made elsewhere, read as numbers in [0, 1]
//! (and, for a labelled file, its label column read as yes/no), for the
//! shift estimate from scores alone.

use std::path::Path;

use crate::data::csv_read::{read_path, ColumnValues};
use crate::data::options::ReadOptions;
use crate::error::{Error, Result};

/// The labels read as the positive class: `1`, `yes`, `true` (anything
/// else is the other class).
pub const POSITIVE_LABELS: [&str; 3] = ["1", "yes", "true"];

/// Reads the probabilities in `column` of `path` and, when `target` is
/// given, whether each row's label is positive ([`POSITIVE_LABELS`]).
pub fn read_score_column(
    path: &Path,
    column: &str,
    target: Option<&str>,
    delimiter: u8,
) -> Result<(Vec<f64>, Option<Vec<bool>>)> {
    let shown = path.display().to_string();
    let mut options = ReadOptions::new(target.unwrap_or(""));
    options.delimiter = delimiter;
    options.score_columns = vec![column.to_string()];
    options.scores_are_probabilities = true;
    options.model_columns = Some(vec![column.to_string()]);
    let table = read_path(path, &options)?;
    let not_numeric =
        || Error::SchemaMismatch { path: shown.clone(), message: format!("column '{column}' is not numeric").into() };
    let index = table.index_of(column).ok_or_else(not_numeric)?;
    let ColumnValues::NumericFeature { index: j } = table.columns[index].values else {
        return Err(not_numeric());
    };
    // The reader refused any value outside [0, 1], naming its line; a
    // missing score is refused here, also by its line.
    if let Some(line) = table.columns[index].facts.first_missing_line {
        let at = crate::error::Position { path: shown, line };
        return Err(Error::NotAProbability { at, column: column.to_string(), value: String::new() });
    }
    let p: Vec<f64> = table.numeric.column(j).to_vec();
    let labels = target.and_then(|t| table.index_of(t)).and_then(|i| match &table.columns[i].values {
        ColumnValues::Categorical { codes, levels, .. } => Some(
            codes
                .iter()
                .map(|&c| levels.get(c as usize).is_some_and(|l| POSITIVE_LABELS.contains(&l.as_str())))
                .collect(),
        ),
        _ => None,
    });
    Ok((p, labels))
}
