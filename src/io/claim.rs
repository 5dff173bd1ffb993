//! A run's hold on its outputs: an advisory lock beside each regular-file
//! output (`.NAME.lock`, locked with `flock`), taken before any work and
//! kept until the outputs are in place, so a second run aimed at the same
//! outputs refuses instead of mixing its files with the first's. `-` and
//! devices need none.
//!
//! Once a lock is held, temporary files an earlier, killed run left beside
//! that output (`.NAME.partial-PID`) are removed, and named in
//! [`OutputClaim::stale_removed`] so the user can be told.
//!
//! A lock file is removed by the run that holds it, while holding it; a run
//! that finds, after locking, that the path no longer names the file it
//! locked (removed by its holder meanwhile) tries again, so two runs never
//! both believe they hold one output.

use std::fs::{File, OpenOptions};
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// The locks of a run's outputs, released (and their files removed) on drop.
#[derive(Debug, Default)]
pub struct OutputClaim {
    locks: Vec<Lock>,
    /// Temporary files of earlier runs that were removed.
    pub stale_removed: Vec<PathBuf>,
}

#[derive(Debug)]
struct Lock {
    path: PathBuf,
    _file: File,
    _on_signal: super::signals::Registered,
}

impl Drop for Lock {
    fn drop(&mut self) {
        // Removed while still locked: see the module documentation.
        let _ = std::fs::remove_file(&self.path);
    }
}

impl OutputClaim {
    /// How many outputs are locked.
    pub fn locked(&self) -> usize {
        self.locks.len()
    }
}

/// Locks every regular-file output among `outputs` (`-`, devices and named
/// pipes are skipped) and removes stale temporary files beside them.
/// Refuses, naming the output, when another run holds one.
pub fn claim_outputs(outputs: &[&Path]) -> Result<OutputClaim> {
    let mut claim = OutputClaim::default();
    for &output in outputs {
        if output.as_os_str() == "-" || super::is_special(output) {
            continue;
        }
        let (directory, name) = super::place_of(output);
        let lock_path = directory.join(format!(".{name}.lock"));
        claim.locks.push(lock(output, &lock_path)?);
        claim.stale_removed.extend(remove_stale(&directory, &name));
    }
    Ok(claim)
}

/// The name of a temporary file of `name` written by process `pid`.
pub(crate) fn temporary_name(name: &str, pid: u32) -> String {
    format!(".{name}.partial-{pid}")
}

fn lock(output: &Path, lock_path: &Path) -> Result<Lock> {
    let shown = output.display().to_string();
    loop {
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(lock_path)
            .map_err(|e| Error::io(&shown, e))?;
        match file.try_lock() {
            Ok(()) => {}
            Err(std::fs::TryLockError::WouldBlock) => {
                let mut holder = String::new();
                let _ = file.read_to_string(&mut holder);
                return Err(Error::OutputBusy {
                    path: shown,
                    holder: holder.trim().parse().ok(),
                    lock: lock_path.display().to_string(),
                });
            }
            Err(std::fs::TryLockError::Error(e)) => return Err(Error::io(&shown, e)),
        }
        if still_named(&file, lock_path) {
            // The holder's process id, for the message a second run prints.
            let _ = file.set_len(0).and_then(|_| file.write_all(std::process::id().to_string().as_bytes()));
            let on_signal = super::signals::register(lock_path);
            return Ok(Lock { path: lock_path.to_path_buf(), _file: file, _on_signal: on_signal });
        }
    }
}

/// True when `path` still names the open `file` (not removed or replaced
/// since it was opened).
fn still_named(file: &File, path: &Path) -> bool {
    #[cfg(unix)]
    {
        matches!((file.metadata(), std::fs::metadata(path)), (Ok(a), Ok(b)) if super::same_inode(&a, &b))
    }
    #[cfg(not(unix))]
    {
        let _ = file;
        path.exists()
    }
}

/// Removes `.NAME.partial-PID` files in `directory`; returns those removed.
fn remove_stale(directory: &Path, name: &str) -> Vec<PathBuf> {
    let prefix = format!(".{name}.partial-");
    let Ok(entries) = std::fs::read_dir(directory) else { return Vec::new() };
    let mut removed = Vec::new();
    for entry in entries.flatten() {
        let file_name = entry.file_name();
        let Some(text) = file_name.to_str() else { continue };
        let is_stale =
            text.strip_prefix(&prefix).is_some_and(|pid| !pid.is_empty() && pid.bytes().all(|b| b.is_ascii_digit()));
        if is_stale && std::fs::remove_file(entry.path()).is_ok() {
            removed.push(entry.path());
        }
    }
    removed.sort();
    removed
}
