//! The data layer: reading analysts' CSV files into model inputs.
//!
//! - [`options`]: what the user says about a file (roles, kinds, missing values);
//! - [`csv_read`]: parallel, position-aware parsing into typed columns;
//! - [`dataset`]: the missing-value policy, the target, and the model inputs;
//! - [`join`]: a training file and its holdout read as one dataset;
//! - [`schema`]: the serializable description a model file embeds;
//! - [`summary`]: column summaries (mean, standard deviation, exact deciles);
//! - [`suggest`]: the closest column name for a misspelt one.
//!
//! This layer knows nothing of models.

pub mod arrays;
pub mod csv_chunk;
pub mod csv_read;
pub mod dataset;
pub mod integer_coded;
pub mod join;
pub mod number;
pub mod options;
pub mod schema;
pub mod score_column;
pub mod split;
pub mod suggest;
pub mod summary;

pub use arrays::{ColumnDescription, LabelledArrays};
pub use dataset::{DataNotice, Dataset, Inputs};
pub use options::{MissingPolicy, ReadOptions};
pub use schema::Schema;
