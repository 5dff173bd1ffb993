//! Writing output files so that a failed run never leaves half a file.

use std::path::Path;

use baserate::error::{Error, Part, Result, Setting};
use baserate::io::OutputClaim;

pub use baserate::io::write_atomic;

/// Refuses, before any work, a run with an output on one of its inputs or
/// two outputs on one file (see [`baserate::io::check_outputs`]). Inputs are
/// named in words ("the data file"), outputs by their flag's setting; an
/// absent optional path is left out.
pub fn refuse_overwrites(inputs: &[(&str, Option<&Path>)], outputs: &[(Setting, Option<&Path>)]) -> Result<()> {
    let inputs: Vec<(Part, &Path)> = inputs.iter().filter_map(|(what, p)| p.map(|p| (Part::from(*what), p))).collect();
    let outputs: Vec<(Part, &Path)> = outputs.iter().filter_map(|(s, p)| p.map(|p| (Part::from(*s), p))).collect();
    baserate::io::check_outputs(&inputs, &outputs)
}

/// Refuses overwrites as [`refuse_overwrites`] does, then takes the run's
/// hold on its outputs (see [`baserate::io::claim`]): the returned claim is
/// kept until the outputs are written. Stale temporary files removed on the
/// way are reported on stderr.
pub fn claim_outputs(inputs: &[(&str, Option<&Path>)], outputs: &[(Setting, Option<&Path>)]) -> Result<OutputClaim> {
    refuse_overwrites(inputs, outputs)?;
    let paths: Vec<&Path> = outputs.iter().filter_map(|(_, p)| *p).collect();
    let claim = baserate::io::claim_outputs(&paths)?;
    warn_stale(&claim.stale_removed);
    Ok(claim)
}

/// Tells the user about temporary files of stopped runs that were removed.
pub fn warn_stale(removed: &[std::path::PathBuf]) {
    for path in removed {
        eprintln!(
            "warning: removed {}, a temporary file left by an earlier run that was stopped before it finished",
            path.display()
        );
    }
}

/// Creates a directory and its parents.
pub fn create_dir(path: &Path) -> Result<()> {
    std::fs::create_dir_all(path).map_err(|e| Error::io(path.display().to_string(), e))
}

/// The data layer's notices on stderr, as every command prints them.
pub fn print_notices(notices: &[baserate::data::DataNotice]) {
    for n in notices {
        eprintln!("note: {}", baserate::report::wrap(&n.describe(&crate::cli::flag), 100, 6));
    }
}
