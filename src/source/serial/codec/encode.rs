//! The binary encoder (the reference for firmware authors; feeds the tests and the fake device).

use super::{
    CRC16, MAX_CHANNELS, MAX_LABEL_LEN, MAX_PACKET_LEN, PACKET_HEADER, PACKET_NOTE,
    PACKET_OVERHEAD, PACKET_SAMPLES, PROTOCOL_VERSION, SAMPLES_PREFIX, SampleWidth, StreamHeader,
};

/// Binary encoder; keeps the sequence counter and the frame counter.
pub struct BinaryEncoder {
    seq: u16,
    next_frame: u32,
    width: SampleWidth,
    channels: usize,
}

impl Default for BinaryEncoder {
    fn default() -> Self {
        Self::new()
    }
}

impl BinaryEncoder {
    /// An encoder writing `i32` samples, starting at sequence 0.
    pub fn new() -> Self {
        Self::with_width(SampleWidth::I32)
    }

    /// An encoder writing samples of the given width (`i16` values saturate).
    pub fn with_width(width: SampleWidth) -> Self {
        BinaryEncoder {
            seq: 0,
            next_frame: 0,
            width,
            channels: 0,
        }
    }

    /// The sequence number of the next packet.
    pub fn sequence(&self) -> u16 {
        self.seq
    }

    /// Sets the sequence number of the next packet (tests of wrap-around).
    pub fn set_sequence(&mut self, seq: u16) {
        self.seq = seq;
    }

    /// Advances the frame counter without sending, as firmware does when its buffer overflows.
    pub fn skip_frames(&mut self, n: u32) {
        self.next_frame = self.next_frame.wrapping_add(n);
    }

    /// Frames that fit in one sample packet for `channels` channels at this width.
    pub fn frames_per_packet(&self, channels: usize) -> usize {
        let stride = channels.max(1) * self.width.bytes();
        ((MAX_PACKET_LEN - PACKET_OVERHEAD - SAMPLES_PREFIX) / stride).max(1)
    }

    /// A header packet, preceded by an extra `0x00` so that whatever came before it is cut
    /// off. At most [`MAX_CHANNELS`] channels are written, names and units are cut to
    /// [`MAX_LABEL_LEN`] bytes. A header written while the sequence is 0 tells the host
    /// that the stream (re)starts.
    pub fn header(&mut self, h: &StreamHeader) -> Vec<u8> {
        let n = h.channels.len().min(MAX_CHANNELS);
        self.channels = n;
        let mut p = Vec::with_capacity(12 + n * 58);
        p.push(PROTOCOL_VERSION);
        p.push(self.width.bytes() as u8);
        p.push(n as u8);
        p.push(0);
        p.extend_from_slice(&h.rate_hz.to_le_bytes());
        for (i, name) in h.channels.iter().take(n).enumerate() {
            p.extend_from_slice(&h.scale(i).to_le_bytes());
            put_label(&mut p, name);
            put_label(&mut p, h.unit(i));
        }
        let mut out = vec![0];
        self.packet(PACKET_HEADER, &p, &mut out);
        out
    }

    /// Sample packets for `frames`, as many frames per packet as fit. Each frame should hold
    /// one value per header channel; missing values are sent as 0 and extra ones dropped
    /// (before any header the first frame's length is used).
    pub fn samples(&mut self, frames: &[Vec<i32>]) -> Vec<u8> {
        let mut out = Vec::new();
        let Some(first) = frames.first() else {
            return out;
        };
        let n = if self.channels > 0 {
            self.channels
        } else {
            first.len().max(1)
        };
        let per_packet = self.frames_per_packet(n);
        let mut p = Vec::with_capacity(MAX_PACKET_LEN);
        for block in frames.chunks(per_packet) {
            p.clear();
            p.extend_from_slice(&self.next_frame.to_le_bytes());
            for frame in block {
                for c in 0..n {
                    let v = frame.get(c).copied().unwrap_or(0);
                    match self.width {
                        SampleWidth::I16 => {
                            let v = v.clamp(i32::from(i16::MIN), i32::from(i16::MAX)) as i16;
                            p.extend_from_slice(&v.to_le_bytes());
                        }
                        SampleWidth::I32 => p.extend_from_slice(&v.to_le_bytes()),
                    }
                }
            }
            self.next_frame = self.next_frame.wrapping_add(block.len() as u32);
            self.packet(PACKET_SAMPLES, &p, &mut out);
        }
        out
    }

    /// A note packet (UTF-8 text, cut to fit one packet).
    pub fn note(&mut self, text: &str) -> Vec<u8> {
        let mut out = Vec::new();
        let max = MAX_PACKET_LEN - PACKET_OVERHEAD;
        self.packet(PACKET_NOTE, truncate_utf8(text, max).as_bytes(), &mut out);
        out
    }

    /// Appends `COBS(type | seq | payload | crc) 0x00` to `out`.
    fn packet(&mut self, kind: u8, payload: &[u8], out: &mut Vec<u8>) {
        let mut raw = Vec::with_capacity(payload.len() + PACKET_OVERHEAD);
        raw.push(kind);
        raw.extend_from_slice(&self.seq.to_le_bytes());
        raw.extend_from_slice(payload);
        let crc = CRC16.checksum(&raw);
        raw.extend_from_slice(&crc.to_le_bytes());
        let start = out.len();
        out.resize(start + cobs::max_encoding_length(raw.len()), 0);
        let n = cobs::try_encode(&raw, &mut out[start..]).unwrap_or(0);
        out.truncate(start + n);
        out.push(0);
        self.seq = self.seq.wrapping_add(1);
    }
}

fn put_label(p: &mut Vec<u8>, s: &str) {
    let s = truncate_utf8(s, MAX_LABEL_LEN);
    p.push(s.len() as u8);
    p.extend_from_slice(s.as_bytes());
}

fn truncate_utf8(s: &str, max: usize) -> &str {
    let mut end = s.len().min(max);
    while !s.is_char_boundary(end) {
        end -= 1;
    }
    &s[..end]
}
