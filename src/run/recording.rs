//! The raw recording of a run, appended as it arrives: 16-bit converter codes when every
//! channel comes from a converter of at most 16 bits (exact, half the size), otherwise
//! 32-bit float in channel units.
//!
//! The WAV header is brought up to date at every `flush`, so after a crash or an unplugged
//! device the file on disk is a valid WAV holding everything up to the last flush.

use crate::error::{Context, Error, Result};
use crate::signal::{Block, StreamInfo};
use std::io::BufWriter;
use std::path::{Path, PathBuf};

/// Encoding of a recording written as 32-bit float channel values.
pub const FLOAT_ENCODING: &str = "float32 in channel units";
/// Encoding of a recording written as 16-bit converter codes (value = code x scale).
pub const COUNTS16_ENCODING: &str = "counts int16 (value = code x scale)";

pub struct RecordingWriter {
    path: PathBuf,
    writer: Option<hound::WavWriter<BufWriter<std::fs::File>>>,
    frames: u64,
    /// Some(scales) when writing 16-bit codes.
    codes: Option<Vec<f64>>,
}

impl RecordingWriter {
    pub fn create(path: &Path, info: &StreamInfo) -> Result<Self> {
        // A converter of 8 to 16 bits: full scale is 2^7..2^15 steps of `scale`.
        let codes = info
            .channels
            .iter()
            .all(|c| {
                c.full_scale
                    .is_some_and(|fs| (128.0..=32_768.5).contains(&(fs / c.scale)))
            })
            .then(|| info.channels.iter().map(|c| c.scale).collect::<Vec<f64>>());
        let spec = hound::WavSpec {
            channels: info.channels.len() as u16,
            sample_rate: info.sample_rate.round() as u32,
            bits_per_sample: if codes.is_some() { 16 } else { 32 },
            sample_format: if codes.is_some() {
                hound::SampleFormat::Int
            } else {
                hound::SampleFormat::Float
            },
        };
        let writer = hound::WavWriter::create(path, spec)
            .map_err(|e| Error::new(e.to_string()))
            .with_context(|| format!("cannot create '{}'", path.display()))?;
        Ok(RecordingWriter {
            path: path.to_path_buf(),
            writer: Some(writer),
            frames: 0,
            codes,
        })
    }

    /// How the samples are stored, for the run file.
    pub fn encoding(&self) -> &'static str {
        if self.codes.is_some() {
            COUNTS16_ENCODING
        } else {
            FLOAT_ENCODING
        }
    }

    /// Append a block. Samples lost before it (a gap in `block.start`) are written as
    /// zeros, so that stream positions in the run file stay positions in the WAV.
    pub fn append(&mut self, block: &Block) -> Result<()> {
        let Some(w) = self.writer.as_mut() else {
            return Ok(());
        };
        let n_ch = block.channels.len();
        for _ in self.frames..block.start {
            for _ in 0..n_ch {
                let r = if self.codes.is_some() {
                    w.write_sample(0i16)
                } else {
                    w.write_sample(0.0f32)
                };
                r.map_err(|e| Error::new(e.to_string()))
                    .with_context(|| format!("cannot write '{}'", self.path.display()))?;
            }
        }
        self.frames = self.frames.max(block.start);
        for k in 0..block.len() {
            for (c, ch) in block.channels.iter().enumerate() {
                let r = match &self.codes {
                    Some(scales) => {
                        let code = (ch[k] / scales[c]).round().clamp(-32_768.0, 32_767.0);
                        w.write_sample(code as i16)
                    }
                    None => w.write_sample(ch[k] as f32),
                };
                r.map_err(|e| Error::new(e.to_string()))
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
