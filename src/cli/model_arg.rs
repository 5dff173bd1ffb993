//! Loading the model file named on the command line, for every command
//! that reads one (`score`, `inspect`, `shift`, `export-sql`): one flag to
//! accept a deliberately edited file, one warning when its integrity
//! cannot be vouched for.

use std::path::Path;

use baserate::train::file::{Integrity, ModelFile};

/// The flag of the commands that load a model.
#[derive(Debug, Clone, Copy, clap::Args)]
pub struct ModelArgs {
    /// Uses a model file whose content was changed since it was fitted (its checksum no longer matches); the run records that it did.
    #[arg(long)]
    pub accept_edited_model: bool,
}

impl ModelArgs {
    /// Loads `path`, telling the user on stderr when the file carries no
    /// checksum or was used though edited.
    pub fn load(&self, path: &Path) -> baserate::Result<(ModelFile, Integrity)> {
        let (file, integrity) = ModelFile::open(path, self.accept_edited_model)?;
        if let Some(warning) = integrity.warning(&path.display().to_string()) {
            eprintln!("warning: {warning}");
        }
        Ok((file, integrity))
    }
}
