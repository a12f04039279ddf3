//! Where samples come from: every source yields blocks with a rate and channel roles.

pub mod simulator;
pub mod wav;

use crate::error::Result;
use crate::signal::{Block, StreamInfo};

/// A producer of sample blocks. Nothing downstream knows which kind it is.
pub trait Source: Send {
    fn info(&self) -> &StreamInfo;
    /// The next block, or `None` when the stream has ended. Live sources wait for data.
    fn next_block(&mut self) -> Result<Option<Block>>;
}
