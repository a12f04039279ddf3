//! The binary wire form: COBS frames, CRC, header and sample packets, the header's reader.

use super::{
    CRC16, Decoded, LinkStats, MAX_ENCODED_LEN, MAX_FRAME_JUMP_S, MAX_PACKET_LEN, MIN_FRAME_JUMP,
    PACKET_HEADER, PACKET_NOTE, PACKET_OVERHEAD, PACKET_SAMPLES, PROTOCOL_VERSION, SAMPLES_PREFIX,
    SampleWidth, StreamHeader, push_note,
};

#[derive(Default)]
pub(super) struct BinaryDecoder {
    /// The COBS frame being collected (without its delimiter).
    buf: Vec<u8>,
    overflow: bool,
    /// Set by a rejected frame, cleared by the next good packet.
    out_of_sync: bool,
    pub(super) header: Option<(StreamHeader, SampleWidth)>,
    next_seq: Option<u16>,
    next_frame: Option<u32>,
    pub(super) frames_lost: u64,
    pub(super) stats: LinkStats,
    /// Intact packets of a known type seen, for sniffing.
    pub(super) evidence: u64,
    pub(super) notes: Vec<String>,
}

impl BinaryDecoder {
    pub(super) fn push(&mut self, bytes: &[u8], out: &mut Vec<Decoded>) {
        let mut rest = bytes;
        while !rest.is_empty() {
            match rest.iter().position(|&b| b == 0) {
                Some(i) => {
                    self.take(&rest[..i]);
                    self.end_frame(out);
                    rest = &rest[i + 1..];
                }
                None => {
                    self.take(rest);
                    break;
                }
            }
        }
    }

    fn take(&mut self, chunk: &[u8]) {
        if self.overflow {
            return;
        }
        if self.buf.len() + chunk.len() > MAX_ENCODED_LEN {
            self.overflow = true;
            self.buf.clear();
        } else {
            self.buf.extend_from_slice(chunk);
        }
    }

    fn end_frame(&mut self, out: &mut Vec<Decoded>) {
        if self.overflow {
            self.overflow = false;
            self.reject();
            return;
        }
        if self.buf.is_empty() {
            return; // back-to-back delimiters
        }
        let mut buf = std::mem::take(&mut self.buf);
        let ok = match cobs::decode_in_place(&mut buf) {
            Ok(n) => buf.get(..n).is_some_and(|p| self.packet(p, out)),
            Err(_) => false,
        };
        if !ok {
            self.reject();
        }
        buf.clear();
        self.buf = buf;
    }

    fn reject(&mut self) {
        self.stats.packets_corrupt += 1;
        if !self.out_of_sync {
            self.out_of_sync = true;
            self.stats.resyncs += 1;
        }
    }

    /// Handles one decoded packet; false if it must be rejected.
    fn packet(&mut self, p: &[u8], out: &mut Vec<Decoded>) -> bool {
        if p.len() < PACKET_OVERHEAD || p.len() > MAX_PACKET_LEN {
            return false;
        }
        let (body, crc) = p.split_at(p.len() - 2);
        if CRC16.checksum(body) != u16::from_le_bytes([crc[0], crc[1]]) {
            return false;
        }
        let kind = body[0];
        let seq = u16::from_le_bytes([body[1], body[2]]);
        let payload = &body[3..];

        // Sequence: a header with seq 0 is a (re)start of the device (sequence and frame
        // counter begin again at 0) and counts no loss; a gap of 0x8000 or more is taken as
        // a restart or reordering, not as loss.
        if kind == PACKET_HEADER && seq == 0 {
            self.next_seq = None;
            self.next_frame = Some(0);
        }
        if let Some(expected) = self.next_seq {
            let gap = seq.wrapping_sub(expected);
            if gap < 0x8000 {
                self.stats.packets_lost += u64::from(gap);
            }
        }
        self.next_seq = Some(seq.wrapping_add(1));

        let ok = match kind {
            PACKET_HEADER => match parse_binary_header(payload) {
                Some(hw) => {
                    out.push(Decoded::Header(hw.0.clone()));
                    self.header = Some(hw);
                    true
                }
                None => false,
            },
            PACKET_SAMPLES => self.samples(payload, out),
            PACKET_NOTE => {
                push_note(
                    &mut self.notes,
                    String::from_utf8_lossy(payload).into_owned(),
                );
                true
            }
            _ => true, // reserved for newer firmware: intact, ignored
        };
        if ok {
            self.stats.packets_ok += 1;
            self.out_of_sync = false;
            if (PACKET_HEADER..=PACKET_NOTE).contains(&kind) {
                self.evidence += 1;
            }
        }
        ok
    }

    fn samples(&mut self, payload: &[u8], out: &mut Vec<Decoded>) -> bool {
        if payload.len() < SAMPLES_PREFIX {
            return false;
        }
        let (prefix, data) = payload.split_at(SAMPLES_PREFIX);
        let first = u32::from_le_bytes([prefix[0], prefix[1], prefix[2], prefix[3]]);
        let Some((h, width)) = &self.header else {
            self.stats.junk_lines += 1;
            return true;
        };
        let n_ch = h.channels.len();
        let stride = n_ch * width.bytes();
        if stride == 0 || data.len() % stride != 0 {
            return false;
        }
        let n_frames = data.len() / stride;
        // Scaled values must be finite: a header scale so large that a sample overflows
        // makes the packet unusable, whatever its CRC says.
        if h.scales
            .iter()
            .any(|s| !(s * f64::from(i32::MAX)).is_finite())
        {
            return false;
        }
        if let Some(expected) = self.next_frame {
            let gap = first.wrapping_sub(expected);
            let limit = ((h.rate_hz * MAX_FRAME_JUMP_S) as u64).max(MIN_FRAME_JUMP);
            if u64::from(gap) > limit && gap < 0x8000_0000 {
                self.stats.counter_jumps += 1;
                push_note(
                    &mut self.notes,
                    format!(
                        "the frame counter jumped ahead by {gap} frames (more than {MAX_FRAME_JUMP_S} s): taken as a restart of the counter, not as lost frames"
                    ),
                );
            } else if gap < 0x8000_0000 && gap > 0 {
                self.frames_lost += u64::from(gap);
                out.push(Decoded::Gap(u64::from(gap)));
            }
        }
        self.next_frame = Some(first.wrapping_add(n_frames as u32));
        for frame in data.chunks_exact(stride) {
            let mut values = Vec::with_capacity(n_ch);
            match width {
                SampleWidth::I16 => {
                    for (i, b) in frame.chunks_exact(2).enumerate() {
                        values.push(f64::from(i16::from_le_bytes([b[0], b[1]])) * h.scale(i));
                    }
                }
                SampleWidth::I32 => {
                    for (i, b) in frame.chunks_exact(4).enumerate() {
                        let v = i32::from_le_bytes([b[0], b[1], b[2], b[3]]);
                        values.push(f64::from(v) * h.scale(i));
                    }
                }
            }
            out.push(Decoded::Frame(values));
        }
        self.stats.frames += n_frames as u64;
        true
    }
}

/// Header payload: version u8, width u8 (2 or 4), channel count u8, reserved u8, rate_hz f64,
/// then per channel: scale f64, name (u8 length + UTF-8), unit (u8 length + UTF-8).
/// Bytes after the last channel are ignored (room for newer versions).
fn parse_binary_header(p: &[u8]) -> Option<(StreamHeader, SampleWidth)> {
    let mut r = Reader(p);
    if r.u8()? != PROTOCOL_VERSION {
        return None;
    }
    let width = SampleWidth::from_bytes(r.u8()?)?;
    let n = usize::from(r.u8()?);
    let _reserved = r.u8()?;
    let rate_hz = r.f64()?;
    if n == 0 || !rate_hz.is_finite() || rate_hz <= 0.0 {
        return None;
    }
    let mut h = StreamHeader {
        rate_hz,
        channels: Vec::with_capacity(n),
        units: Vec::with_capacity(n),
        scales: Vec::with_capacity(n),
    };
    for i in 0..n {
        let scale = r.f64().filter(|s| s.is_finite())?;
        let name = r.label()?;
        let unit = r.label()?;
        h.scales.push(scale);
        h.channels.push(if name.is_empty() {
            format!("ch{i}")
        } else {
            name
        });
        h.units.push(if unit.is_empty() {
            "counts".to_string()
        } else {
            unit
        });
    }
    Some((h, width))
}

struct Reader<'a>(&'a [u8]);

impl Reader<'_> {
    fn bytes(&mut self, n: usize) -> Option<&[u8]> {
        if self.0.len() < n {
            return None;
        }
        let (head, tail) = self.0.split_at(n);
        self.0 = tail;
        Some(head)
    }

    fn u8(&mut self) -> Option<u8> {
        self.bytes(1).map(|b| b[0])
    }

    fn f64(&mut self) -> Option<f64> {
        let b: [u8; 8] = self.bytes(8)?.try_into().ok()?;
        Some(f64::from_le_bytes(b))
    }

    fn label(&mut self) -> Option<String> {
        let n = usize::from(self.u8()?);
        std::str::from_utf8(self.bytes(n)?).ok().map(str::to_string)
    }
}
