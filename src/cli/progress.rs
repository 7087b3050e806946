//! The progress bar of a batch (`run`, `slice`): clips done out of the total, rejects so far.

use std::sync::atomic::{AtomicUsize, Ordering};

use indicatif::{ProgressBar, ProgressStyle};
use retake::run::Event;

/// A bar fed by the batch engine's events; hidden when stderr is not a terminal, so piped
/// and logged runs stay clean.
pub struct ClipProgress {
    bar: ProgressBar,
    rejected: AtomicUsize,
}

impl ClipProgress {
    /// An empty bar; its length comes with [`Event::Started`].
    pub fn new() -> Self {
        let bar = ProgressBar::new(0);
        bar.set_style(
            ProgressStyle::with_template(
                "{elapsed_precise} [{wide_bar}] {pos}/{len} clips, {msg}eta {eta}",
            )
            .expect("valid progress template")
            .progress_chars("=> "),
        );
        ClipProgress {
            bar,
            rejected: AtomicUsize::new(0),
        }
    }

    /// Show one event.
    pub fn on_event(&self, e: Event) {
        match e {
            Event::Started { clips } => self.bar.set_length(clips as u64),
            Event::ClipDone { ok } => {
                if !ok {
                    let n = self.rejected.fetch_add(1, Ordering::Relaxed) + 1;
                    self.bar.set_message(format!("{n} rejected, "));
                }
                self.bar.inc(1);
            }
        }
    }

    /// Take the bar off the screen before the summary is printed.
    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}
