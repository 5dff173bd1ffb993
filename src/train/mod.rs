//! Training's product: the versioned model file ([`file`]), which carries
//! the fitted family, its schema, the held-out summary, calibration and the
//! drift reference.

pub mod file;
