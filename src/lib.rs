//! baserate: Bayes-rule classifiers for credit-risk and fraud work, where the
//! class mix of the training data is not the mix the model will meet.
//!
//! The library owns every computation; the `baserate` binary (its command
//! line lives beside `src/main.rs`, in `src/cli/`) only parses arguments,
//! calls the library and prints. The library compiles without the command
//! line's dependencies (`default-features = false`). Data flows one way:
//! [`data`] → models → priors → decisions → evaluation → reports, with the
//! invented demo scenarios in [`demo`].
//!
//! # The whole job from Rust, without files
//!
//! A dataset from arrays, a fit with its held-out summary, posteriors for
//! new rows, a new base rate estimated and applied, and the decisions that
//! minimise expected cost (the numbers are invented for the example):
//!
//! ```
//! use baserate::apply::arrays::inputs_from_arrays;
//! use baserate::apply::UnseenPolicy;
//! use baserate::data::{ColumnDescription, Dataset, LabelledArrays, ReadOptions};
//! use baserate::decide::{decide, CostSpec};
//! use baserate::model::{discriminant::LdaParams, FamilyParams};
//! use baserate::prior::shift::{estimate_shift, ShiftInput, ShiftOptions};
//! use baserate::train::{train, TrainRequest};
//! use ndarray::Array2;
//!
//! // 400 applications: utilisation and a channel code (0 = branch, 1 = online).
//! let rows = 400;
//! let mut features = Array2::zeros((rows, 2));
//! let mut labels = Vec::new();
//! for r in 0..rows {
//!     let defaulted = r % 5 == 0;
//!     let wobble = ((r * 37) % 100) as f64 / 100.0;
//!     features[(r, 0)] = if defaulted { 0.55 + 0.4 * wobble } else { 0.1 + 0.6 * wobble };
//!     features[(r, 1)] = (r % 3 == 0) as u8 as f64;
//!     labels.push(usize::from(defaulted));
//! }
//! let columns = [ColumnDescription::numeric("utilisation"), ColumnDescription::categorical("channel", &["branch", "online"])];
//! let classes = ["paid".to_string(), "defaulted".to_string()];
//! let arrays = LabelledArrays {
//!     features: features.view(),
//!     columns: &columns,
//!     target_name: "outcome",
//!     classes: &classes,
//!     target: &labels,
//!     weights: None,
//! };
//! let (dataset, _notices) = Dataset::from_arrays(&arrays, &ReadOptions::new("outcome"))?;
//! assert_eq!(dataset.schema.target.positive, "defaulted"); // the minority class
//!
//! let model = train(&dataset, &TrainRequest::new(FamilyParams::Lda(LdaParams::default())))?;
//!
//! // New rows, scored at the training class mix.
//! let new = features.slice(ndarray::s![..100, ..]).to_owned();
//! let inputs = inputs_from_arrays(&model, new.view(), &columns, None, UnseenPolicy::Error)?;
//! let base = model.calibrated_to().to_vec();
//! let posteriors: Vec<f64> = model.log_posteriors(&inputs.inputs(), &base).iter().map(|v| v.exp()).collect();
//!
//! // The new portfolio's base rate, estimated, then applied.
//! let positive = model.positive_index();
//! let input = ShiftInput {
//!     classes: &model.classes,
//!     positive,
//!     training_prior: &base,
//!     posteriors: &posteriors,
//!     confusion: model.held_out.as_ref().map(|h| h.confusion.as_slice()),
//! };
//! let shift = estimate_shift(&input, &ShiftOptions::default())?;
//! let new_rate = shift.estimate("em").map(|e| e.prior["defaulted"]).unwrap_or(0.2);
//! let mut new_prior = vec![0.0; 2];
//! new_prior[positive] = new_rate;
//! new_prior[1 - positive] = 1.0 - new_rate;
//! let restated = model.log_posteriors(&inputs.inputs(), &new_prior).mapv(f64::exp);
//!
//! // Approve or decline: a default costs 5, a declined good customer 1.
//! let costs = CostSpec::parse("costs.toml", "[actions.approve]\npaid = 0\ndefaulted = 5\n[actions.decline]\npaid = 1\ndefaulted = 0\n", &model.classes)?;
//! let expected: Vec<Vec<f64>> = restated.rows().into_iter().map(|p| costs.expected_costs(&p.to_vec(), &|_| 0.0)).collect();
//! let decisions = decide(&costs, &expected);
//! assert_eq!(decisions.action.len(), 100);
//! # Ok::<(), baserate::Error>(())
//! ```
//!
//! Decision support, not a decision: see [`CAUTION`].

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
#[cfg(feature = "linfa")]
pub mod interop;
pub mod io;
pub mod model;
pub mod prior;
pub mod progress;
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
