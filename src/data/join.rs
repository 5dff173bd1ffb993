//! A training file and its holdout file read as one dataset: each file is
//! read (and checked) on its own, so an error names its own file and line;
//! the two typed tables are then stacked, the training rows first.
//!
//! The stacked dataset is the one a single file holding both would give: a
//! column's kind and levels come from both files (a column that is numeric
//! in one and holds text in the other is read again as categorical, as one
//! file would have been read), and so do the column summaries.

use std::path::Path;

use ndarray::{Array2, ShapeBuilder};

use crate::data::csv_chunk::MISSING_CODE;
use crate::data::csv_read::{read_path, ColumnValues, ReadColumn, ReadTable};
use crate::data::dataset::{DataNotice, Dataset};
use crate::data::options::ReadOptions;
use crate::error::{Error, Result};

/// A training set and its holdout as one dataset.
#[derive(Debug, Clone)]
pub struct WithHoldout {
    /// Every row: the training file's, then the holdout's.
    pub dataset: Dataset,
    /// What the data layer noticed about the stacked rows.
    pub notices: Vec<DataNotice>,
    /// How many of the rows (the first) are the training file's.
    pub training_rows: usize,
}

impl Dataset {
    /// Reads `training` and `holdout` (same header) as one dataset; see
    /// the module documentation.
    pub fn read_with_holdout(training: &Path, holdout: &Path, options: &ReadOptions) -> Result<WithHoldout> {
        let mut options = options.clone();
        loop {
            let test = read_path(holdout, &options)?;
            let train = read_path(training, &options)?;
            let train_names: Vec<&str> = train.columns.iter().map(|c| c.name.as_str()).collect();
            let test_names: Vec<&str> = test.columns.iter().map(|c| c.name.as_str()).collect();
            if train_names != test_names {
                return Err(Error::Usage(format!(
                    "{} must have the same header as {}",
                    holdout.display(),
                    training.display()
                )));
            }
            // The holdout is checked as a dataset of its own first, so that
            // its errors name its own lines.
            Dataset::from_table(test.clone(), &options)?;
            // A column numeric in one file and text in the other is read
            // again, categorical in both.
            let mixed: Vec<String> = train
                .columns
                .iter()
                .zip(&test.columns)
                .filter(|(a, b)| is_numeric(a) != is_numeric(b))
                .map(|(a, _)| a.name.clone())
                .collect();
            let fresh: Vec<String> = mixed.into_iter().filter(|c| !options.categorical.contains(c)).collect();
            if !fresh.is_empty() {
                options.categorical.extend(fresh);
                continue;
            }
            let training_rows = train.rows;
            let shown = format!("{} + {}", training.display(), holdout.display());
            let joined = stack(shown, train, test)?;
            let (dataset, notices) = Dataset::from_table(joined, &options)?;
            return Ok(WithHoldout { dataset, notices, training_rows });
        }
    }
}

fn is_numeric(column: &ReadColumn) -> bool {
    matches!(column.values, ColumnValues::NumericFeature { .. })
}

/// The rows of `second` below those of `first` (same columns, same kinds).
fn stack(path: String, first: ReadTable, second: ReadTable) -> Result<ReadTable> {
    let rows = first.rows + second.rows;
    let (p, q) = (first.numeric.ncols(), second.numeric.ncols());
    if p != q {
        return Err(Error::Usage(format!("{path}: the files do not read the same numeric columns")));
    }
    // Column-major, as the reader lays out its matrix.
    let mut numeric = Array2::<f64>::zeros((rows, p).f());
    for j in 0..p {
        let mut column = numeric.column_mut(j);
        for (i, v) in first.numeric.column(j).iter().chain(second.numeric.column(j).iter()).enumerate() {
            column[i] = *v;
        }
    }
    let columns =
        first.columns.into_iter().zip(second.columns).map(|(a, b)| stack_column(a, b)).collect::<Result<Vec<_>>>()?;
    Ok(ReadTable { path, rows, columns, numeric })
}

fn stack_column(mut first: ReadColumn, second: ReadColumn) -> Result<ReadColumn> {
    first.facts.merge(&second.facts);
    first.values = match (first.values, second.values) {
        (ColumnValues::NumericFeature { index }, ColumnValues::NumericFeature { .. }) => {
            ColumnValues::NumericFeature { index }
        }
        (ColumnValues::Weights(mut a), ColumnValues::Weights(b)) => {
            a.extend(b);
            ColumnValues::Weights(a)
        }
        (ColumnValues::Text(mut a), ColumnValues::Text(b)) => {
            a.extend(b);
            ColumnValues::Text(a)
        }
        (
            ColumnValues::Categorical { codes: a, levels: la, first_lines: fa },
            ColumnValues::Categorical { codes: b, levels: lb, first_lines: fb },
        ) => {
            let mut levels: Vec<String> = la.iter().chain(&lb).cloned().collect();
            levels.sort_unstable();
            levels.dedup();
            let remap = |own: &[String]| -> Vec<u32> {
                own.iter().map(|l| levels.binary_search(l).map_or(MISSING_CODE, |i| i as u32)).collect()
            };
            let (ra, rb) = (remap(&la), remap(&lb));
            let recode = |codes: Vec<u32>, map: &[u32]| -> Vec<u32> {
                codes.into_iter().map(|c| if c == MISSING_CODE { c } else { map[c as usize] }).collect()
            };
            let mut first_lines = vec![u64::MAX; levels.len()];
            for (map, lines) in [(&rb, &fb), (&ra, &fa)] {
                for (&code, &line) in map.iter().zip(lines) {
                    first_lines[code as usize] = line;
                }
            }
            let mut codes = recode(a, &ra);
            codes.extend(recode(b, &rb));
            ColumnValues::Categorical { codes, levels, first_lines }
        }
        (ColumnValues::Skipped, ColumnValues::Skipped) => ColumnValues::Skipped,
        _ => {
            return Err(Error::Usage(format!(
                "column '{}' is read differently in the two files; declare its kind",
                first.name
            )))
        }
    };
    Ok(first)
}
