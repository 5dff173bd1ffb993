//! The file system as the library's writers use it:
//!
//! - outputs written whole or not at all ([`write_atomic`], [`AtomicFile`]):
//!   into a temporary file beside the target, renamed into place when done;
//! - a run's hold on its outputs ([`claim`]): a lock beside each, and stale
//!   temporary files of killed runs removed;
//! - temporary files removed when the process is interrupted ([`signals`]);
//! - no output on an input ([`check_outputs`]), hashes and timestamps.

pub mod claim;
#[cfg(unix)]
pub mod signals;
#[cfg(not(unix))]
pub mod signals {
    //! Interrupted runs on platforms without POSIX signals: nothing to do.
    /// A file that would be removed on a signal.
    #[derive(Debug)]
    pub struct Registered;
    /// Does nothing here.
    pub fn register(_: &std::path::Path) -> Registered {
        Registered
    }
    /// Does nothing here.
    pub fn remove_on_signal() {}
    /// Runs `work`.
    pub fn deferred<T>(work: impl FnOnce() -> T) -> T {
        work()
    }
}

use std::io::Write;
use std::path::{Path, PathBuf};

pub use claim::{claim_outputs, OutputClaim};
use signals::Registered;

use crate::error::{Error, Result};

/// The folder an output goes in (`.` for a bare name) and its file name.
fn place_of(path: &Path) -> (PathBuf, String) {
    let directory = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let file_name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    (directory.to_path_buf(), file_name)
}

/// The temporary file beside `path` that this process writes it through.
fn temporary_beside(path: &Path) -> PathBuf {
    let (directory, name) = place_of(path);
    directory.join(claim::temporary_name(&name, std::process::id()))
}

/// Writes `bytes` to `path` atomically: into a temporary file beside it,
/// flushed to disk, then renamed over the target, so a failed or killed run
/// never leaves half a file. `-` writes to stdout.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let shown = path.display().to_string();
    if shown == "-" {
        let mut out = std::io::stdout().lock();
        return out.write_all(bytes).and_then(|_| out.flush()).map_err(|e| Error::io("<stdout>", e));
    }
    if is_special(path) {
        return std::fs::write(path, bytes).map_err(|e| Error::io(shown, e));
    }
    let temporary = temporary_beside(path);
    let _on_signal = signals::register(&temporary);
    let result = (|| {
        let mut file = std::fs::File::create(&temporary)?;
        file.write_all(bytes)?;
        file.sync_all()?;
        signals::deferred(|| std::fs::rename(&temporary, path))
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&temporary);
        return Err(Error::io(shown, e));
    }
    Ok(())
}

/// Bytes as lowercase hex (how every digest is written).
pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// The SHA-256 of bytes, as lowercase hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    use sha2::Digest;
    hex(&sha2::Sha256::digest(bytes))
}

/// The SHA-256 of a file, as lowercase hex.
pub fn sha256_file(path: &Path) -> Result<String> {
    use sha2::Digest;
    let shown = path.display().to_string();
    let mut file = std::fs::File::open(path).map_err(|e| Error::io(&shown, e))?;
    let mut hasher = sha2::Sha256::new();
    let mut buffer = vec![0u8; 1 << 20];
    loop {
        let read = std::io::Read::read(&mut file, &mut buffer).map_err(|e| Error::io(&shown, e))?;
        if read == 0 {
            break;
        }
        hasher.update(&buffer[..read]);
    }
    Ok(hex(&hasher.finalize()))
}

/// The current time as RFC 3339 UTC (`2026-12-01T19:15:34Z`); the
/// `SOURCE_DATE_EPOCH` environment variable, when set, fixes it (for
/// reproducible outputs).
pub fn utc_timestamp() -> String {
    let seconds =
        std::env::var("SOURCE_DATE_EPOCH").ok().and_then(|v| v.trim().parse::<i64>().ok()).unwrap_or_else(|| {
            std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_secs() as i64)
        });
    utc_timestamp_at(seconds)
}

/// Seconds since 1970-01-01 as RFC 3339 UTC.
pub(crate) fn utc_timestamp_at(seconds: i64) -> String {
    let days = seconds.div_euclid(86_400);
    let second_of_day = seconds.rem_euclid(86_400);
    // Civil date from days since 1970-01-01 (Hinnant's algorithm).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z",
        second_of_day / 3600,
        (second_of_day / 60) % 60,
        second_of_day % 60
    )
}

/// A file written in a stream and put in place only when complete: the
/// bytes go to a temporary file beside the target, which [`AtomicFile::commit`]
/// flushes to disk and renames over it. Dropped without a commit (an error,
/// a panic), the temporary file is removed; a killed process leaves at most
/// a hidden `.NAME.partial-PID` file, never a partial target. `-` writes
/// to stdout directly.
pub struct AtomicFile {
    target: PathBuf,
    temporary: Option<PathBuf>,
    writer: Option<Box<dyn Write + Send>>,
    _on_signal: Option<Registered>,
}

impl AtomicFile {
    /// Starts writing `path`.
    pub fn create(path: &Path) -> Result<AtomicFile> {
        if path.as_os_str() == "-" {
            let stdout: Box<dyn Write + Send> = Box::new(std::io::BufWriter::with_capacity(1 << 20, std::io::stdout()));
            return Ok(AtomicFile {
                target: path.to_path_buf(),
                temporary: None,
                writer: Some(stdout),
                _on_signal: None,
            });
        }
        if is_special(path) {
            let file = std::fs::OpenOptions::new()
                .write(true)
                .open(path)
                .map_err(|e| Error::io(path.display().to_string(), e))?;
            return Ok(AtomicFile {
                target: path.to_path_buf(),
                temporary: None,
                writer: Some(Box::new(file)),
                _on_signal: None,
            });
        }
        let temporary = temporary_beside(path);
        let on_signal = signals::register(&temporary);
        let file = std::fs::File::create(&temporary).map_err(|e| Error::io(path.display().to_string(), e))?;
        Ok(AtomicFile {
            target: path.to_path_buf(),
            temporary: Some(temporary),
            writer: Some(Box::new(std::io::BufWriter::with_capacity(1 << 20, file))),
            _on_signal: Some(on_signal),
        })
    }

    /// Appends bytes.
    pub fn write_all(&mut self, bytes: &[u8]) -> Result<()> {
        let shown = self.shown();
        match self.writer.as_mut() {
            Some(w) => w.write_all(bytes).map_err(|e| Error::io(shown, e)),
            None => Ok(()),
        }
    }

    fn shown(&self) -> String {
        if self.target.as_os_str() == "-" {
            "<stdout>".to_string()
        } else {
            self.target.display().to_string()
        }
    }

    /// Flushes, syncs and renames the file into place.
    pub fn commit(self) -> Result<()> {
        AtomicFile::commit_all(vec![self])
    }

    /// Flushes and syncs every file, then renames them all into place: a
    /// failure while writing leaves none of them behind.
    pub fn commit_all(mut files: Vec<AtomicFile>) -> Result<()> {
        for file in &mut files {
            let shown = file.shown();
            if let Some(mut writer) = file.writer.take() {
                writer.flush().map_err(|e| Error::io(&shown, e))?;
            }
            if let Some(temporary) = &file.temporary {
                std::fs::File::open(temporary).and_then(|f| f.sync_all()).map_err(|e| Error::io(&shown, e))?;
            }
        }
        // A signal meanwhile waits until the set is in place.
        signals::deferred(|| {
            for file in &mut files {
                if let Some(temporary) = file.temporary.take() {
                    if let Err(e) = std::fs::rename(&temporary, &file.target) {
                        let _ = std::fs::remove_file(&temporary);
                        return Err(Error::io(file.shown(), e));
                    }
                }
            }
            Ok(())
        })
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        self.writer.take();
        if let Some(temporary) = self.temporary.take() {
            let _ = std::fs::remove_file(temporary);
        }
    }
}

/// True for an existing target that is not a regular file (`/dev/null`, a
/// named pipe): it is written in place, never replaced by a rename.
pub(crate) fn is_special(path: &Path) -> bool {
    std::fs::metadata(path).is_ok_and(|m| !m.is_file() && !m.is_dir())
}

/// True when two files' metadata are of one file: the same device and inode.
#[cfg(unix)]
fn same_inode(a: &std::fs::Metadata, b: &std::fs::Metadata) -> bool {
    use std::os::unix::fs::MetadataExt;
    a.dev() == b.dev() && a.ino() == b.ino()
}

/// True when `a` and `b` name one file: the same device and inode (so a
/// hard link or a symlink counts), or, for a path that does not exist yet,
/// the same place once its folder's symlinks are resolved.
pub fn same_file(a: &Path, b: &Path) -> bool {
    #[cfg(unix)]
    if let (Ok(x), Ok(y)) = (std::fs::metadata(a), std::fs::metadata(b)) {
        return same_inode(&x, &y);
    }
    let resolved = |p: &Path| -> Option<std::path::PathBuf> {
        if let Ok(full) = std::fs::canonicalize(p) {
            return Some(full);
        }
        let parent = match p.parent() {
            Some(d) if !d.as_os_str().is_empty() => d,
            _ => Path::new("."),
        };
        Some(std::fs::canonicalize(parent).ok()?.join(p.file_name()?))
    };
    match (resolved(a), resolved(b)) {
        (Some(x), Some(y)) => x == y,
        _ => false,
    }
}

/// Refuses a run whose outputs land on one of its inputs, or two of whose
/// outputs are one file, before any work: `(what, path)` pairs, `-` (the
/// standard streams) never counts. A usage error naming both.
pub fn check_outputs(inputs: &[(crate::error::Part, &Path)], outputs: &[(crate::error::Part, &Path)]) -> Result<()> {
    let real = |p: &Path| p.as_os_str() != "-";
    for (i, (output, out_path)) in outputs.iter().enumerate().filter(|(_, (_, p))| real(p)) {
        for (input, in_path) in inputs.iter().filter(|(_, p)| real(p)) {
            if same_file(out_path, in_path) {
                return Err(Error::invalid(crate::error::message![
                    output.clone(),
                    format!(" {} is ", out_path.display()),
                    input.clone(),
                    format!(" {}; write the output elsewhere", in_path.display())
                ]));
            }
        }
        for (other, other_path) in outputs[..i].iter().filter(|(_, p)| real(p)) {
            if same_file(out_path, other_path) {
                return Err(Error::invalid(crate::error::message![
                    other.clone(),
                    " and ",
                    output.clone(),
                    format!(" name the same file, {}", out_path.display())
                ]));
            }
        }
    }
    Ok(())
}

/// The machine's memory in bytes (Linux: `MemTotal` in /proc/meminfo;
/// `None` elsewhere or when it cannot be read).
pub fn machine_memory() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemTotal:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    kib.checked_mul(1024)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timestamps() {
        std::env::set_var("SOURCE_DATE_EPOCH", "951782400");
        // 951782400 s after the epoch is 2000-02-29 00:00:00 UTC.
        assert_eq!(utc_timestamp(), "2000-02-29T00:00:00Z");
        // Python: datetime.fromtimestamp(1795978534, UTC) is 2026-11-29 18:55:34.
        std::env::set_var("SOURCE_DATE_EPOCH", "1795978534");
        assert_eq!(utc_timestamp(), "2026-11-29T18:55:34Z");
        std::env::remove_var("SOURCE_DATE_EPOCH");
    }

    #[test]
    fn sha256_of_abc() {
        // FIPS 180-2, appendix B.1: SHA-256("abc").
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("abc");
        std::fs::write(&path, b"abc").unwrap();
        assert_eq!(sha256_file(&path).unwrap(), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    }
}
