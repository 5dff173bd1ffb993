//! Evaluation out of sample: rank metrics with DeLong's variance, the
//! probability metrics and calibration, paired comparisons, and the
//! side-by-side comparison of families on shared splits.

pub mod compare;
pub mod metrics;
pub mod roc;
