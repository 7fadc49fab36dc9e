//! Terminal progress bars for long library work (indicatif), hidden when stderr is no terminal.

use fanmark_core::progress::Progress;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::sync::Mutex;

/// A progress sink drawing one bar on stderr.
#[derive(Default)]
pub struct TermProgress {
    bar: Mutex<Option<ProgressBar>>,
}

impl TermProgress {
    /// A new sink; draws nothing until work starts.
    pub fn new() -> TermProgress {
        TermProgress::default()
    }
}

impl Progress for TermProgress {
    fn start(&self, what: &str, total: u64) {
        let bar = if total > 0 {
            ProgressBar::new(total)
        } else {
            ProgressBar::new_spinner()
        };
        bar.set_draw_target(ProgressDrawTarget::stderr());
        if let Ok(style) =
            ProgressStyle::with_template("{msg:>12} [{bar:30}] {percent:>3}% {elapsed_precise}")
        {
            bar.set_style(style.progress_chars("=> "));
        }
        bar.set_message(what.to_string());
        if let Ok(mut b) = self.bar.lock() {
            *b = Some(bar);
        }
    }
    fn set(&self, done: u64) {
        if let Ok(b) = self.bar.lock() {
            if let Some(b) = b.as_ref() {
                b.set_position(done);
            }
        }
    }
    fn finish(&self) {
        if let Ok(mut b) = self.bar.lock() {
            if let Some(b) = b.take() {
                b.finish_and_clear();
            }
        }
    }
}
