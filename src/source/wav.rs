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
    bytes: Vec<u8>,
    info: StreamInfo,
    frames_total: u64,
    next: u64,
    block: usize,
    /// Stretches lost before they reached the file (the file frame where the stream jumps,
    /// frames lost): the file holds only what arrived, so at each the blocks' `start`
    /// jumps ahead by the frames lost.
    gaps: Vec<(u64, u64)>,
    /// Frames lost before `next` (stream position = file frame + shift).
    shift: u64,
    /// Optional real-time pacing: the wall-clock start and the rate to keep.
    pace: Option<std::time::Instant>,
    /// Frames read past the header's count (a recording cut off before its header was
    /// updated, see `wav_header`).
    past_header: u64,
    /// Frames the header counts.
    header_frames: u64,
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
            frames_total: h.frames,
            next: 0,
            block: WAV_BLOCK,
            gaps: Vec::new(),
            shift: 0,
            pace: None,
            past_header: h.past_header,
            header_frames: h.frames - h.past_header,
        })
    }

    /// Frames read past the count the header gives: more than 0 for a recording cut off
    /// before its header was last updated (a killed capture), read to the end of the file.
    pub fn past_header(&self) -> u64 {
        self.past_header
    }

    /// One sentence for the operator when the file was read past its header's count.
    pub fn note(&self) -> Option<String> {
        (self.past_header > 0).then(|| {
            format!(
                "note: the header of '{}' counts {} frames but the file holds {} more after them (a recording cut off before its header was last updated, e.g. a killed capture); they are read too",
                self.name,
                self.header_frames,
                self.past_header,
            )
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

    /// Bytes of one frame in the file.
    pub fn frame_bytes(&self) -> u64 {
        (self.kind.bytes() * self.info.channels.len()) as u64
    }

    /// Read no further than `frames` (a run that ended before its recording did).
    pub fn limit_frames(&mut self, frames: u64) {
        self.frames_total = self.frames_total.min(frames);
    }

    /// The stretches a run file lists as lost (file frame where the stream jumps, frames
    /// lost): the blocks carry the same jumps in position the live stream had.
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

/// Decode interleaved frames into one vector per channel, times the channel's scale: one
/// tight loop per channel and sample kind (no per-sample dispatch on the kind). Returns
/// whether every decoded value is finite (checked in the same loop, without a branch).
fn decode_frames(
    kind: SampleKind,
    bytes: &[u8],
    scales: &[f64],
    channels: &mut [Vec<f64>],
) -> bool {
    fn each<const W: usize>(
        bytes: &[u8],
        scales: &[f64],
        channels: &mut [Vec<f64>],
        decode: impl Fn([u8; W]) -> f64 + Copy,
    ) -> bool {
        let frame = W * channels.len();
        if frame == 0 {
            return true;
        }
        let mut finite = true;
        let n = bytes.len() / frame;
        for (c, (out, &scale)) in channels.iter_mut().zip(scales).enumerate() {
            // One tight loop per channel over a slice made to size: the decoder inlines
            // and the loop needs no capacity checks.
            let start = out.len();
            out.resize(start + n, 0.0);
            for (o, f) in out[start..].iter_mut().zip(bytes.chunks_exact(frame)) {
                let mut b = [0u8; W];
                b.copy_from_slice(&f[c * W..(c + 1) * W]);
                *o = decode(b) * scale;
                finite &= o.is_finite();
            }
        }
        finite
    }
    match kind {
        SampleKind::U8 => each::<1>(bytes, scales, channels, |b| f64::from(b[0]) - 128.0),
        SampleKind::Int { bytes: 2, valid } => {
            let unused = 16 - u32::from(valid);
            each::<2>(bytes, scales, channels, |b| {
                f64::from(i32::from(i16::from_le_bytes(b)) >> unused)
            })
        }
        SampleKind::Int { bytes: 3, valid } => {
            let unused = 24 - u32::from(valid);
            each::<3>(bytes, scales, channels, |b| {
                f64::from((i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8) >> unused)
            })
        }
        SampleKind::Int { valid, .. } => {
            let unused = 32 - u32::from(valid);
            each::<4>(bytes, scales, channels, |b| {
                f64::from(i32::from_le_bytes(b) >> unused)
            })
        }
        SampleKind::F32 => each::<4>(bytes, scales, channels, |b| {
            f64::from(f32::from_le_bytes(b))
        }),
        SampleKind::F64 => each::<8>(bytes, scales, channels, f64::from_le_bytes),
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
        // The stream jumps ahead where frames were lost before this file frame.
        while let Some(&(at, len)) = self.gaps.first() {
            if at > self.next {
                break;
            }
            self.gaps.remove(0);
            self.shift = self.shift.saturating_add(len);
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
        let all_finite = decode_frames(self.kind, &self.bytes, &scales, &mut channels);
        // The first bad sample in file order: earliest frame, then lowest channel (searched
        // for only when the decoder saw one).
        let bad = (channels.iter().enumerate())
            .filter(|_| !all_finite)
            .filter_map(|(c, x)| x.iter().position(|v| !v.is_finite()).map(|i| (i, c)))
            .min();
        if let Some((i, c)) = bad {
            crate::fail!(
                "'{}' holds a sample that is not a finite number (channel {c}, frame {})",
                self.name,
                self.next + i as u64
            );
        }
        let block = Block {
            start: self.next + self.shift,
            channels,
        };
        self.next += frames as u64;
        if let Some(t0) = self.pace {
            let due = std::time::Duration::from_secs_f64(
                (self.next + self.shift) as f64 / self.info.sample_rate,
            );
            if let Some(wait) = due.checked_sub(t0.elapsed()) {
                std::thread::sleep(wait);
            }
        }
        Ok(Some(block))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The bulk decoder gives exactly what the per-sample decoder of the header module
    /// gives, for every sample kind, scaled per channel.
    #[test]
    fn bulk_decoding_matches_per_sample() {
        let kinds = [
            SampleKind::U8,
            SampleKind::Int {
                bytes: 2,
                valid: 16,
            },
            SampleKind::Int {
                bytes: 2,
                valid: 12,
            },
            SampleKind::Int {
                bytes: 3,
                valid: 24,
            },
            SampleKind::Int {
                bytes: 4,
                valid: 24,
            },
            SampleKind::Int {
                bytes: 4,
                valid: 32,
            },
            SampleKind::F32,
            SampleKind::F64,
        ];
        let mut rng = crate::rng::Rng::new(7);
        for kind in kinds {
            for n_ch in [1usize, 2, 3] {
                let w = kind.bytes();
                let frames = 37;
                let mut bytes: Vec<u8> = (0..frames * n_ch * w)
                    .map(|_| (rng.next_u64() >> 56) as u8)
                    .collect();
                if kind.is_float() {
                    // Keep the floats finite: clear the top exponent bit of each sample.
                    for s in bytes.chunks_exact_mut(w) {
                        s[w - 1] &= 0x3f;
                    }
                }
                let scales: Vec<f64> = (0..n_ch).map(|c| 0.5 + c as f64).collect();
                let mut got = vec![Vec::new(); n_ch];
                assert!(
                    decode_frames(kind, &bytes, &scales, &mut got),
                    "{kind:?} finite"
                );
                for (i, b) in bytes.chunks_exact(w).enumerate() {
                    let c = i % n_ch;
                    let want = kind.decode(b) * scales[c];
                    assert_eq!(
                        got[c][i / n_ch].to_bits(),
                        want.to_bits(),
                        "{kind:?} {n_ch}"
                    );
                }
                if kind.is_float() {
                    // A NaN in the last channel of the last frame is reported.
                    let at = bytes.len() - w;
                    bytes[at..].fill(0xff);
                    let mut got = vec![Vec::new(); n_ch];
                    assert!(
                        !decode_frames(kind, &bytes, &scales, &mut got),
                        "{kind:?} NaN"
                    );
                }
            }
        }
    }
}
