//! The raw recording of a run: a 32-bit float WAV in channel units, appended as it arrives.
//!
//! The WAV header is brought up to date at every `flush`, so after a crash or an unplugged
//! device the file on disk is a valid WAV holding everything up to the last flush.

use crate::error::{Context, Error, Result};
use crate::signal::{Block, StreamInfo};
use std::io::BufWriter;
use std::path::{Path, PathBuf};

pub struct RecordingWriter {
    path: PathBuf,
    writer: Option<hound::WavWriter<BufWriter<std::fs::File>>>,
    frames: u64,
}

impl RecordingWriter {
    pub fn create(path: &Path, info: &StreamInfo) -> Result<Self> {
        let spec = hound::WavSpec {
            channels: info.channels.len() as u16,
            sample_rate: info.sample_rate.round() as u32,
            bits_per_sample: 32,
            sample_format: hound::SampleFormat::Float,
        };
        let writer = hound::WavWriter::create(path, spec)
            .map_err(|e| Error::new(e.to_string()))
            .with_context(|| format!("cannot create '{}'", path.display()))?;
        Ok(RecordingWriter {
            path: path.to_path_buf(),
            writer: Some(writer),
            frames: 0,
        })
    }

    pub fn append(&mut self, block: &Block) -> Result<()> {
        let Some(w) = self.writer.as_mut() else {
            return Ok(());
        };
        for k in 0..block.len() {
            for ch in &block.channels {
                w.write_sample(ch[k] as f32)
                    .map_err(|e| Error::new(e.to_string()))
                    .with_context(|| format!("cannot write '{}'", self.path.display()))?;
            }
        }
        self.frames += block.len() as u64;
        Ok(())
    }

    /// Make the file on disk complete and valid up to now.
    pub fn flush(&mut self) -> Result<()> {
        if let Some(w) = self.writer.as_mut() {
            w.flush()
                .map_err(|e| Error::new(e.to_string()))
                .with_context(|| format!("cannot write '{}'", self.path.display()))?;
        }
        Ok(())
    }

    pub fn frames(&self) -> u64 {
        self.frames
    }

    pub fn finish(mut self) -> Result<()> {
        if let Some(w) = self.writer.take() {
            w.finalize()
                .map_err(|e| Error::new(e.to_string()))
                .with_context(|| format!("cannot finish '{}'", self.path.display()))?;
        }
        Ok(())
    }
}

/// Write a complete recording of raw integer counts (the simulator's converter output).
pub fn write_counts_wav(path: &Path, fs: f64, bits: u16, channels: &[Vec<i32>]) -> Result<()> {
    let spec = hound::WavSpec {
        channels: channels.len() as u16,
        sample_rate: fs.round() as u32,
        bits_per_sample: bits,
        sample_format: hound::SampleFormat::Int,
    };
    let mut cursor = std::io::Cursor::new(Vec::new());
    {
        let mut w =
            hound::WavWriter::new(&mut cursor, spec).map_err(|e| Error::new(e.to_string()))?;
        let n = channels.first().map_or(0, Vec::len);
        for k in 0..n {
            for ch in channels {
                w.write_sample(ch[k])
                    .map_err(|e| Error::new(e.to_string()))?;
            }
        }
        w.finalize().map_err(|e| Error::new(e.to_string()))?;
    }
    super::atomic::write_atomic(path, &cursor.into_inner())
}
