//! Writing output files so that a failed run never leaves half a file.

use std::io::Write;
use std::path::Path;

use crate::error::{Error, Result};

/// Writes `bytes` to `path` atomically: into a temporary file beside it,
/// flushed to disk, then renamed over the target. `-` writes to stdout.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let shown = path.display().to_string();
    if shown == "-" {
        let mut out = std::io::stdout().lock();
        return out.write_all(bytes).and_then(|_| out.flush()).map_err(|e| Error::io("<stdout>", e));
    }
    let directory = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let file_name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let temporary = directory.join(format!(".{file_name}.partial-{}", std::process::id()));
    let result = (|| {
        let mut file = std::fs::File::create(&temporary)?;
        file.write_all(bytes)?;
        file.sync_all()?;
        std::fs::rename(&temporary, path)
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&temporary);
        return Err(Error::io(shown, e));
    }
    Ok(())
}

/// Creates a directory and its parents.
pub fn create_dir(path: &Path) -> Result<()> {
    std::fs::create_dir_all(path).map_err(|e| Error::io(path.display().to_string(), e))
}
