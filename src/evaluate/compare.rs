//! Families side by side on the same splits, judged out of sample: the
//! comparison's whole API in one place, from its parts —
//! [`crate::evaluate::cross_validation`] (out-of-fold predictions),
//! [`crate::evaluate::paired`] (the evaluation with paired tests),
//! [`crate::evaluate::learning_curve`], [`crate::evaluate::cost_figures`],
//! and the whole run, [`crate::evaluate::study`].

pub use crate::evaluate::cost_figures::*;
pub use crate::evaluate::cross_validation::*;
pub use crate::evaluate::learning_curve::*;
pub use crate::evaluate::paired::*;
pub use crate::evaluate::study::*;
