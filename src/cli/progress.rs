//! A progress bar on stderr for long analyses (the `indicatif` crate): bytes read, taps
//! found, time left. Silent when stderr is not a terminal, with `--quiet`, and for work that
//! ends within half a second.

use crate::pipeline::Progress;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::time::{Duration, Instant};

/// Shown only after this much work; redrawn at most this many times a second.
const FIRST_AFTER: Duration = Duration::from_millis(500);
const REDRAWS_PER_S: u8 = 10;

pub struct Meter {
    /// `None` when nothing is to be shown (not a terminal, quiet, empty input).
    bar: Option<ProgressBar>,
    bytes_per_frame: u64,
    start: Instant,
    shown: bool,
}

impl Meter {
    /// A meter for a stream of `total_frames` frames of `bytes_per_frame` bytes.
    pub fn new(total_frames: u64, bytes_per_frame: u64, quiet: bool) -> Self {
        let enabled = !quiet && std::io::stderr().is_terminal() && total_frames > 0;
        let bar = enabled.then(|| {
            // Hidden until the work has taken FIRST_AFTER: short runs print nothing.
            let bar = ProgressBar::with_draw_target(
                Some(total_frames * bytes_per_frame),
                ProgressDrawTarget::hidden(),
            );
            if let Ok(style) = ProgressStyle::with_template(
                "{bar:24} {bytes} of {total_bytes} read, {msg}, about {eta} left",
            ) {
                bar.set_style(style.progress_chars("=> "));
            }
            bar
        });
        Meter {
            bar,
            bytes_per_frame,
            start: Instant::now(),
            shown: false,
        }
    }

    pub fn update(&mut self, p: Progress) {
        let Some(bar) = &self.bar else {
            return;
        };
        if !self.shown {
            if self.start.elapsed() < FIRST_AFTER {
                return;
            }
            bar.set_draw_target(ProgressDrawTarget::stderr_with_hz(REDRAWS_PER_S));
            self.shown = true;
        }
        bar.set_message(format!("{} taps ({} accepted)", p.hits, p.accepted));
        bar.set_position(p.frames * self.bytes_per_frame);
    }

    /// Clear the bar (if anything was shown).
    pub fn finish(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}
