//! The text wire form: lines, the `#` header line, sample lines, and their encoders.

use super::{Decoded, LinkStats, MAX_LINE_LEN, StreamHeader, push_note};

#[derive(Default)]
pub(super) struct TextDecoder {
    line: Vec<u8>,
    overlong: bool,
    pub(super) header: Option<StreamHeader>,
    pub(super) stats: LinkStats,
    /// Numeric lines seen (a valid header counts 2), for sniffing.
    pub(super) evidence: u32,
    pub(super) notes: Vec<String>,
    /// No header comes: any of `, ; tab space` separates fields.
    pub(super) loose: bool,
}

impl TextDecoder {
    pub(super) fn push(&mut self, bytes: &[u8], out: &mut Vec<Decoded>) {
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
