//! Writing output files so that a failed run never leaves half a file.

use std::path::Path;

use baserate::error::{Error, Result};

pub use baserate::io::write_atomic;

/// Creates a directory and its parents.
pub fn create_dir(path: &Path) -> Result<()> {
    std::fs::create_dir_all(path).map_err(|e| Error::io(path.display().to_string(), e))
}
