//! Acquisition on its own thread: a source feeds blocks through a channel, never blocked
//! by the consumer; a backlog beyond the limit is dropped and counted, never silent.

use crate::error::Error;
use crate::signal::{Block, StreamInfo};
use crate::source::{LinkCounters, Source};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::mpsc::{self, Receiver, Sender, TryRecvError};
use std::sync::{Arc, Mutex};

/// What the acquisition thread sends.
#[derive(Debug)]
pub enum Feed {
    Block(Block),
    /// The stream ended; `Some` when it ended by an error (e.g. the device was unplugged).
    Ended(Option<Error>),
}

/// Requests to the acquisition thread.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Request {
    /// Fire a simulated tap (simulator only; ignored by real sources).
    Tap,
    Stop,
}

/// Counters shared with the acquisition thread.
#[derive(Debug, Default)]
pub struct Health {
    /// Samples (frames) dropped because the consumer fell behind.
    pub overrun_frames: AtomicU64,
    /// Blocks waiting in the channel.
    pub queued_blocks: AtomicU64,
    pub link: Mutex<Option<LinkCounters>>,
}

/// The consumer's end of a running acquisition.
pub struct LiveFeed {
    pub info: StreamInfo,
    rx: Receiver<Feed>,
    requests: Sender<Request>,
    pub health: Arc<Health>,
    stop: Arc<AtomicBool>,
    thread: Option<std::thread::JoinHandle<()>>,
}

/// Blocks allowed in flight before new ones are dropped (about 10 s at 50 blocks/s).
pub const MAX_QUEUED_BLOCKS: u64 = 500;

impl LiveFeed {
    /// Start `source` on its own thread. A source that paces itself (real hardware, real-
    /// time replay) never waits for the consumer: a backlog over `MAX_QUEUED_BLOCKS` is
    /// dropped and counted. A source running as fast as possible (`paced() == false`) waits
    /// instead, since nothing is lost by waiting.
    pub fn start(mut source: Box<dyn Source>) -> LiveFeed {
        let lossless = !source.paced();
        let info = source.info().clone();
        let (tx, rx) = mpsc::channel();
        let (req_tx, req_rx) = mpsc::channel::<Request>();
        let health = Arc::new(Health::default());
        let stop = Arc::new(AtomicBool::new(false));
        let (h, s) = (health.clone(), stop.clone());
        let thread = std::thread::spawn(move || {
            loop {
                loop {
                    match req_rx.try_recv() {
                        Ok(Request::Tap) => source.tap(),
                        Ok(Request::Stop) | Err(TryRecvError::Disconnected) => return,
                        Err(TryRecvError::Empty) => break,
                    }
                }
                if s.load(Ordering::Relaxed) {
                    return;
                }
                let next = source.next_block();
                if let (Some(c), Ok(mut l)) = (source.link_counters(), h.link.lock()) {
                    *l = Some(c);
                }
                match next {
                    Ok(Some(block)) => {
                        while lossless
                            && h.queued_blocks.load(Ordering::Relaxed) >= MAX_QUEUED_BLOCKS
                        {
                            if s.load(Ordering::Relaxed) {
                                return;
                            }
                            std::thread::sleep(std::time::Duration::from_millis(1));
                        }
                        if h.queued_blocks.load(Ordering::Relaxed) >= MAX_QUEUED_BLOCKS {
                            h.overrun_frames
                                .fetch_add(block.len() as u64, Ordering::Relaxed);
                            continue;
                        }
                        h.queued_blocks.fetch_add(1, Ordering::Relaxed);
                        if tx.send(Feed::Block(block)).is_err() {
                            return;
                        }
                    }
                    Ok(None) => {
                        let _ = tx.send(Feed::Ended(None));
                        return;
                    }
                    Err(e) => {
                        let _ = tx.send(Feed::Ended(Some(e)));
                        return;
                    }
                }
            }
        });
        LiveFeed {
            info,
            rx,
            requests: req_tx,
            health,
            stop,
            thread: Some(thread),
        }
    }

    /// Everything that has arrived, without waiting.
    pub fn drain(&self) -> Vec<Feed> {
        let mut out = Vec::new();
        while let Ok(f) = self.rx.try_recv() {
            self.note_taken(&f);
            out.push(f);
        }
        out
    }

    /// Wait up to `timeout` for the next item.
    pub fn recv_timeout(&self, timeout: std::time::Duration) -> Option<Feed> {
        let f = self.rx.recv_timeout(timeout).ok()?;
        self.note_taken(&f);
        Some(f)
    }

    fn note_taken(&self, f: &Feed) {
        if matches!(f, Feed::Block(_)) {
            self.health.queued_blocks.fetch_sub(1, Ordering::Relaxed);
        }
    }

    pub fn request(&self, r: Request) {
        let _ = self.requests.send(r);
    }

    pub fn overrun_frames(&self) -> u64 {
        self.health.overrun_frames.load(Ordering::Relaxed)
    }

    pub fn link(&self) -> Option<LinkCounters> {
        self.health.link.lock().ok().and_then(|l| *l)
    }
}

impl Drop for LiveFeed {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        let _ = self.requests.send(Request::Stop);
        // Do not join: a source may sit in a blocking read; the thread ends on its own.
        let _ = self.thread.take();
    }
}
