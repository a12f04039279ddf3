//! Where samples come from: every source yields blocks with a rate and channel roles.

#[cfg(feature = "audio")]
pub mod audio;
pub mod live;
pub mod serial;
pub mod simulator;
pub mod wav;
pub(crate) mod wav_header;

use crate::error::Result;
use crate::signal::{Block, StreamInfo};

/// Link-quality counters of a source with a wire protocol (serial).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct LinkCounters {
    pub packets_ok: u64,
    pub packets_lost: u64,
    pub packets_corrupt: u64,
    pub resyncs: u64,
    pub junk_lines: u64,
}

/// A producer of sample blocks. Nothing downstream knows which kind it is.
pub trait Source: Send {
    fn info(&self) -> &StreamInfo;
    /// The next block, or `None` when the stream has ended. Live sources wait for data.
    fn next_block(&mut self) -> Result<Option<Block>>;
    /// Fire a simulated tap; real sources ignore it.
    fn tap(&mut self) {}
    /// True when the source delivers in real time (hardware, paced replay or simulation);
    /// false when it runs as fast as the consumer can take it.
    fn paced(&self) -> bool {
        true
    }
    /// Link-quality counters, for sources that have them.
    fn link_counters(&self) -> Option<LinkCounters> {
        None
    }
}
