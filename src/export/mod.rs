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
//! - [`newton_query`] writes the aggregate query of one Newton step of
//!   logistic regression at a model's coefficients, and [`newton_reader`]
//!   reads its result back (the step itself is
//!   `crate::model::logistic_aggregates`, the model file
//!   `crate::train::newton`).
//! - [`sql`] holds what both share: quoting that makes any name harmless,
//!   number literals that keep every bit, and the dialect's spelling of
//!   the few functions that differ.

pub mod newton_query;
pub mod newton_reader;
pub mod scoring;
pub mod sql;
pub mod stats_query;
pub mod stats_reader;

pub use sql::Dialect;
