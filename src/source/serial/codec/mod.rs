//! Turns the byte stream from the tap-test firmware into stream headers and scaled sample frames.
//!
//! Two wire forms are understood, both specified in `firmware-notes/protocol.md`:
//!
//! - **Text** (for bring-up): `\n`-terminated lines. `# rate_hz=3200 channels=force,accel_z
//!   units=N,g scale=0.01,0.000122` describes the stream; every other line is one sample
//!   instant as comma-separated numbers, one per channel.
//! - **Binary** (for high rates): packets framed with COBS (Cheshire & Baker, "Consistent
//!   Overhead Byte Stuffing", IEEE/ACM Trans. Networking, 1999) and delimited by `0x00`. A
//!   packet is `type u8 | seq u16 LE | payload | CRC-16/IBM-3740 u16 LE` (the CRC, also known as
//!   CCITT-FALSE, covers type, seq and payload). Header packets describe the stream, sample
//!   packets carry blocks of little-endian `i16`/`i32` frames.
//!
//! [`Decoder`] is pure (no I/O), accepts the bytes in chunks of any size, and never panics.
//! The encoders are the reference for firmware authors and feed the tests and the fake device.

mod binary;
mod encode;
mod text;

use binary::BinaryDecoder;
pub use encode::BinaryEncoder;
use text::TextDecoder;
pub use text::{encode_text_frame, encode_text_header};

use crc::{CRC_16_IBM_3740, Crc};

/// CRC-16/IBM-3740 (a.k.a. CCITT-FALSE): poly 0x1021, init 0xFFFF, no reflection, xorout 0.
static CRC16: Crc<u16> = Crc::<u16>::new(&CRC_16_IBM_3740);

/// Binary packet type: stream header.
pub const PACKET_HEADER: u8 = 0x01;
/// Binary packet type: a block of sample frames.
pub const PACKET_SAMPLES: u8 = 0x02;
/// Binary packet type: a UTF-8 note from the device (boot messages, sensor errors).
pub const PACKET_NOTE: u8 = 0x03;
/// Version byte at the start of a binary header payload.
pub const PROTOCOL_VERSION: u8 = 1;
/// Largest packet before COBS: type + seq + payload + CRC.
pub const MAX_PACKET_LEN: usize = 1024;
/// Most channels an encoder writes into a header.
pub const MAX_CHANNELS: usize = 16;
/// Longest channel name or unit (bytes of UTF-8) an encoder writes into a binary header.
pub const MAX_LABEL_LEN: usize = 24;
/// Bytes seen before [`Decoder::diagnosis`] may give a verdict.
pub const DIAGNOSIS_AFTER_BYTES: u64 = 512;

/// type (1) + seq (2) + CRC (2).
const PACKET_OVERHEAD: usize = 5;
/// first_frame (u32) at the start of a sample payload.
const SAMPLES_PREFIX: usize = 4;
/// Longest COBS frame (without its delimiter) that can hold a valid packet.
const MAX_ENCODED_LEN: usize = cobs::max_encoding_length(MAX_PACKET_LEN);
/// Longer text lines are junk (and are not kept in memory).
const MAX_LINE_LEN: usize = 4096;
/// The form is decided within this many bytes.
const SNIFF_LIMIT: usize = 256;
/// Device notes kept for [`Decoder::take_notes`].
const MAX_NOTES: usize = 16;

/// What the stream says about itself.
/// Units default to "counts" and scales to 1.0 when not given.
#[derive(Debug, Clone, PartialEq)]
pub struct StreamHeader {
    pub rate_hz: f64,
    pub channels: Vec<String>,
    pub units: Vec<String>,
    pub scales: Vec<f64>,
}

impl StreamHeader {
    /// A header with units "counts" and scales 1.0 for every channel.
    pub fn new(rate_hz: f64, channels: &[&str]) -> Self {
        StreamHeader {
            rate_hz,
            channels: channels.iter().map(|c| c.to_string()).collect(),
            units: vec!["counts".to_string(); channels.len()],
            scales: vec![1.0; channels.len()],
        }
    }

    /// The unit of channel `i`, "counts" when not given.
    pub fn unit(&self, i: usize) -> &str {
        self.units.get(i).map_or("counts", String::as_str)
    }

    /// The scale of channel `i`, 1.0 when not given.
    pub fn scale(&self, i: usize) -> f64 {
        self.scales.get(i).copied().unwrap_or(1.0)
    }
}

#[derive(Debug, Clone, PartialEq)]
pub enum Decoded {
    Header(StreamHeader),
    /// One sample instant: one value per channel, already multiplied by the channel's scale.
    Frame(Vec<f64>),
    /// Frames known lost by the frame counter (binary form), emitted just before the first
    /// frame after them: where a gap lands follows from the counter alone, never from how
    /// the bytes were split into reads. A jump taken as a restart of the counter is no gap.
    Gap(u64),
}

/// Counters of what the link delivered. `bytes` counts everything pushed; `frames` the
/// [`Decoded::Frame`]s emitted.
///
/// Binary form: `packets_ok` are packets that passed the CRC and made sense; `packets_lost`
/// is the sum of the gaps in the sequence counter (a corrupt packet therefore also shows up as
/// lost once the next good one arrives); `packets_corrupt` are delimited frames that were
/// rejected (COBS error, bad length, CRC mismatch, malformed contents, overlong); `resyncs`
/// counts runs of rejected bytes after which the decoder found a packet boundary again.
/// `junk_lines` counts text lines that could not be used (wrong field count, unparsable,
/// before any header) and, in the binary form, intact sample packets that arrived before any
/// header and were dropped.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct LinkStats {
    pub bytes: u64,
    pub frames: u64,
    pub packets_ok: u64,
    pub packets_lost: u64,
    pub packets_corrupt: u64,
    pub resyncs: u64,
    pub junk_lines: u64,
    /// Binary form: jumps of the frame counter beyond [`MAX_FRAME_JUMP_S`] of stream, taken
    /// as a restart of the device's counter (no loss counted, a note is kept).
    pub counter_jumps: u64,
}

/// Longest forward jump of the frame counter, in seconds of stream, still counted as lost
/// frames; a longer one is taken as a restart of the counter (a hot-plugged sensor, a
/// firmware reset without a header), so that one bad counter cannot fake hours of loss.
pub const MAX_FRAME_JUMP_S: f64 = 10.0;
/// ... but never fewer frames than this.
pub const MIN_FRAME_JUMP: u64 = 65_536;

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WireForm {
    Text,
    Binary,
}

/// Integer width of the samples in binary sample packets.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SampleWidth {
    I16,
    I32,
}

impl SampleWidth {
    /// Bytes per value.
    pub fn bytes(self) -> usize {
        match self {
            SampleWidth::I16 => 2,
            SampleWidth::I32 => 4,
        }
    }

    fn from_bytes(n: u8) -> Option<Self> {
        match n {
            2 => Some(SampleWidth::I16),
            4 => Some(SampleWidth::I32),
            _ => None,
        }
    }
}

/// Streaming decoder for both wire forms.
pub struct Decoder {
    form: Option<WireForm>,
    text: TextDecoder,
    bin: BinaryDecoder,
    /// Outputs of each candidate while the form is being sniffed.
    pending_text: Vec<Decoded>,
    pending_bin: Vec<Decoded>,
    bytes: u64,
    printable: u64,
    zeros: u64,
    newlines: u64,
}

impl Default for Decoder {
    fn default() -> Self {
        Self::new()
    }
}

impl Decoder {
    /// A decoder that sniffs the form from the first bytes (at most 256 of them): it feeds
    /// both forms in parallel and picks the first to produce an intact packet (binary), or a
    /// header line or two numeric lines (text); failing that, it decides from the share of
    /// printable bytes.
    /// Outputs are held back until the form is known, so the result is the same for any way
    /// of splitting the input into pushes.
    pub fn new() -> Self {
        Decoder {
            form: None,
            text: TextDecoder::default(),
            bin: BinaryDecoder::default(),
            pending_text: Vec::new(),
            pending_bin: Vec::new(),
            bytes: 0,
            printable: 0,
            zeros: 0,
            newlines: 0,
        }
    }

    /// A decoder for a known form.
    pub fn with_form(form: WireForm) -> Self {
        let mut d = Self::new();
        d.form = Some(form);
        d
    }

    /// A decoder for text streams that send no header (plain sketches printing numbers):
    /// `header` names the columns. Fields may be separated by commas, semicolons, tabs or
    /// spaces; lines with another number of fields, or that are not numbers, are junk.
    pub fn headerless(header: StreamHeader) -> Self {
        let mut d = Self::with_form(WireForm::Text);
        d.text.header = Some(header);
        d.text.loose = true;
        d
    }

    /// Decodes `bytes` (any chunk of the stream) and appends what it completes to `out`.
    pub fn push(&mut self, bytes: &[u8], out: &mut Vec<Decoded>) {
        let mut rest = bytes;
        if self.form.is_none() {
            while let Some((&b, tail)) = rest.split_first() {
                rest = tail;
                self.count(std::slice::from_ref(&b));
                let one = [b];
                self.text.push(&one, &mut self.pending_text);
                self.bin.push(&one, &mut self.pending_bin);
                if let Some(form) = self.sniff(b) {
                    self.adopt(form, out);
                    break;
                }
            }
        }
        self.count(rest);
        match self.form {
            Some(WireForm::Text) => self.text.push(rest, out),
            Some(WireForm::Binary) => self.bin.push(rest, out),
            None => {}
        }
    }

    /// Counters so far. Until the form is known only `bytes` is filled in.
    pub fn stats(&self) -> LinkStats {
        let mut s = match self.form {
            Some(WireForm::Text) => self.text.stats,
            Some(WireForm::Binary) => self.bin.stats,
            None => LinkStats::default(),
        };
        s.bytes = self.bytes;
        s
    }

    /// The wire form, once known.
    pub fn form(&self) -> Option<WireForm> {
        self.form
    }

    /// The most recent header, if any.
    pub fn header(&self) -> Option<&StreamHeader> {
        match self.form {
            Some(WireForm::Text) => self.text.header.as_ref(),
            Some(WireForm::Binary) => self.bin.header.as_ref().map(|(h, _)| h),
            None => None,
        }
    }

    /// Binary form only: sample frames missing between received sample packets, from the
    /// packets' frame counter. Includes frames the device itself dropped (sensor FIFO or
    /// transmit buffer overrun) when its firmware counts them, see `protocol.md`.
    pub fn frames_lost(&self) -> u64 {
        match self.form {
            Some(WireForm::Binary) => self.bin.frames_lost,
            _ => 0,
        }
    }

    /// Notes the device sent (text comment lines without header keys, binary note packets),
    /// oldest first; at most the last 16 are kept.
    pub fn take_notes(&mut self) -> Vec<String> {
        match self.form {
            Some(WireForm::Text) => std::mem::take(&mut self.text.notes),
            Some(WireForm::Binary) => std::mem::take(&mut self.bin.notes),
            None => Vec::new(),
        }
    }

    /// A one-sentence diagnosis when the bytes look like the wrong baud rate or the wrong form
    /// (e.g. mostly non-printable bytes and no valid frame after N bytes), else None.
    pub fn diagnosis(&self) -> Option<String> {
        if self.bytes < DIAGNOSIS_AFTER_BYTES {
            return None;
        }
        let s = self.stats();
        let n = self.bytes;
        let printable = self.printable as f64 / n as f64;
        let nonprintable_pct = (1.0 - printable) * 100.0;
        let got_data = s.frames > 0 || s.packets_ok > 0 || self.header().is_some();
        let looks_like_text = printable >= 0.95 && self.newlines > 0 && self.zeros == 0;

        if !got_data {
            return Some(match self.form {
                Some(WireForm::Binary) if looks_like_text => format!(
                    "After {n} bytes of printable text lines and no binary packet, the device \
                     seems to send the text form: decode as text (or send 'b' to the device)."
                ),
                Some(WireForm::Text) if self.zeros > 0 && nonprintable_pct > 20.0 => format!(
                    "After {n} bytes, {nonprintable_pct:.0}% are non-printable and zero bytes \
                     appear but no valid line: the device may send the binary form (decode as \
                     binary or send 't'), or the baud rate does not match."
                ),
                _ if nonprintable_pct > 30.0 => format!(
                    "After {n} bytes, {nonprintable_pct:.0}% are non-printable and no valid \
                     frame was found: the baud rate probably does not match the device's (a \
                     native USB port ignores the baud rate, so then check the firmware)."
                ),
                Some(WireForm::Text) if s.junk_lines >= 4 && self.text.header.is_none() => {
                    format!(
                        "{} sample lines arrived but no header line, so rate and channels are \
                         unknown: send 'h' to the device or reset it.",
                        s.junk_lines
                    )
                }
                _ => format!(
                    "No valid frame after {n} bytes: check the port, the baud rate and that \
                     the firmware is streaming."
                ),
            });
        }
        if self.form == Some(WireForm::Binary) {
            if self.bin.header.is_none() && s.junk_lines >= 2 {
                return Some(format!(
                    "{} sample packets arrived but no header packet, so rate and channels are \
                     unknown: send 'h' to the device or reset it.",
                    s.junk_lines
                ));
            }
            let seen = s.packets_ok + s.packets_corrupt;
            if seen >= 16 && s.packets_corrupt * 2 > seen {
                return Some(format!(
                    "{} of {seen} packets were rejected (framing or CRC): the link is \
                     unreliable, check the cable, the hub and the baud rate.",
                    s.packets_corrupt
                ));
            }
            if s.packets_ok >= 16 && s.packets_lost > s.packets_ok {
                return Some(format!(
                    "{} packets were lost against {} received: the host does not read fast \
                     enough or the device's buffer overflows; lower the rate or use a faster \
                     link.",
                    s.packets_lost, s.packets_ok
                ));
            }
        }
        if self.form == Some(WireForm::Text) && s.junk_lines >= 16 && s.junk_lines > s.frames {
            return Some(format!(
                "{} of {} lines were unusable (wrong number of fields or not numbers): check \
                 that the header's channel list matches the lines the firmware prints.",
                s.junk_lines,
                s.junk_lines + s.frames
            ));
        }
        None
    }

    fn count(&mut self, bytes: &[u8]) {
        self.bytes += bytes.len() as u64;
        for &b in bytes {
            match b {
                0 => self.zeros += 1,
                b'\n' => {
                    self.newlines += 1;
                    self.printable += 1;
                }
                b'\r' | b'\t' | 0x20..=0x7e => self.printable += 1,
                _ => {}
            }
        }
    }

    /// Called after each byte while the form is unknown.
    fn sniff(&self, b: u8) -> Option<WireForm> {
        if b == 0 && self.bin.evidence > 0 {
            return Some(WireForm::Binary);
        }
        if b == b'\n' && self.text.evidence >= 2 {
            return Some(WireForm::Text);
        }
        if self.bytes >= SNIFF_LIMIT as u64 {
            // A first line longer than the sniffing window that is all printable text (a
            // long header with many channels) is waited for up to the longest line.
            if self.newlines == 0
                && self.zeros == 0
                && self.printable == self.bytes
                && self.bytes < MAX_LINE_LEN as u64
            {
                return None;
            }
            let printable = self.printable as f64 / self.bytes as f64;
            return Some(
                if printable >= 0.9 && self.newlines > 0 && self.zeros == 0 {
                    WireForm::Text
                } else {
                    WireForm::Binary
                },
            );
        }
        None
    }

    fn adopt(&mut self, form: WireForm, out: &mut Vec<Decoded>) {
        self.form = Some(form);
        match form {
            WireForm::Text => {
                out.append(&mut self.pending_text);
                self.bin = BinaryDecoder::default();
            }
            WireForm::Binary => {
                out.append(&mut self.pending_bin);
                self.text = TextDecoder::default();
            }
        }
        self.pending_text = Vec::new();
        self.pending_bin = Vec::new();
    }
}

fn push_note(notes: &mut Vec<String>, note: String) {
    let note = crate::run::validate::clean_text(&note, false);
    if notes.len() >= MAX_NOTES {
        notes.remove(0);
    }
    notes.push(note);
}

#[cfg(test)]
mod tests;
