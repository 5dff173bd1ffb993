//! Evaluation out of sample: rank metrics with DeLong's variance, the
//! probability metrics and calibration, paired comparisons, and the
//! side-by-side comparison of families on shared splits, and
//! [`study`]: a whole comparison or judgement of outside scores as one call.

pub mod compare;
pub mod cost_figures;
pub mod cross_validation;
pub mod learning_curve;
pub mod metrics;
pub mod paired;
pub mod roc;
pub mod study;
