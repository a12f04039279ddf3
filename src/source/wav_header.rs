//! Reading a WAV header as untrusted input: RIFF/WAVE, RF64 and BW64 (EBU Tech 3306 and
//! ITU-R BS.2088, `ds64` chunk; from memory), `fmt ` as PCM (tag 1), IEEE float (tag 3) or
//! WAVE_FORMAT_EXTENSIBLE (tag 0xFFFE, with valid bits and a sub-format GUID whose first two
//! bytes are the tag; Microsoft WAVEFORMATEXTENSIBLE documentation, from memory).
//!
//! Every size is checked against the file before anything is allocated, and the rate and
//! channel count go through [`crate::run::validate`].
//!
//! A recording cut off before its header was last brought up to date (a capture killed with
//! SIGKILL or by a power cut: the header counts what was there at the last flush, the file
//! holds more) is read to its end: when a RIFF file's RIFF size ends at or before the end
//! of its data chunk but the file goes on, and what follows is not a chunk, the data is
//! taken to run to the end of the file (whole frames; a partial last frame is dropped) and
//! [`WavHeader::past_header`] says how many frames that added. Chunks after the data that
//! the RIFF size covers, and a chunk or ID3 tag appended after it, are left alone. Samples narrower than their container
//! (24 valid bits in 32) are left-justified, as the extensible format specifies: they are
//! shifted right by the unused bits.

use crate::error::{Error, Result};
use std::io::{Read, Seek, SeekFrom};

/// How one sample is stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SampleKind {
    /// Unsigned 8-bit, offset 128.
    U8,
    /// Signed little-endian integer in `bytes` (2, 3 or 4) with `valid` significant bits,
    /// left-justified.
    Int {
        bytes: u8,
        valid: u16,
    },
    F32,
    F64,
}

impl SampleKind {
    pub fn bytes(self) -> usize {
        match self {
            SampleKind::U8 => 1,
            SampleKind::Int { bytes, .. } => usize::from(bytes),
            SampleKind::F32 => 4,
            SampleKind::F64 => 8,
        }
    }

    /// Largest magnitude in raw units (counts for integers, 1.0 for float).
    pub fn full_scale(self) -> f64 {
        match self {
            SampleKind::U8 => 128.0,
            SampleKind::Int { valid, .. } => (1u64 << (valid - 1)) as f64,
            SampleKind::F32 | SampleKind::F64 => 1.0,
        }
    }

    /// Float samples (the tests' reference decoding; `wav.rs` converts in bulk).
    #[cfg(test)]
    pub fn is_float(self) -> bool {
        matches!(self, SampleKind::F32 | SampleKind::F64)
    }

    /// Decode one sample from exactly `self.bytes()` bytes: the tests' reference for the
    /// bulk conversion in `wav.rs`.
    #[cfg(test)]
    pub fn decode(self, b: &[u8]) -> f64 {
        match self {
            SampleKind::U8 => f64::from(b[0]) - 128.0,
            SampleKind::Int { bytes, valid } => {
                let v: i32 = match bytes {
                    2 => i32::from(i16::from_le_bytes([b[0], b[1]])),
                    3 => i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8,
                    _ => i32::from_le_bytes([b[0], b[1], b[2], b[3]]),
                };
                let unused = u32::from(bytes) * 8 - u32::from(valid);
                f64::from(v >> unused)
            }
            SampleKind::F32 => f64::from(f32::from_le_bytes([b[0], b[1], b[2], b[3]])),
            SampleKind::F64 => f64::from_le_bytes(b[..8].try_into().unwrap_or([0; 8])),
        }
    }
}

/// What the header says, checked.
#[derive(Debug, Clone, PartialEq)]
pub struct WavHeader {
    pub channels: usize,
    pub sample_rate: f64,
    pub kind: SampleKind,
    /// Byte offset of the first sample.
    pub data_offset: u64,
    /// Whole frames in the data chunk.
    pub frames: u64,
    /// Frames read past the count the header gives (a recording cut off before its
    /// header was updated; see the module notes); 0 for a complete file.
    pub past_header: u64,
}

/// tag, channels, rate, block align, bits, (valid bits, sub-format tag) of extensible.
type FmtFields = (u16, u16, u32, u16, u16, Option<(u16, u16)>);

/// Most chunks looked at before the data chunk.
const MAX_CHUNKS: usize = 4096;

/// Parse the header of a WAV of `file_len` bytes; leaves `r` anywhere.
pub fn read_header<R: Read + Seek>(r: &mut R, file_len: u64, name: &str) -> Result<WavHeader> {
    let trunc = || Error::new(format!("'{name}' ends early: the WAV file is truncated"));
    let mut head = [0u8; 12];
    read_exact(r, &mut head).map_err(|_| {
        Error::new(format!(
            "'{name}' is not a WAV file (too short for a RIFF header)"
        ))
    })?;
    let form = &head[0..4];
    let is64 = form == b"RF64" || form == b"BW64";
    if !(form == b"RIFF" || is64) || &head[8..12] != b"WAVE" {
        crate::fail!("'{name}' is not a WAV file (no RIFF/WAVE header)");
    }
    let mut pos = 12u64;
    let mut ds64_data: Option<u64> = None;
    let mut fmt: Option<FmtFields> = None;
    for _ in 0..MAX_CHUNKS {
        let mut ch = [0u8; 8];
        r.seek(SeekFrom::Start(pos)).map_err(|_| trunc())?;
        if read_exact(r, &mut ch).is_err() {
            if fmt.is_none() {
                crate::fail!("'{name}' is not a valid WAV file: it has no format chunk");
            }
            crate::fail!("'{name}' is not a valid WAV file: it has no data chunk");
        }
        let id = [ch[0], ch[1], ch[2], ch[3]];
        let size32 = u32::from_le_bytes([ch[4], ch[5], ch[6], ch[7]]);
        let body = pos + 8;
        let mut size = u64::from(size32);
        match &id {
            b"ds64" if is64 => {
                if size < 24 || body + 24 > file_len {
                    crate::fail!("'{name}' is not a valid WAV file: its ds64 chunk is too short");
                }
                let mut b = [0u8; 24];
                read_exact(r, &mut b).map_err(|_| trunc())?;
                ds64_data = Some(u64::from_le_bytes(b[8..16].try_into().unwrap_or([0; 8])));
            }
            b"fmt " => {
                if !(16..=1024).contains(&size) || body + size > file_len {
                    crate::fail!(
                        "'{name}' is not a valid WAV file: its format chunk has {size} bytes"
                    );
                }
                let mut b = vec![0u8; size as usize];
                read_exact(r, &mut b).map_err(|_| trunc())?;
                let u16at = |i: usize| u16::from_le_bytes([b[i], b[i + 1]]);
                let tag = u16at(0);
                let ext = (tag == 0xFFFE && size >= 40).then(|| (u16at(18), u16at(24)));
                if tag == 0xFFFE && ext.is_none() {
                    crate::fail!(
                        "'{name}' is not a valid WAV file: its extensible format chunk is too short"
                    );
                }
                let rate = u32::from_le_bytes([b[4], b[5], b[6], b[7]]);
                fmt = Some((tag, u16at(2), rate, u16at(12), u16at(14), ext));
            }
            b"data" => {
                let Some((tag, channels, rate, align, bits, ext)) = fmt else {
                    crate::fail!(
                        "'{name}' is not a valid WAV file: the data comes before the format chunk"
                    );
                };
                if is64 && size32 == u32::MAX {
                    size = ds64_data.ok_or_else(|| {
                        Error::new(format!(
                            "'{name}' is not a valid WAV file: an RF64 file without a ds64 chunk"
                        ))
                    })?;
                }
                let kind = sample_kind(tag, bits, ext, name)?;
                let n = usize::from(channels);
                crate::run::validate::check_channel_count(n, &format!("the WAV file '{name}'"))?;
                crate::run::validate::check_rate(
                    f64::from(rate),
                    &format!("the WAV file '{name}'"),
                )?;
                let frame_bytes = kind.bytes() * n;
                if usize::from(align) != frame_bytes {
                    crate::fail!(
                        "'{name}' is not a valid WAV file: its frames are said to be {align} bytes, but {n} channels of {} bytes take {frame_bytes}",
                        kind.bytes()
                    );
                }
                if body.saturating_add(size) > file_len {
                    return Err(trunc());
                }
                let declared = size / frame_bytes as u64;
                let riff_end =
                    u64::from(u32::from_le_bytes([head[4], head[5], head[6], head[7]])) + 8;
                let data_end = body + size;
                if !is64
                    && riff_end <= data_end
                    && file_len - data_end > (size & 1)
                    && !chunk_at(r, data_end, file_len)
                {
                    size = file_len - body;
                }
                let frames = size / frame_bytes as u64;
                return Ok(WavHeader {
                    channels: n,
                    sample_rate: f64::from(rate),
                    kind,
                    data_offset: body,
                    frames,
                    past_header: frames - declared,
                });
            }
            _ => {}
        }
        // Chunks are padded to an even length.
        pos = body
            .checked_add(size + (size & 1))
            .filter(|&p| p <= file_len)
            .ok_or_else(|| {
                Error::new(format!(
                    "'{name}' is not a valid WAV file: a chunk claims {size} bytes, past the end of the file"
                ))
            })?;
    }
    crate::fail!("'{name}' is not a valid WAV file: more than {MAX_CHUNKS} chunks before the data")
}

fn sample_kind(tag: u16, bits: u16, ext: Option<(u16, u16)>, name: &str) -> Result<SampleKind> {
    let (tag, valid) = match ext {
        Some((valid, sub)) => (sub, if valid == 0 { bits } else { valid }),
        None => (tag, bits),
    };
    let unsupported = || {
        Error::new(format!(
            "'{name}' uses a WAV encoding this tool does not read ({} {bits}-bit; only PCM integer of 8 to 32 bits and 32/64-bit float)",
            match tag {
                1 => "integer",
                3 => "float",
                _ => "compressed or unknown",
            }
        ))
    };
    if valid == 0 || valid > bits {
        crate::fail!(
            "'{name}' is not a valid WAV file: {valid} valid bits in a {bits}-bit container"
        );
    }
    match (tag, bits) {
        (1, 8) => Ok(SampleKind::U8),
        (1, 16 | 24 | 32) if valid >= 8 => Ok(SampleKind::Int {
            bytes: (bits / 8) as u8,
            valid,
        }),
        (3, 32) => Ok(SampleKind::F32),
        (3, 64) => Ok(SampleKind::F64),
        _ => Err(unsupported()),
    }
}

/// Whether the bytes at `pos` begin a chunk (four letters, digits, blanks or `_` and a size
/// that fits in the file) or an ID3 tag, rather than more samples.
fn chunk_at<R: Read + Seek>(r: &mut R, pos: u64, file_len: u64) -> bool {
    let mut b = [0u8; 8];
    if r.seek(SeekFrom::Start(pos)).is_err() || read_exact(r, &mut b).is_err() {
        return false;
    }
    if &b[..3] == b"ID3" {
        return true;
    }
    let size = u64::from(u32::from_le_bytes([b[4], b[5], b[6], b[7]]));
    b[..4]
        .iter()
        .all(|&c| c.is_ascii_alphanumeric() || c == b' ' || c == b'_')
        && pos + 8 + size <= file_len
}

fn read_exact<R: Read>(r: &mut R, buf: &mut [u8]) -> std::io::Result<()> {
    r.read_exact(buf)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn left_justified_24_in_32() {
        let k = SampleKind::Int {
            bytes: 4,
            valid: 24,
        };
        // 0x123456 stored in the top three bytes.
        let v = (0x12_3456i32 << 8).to_le_bytes();
        assert_eq!(k.decode(&v), f64::from(0x12_3456));
        let v = ((-5i32) << 8).to_le_bytes();
        assert_eq!(k.decode(&v), -5.0);
        assert_eq!(k.full_scale(), 8_388_608.0);
        let k24 = SampleKind::Int {
            bytes: 3,
            valid: 24,
        };
        assert_eq!(k24.decode(&[0xff, 0xff, 0xff]), -1.0);
    }
}

#[cfg(test)]
mod cut_off_tests {
    use super::*;

    /// A 16-bit stereo WAV at 1 kHz whose header says `riff` and `data` bytes, followed by
    /// `samples` bytes of samples and then `tail`.
    fn wav(riff: u32, data: u32, samples: usize, tail: &[u8]) -> Vec<u8> {
        let mut v = b"RIFF".to_vec();
        v.extend(riff.to_le_bytes());
        v.extend(b"WAVEfmt ");
        v.extend(16u32.to_le_bytes());
        v.extend(1u16.to_le_bytes()); // PCM
        v.extend(2u16.to_le_bytes());
        v.extend(1000u32.to_le_bytes());
        v.extend(4000u32.to_le_bytes());
        v.extend(4u16.to_le_bytes());
        v.extend(16u16.to_le_bytes());
        v.extend(b"data");
        v.extend(data.to_le_bytes());
        // Quiet samples: small values, high bytes 0x00 or 0xff (never a chunk name).
        v.extend((0..samples).map(|i| if i % 2 == 0 { (i % 7) as u8 } else { 0 }));
        v.extend(tail);
        v
    }

    fn header(b: &[u8]) -> WavHeader {
        read_header(&mut std::io::Cursor::new(b), b.len() as u64, "t").unwrap()
    }

    #[test]
    fn a_recording_cut_off_before_its_header_was_updated_is_read_to_its_end() {
        // Killed before the first flush: the header still says 0 (as the writer left it).
        let h = header(&wav(0, 0, 4000, &[]));
        assert_eq!((h.frames, h.past_header), (1000, 1000));
        // Killed after a flush at 400 frames; a partial frame at the end is dropped.
        let h = header(&wav(36 + 1600, 1600, 4002, &[]));
        assert_eq!((h.frames, h.past_header), (1000, 600));
        // Complete file: nothing added.
        let h = header(&wav(36 + 4000, 4000, 4000, &[]));
        assert_eq!((h.frames, h.past_header), (1000, 0));
    }

    #[test]
    fn chunks_and_tags_after_the_data_are_not_samples() {
        // A LIST chunk the RIFF size covers.
        let mut list = b"LIST".to_vec();
        list.extend(4u32.to_le_bytes());
        list.extend(b"INFO");
        let h = header(&wav(36 + 4000 + 12, 4000, 4000, &list));
        assert_eq!((h.frames, h.past_header), (1000, 0));
        // The same chunk appended outside the RIFF size.
        let h = header(&wav(36 + 4000, 4000, 4000, &list));
        assert_eq!((h.frames, h.past_header), (1000, 0));
        // An ID3 tag appended.
        let h = header(&wav(
            36 + 4000,
            4000,
            4000,
            b"ID3\x03\x00\x00\x00\x00\x00\x10",
        ));
        assert_eq!((h.frames, h.past_header), (1000, 0));
        // The pad byte of an odd-sized data chunk outside the RIFF size.
        let mut odd = wav(36 + 3, 3, 3, &[0]);
        odd[22] = 1; // mono 8-bit so that 3 bytes are 3 frames
        odd[32] = 1;
        odd[34] = 8;
        let h = header(&odd);
        assert_eq!((h.frames, h.past_header), (3, 0));
    }
}
