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

// ---------------------------------------------------------------------------------------------
// Text form

#[derive(Default)]
struct TextDecoder {
    line: Vec<u8>,
    overlong: bool,
    header: Option<StreamHeader>,
    stats: LinkStats,
    /// Numeric lines seen (a valid header counts 2), for sniffing.
    evidence: u32,
    notes: Vec<String>,
    /// No header comes: any of `, ; tab space` separates fields.
    loose: bool,
}

impl TextDecoder {
    fn push(&mut self, bytes: &[u8], out: &mut Vec<Decoded>) {
        let mut rest = bytes;
        while !rest.is_empty() {
            match rest.iter().position(|&b| b == b'\n') {
                Some(i) => {
                    self.take(&rest[..i]);
                    self.end_line(out);
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
        if self.overlong {
            return;
        }
        if self.line.len() + chunk.len() > MAX_LINE_LEN {
            self.overlong = true;
            self.line.clear();
        } else {
            self.line.extend_from_slice(chunk);
        }
    }

    fn end_line(&mut self, out: &mut Vec<Decoded>) {
        if self.overlong {
            self.overlong = false;
            self.stats.junk_lines += 1;
            return;
        }
        let line = std::mem::take(&mut self.line);
        self.handle_line(&line, out);
        self.line = line;
        self.line.clear();
    }

    fn handle_line(&mut self, raw: &[u8], out: &mut Vec<Decoded>) {
        let Ok(line) = std::str::from_utf8(raw) else {
            self.stats.junk_lines += 1;
            return;
        };
        let line = line.trim();
        if line.is_empty() {
            return;
        }
        if looks_numeric(line) {
            self.evidence = self.evidence.saturating_add(1);
        }
        if let Some(body) = line.strip_prefix('#') {
            match parse_text_header(body) {
                HeaderLine::Header(h) => {
                    self.evidence = self.evidence.saturating_add(2);
                    self.header = Some(h.clone());
                    out.push(Decoded::Header(h));
                }
                HeaderLine::Comment => push_note(&mut self.notes, body.trim().to_string()),
                HeaderLine::Invalid => self.stats.junk_lines += 1,
            }
            return;
        }
        let Some(h) = &self.header else {
            self.stats.junk_lines += 1;
            return;
        };
        let n = h.channels.len();
        let mut values = Vec::with_capacity(n);
        let fields: Box<dyn Iterator<Item = &str>> = if self.loose {
            Box::new(
                line.split([',', ';', '\t', ' '])
                    .filter(|f| !f.trim().is_empty()),
            )
        } else {
            Box::new(line.split(','))
        };
        for (i, field) in fields.enumerate() {
            let v = match field.trim().parse::<f64>() {
                Ok(v) if v.is_finite() && i < n => v,
                _ => {
                    self.stats.junk_lines += 1;
                    return;
                }
            };
            let v = v * h.scale(i);
            if !v.is_finite() {
                // Finite as sent but not once scaled: never let it reach the recording.
                self.stats.junk_lines += 1;
                return;
            }
            values.push(v);
        }
        if values.len() != n {
            self.stats.junk_lines += 1;
            return;
        }
        self.stats.frames += 1;
        out.push(Decoded::Frame(values));
    }
}

/// Digits, signs, points, exponents, commas and blanks only: what sample lines look like
/// (a boot banner or binary bytes do not).
fn looks_numeric(line: &str) -> bool {
    line.bytes().any(|b| b.is_ascii_digit())
        && line
            .bytes()
            .all(|b| b.is_ascii_digit() || b"+-.,eE \t".contains(&b))
}

enum HeaderLine {
    Header(StreamHeader),
    /// A `#` line without `rate_hz` or `channels`: a note from the device.
    Comment,
    Invalid,
}

fn parse_text_header(body: &str) -> HeaderLine {
    let mut rate = None;
    let mut channels = None;
    let mut units = None;
    let mut scales = None;
    for token in body.split_ascii_whitespace() {
        let Some((key, value)) = token.split_once('=') else {
            continue;
        };
        match key {
            "rate_hz" => rate = Some(value),
            "channels" => channels = Some(value),
            "units" => units = Some(value),
            "scale" | "scales" => scales = Some(value),
            _ => {} // unknown keys are left for newer firmware
        }
    }
    if rate.is_none() && channels.is_none() {
        return HeaderLine::Comment;
    }
    let build = || -> Option<StreamHeader> {
        let rate_hz = rate?
            .parse::<f64>()
            .ok()
            .filter(|r| r.is_finite() && *r > 0.0)?;
        let channels: Vec<String> = channels?.split(',').map(str::to_string).collect();
        if channels.iter().any(String::is_empty) {
            return None;
        }
        let n = channels.len();
        let units: Vec<String> = match units {
            Some(u) => u.split(',').map(str::to_string).collect(),
            None => vec!["counts".to_string(); n],
        };
        let scales: Vec<f64> = match scales {
            Some(s) => s
                .split(',')
                .map(|v| v.parse::<f64>().ok().filter(|v| v.is_finite()))
                .collect::<Option<_>>()?,
            None => vec![1.0; n],
        };
        (units.len() == n && scales.len() == n).then_some(StreamHeader {
            rate_hz,
            channels,
            units,
            scales,
        })
    };
    match build() {
        Some(h) => HeaderLine::Header(h),
        None => HeaderLine::Invalid,
    }
}

fn push_note(notes: &mut Vec<String>, note: String) {
    let note = crate::run::validate::clean_text(&note, false);
    if notes.len() >= MAX_NOTES {
        notes.remove(0);
    }
    notes.push(note);
}

/// The text header line for `h`. Separators in names and units (`,`, `=`, whitespace) become
/// `_`; missing units and scales are written as "counts" and 1.
pub fn encode_text_header(h: &StreamHeader) -> Vec<u8> {
    let label = |s: &str, fallback: String| -> String {
        let clean: String = s
            .chars()
            .map(|c| {
                if c == ',' || c == '=' || c.is_whitespace() {
                    '_'
                } else {
                    c
                }
            })
            .collect();
        if clean.is_empty() { fallback } else { clean }
    };
    let n = h.channels.len();
    let names: Vec<String> = h
        .channels
        .iter()
        .enumerate()
        .map(|(i, c)| label(c, format!("ch{i}")))
        .collect();
    let units: Vec<String> = (0..n)
        .map(|i| label(h.unit(i), "counts".to_string()))
        .collect();
    let scales: Vec<String> = (0..n).map(|i| format!("{}", h.scale(i))).collect();
    format!(
        "# rate_hz={} channels={} units={} scale={}\n",
        h.rate_hz,
        names.join(","),
        units.join(","),
        scales.join(",")
    )
    .into_bytes()
}

/// One text sample line. The values are written before scaling (the decoder multiplies them
/// by the header's scales) in the shortest form that reads back exactly. Non-finite values
/// are written as such and make the line junk to the decoder.
pub fn encode_text_frame(values: &[f64]) -> Vec<u8> {
    use std::fmt::Write as _;
    let mut s = String::with_capacity(values.len() * 12);
    for (i, v) in values.iter().enumerate() {
        if i > 0 {
            s.push(',');
        }
        let _ = write!(s, "{v}");
    }
    s.push('\n');
    s.into_bytes()
}

// ---------------------------------------------------------------------------------------------
// Binary form

#[derive(Default)]
struct BinaryDecoder {
    /// The COBS frame being collected (without its delimiter).
    buf: Vec<u8>,
    overflow: bool,
    /// Set by a rejected frame, cleared by the next good packet.
    out_of_sync: bool,
    header: Option<(StreamHeader, SampleWidth)>,
    next_seq: Option<u16>,
    next_frame: Option<u32>,
    frames_lost: u64,
    stats: LinkStats,
    /// Intact packets of a known type seen, for sniffing.
    evidence: u64,
    notes: Vec<String>,
}

impl BinaryDecoder {
    fn push(&mut self, bytes: &[u8], out: &mut Vec<Decoded>) {
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

#[cfg(test)]
#[path = "codec_tests.rs"]
mod tests;
