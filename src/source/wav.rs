//! WAV replay: streams any PCM WAV (8/16/24/32-bit integer or 32-bit float) as blocks.
//!
//! Integer samples arrive as raw counts and float samples as stored, each times the
//! channel's scale (1.0 unless the caller calibrates). Memory stays flat: one block at a time.

use crate::error::{Error, Result};
use crate::signal::{Block, ChannelInfo, Role, StreamInfo};
use crate::source::Source;
use std::fs::File;
use std::io::BufReader;
use std::path::{Path, PathBuf};

/// Frames per block read from the file.
pub const WAV_BLOCK: usize = 8192;

/// Sample layouts read in bulk (the container size equals the sample size); others go
/// through hound sample by sample.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Bulk {
    I16,
    I32,
    F32,
}

enum Reader {
    Hound(hound::WavReader<BufReader<File>>),
    /// Positioned at the first sample of the data chunk.
    Bulk(BufReader<File>, Bulk),
}

pub struct WavSource {
    path: PathBuf,
    reader: Reader,
    bytes: Vec<u8>,
    info: StreamInfo,
    frames_total: u64,
    next: u64,
    block: usize,
    /// Optional real-time pacing: the wall-clock start and the rate to keep.
    pace: Option<std::time::Instant>,
}

impl WavSource {
    pub fn open(path: &Path) -> Result<Self> {
        let shown = path.display();
        let reader = hound::WavReader::open(path).map_err(|e| describe(e, path))?;
        let spec = reader.spec();
        if spec.channels == 0 {
            crate::fail!("'{shown}' has zero channels");
        }
        let float = spec.sample_format == hound::SampleFormat::Float;
        if float && spec.bits_per_sample != 32 {
            crate::fail!(
                "'{shown}' uses {}-bit float samples; only 32-bit float is supported",
                spec.bits_per_sample
            );
        }
        let full_scale = if float {
            1.0
        } else {
            (1u64 << (spec.bits_per_sample - 1)) as f64
        };
        let channels = (0..spec.channels)
            .map(|i| ChannelInfo {
                name: format!("ch{i}"),
                role: Role::Unused,
                unit: "counts".into(),
                scale: 1.0,
                full_scale: Some(full_scale),
            })
            .collect();
        let frames_total = reader.duration() as u64;
        let bulk = match (spec.sample_format, spec.bits_per_sample) {
            (hound::SampleFormat::Int, 16) => Some(Bulk::I16),
            (hound::SampleFormat::Int, 32) => Some(Bulk::I32),
            (hound::SampleFormat::Float, 32) => Some(Bulk::F32),
            _ => None,
        };
        let reader = match bulk {
            Some(kind) => Reader::Bulk(reader.into_inner(), kind),
            None => Reader::Hound(reader),
        };
        Ok(WavSource {
            bytes: Vec::new(),
            info: StreamInfo {
                source: format!("wav {}", path.display()),
                sample_rate: spec.sample_rate as f64,
                channels,
            },
            path: path.to_path_buf(),
            reader,
            frames_total,
            next: 0,
            block: WAV_BLOCK,
            pace: None,
        })
    }

    /// Replay no faster than real time (for live-like use of a recording).
    pub fn real_time(mut self) -> Self {
        self.pace = Some(std::time::Instant::now());
        self.block = (self.info.sample_rate / 50.0).ceil() as usize;
        self
    }

    pub fn with_block_len(mut self, n: usize) -> Self {
        self.block = n.max(1);
        self
    }

    pub fn frames(&self) -> u64 {
        self.frames_total
    }

    /// Set a channel's unit and scale (unit per count); full scale follows.
    pub fn calibrate(&mut self, channel: usize, unit: &str, scale: f64) {
        if let Some(c) = self.info.channels.get_mut(channel) {
            c.unit = unit.to_string();
            c.full_scale = c.full_scale.map(|f| f / c.scale * scale);
            c.scale = scale;
        }
    }

    /// Name the channels and declare their roles (as a run file records them).
    pub fn set_channel(&mut self, channel: usize, name: &str, role: Role) {
        if let Some(c) = self.info.channels.get_mut(channel) {
            c.name = name.to_string();
            c.role = role;
        }
    }
}

fn describe(e: hound::Error, path: &Path) -> Error {
    let shown = path.display();
    match e {
        hound::Error::IoError(io) if io.kind() == std::io::ErrorKind::NotFound => {
            Error::new(format!("cannot open '{shown}': no such file"))
        }
        hound::Error::IoError(io)
            if io.kind() == std::io::ErrorKind::UnexpectedEof
                || io.to_string().contains("enough bytes") =>
        {
            Error::new(format!("'{shown}' ends early: the WAV file is truncated"))
        }
        hound::Error::IoError(io) => Error::new(format!(
            "cannot read '{shown}': {}",
            crate::error::describe_io(&io)
        )),
        hound::Error::FormatError(what) if what.contains("RIFF") || what.contains("WAVE") => {
            Error::new(format!("'{shown}' is not a WAV file ({what})"))
        }
        hound::Error::FormatError(what) => {
            Error::new(format!("'{shown}' is not a valid WAV file: {what}"))
        }
        hound::Error::Unsupported => Error::new(format!(
            "'{shown}' uses a WAV encoding this tool does not read (only PCM integer and 32-bit float)"
        )),
        other => Error::new(format!("cannot read '{shown}': {other}")),
    }
}

impl Source for WavSource {
    fn info(&self) -> &StreamInfo {
        &self.info
    }

    fn paced(&self) -> bool {
        self.pace.is_some()
    }

    fn next_block(&mut self) -> Result<Option<Block>> {
        if self.next >= self.frames_total {
            return Ok(None);
        }
        let n_ch = self.info.channels.len();
        let frames = (self.frames_total - self.next).min(self.block as u64) as usize;
        let mut channels = vec![Vec::with_capacity(frames); n_ch];
        let scales: Vec<f64> = self.info.channels.iter().map(|c| c.scale).collect();
        let shown = self.path.display();
        let total = frames * n_ch;
        let mut read = 0usize;
        if let Reader::Bulk(raw, kind) = &mut self.reader {
            let width = if *kind == Bulk::I16 { 2 } else { 4 };
            self.bytes.resize(total * width, 0);
            if let Err(e) = std::io::Read::read_exact(raw, &mut self.bytes) {
                return Err(if e.kind() == std::io::ErrorKind::UnexpectedEof {
                    Error::new(format!("'{shown}' ends early: the WAV file is truncated"))
                } else {
                    Error::new(format!(
                        "cannot read '{shown}': {}",
                        crate::error::describe_io(&e)
                    ))
                });
            }
            for (i, b) in self.bytes.chunks_exact(width).enumerate() {
                let c = i % n_ch;
                let v = match kind {
                    Bulk::I16 => i16::from_le_bytes([b[0], b[1]]) as f64,
                    Bulk::I32 => i32::from_le_bytes([b[0], b[1], b[2], b[3]]) as f64,
                    Bulk::F32 => {
                        let v = f32::from_le_bytes([b[0], b[1], b[2], b[3]]) as f64;
                        if !v.is_finite() {
                            crate::fail!(
                                "'{shown}' holds a sample that is not a finite number (channel {c}, frame {})",
                                self.next + (i / n_ch) as u64
                            );
                        }
                        v
                    }
                };
                channels[c].push(v * scales[c]);
            }
            read = total;
        } else if let Reader::Hound(reader) = &mut self.reader {
            // Only integer layouts other than 16/32-bit get here (32-bit float is bulk).
            for s in reader.samples::<i32>().take(total) {
                let v = s.map_err(|e| describe(e, &self.path))? as f64;
                let c = read % n_ch;
                channels[c].push(v * scales[c]);
                read += 1;
            }
        }
        if read < total {
            crate::fail!("'{shown}' ends early: the WAV file is truncated");
        }
        let block = Block {
            start: self.next,
            channels,
        };
        self.next += frames as u64;
        if let Some(t0) = self.pace {
            let due = std::time::Duration::from_secs_f64(self.next as f64 / self.info.sample_rate);
            if let Some(wait) = due.checked_sub(t0.elapsed()) {
                std::thread::sleep(wait);
            }
        }
        Ok(Some(block))
    }
}
