//! What a run leaves behind when it is interrupted: the files registered
//! here (temporary outputs, output locks) are removed when SIGINT, SIGTERM
//! or SIGHUP arrives, and the process then ends by that signal as it would
//! have without us.
//!
//! The handler may only do what is async-signal-safe, so the registry is a
//! fixed table of C strings behind atomic pointers, and the handler calls
//! nothing but `unlink`, `signal` and `raise`. A signal that arrives while
//! a set of outputs is being renamed into place waits until the renames are
//! done ([`deferred`]), so a set is never half replaced.
//!
//! Nothing happens unless the program asks for it with
//! [`remove_on_signal`]: a library should not take over a host program's
//! signals on its own.

use std::ffi::CString;
use std::path::Path;
use std::sync::atomic::{AtomicBool, AtomicI32, AtomicPtr, Ordering};

/// Files that may be registered at once; more are simply not removed by a
/// signal (a run has a handful of outputs).
const SLOTS: usize = 256;

#[allow(clippy::declare_interior_mutable_const)]
const EMPTY: AtomicPtr<libc::c_char> = AtomicPtr::new(std::ptr::null_mut());
static PATHS: [AtomicPtr<libc::c_char>; SLOTS] = [EMPTY; SLOTS];
/// Set once the handler has started: from then on no registered string is
/// freed, since the handler may be reading it.
static HANDLING: AtomicBool = AtomicBool::new(false);
/// Renames in progress: a signal waits.
static DEFERRING: AtomicI32 = AtomicI32::new(0);
/// A signal that arrived while deferred (0: none).
static PENDING: AtomicI32 = AtomicI32::new(0);

/// A file removed if the process is interrupted, until this is dropped.
#[derive(Debug)]
pub struct Registered {
    slot: Option<usize>,
}

/// Registers `path` for removal on a signal.
pub fn register(path: &Path) -> Registered {
    let absolute = if path.is_absolute() {
        path.to_path_buf()
    } else {
        std::env::current_dir().map(|d| d.join(path)).unwrap_or_else(|_| path.to_path_buf())
    };
    let Ok(text) = CString::new(absolute.as_os_str().as_encoded_bytes()) else {
        return Registered { slot: None };
    };
    let pointer = text.into_raw();
    for (slot, cell) in PATHS.iter().enumerate() {
        if cell.compare_exchange(std::ptr::null_mut(), pointer, Ordering::SeqCst, Ordering::SeqCst).is_ok() {
            return Registered { slot: Some(slot) };
        }
    }
    // SAFETY: `pointer` came from `CString::into_raw` above and was never
    // published.
    drop(unsafe { CString::from_raw(pointer) });
    Registered { slot: None }
}

impl Drop for Registered {
    fn drop(&mut self) {
        let Some(slot) = self.slot else { return };
        let pointer = PATHS[slot].swap(std::ptr::null_mut(), Ordering::SeqCst);
        if !pointer.is_null() && !HANDLING.load(Ordering::SeqCst) {
            // SAFETY: the pointer came from `CString::into_raw` in
            // `register`; it is no longer in the table, and no handler had
            // started when it was taken out, so none can be reading it.
            drop(unsafe { CString::from_raw(pointer) });
        }
    }
}

/// Installs the handler for SIGINT, SIGTERM and SIGHUP (once per process;
/// later calls do nothing).
pub fn remove_on_signal() {
    static INSTALLED: std::sync::Once = std::sync::Once::new();
    INSTALLED.call_once(|| {
        for signal in [libc::SIGINT, libc::SIGTERM, libc::SIGHUP] {
            // SAFETY: `handler` is an `extern "C" fn(c_int)` that only does
            // async-signal-safe work.
            unsafe {
                libc::signal(signal, handler as *const () as libc::sighandler_t);
            }
        }
    });
}

/// Runs `work` with signals held back: one that arrives meanwhile is acted
/// on when `work` returns.
pub fn deferred<T>(work: impl FnOnce() -> T) -> T {
    DEFERRING.fetch_add(1, Ordering::SeqCst);
    let result = work();
    if DEFERRING.fetch_sub(1, Ordering::SeqCst) == 1 {
        let pending = PENDING.swap(0, Ordering::SeqCst);
        if pending != 0 {
            // SAFETY: raising a signal that arrived for this process.
            unsafe {
                libc::raise(pending);
            }
        }
    }
    result
}

extern "C" fn handler(signal: libc::c_int) {
    if DEFERRING.load(Ordering::SeqCst) > 0 {
        PENDING.store(signal, Ordering::SeqCst);
        return;
    }
    HANDLING.store(true, Ordering::SeqCst);
    for cell in &PATHS {
        let pointer = cell.load(Ordering::SeqCst);
        if !pointer.is_null() {
            // SAFETY: a registered pointer is a valid C string, never freed
            // once HANDLING is set.
            unsafe {
                libc::unlink(pointer);
            }
        }
    }
    // SAFETY: restoring the default action and raising the signal again
    // ends the process the way the signal would have.
    unsafe {
        libc::signal(signal, libc::SIG_DFL);
        libc::raise(signal);
    }
}
