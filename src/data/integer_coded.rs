//! Numeric columns that look like integer-coded categories: every value a
//! whole number and at most [`MOST_CODES`] distinct values (our rule). Read
//! as numbers, such a column enters every family as one ordered scale (and
//! as a Gaussian in the class-conditional ones), which a code such as an
//! occupation or a region number is not. `describe` names them and the flag
//! that reads them as categories.

use crate::data::dataset::{DataNotice, Dataset};
use crate::error::Setting;

/// The most distinct whole-number values a numeric column may have and
/// still be named as possibly integer-coded (our rule).
pub const MOST_CODES: usize = 12;

/// A notice for each numeric feature whose values are all whole numbers
/// with at most [`MOST_CODES`] distinct ones, naming them.
pub fn integer_coded_notices(dataset: &Dataset) -> Vec<DataNotice> {
    let features: Vec<&str> = dataset
        .schema
        .features()
        .filter(|c| c.kind == Some(crate::data::schema::ColumnKind::Numeric))
        .map(|c| c.name.as_str())
        .collect();
    let inputs = dataset.inputs();
    let mut notices = Vec::new();
    // Numeric features come first among the numeric inputs, in file order.
    for (j, name) in features.iter().enumerate() {
        let mut values: Vec<f64> = Vec::new();
        let whole = inputs.numeric.column(j).iter().all(|&v| {
            if !(v.is_finite() && v.fract() == 0.0) {
                return false;
            }
            if !values.contains(&v) {
                values.push(v);
            }
            values.len() <= MOST_CODES
        });
        if whole && values.len() >= 2 {
            values.sort_by(f64::total_cmp);
            let shown: Vec<String> = values.iter().map(|v| format!("{v}")).collect();
            notices.push(DataNotice(crate::error::message![
                format!(
                    "'{name}' holds only the whole numbers {}: if they are codes rather than amounts, read it as a category with ",
                    shown.join(", ")
                ),
                Setting::Categorical,
                format!(" {name}")
            ]));
        }
    }
    notices
}
