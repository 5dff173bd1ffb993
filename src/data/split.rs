//! Splitting rows into training and test sets: stratified holdout,
//! stratified k-fold (repeated), out-of-time with an optional label-maturity
//! gap. Every split is a fold assignment per row, seeded, so every family
//! sees exactly the same rows in every fold and comparisons are paired.

use crate::error::{Error, Result, Setting};
use crate::rng::Rng;

/// Marks a row that is in no split (the gap of an out-of-time split).
pub const LEFT_OUT: u32 = u32::MAX;

/// How to split.
#[derive(Debug, Clone, PartialEq)]
pub enum SplitPlan {
    /// One stratified test set of this share of the rows.
    Holdout {
        /// Share of rows in the test set, in (0, 1).
        test_fraction: f64,
    },
    /// Stratified K folds, repeated with fresh shuffles.
    KFold {
        /// Number of folds (≥ 2).
        folds: usize,
        /// Number of repeats (≥ 1).
        repeats: usize,
    },
    /// Rows at or after `test_from` in `column` are the test set; with a
    /// gap, training rows are those before `gap_from`, and rows from
    /// `gap_from` up to `test_from` are left out.
    OutOfTime {
        /// The column's values, per row.
        values: Vec<String>,
        /// The column's name (for descriptions).
        column: String,
        /// First value of the test period.
        test_from: String,
        /// First value of the gap (training ends before it).
        gap_from: Option<String>,
    },
}

/// Fold assignments: for each repeat, the fold of each row (0..folds) or
/// [`LEFT_OUT`]. For a holdout or out-of-time split there is one repeat with
/// fold 0 = test and fold 1 = training, and only fold 0 is tested.
#[derive(Debug, Clone, PartialEq)]
pub struct Assignment {
    /// Per repeat, per row.
    pub folds: Vec<Vec<u32>>,
    /// Folds per repeat that are tested in turn.
    pub tested_folds: usize,
    /// For people: "5-fold stratified cross-validation, seed 1", ...
    pub description: String,
}

impl Assignment {
    /// The rows tested in fold `fold` of `repeat`.
    pub fn test_rows(&self, repeat: usize, fold: usize) -> Vec<usize> {
        self.folds[repeat].iter().enumerate().filter(|(_, &f)| f == fold as u32).map(|(i, _)| i).collect()
    }

    /// Whether row `i` trains fold `fold` of `repeat`.
    pub fn trains(&self, repeat: usize, fold: usize, i: usize) -> bool {
        let f = self.folds[repeat][i];
        f != fold as u32 && f != LEFT_OUT
    }
}

/// Compares two values of an out-of-time column: as numbers when both are,
/// else as text (which orders ISO dates and `YYYY-MM` months correctly).
pub fn compare_values(a: &str, b: &str) -> std::cmp::Ordering {
    match (a.trim().parse::<f64>(), b.trim().parse::<f64>()) {
        (Ok(x), Ok(y)) => x.total_cmp(&y),
        _ => a.cmp(b),
    }
}

/// Seeded Fisher–Yates shuffle.
fn shuffle(values: &mut [usize], rng: &mut Rng) {
    for i in (1..values.len()).rev() {
        let j = (rng.next_u64() % (i as u64 + 1)) as usize;
        values.swap(i, j);
    }
}

/// Assigns rows to folds. `target` gives each row's class (for
/// stratification); `classes` the number of classes.
pub fn assign(plan: &SplitPlan, target: &[u32], classes: usize, seed: u64) -> Result<Assignment> {
    let n = target.len();
    let by_class = |rng: &mut Rng| -> Vec<Vec<usize>> {
        let mut members: Vec<Vec<usize>> = vec![Vec::new(); classes];
        for (i, &y) in target.iter().enumerate() {
            members[y as usize].push(i);
        }
        for m in members.iter_mut() {
            shuffle(m, rng);
        }
        members
    };
    match plan {
        SplitPlan::KFold { folds, repeats } => {
            if *folds < 2 || *repeats < 1 {
                return Err(Error::invalid(crate::error::message![
                    Setting::Folds,
                    " must be at least 2 and ",
                    Setting::Repeats,
                    " at least 1"
                ]));
            }
            let mut all = Vec::with_capacity(*repeats);
            for repeat in 0..*repeats {
                let mut rng = Rng::new(Rng::stream_seed(seed, 1000 + repeat as u64));
                let mut fold_of = vec![0u32; n];
                // A running offset across classes, so the extra rows of each
                // class go to different folds.
                let mut offset = 0;
                for members in by_class(&mut rng) {
                    for (position, &i) in members.iter().enumerate() {
                        fold_of[i] = ((offset + position) % folds) as u32;
                    }
                    offset += members.len();
                }
                all.push(fold_of);
            }
            Ok(Assignment {
                folds: all,
                tested_folds: *folds,
                description: format!(
                    "{folds}-fold stratified cross-validation{}, seed {seed}",
                    if *repeats > 1 { format!(", {repeats} repeats") } else { String::new() }
                ),
            })
        }
        SplitPlan::Holdout { test_fraction } => {
            if !(*test_fraction > 0.0 && *test_fraction < 1.0) {
                return Err(Error::invalid(crate::error::message![
                    Setting::TestFraction,
                    " must lie strictly between 0 and 1"
                ]));
            }
            let mut rng = Rng::new(Rng::stream_seed(seed, 999));
            let mut fold_of = vec![1u32; n];
            for members in by_class(&mut rng) {
                let test = (members.len() as f64 * test_fraction).round() as usize;
                for &i in &members[..test] {
                    fold_of[i] = 0;
                }
            }
            let test = fold_of.iter().filter(|&&f| f == 0).count();
            if test == 0 || test == n {
                return Err(Error::invalid(crate::error::message![
                    Setting::TestFraction,
                    format!(" {test_fraction} leaves {test} test rows of {n}; choose a fraction that leaves rows on both sides")
                ]));
            }
            Ok(Assignment {
                folds: vec![fold_of],
                tested_folds: 1,
                description: format!("stratified holdout of {:.0}% of rows, seed {seed}", test_fraction * 100.0),
            })
        }
        SplitPlan::OutOfTime { values, column, test_from, gap_from } => {
            if let Some(gap) = gap_from {
                if compare_values(gap, test_from) == std::cmp::Ordering::Greater {
                    return Err(Error::invalid(crate::error::message![
                        Setting::Gap,
                        format!(" {gap} must not come after "),
                        Setting::TestFrom,
                        format!(" {test_from}")
                    ]));
                }
            }
            let training_end = gap_from.as_deref().unwrap_or(test_from);
            let fold_of: Vec<u32> = values
                .iter()
                .map(|v| {
                    if compare_values(v, test_from) != std::cmp::Ordering::Less {
                        0
                    } else if compare_values(v, training_end) == std::cmp::Ordering::Less {
                        1
                    } else {
                        LEFT_OUT
                    }
                })
                .collect();
            let test = fold_of.iter().filter(|&&f| f == 0).count();
            let train = fold_of.iter().filter(|&&f| f == 1).count();
            if test == 0 || train == 0 {
                return Err(Error::invalid(crate::error::message![
                    format!("the out-of-time split on '{column}' leaves {train} training and {test} test rows; choose another "),
                    Setting::TestFrom
                ]));
            }
            let gap_text = match gap_from {
                Some(g) => format!(", rows from {g} up to {test_from} left out as a label-maturity gap"),
                None => String::new(),
            };
            Ok(Assignment {
                folds: vec![fold_of],
                tested_folds: 1,
                description: format!(
                    "out of time on '{column}': training before {training_end}, test from {test_from}{gap_text}"
                ),
            })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn folds_are_stratified_and_deterministic() {
        let target: Vec<u32> = (0..1000).map(|i| u32::from(i % 10 == 0)).collect();
        let a = assign(&SplitPlan::KFold { folds: 5, repeats: 2 }, &target, 2, 7).unwrap();
        assert_eq!(a, assign(&SplitPlan::KFold { folds: 5, repeats: 2 }, &target, 2, 7).unwrap());
        for f in 0..5 {
            let rows = a.test_rows(0, f);
            assert_eq!(rows.len(), 200);
            assert_eq!(rows.iter().filter(|&&i| target[i] == 1).count(), 20);
        }
        assert_ne!(a.folds[0], a.folds[1]);
    }

    #[test]
    fn out_of_time_with_a_gap() {
        let values: Vec<String> =
            ["2025-01", "2025-05", "2025-07", "2025-09", "2025-12"].iter().map(|s| s.to_string()).collect();
        let plan = SplitPlan::OutOfTime {
            values,
            column: "month".into(),
            test_from: "2025-09".into(),
            gap_from: Some("2025-06".into()),
        };
        let a = assign(&plan, &[0, 1, 0, 1, 0], 2, 1).unwrap();
        assert_eq!(a.folds[0], vec![1, 1, LEFT_OUT, 0, 0]);
    }
}
