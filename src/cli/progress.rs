//! A one-line progress display on stderr for long analyses: bytes read, taps found, time
//! left. Silent when stderr is not a terminal, with `--quiet`, and for work that ends
//! within half a second.

use crate::pipeline::Progress;
use std::io::{IsTerminal, Write};
use std::time::{Duration, Instant};

/// Shown only after this much work, and redrawn at most this often.
const FIRST_AFTER: Duration = Duration::from_millis(500);
const EVERY: Duration = Duration::from_millis(100);

pub struct Meter {
    enabled: bool,
    total_frames: u64,
    bytes_per_frame: u64,
    start: Instant,
    last: Option<Instant>,
}

impl Meter {
    /// A meter for a stream of `total_frames` frames of `bytes_per_frame` bytes.
    pub fn new(total_frames: u64, bytes_per_frame: u64, quiet: bool) -> Self {
        Meter {
            enabled: !quiet && std::io::stderr().is_terminal() && total_frames > 0,
            total_frames,
            bytes_per_frame,
            start: Instant::now(),
            last: None,
        }
    }

    pub fn update(&mut self, p: Progress) {
        if !self.enabled {
            return;
        }
        let now = Instant::now();
        let elapsed = now - self.start;
        if elapsed < FIRST_AFTER || self.last.is_some_and(|t| now - t < EVERY) {
            return;
        }
        self.last = Some(now);
        let done = p.frames.min(self.total_frames) as f64 / self.total_frames as f64;
        let mb = |frames: u64| (frames * self.bytes_per_frame) as f64 / 1e6;
        let left = if done > 0.0 {
            elapsed.as_secs_f64() * (1.0 - done) / done
        } else {
            0.0
        };
        let mut err = std::io::stderr().lock();
        let _ = write!(
            err,
            "\r\x1b[K{:.0} of {:.0} MB read, {} taps ({} accepted), about {:.0} s left",
            mb(p.frames),
            mb(self.total_frames),
            p.hits,
            p.accepted,
            left.ceil()
        );
        let _ = err.flush();
    }

    /// Clear the line (if anything was shown).
    pub fn finish(&mut self) {
        if self.last.take().is_some() {
            let mut err = std::io::stderr().lock();
            let _ = write!(err, "\r\x1b[K");
            let _ = err.flush();
        }
    }
}
