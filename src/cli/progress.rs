//! Progress on a terminal: the library's counts (see
//! [`baserate::progress`]) drawn as an indicatif bar on stderr, which is
//! cleared when the work ends. Nothing is drawn when stderr is not a
//! terminal, so logs and pipes stay clean.

use std::io::IsTerminal;
use std::sync::{Arc, Mutex};

use baserate::progress::{Progress, Tick};

/// A bar on stderr while it lives; cleared when dropped.
pub struct TerminalProgress {
    bar: Option<indicatif::ProgressBar>,
}

impl TerminalProgress {
    /// A bar when stderr is a terminal (and `quiet` is not set), else none.
    pub fn start(quiet: bool) -> Self {
        let bar = (!quiet && std::io::stderr().is_terminal())
            .then(|| indicatif::ProgressBar::new(0).with_style(style(false)));
        TerminalProgress { bar }
    }

    /// Runs `print` with the bar out of the way, so lines written to the
    /// terminal meanwhile are not drawn over.
    pub fn suspend<R>(&self, print: impl FnOnce() -> R) -> R {
        match &self.bar {
            Some(bar) => bar.suspend(print),
            None => print(),
        }
    }

    /// Where the library sends its counts: to the bar, or nowhere.
    pub fn sink(&self) -> Progress {
        let Some(bar) = self.bar.clone() else {
            return Progress::silent();
        };
        let stage: Arc<Mutex<&'static str>> = Arc::new(Mutex::new(""));
        Progress::to(move |tick: Tick| {
            if let Ok(mut current) = stage.lock() {
                if *current != tick.stage {
                    *current = tick.stage;
                    bar.reset();
                    bar.set_style(style(tick.total.is_some()));
                    bar.set_message(tick.stage);
                }
            }
            if let Some(total) = tick.total {
                bar.set_length(total);
            }
            bar.set_position(tick.done);
        })
    }
}

/// A bar with a count and an ETA for work of known size, a spinner with
/// the count otherwise.
fn style(sized: bool) -> indicatif::ProgressStyle {
    let template =
        if sized { "{spinner} {msg} {pos}/{len}  {elapsed}  eta {eta}" } else { "{spinner} {msg} {pos}  {elapsed}" };
    indicatif::ProgressStyle::with_template(template).unwrap_or_else(|_| indicatif::ProgressStyle::default_spinner())
}

impl Drop for TerminalProgress {
    fn drop(&mut self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
    }
}
