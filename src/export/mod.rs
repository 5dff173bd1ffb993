//! The warehouse path: the scoring job and the class-conditional fits as
//! plain SQL, for the engine where the data already lives.
//!
//! - [`scoring`] writes one SELECT that reproduces `score` row by row:
//!   posteriors (after calibration and any prior correction), and the
//!   expected-cost action with capacities through a window function.
//! - [`stats_query`] writes the aggregate query whose result (per-class
//!   counts, shifted sums and cross-products, level counts, deciles where
//!   the dialect has them) fits LDA, QDA or naive Bayes without the rows
//!   leaving the engine; [`stats_reader`] reads that result back (the fit
//!   itself is `crate::model::aggregates`, the model file
//!   `crate::train::train_from_aggregates`).
//! - [`sql`] holds what both share: quoting that makes any name harmless,
//!   number literals that keep every bit, and the dialect's spelling of
//!   the few functions that differ.

pub mod scoring;
pub mod sql;
pub mod stats_query;
pub mod stats_reader;

pub use sql::Dialect;
