//! Progress of long work, for whoever asked for it. The library counts the
//! steps it finishes (folds, points of a λ path, bootstrap draws, bytes
//! read) and hands each count to a callback; it draws nothing, so it holds
//! no terminal code. The command line turns the counts into a bar on a
//! terminal and ignores them otherwise.

use std::fmt;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

/// How far one stage of work has got.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Tick {
    /// What is being done, in a few words ("cross-validation fits").
    pub stage: &'static str,
    /// Steps finished.
    pub done: u64,
    /// Steps in all, when known in advance.
    pub total: Option<u64>,
}

/// Where progress goes: a callback, or nowhere (the default).
#[derive(Clone, Default)]
pub struct Progress(Option<Arc<dyn Fn(Tick) + Send + Sync>>);

impl fmt::Debug for Progress {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(if self.0.is_some() { "Progress(callback)" } else { "Progress(silent)" })
    }
}

impl Progress {
    /// Progress handed to `callback`, which may be called from several
    /// threads at once.
    pub fn to(callback: impl Fn(Tick) + Send + Sync + 'static) -> Self {
        Progress(Some(Arc::new(callback)))
    }

    /// No progress reported.
    pub fn silent() -> Self {
        Progress(None)
    }

    /// Whether anyone listens (work that only feeds progress can be skipped).
    pub fn is_silent(&self) -> bool {
        self.0.is_none()
    }

    /// Reports `done` of `total` steps of `stage`.
    pub fn report(&self, stage: &'static str, done: u64, total: Option<u64>) {
        if let Some(callback) = &self.0 {
            callback(Tick { stage, done, total });
        }
    }

    /// A counter of `total` steps of `stage`, shared between threads; it
    /// reports 0 at once and each step as it finishes.
    pub fn counter(&self, stage: &'static str, total: Option<u64>) -> Counter<'_> {
        self.report(stage, 0, total);
        Counter { progress: self, stage, total, done: AtomicU64::new(0) }
    }
}

/// Steps of one stage, counted as they finish (see [`Progress::counter`]).
#[derive(Debug)]
pub struct Counter<'a> {
    progress: &'a Progress,
    stage: &'static str,
    total: Option<u64>,
    done: AtomicU64,
}

impl Counter<'_> {
    /// One more step finished.
    pub fn step(&self) {
        let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
        self.progress.report(self.stage, done, self.total);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::sync::Mutex;

    #[test]
    fn a_counter_reports_each_step_from_any_thread() {
        let seen = Arc::new(Mutex::new(Vec::new()));
        let sink = Arc::clone(&seen);
        let progress = Progress::to(move |t| sink.lock().map(|mut s| s.push(t.done)).unwrap_or(()));
        let counter = progress.counter("draws", Some(8));
        std::thread::scope(|scope| {
            for _ in 0..4 {
                scope.spawn(|| {
                    counter.step();
                    counter.step();
                });
            }
        });
        let mut done = seen.lock().map(|s| s.clone()).unwrap_or_default();
        done.sort_unstable();
        assert_eq!(done, (0..=8).collect::<Vec<u64>>());
        assert!(Progress::silent().is_silent() && !progress.is_silent());
    }
}
