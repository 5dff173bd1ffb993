//! baserate: Bayes-rule classifiers for credit-risk and fraud work, where the
//! class mix of the training data is not the mix the model will meet.
//!
//! The library owns every computation; the `baserate` binary (its command
//! line lives beside `src/main.rs`, in `src/cli/`) only parses arguments,
//! calls the library and prints. The library compiles without the command
//! line's dependencies (`default-features = false`). Data flows one way:
//! [`data`] → models → priors → decisions → evaluation → reports, with the
//! invented demo scenarios in [`demo`].

#![deny(missing_docs)]
// Index loops mirror the formulas they implement; `!(x > 0.0)` is meant to be
// true for NaN as well.
#![allow(clippy::needless_range_loop, clippy::neg_cmp_op_on_partial_ord)]

pub mod apply;
pub mod batch;
pub mod data;
pub mod decide;
pub mod demo;
pub mod error;
pub mod evaluate;
pub mod export;
pub mod format;
pub mod io;
pub mod model;
pub mod prior;
pub mod records;
pub mod report;
pub mod rng;
pub mod tails;
pub mod train;

/// The caution printed with every report: what baserate's output is and is
/// not, for credit and fraud decisions.
pub const CAUTION: &str = "Caution: baserate gives decision support, not a decision. Credit and fraud decisions \
affect people: fair-lending, anti-discrimination, adverse-action and model-governance rules apply. \
A model trained only on approved applications inherits their selection bias, which baserate does not correct. \
Defer to local law and your institution's licensed practice.";

pub use error::{Error, Result};
