//! The raw recording of a run, appended as it arrives: 16-bit converter codes when every
//! channel comes from a converter of at most 16 bits (exact, half the size), otherwise
//! 32-bit float in channel units.
//!
//! The WAV header is brought up to date at every `flush`, so after a crash or an unplugged
//! device the file on disk is a valid WAV holding everything up to the last flush.
//!
//! Samples lost on the way (link loss, overruns) are not written: the WAV holds only what
//! arrived, and [`RecordingWriter::gaps`] lists where stretches are missing (WAV frame,
//! frames lost) for the run file, so re-analysis sees the same gaps the live stream had
//! and no filler the trigger could fire on.
//!
//! A RIFF WAV's sizes are 32-bit, so a recording stops growing at [`MAX_WAV_BYTES`]
//! (just under 4 GiB): `append` then fails with a clear sentence and the file on disk stays
//! a valid WAV of everything up to the limit (16-bit stereo at 48 kHz reaches it after
//! about 6 hours).

use crate::error::{Context, Error, Result};
use crate::run::naming;
use crate::signal::{Block, StreamInfo};
use std::io::BufWriter;
use std::path::{Path, PathBuf};

/// How a run's WAV holds its samples. Stored in the run file as readable text (the texts
/// below are the ones every version has written, so old run files load unchanged).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(try_from = "String", into = "String")]
pub enum Encoding {
    /// 32-bit float channel values, written by this module.
    Float32,
    /// 16-bit converter codes, written by this module: value = code x scale.
    Counts16,
    /// A recording made elsewhere and analysed as it is, its samples already in channel
    /// units (every scale 1).
    AsStored,
    /// A recording made elsewhere holding converter codes: value = code x scale.
    Counts,
}

impl Encoding {
    pub const ALL: [Encoding; 4] = [
        Encoding::Float32,
        Encoding::Counts16,
        Encoding::AsStored,
        Encoding::Counts,
    ];

    /// The text in the run file.
    pub fn text(self) -> &'static str {
        match self {
            Encoding::Float32 => "float32 in channel units",
            Encoding::Counts16 => "counts int16 (value = code x scale)",
            Encoding::AsStored => "as stored",
            Encoding::Counts => "counts",
        }
    }

    /// A recording made elsewhere, as opened: converter codes when any channel has a scale
    /// (the user calibrated it), else values as stored.
    pub fn of_external(info: &crate::signal::StreamInfo) -> Encoding {
        if info.channels.iter().all(|c| c.scale == 1.0) {
            Encoding::AsStored
        } else {
            Encoding::Counts
        }
    }

    /// True when the samples are converter codes that the channel scales turn into values.
    pub fn is_counts(self) -> bool {
        matches!(self, Encoding::Counts16 | Encoding::Counts)
    }
}

impl std::fmt::Display for Encoding {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.text())
    }
}

impl TryFrom<String> for Encoding {
    type Error = String;
    fn try_from(s: String) -> std::result::Result<Self, String> {
        Encoding::ALL
            .into_iter()
            .find(|e| e.text() == s)
            .ok_or_else(|| {
                let known: Vec<String> = Encoding::ALL
                    .iter()
                    .map(|e| format!("'{}'", e.text()))
                    .collect();
                format!(
                    "unknown recording encoding '{}' (known: {})",
                    crate::run::validate::clean_text(&s, false),
                    known.join(", ")
                )
            })
    }
}

impl From<Encoding> for String {
    fn from(e: Encoding) -> String {
        e.text().to_string()
    }
}

/// Largest WAV this writer makes: the RIFF size field (32 bits) minus room for the header.
pub const MAX_WAV_BYTES: u64 = u32::MAX as u64 - 1024;

pub struct RecordingWriter {
    path: PathBuf,
    writer: Option<hound::WavWriter<BufWriter<std::fs::File>>>,
    /// Frames written to the file.
    frames: u64,
    /// Stream position of the next frame (written frames plus frames lost).
    position: u64,
    gaps: Vec<(u64, u64)>,
    bytes_per_frame: u64,
    limit_bytes: u64,
    /// Some(scales) when writing 16-bit codes.
    codes: Option<Vec<f64>>,
}

impl RecordingWriter {
    /// Create `DIR/STEM.wav` for a new run under the stem [`naming::claim_stem`] gives
    /// `label` (exclusive: two writers started together never share a name).
    pub fn create_fresh(dir: &Path, label: &str, info: &StreamInfo) -> Result<(Self, String)> {
        let (stem, file) = naming::claim_stem(dir, label)?;
        let wav = dir.join(format!("{stem}.wav"));
        match Self::with_file(&wav, file, info) {
            Ok(w) => Ok((w, stem)),
            Err(e) => {
                // A failed start leaves no empty file behind and frees the name.
                let _ = std::fs::remove_file(&wav);
                Err(e)
            }
        }
    }

    /// Create (or replace) the recording at `path`.
    pub fn create(path: &Path, info: &StreamInfo) -> Result<Self> {
        crate::run::safe_path::check_output(path, crate::run::safe_path::FileKind::Wav, &[])?;
        let file = std::fs::File::create(path)
            .map_err(Error::from)
            .with_context(|| format!("cannot create '{}'", path.display()))?;
        Self::with_file(path, file, info)
    }

    fn with_file(path: &Path, file: std::fs::File, info: &StreamInfo) -> Result<Self> {
        crate::run::validate::check_stream(info, "the stream to record")?;
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
        let bytes_per_frame = u64::from(spec.channels) * u64::from(spec.bits_per_sample / 8);
        let writer = hound::WavWriter::new(BufWriter::new(file), spec)
            .map_err(|e| Error::new(e.to_string()))
            .with_context(|| format!("cannot create '{}'", path.display()))?;
        Ok(RecordingWriter {
            path: path.to_path_buf(),
            writer: Some(writer),
            frames: 0,
            position: 0,
            gaps: Vec::new(),
            bytes_per_frame,
            limit_bytes: MAX_WAV_BYTES,
            codes,
        })
    }

    /// How the samples are stored, for the run file.
    pub fn encoding(&self) -> Encoding {
        if self.codes.is_some() {
            Encoding::Counts16
        } else {
            Encoding::Float32
        }
    }

    /// Lower the size limit (tests of the limit without writing 4 GiB).
    pub fn with_limit_bytes(mut self, limit: u64) -> Self {
        self.limit_bytes = limit.min(MAX_WAV_BYTES);
        self
    }

    /// Stretches lost before they reached the recording: (WAV frame, frames lost).
    pub fn gaps(&self) -> &[(u64, u64)] {
        &self.gaps
    }

    /// Append a block. Samples lost before it (a gap in `block.start`) are not written;
    /// the gap is listed in [`Self::gaps`]. Past the size limit nothing is written and an
    /// error says so; what was written stays a valid WAV.
    pub fn append(&mut self, block: &Block) -> Result<()> {
        let Some(w) = self.writer.as_mut() else {
            return Ok(());
        };
        let bytes = 44 + (self.frames + block.len() as u64) * self.bytes_per_frame;
        if bytes > self.limit_bytes {
            crate::fail!(
                "the recording '{}' reached the WAV size limit of {} MiB (the format's 32-bit sizes); it holds everything up to here, start a new run to go on",
                self.path.display(),
                self.limit_bytes >> 20
            );
        }
        if block.start > self.position {
            self.gaps.push((self.frames, block.start - self.position));
        }
        self.position = self.position.max(block.start);
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
        self.position += block.len() as u64;
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::{ChannelInfo, Role};

    #[test]
    fn the_size_limit_stops_the_recording_with_a_valid_file() {
        // The limit is tested lowered (the real one, just under 4 GiB, would take minutes to
        // reach): the block that would cross it is refused with one sentence, and what was
        // written before stays a complete WAV.
        let dir = std::env::temp_dir().join(format!("tapmodes-rec-limit-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let info = StreamInfo {
            source: "test".into(),
            sample_rate: 1000.0,
            channels: vec![ChannelInfo {
                name: "a".into(),
                role: Role::Response,
                unit: "g".into(),
                scale: 1.0 / 2048.0,
                full_scale: Some(16.0),
            }],
        };
        let path = dir.join("limit.wav");
        let mut rec = RecordingWriter::create(&path, &info)
            .unwrap()
            .with_limit_bytes(44 + 2 * 2500);
        let block = |start: u64| Block {
            start,
            channels: vec![(0..1000).map(|k| (k as f64 / 2048.0).sin()).collect()],
        };
        rec.append(&block(0)).unwrap();
        rec.append(&block(1000)).unwrap();
        let err = rec.append(&block(2000)).unwrap_err().to_string();
        assert!(
            err.contains("size limit") && err.contains("start a new run"),
            "{err}"
        );
        assert_eq!(rec.frames(), 2000);
        rec.finish().unwrap();
        let wav = hound::WavReader::open(&path).expect("a valid WAV up to the limit");
        assert_eq!(wav.duration(), 2000);
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn encodings_read_back_as_written_and_unknown_text_is_refused() {
        for e in Encoding::ALL {
            let json = serde_json::to_string(&e).unwrap();
            assert_eq!(
                json,
                format!("\"{}\"", e.text()),
                "readable text in the file"
            );
            assert_eq!(serde_json::from_str::<Encoding>(&json).unwrap(), e);
        }
        let err = serde_json::from_str::<Encoding>("\"counts int24\"").unwrap_err();
        assert!(
            err.to_string()
                .contains("unknown recording encoding 'counts int24'")
        );
        assert!(Encoding::Counts16.is_counts() && Encoding::Counts.is_counts());
        assert!(!Encoding::Float32.is_counts() && !Encoding::AsStored.is_counts());
    }

    #[test]
    fn the_schema_lists_every_encoding() {
        let schema: serde_json::Value =
            serde_json::from_str(include_str!("../../schema/run.schema.json")).unwrap();
        let listed: Vec<&str> = schema["properties"]["recording"]["properties"]["encoding"]["enum"]
            .as_array()
            .expect("an enum of encodings in the schema")
            .iter()
            .map(|v| v.as_str().unwrap())
            .collect();
        let ours: Vec<&str> = Encoding::ALL.iter().map(|e| e.text()).collect();
        assert_eq!(listed, ours);
    }
}
