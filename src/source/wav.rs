//! WAV replay: streams any PCM WAV (8/16/24/32-bit integer, 24 bits left-justified in 32,
//! 32/64-bit float; RIFF, RF64 or BW64) as blocks.
//!
//! Integer samples arrive as raw counts and float samples as stored, each times the
//! channel's scale (1.0 unless the caller calibrates). Memory stays flat: one block at a time.
//! The header is untrusted: see `wav_header`.

use crate::error::{Error, Result};
use crate::signal::{Block, ChannelInfo, Role, StreamInfo};
use crate::source::Source;
use crate::source::wav_header::{SampleKind, read_header};
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::Path;

/// Frames per block read from the file.
pub const WAV_BLOCK: usize = 8192;

/// Anything a WAV can be read from: a file, or bytes in memory (tests, fuzzing).
pub trait WavInput: Read + Seek + Send {}
impl<T: Read + Seek + Send> WavInput for T {}

pub struct WavSource {
    name: String,
    reader: Box<dyn WavInput>,
    kind: SampleKind,
    data_offset: u64,
    bytes: Vec<u8>,
    info: StreamInfo,
    frames_total: u64,
    next: u64,
    block: usize,
    /// Stretches of the file (start frame, length) that were lost on the way and stored
    /// as filler: skipped, so blocks show them as gaps in `start`.
    gaps: Vec<(u64, u64)>,
    /// Optional real-time pacing: the wall-clock start and the rate to keep.
    pace: Option<std::time::Instant>,
}

impl WavSource {
    pub fn open(path: &Path) -> Result<Self> {
        let shown = path.display().to_string();
        crate::run::safe_path::check_input(path)?;
        let file = std::fs::File::open(path).map_err(|e| {
            if e.kind() == std::io::ErrorKind::NotFound {
                Error::new(format!("cannot open '{shown}': no such file"))
            } else {
                Error::new(format!(
                    "cannot read '{shown}': {}",
                    crate::error::describe_io(&e)
                ))
            }
        })?;
        let len = file
            .metadata()
            .map_err(|e| Error::new(format!("cannot read '{shown}': {e}")))?
            .len();
        Self::from_reader(&shown, Box::new(BufReader::new(file)), len)
    }

    /// A WAV held in memory.
    pub fn from_bytes(name: &str, bytes: Vec<u8>) -> Result<Self> {
        let len = bytes.len() as u64;
        Self::from_reader(name, Box::new(std::io::Cursor::new(bytes)), len)
    }

    fn from_reader(name: &str, mut reader: Box<dyn WavInput>, len: u64) -> Result<Self> {
        let h = read_header(&mut reader, len, name)?;
        reader
            .seek(SeekFrom::Start(h.data_offset))
            .map_err(|e| Error::new(format!("cannot read '{name}': {e}")))?;
        let full_scale = h.kind.full_scale();
        let channels = (0..h.channels)
            .map(|i| ChannelInfo {
                name: format!("ch{i}"),
                role: Role::Unused,
                unit: "counts".into(),
                scale: 1.0,
                full_scale: Some(full_scale),
            })
            .collect();
        Ok(WavSource {
            bytes: Vec::new(),
            info: StreamInfo {
                source: format!("wav {name}"),
                sample_rate: h.sample_rate,
                channels,
            },
            name: name.to_string(),
            reader,
            kind: h.kind,
            data_offset: h.data_offset,
            frames_total: h.frames,
            next: 0,
            block: WAV_BLOCK,
            gaps: Vec::new(),
            pace: None,
        })
    }

    /// Replay no faster than real time (for live-like use of a recording).
    pub fn real_time(mut self) -> Self {
        self.pace = Some(std::time::Instant::now());
        self.block = (self.info.sample_rate / 50.0).ceil().max(1.0) as usize;
        self
    }

    pub fn with_block_len(mut self, n: usize) -> Self {
        self.block = n.clamp(1, 1 << 20);
        self
    }

    pub fn frames(&self) -> u64 {
        self.frames_total
    }

    /// Read no further than `frames` (a run that ended before its recording did).
    pub fn limit_frames(&mut self, frames: u64) {
        self.frames_total = self.frames_total.min(frames);
    }

    /// Skip the stretches a run file lists as lost (start frame, length), so the blocks
    /// carry the same gaps the live stream had.
    pub fn skip_gaps(&mut self, gaps: &[(u64, u64)]) {
        let mut g: Vec<(u64, u64)> = gaps.iter().copied().filter(|g| g.1 > 0).collect();
        g.sort_unstable();
        self.gaps = g;
    }

    /// Set a channel's unit and scale (unit per count); full scale follows.
    pub fn calibrate(&mut self, channel: usize, unit: &str, scale: f64) {
        if let Some(c) = self.info.channels.get_mut(channel) {
            c.unit = unit.to_string();
            c.full_scale = c.full_scale.map(|f| f / c.scale * scale);
            c.scale = scale;
        }
    }

    /// Set a channel's clipping level in its unit (`None`: unknown), as the run recorded it.
    pub fn set_full_scale(&mut self, channel: usize, full_scale: Option<f64>) {
        if let Some(c) = self.info.channels.get_mut(channel) {
            c.full_scale = full_scale;
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

impl Source for WavSource {
    fn info(&self) -> &StreamInfo {
        &self.info
    }

    fn paced(&self) -> bool {
        self.pace.is_some()
    }

    fn next_block(&mut self) -> Result<Option<Block>> {
        // Step over a lost stretch that starts here.
        while let Some(&(at, len)) = self.gaps.first() {
            if at > self.next {
                break;
            }
            self.gaps.remove(0);
            let end = at.saturating_add(len);
            if end > self.next {
                self.next = end.min(self.frames_total);
                let off = self.data_offset
                    + self.next * (self.kind.bytes() * self.info.channels.len()) as u64;
                self.reader
                    .seek(SeekFrom::Start(off))
                    .map_err(|e| Error::new(format!("cannot read '{}': {e}", self.name)))?;
            }
        }
        if self.next >= self.frames_total {
            return Ok(None);
        }
        let n_ch = self.info.channels.len();
        let mut frames = (self.frames_total - self.next).min(self.block as u64);
        if let Some(&(at, _)) = self.gaps.first() {
            frames = frames.min(at - self.next);
        }
        let frames = frames as usize;
        let scales: Vec<f64> = self.info.channels.iter().map(|c| c.scale).collect();
        let width = self.kind.bytes();
        self.bytes.resize(frames * n_ch * width, 0);
        if let Err(e) = self.reader.read_exact(&mut self.bytes) {
            return Err(if e.kind() == std::io::ErrorKind::UnexpectedEof {
                Error::new(format!(
                    "'{}' ends early: the WAV file is truncated",
                    self.name
                ))
            } else {
                Error::new(format!(
                    "cannot read '{}': {}",
                    self.name,
                    crate::error::describe_io(&e)
                ))
            });
        }
        let mut channels = vec![Vec::with_capacity(frames); n_ch];
        for (i, b) in self.bytes.chunks_exact(width).enumerate() {
            let c = i % n_ch;
            let v = self.kind.decode(b) * scales[c];
            if !v.is_finite() {
                crate::fail!(
                    "'{}' holds a sample that is not a finite number (channel {c}, frame {})",
                    self.name,
                    self.next + (i / n_ch) as u64
                );
            }
            channels[c].push(v);
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
