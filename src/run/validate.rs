//! One validation of settings, used alike by the command line, run files, WAV headers and
//! device headers: every one of them is untrusted input.
//!
//! The limits follow from the hardware this tool is for and from a stated memory budget:
//!
//! - Sample rate 1 Hz to 1 MHz: MEMS accelerometers stream at up to a few tens of kHz and
//!   sound cards at up to 384 kHz (from memory); a megahertz leaves room and keeps every
//!   derived length in range.
//! - At most [`MAX_CHANNELS`] channels (a multi-input sound card; the serial protocol's
//!   encoder writes at most 16).
//! - Memory budget [`MEMORY_BUDGET`] for one analysis: the FFT work arrays (about
//!   [`FFT_BYTES_PER_POINT`] bytes per padded point) plus [`RETAINED_RECORDS`] records of
//!   every channel in f64. Record length and pad factor are refused when the estimate passes
//!   it, before anything is allocated.

use crate::error::{Error, Result};
use crate::hits::{CheckConfig, TriggerLevel};
use crate::modes::ModeConfig;
use crate::pipeline::AnalysisConfig;
use crate::signal::{ChannelInfo, Roles, StreamInfo};
use crate::spectra::WindowConfig;

/// Lowest usable sample rate, Hz.
pub const MIN_RATE_HZ: f64 = 1.0;
/// Highest usable sample rate, Hz.
pub const MAX_RATE_HZ: f64 = 1_000_000.0;
/// Most channels in one stream.
pub const MAX_CHANNELS: usize = 32;
/// Largest zero-padding factor.
pub const MAX_PAD: usize = 16;
/// Longest record, in samples per channel (2^22: 87 s at 48 kHz).
pub const MAX_RECORD_SAMPLES: u64 = 1 << 22;
/// Longest pre-trigger, hold-off or record time, s.
pub const MAX_SECONDS: f64 = 3600.0;
/// Memory one analysis may plan for, bytes (1 GiB).
pub const MEMORY_BUDGET: u64 = 1 << 30;
/// Records the analysis may hold at once for the per-hit spread (pipeline keeps 16).
pub const RETAINED_RECORDS: u64 = 16;
/// Bytes per padded FFT point: input, spectrum and a dozen accumulated one-sided arrays.
pub const FFT_BYTES_PER_POINT: u64 = 16 * 12;
/// Largest prominence a peak may be asked for, dB: more than a 24-bit converter's whole
/// range (about 144 dB), so no peak could ever pass it.
pub const MAX_PROMINENCE_DB: f64 = 150.0;
/// Longest channel name, unit, label or note kept, in characters.
pub const MAX_TEXT_CHARS: usize = 4096;

/// Rate and channel layout of a stream (WAV header, device header, run file).
pub fn check_stream(info: &StreamInfo, what: &str) -> Result<()> {
    check_rate(info.sample_rate, what)?;
    check_channel_count(info.channels.len(), what)?;
    for (i, c) in info.channels.iter().enumerate() {
        check_channel(c, i, what)?;
    }
    Ok(())
}

pub fn check_rate(fs: f64, what: &str) -> Result<()> {
    if !(fs.is_finite() && (MIN_RATE_HZ..=MAX_RATE_HZ).contains(&fs)) {
        return Err(Error::new(format!(
            "{what} gives a sample rate of {fs} Hz; this tool works from {MIN_RATE_HZ} Hz to {MAX_RATE_HZ} Hz"
        )));
    }
    Ok(())
}

pub fn check_channel_count(n: usize, what: &str) -> Result<()> {
    if n == 0 || n > MAX_CHANNELS {
        return Err(Error::new(format!(
            "{what} has {n} channels; this tool works with 1 to {MAX_CHANNELS}"
        )));
    }
    Ok(())
}

fn check_channel(c: &ChannelInfo, i: usize, what: &str) -> Result<()> {
    if !(c.scale.is_finite() && c.scale != 0.0) {
        return Err(Error::new(format!(
            "{what}: channel {i} has the scale {}, which is not a usable number (finite and not zero)",
            c.scale
        )));
    }
    if let Some(f) = c.full_scale
        && !(f.is_finite() && f > 0.0)
    {
        return Err(Error::new(format!(
            "{what}: channel {i} has the full scale {f}, which is not a positive number"
        )));
    }
    if c.name.chars().count() > MAX_TEXT_CHARS || c.unit.chars().count() > MAX_TEXT_CHARS {
        return Err(Error::new(format!(
            "{what}: channel {i} has a name or unit longer than {MAX_TEXT_CHARS} characters"
        )));
    }
    Ok(())
}

/// Roles against the channel count: each index exists, force/response/base differ.
pub fn check_roles(roles: &Roles, n: usize, what: &str) -> Result<()> {
    let named = [
        ("force", roles.force),
        ("response", Some(roles.response)),
        ("base", roles.base),
    ];
    for (role, i) in named {
        if let Some(i) = i.filter(|&i| i >= n) {
            return Err(Error::new(format!(
                "{what} names channel {i} as the {role} channel, but there are {n} channels (numbered from 0)"
            )));
        }
    }
    if roles.force == Some(roles.response) || roles.base == Some(roles.response) {
        return Err(Error::new(format!(
            "{what} gives channel {} two roles",
            roles.response
        )));
    }
    if let Some(f) = roles.force.filter(|&f| Some(f) == roles.base) {
        return Err(Error::new(format!(
            "{what} gives channel {f} two roles (force and base); without a hammer sensor add --no-force, else name the force channel with --force-channel"
        )));
    }
    Ok(())
}

/// Every setting of an analysis against the stream it will run on. `what` names where
/// the settings came from ("the command line", "run file 'x.json'").
pub fn check_analysis(
    cfg: &AnalysisConfig,
    info: &StreamInfo,
    roles: &Roles,
    what: &str,
) -> Result<()> {
    check_stream(info, what)?;
    let n = info.channels.len();
    check_roles(roles, n, what)?;
    let fs = info.sample_rate;
    let t = &cfg.trigger;
    if let Some(c) = t.channel.filter(|&c| c >= n) {
        return Err(Error::new(format!(
            "{what} names channel {c} as the trigger channel, but there are {n} channels"
        )));
    }
    match t.level {
        TriggerLevel::Absolute(v) => positive(v, "the trigger level", what)?,
        TriggerLevel::NoiseMultiple(k) => positive(k, "the trigger multiple of the noise", what)?,
    }
    seconds(t.record_s, "the record length", what, false)?;
    seconds(t.pretrigger_s, "the pre-trigger", what, true)?;
    seconds(t.holdoff_s, "the hold-off", what, true)?;
    if t.pretrigger_s >= t.record_s {
        return Err(Error::new(format!(
            "{what}: the pre-trigger ({} s) must be shorter than the record ({} s)",
            t.pretrigger_s, t.record_s
        )));
    }
    let record = (t.record_s * fs).round();
    if record < 16.0 {
        return Err(Error::new(format!(
            "{what}: a record of {} s at {fs} Hz holds {record} samples; at least 16 are needed",
            t.record_s
        )));
    }
    check_record(record as u64, cfg.spectra.pad, n, what)?;
    check_checks(&cfg.checks, what)?;
    check_windows(&cfg.spectra.windows, what)?;
    check_modes(&cfg.modes, fs, what)?;
    Ok(())
}

/// Record length and pad factor against [`MAX_RECORD_SAMPLES`], [`MAX_PAD`] and the
/// memory budget.
pub fn check_record(record: u64, pad: usize, channels: usize, what: &str) -> Result<()> {
    if pad == 0 || pad > MAX_PAD {
        return Err(Error::new(format!(
            "{what} gives a zero-padding factor of {pad}; use 1 to {MAX_PAD}"
        )));
    }
    if record > MAX_RECORD_SAMPLES {
        return Err(Error::new(format!(
            "{what} asks for records of {record} samples; the most is {MAX_RECORD_SAMPLES} (shorten the record)"
        )));
    }
    let fft = record.next_power_of_two() * pad as u64;
    let need = fft * FFT_BYTES_PER_POINT + RETAINED_RECORDS * record * channels as u64 * 8;
    if need > MEMORY_BUDGET {
        return Err(Error::new(format!(
            "{what}: records of {record} samples on {channels} channels with zero padding {pad} need about {} MiB, above the budget of {} MiB (shorten the record or lower the padding)",
            need >> 20,
            MEMORY_BUDGET >> 20
        )));
    }
    Ok(())
}

fn check_checks(c: &CheckConfig, what: &str) -> Result<()> {
    fraction(c.clip_fraction, "the clipping fraction", what)?;
    fraction(c.double_fraction, "the double-hit fraction", what)?;
    positive(c.residual_limit, "the residual limit", what)?;
    finite(c.min_snr_db, "the smallest signal-to-noise ratio", what)
}

fn check_windows(w: &WindowConfig, what: &str) -> Result<()> {
    seconds(w.force_s, "the force window", what, false)?;
    seconds(w.force_taper_s, "the force window taper", what, true)?;
    if !(w.exponential_end > 0.0 && w.exponential_end <= 1.0) {
        return Err(Error::new(format!(
            "{what}: the exponential window end {} must be above 0 and at most 1",
            w.exponential_end
        )));
    }
    Ok(())
}

fn check_modes(m: &ModeConfig, fs: f64, what: &str) -> Result<()> {
    let (lo, hi) = m.band_hz;
    if lo.is_nan() || hi.is_nan() || lo < 0.0 || lo.is_infinite() || lo >= hi {
        return Err(Error::new(format!(
            "{what} gives the band {lo}:{hi} Hz, which is empty or not a band"
        )));
    }
    if lo >= fs / 2.0 {
        return Err(Error::new(format!(
            "{what}: the band starts at {lo} Hz, at or above the Nyquist frequency {} Hz",
            fs / 2.0
        )));
    }
    prominence(m.min_prominence_db, "the smallest prominence", what)?;
    prominence(
        m.min_prominence_coherent_db,
        "the smallest prominence (coherent curves)",
        what,
    )?;
    finite(m.min_above_floor_db, "the height above the floor", what)?;
    finite(
        m.min_above_floor_coherent_db,
        "the height above the floor (coherent curves)",
        what,
    )?;
    if m.max_modes == 0 || m.max_modes > 1000 {
        return Err(Error::new(format!(
            "{what} asks for at most {} modes; use 1 to 1000",
            m.max_modes
        )));
    }
    Ok(())
}

/// The part's mass, when given: a positive, finite number of grams (it divides the
/// stiffness ratio).
pub fn check_mass(mass_g: Option<f64>, what: &str) -> Result<()> {
    match mass_g {
        Some(m) if !(m.is_finite() && m > 0.0) => Err(Error::new(format!(
            "{what}: the mass (variant.mass_g) must be a positive number of grams, not {m}"
        ))),
        _ => Ok(()),
    }
}

fn positive(v: f64, name: &str, what: &str) -> Result<()> {
    if !(v.is_finite() && v > 0.0) {
        return Err(Error::new(format!(
            "{what}: {name} must be a positive number, not {v}"
        )));
    }
    Ok(())
}

fn finite(v: f64, name: &str, what: &str) -> Result<()> {
    if !v.is_finite() {
        return Err(Error::new(format!(
            "{what}: {name} must be a finite number, not {v}"
        )));
    }
    Ok(())
}

fn prominence(v: f64, name: &str, what: &str) -> Result<()> {
    if !(0.0..=MAX_PROMINENCE_DB).contains(&v) {
        return Err(Error::new(format!(
            "{what}: {name} must be from 0 to {MAX_PROMINENCE_DB} dB, not {v}"
        )));
    }
    Ok(())
}

fn fraction(v: f64, name: &str, what: &str) -> Result<()> {
    if !(v > 0.0 && v <= 1.0) {
        return Err(Error::new(format!(
            "{what}: {name} must be above 0 and at most 1, not {v}"
        )));
    }
    Ok(())
}

fn seconds(v: f64, name: &str, what: &str, zero_ok: bool) -> Result<()> {
    let low_ok = if zero_ok { v >= 0.0 } else { v > 0.0 };
    if !(v.is_finite() && low_ok && v <= MAX_SECONDS) {
        return Err(Error::new(format!(
            "{what}: {name} of {v} s is outside {} to {MAX_SECONDS} s",
            if zero_ok { "0" } else { "above 0" }
        )));
    }
    Ok(())
}

/// Text from outside (labels, notes, channel names, device notes) made safe for a
/// terminal: escape sequences (ESC and what follows it up to the final byte, CSI and OSC
/// alike) and every other control character are dropped, tabs become spaces, and the text
/// is cut to [`MAX_TEXT_CHARS`] characters. Line breaks are kept only when `multiline`.
pub fn clean_text(s: &str, multiline: bool) -> String {
    let mut out = String::with_capacity(s.len().min(MAX_TEXT_CHARS));
    let mut chars = s.chars().peekable();
    let mut kept = 0;
    while let Some(c) = chars.next() {
        if kept >= MAX_TEXT_CHARS {
            break;
        }
        match c {
            '\u{1b}' | '\u{9b}' | '\u{9d}' => skip_escape(c, &mut chars),
            '\t' => out.push(' '),
            '\n' if multiline => out.push('\n'),
            c if c.is_control() => {}
            // Bidirectional overrides can make text read differently from what it is.
            '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}' => {}
            c => out.push(c),
        }
        kept += 1;
    }
    out
}

/// Skip an escape sequence whose introducer was `first` (ESC, or C1 CSI / OSC).
fn skip_escape(first: char, chars: &mut std::iter::Peekable<std::str::Chars<'_>>) {
    let kind = if first == '\u{1b}' {
        match chars.peek() {
            Some('[') => {
                chars.next();
                '['
            }
            Some(']') | Some('P') | Some('_') | Some('^') | Some('X') => {
                chars.next();
                ']'
            }
            Some(_) => {
                // Two-character escape (ESC c, ESC 7, ...).
                chars.next();
                return;
            }
            None => return,
        }
    } else if first == '\u{9b}' {
        '['
    } else {
        ']'
    };
    if kind == '[' {
        // CSI: parameters and intermediates up to a final byte in @..~ (ECMA-48, 5.4; from memory).
        for c in chars.by_ref() {
            if ('@'..='~').contains(&c) {
                return;
            }
        }
    } else {
        // String until BEL or ST (ESC \).
        while let Some(c) = chars.next() {
            if c == '\u{7}' || c == '\u{9c}' {
                return;
            }
            if c == '\u{1b}' {
                chars.next();
                return;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_are_dropped() {
        assert_eq!(clean_text("a\u{1b}[31mred\u{1b}[0m", false), "ared");
        assert_eq!(clean_text("x\u{1b}]0;title\u{7}y", false), "xy");
        assert_eq!(clean_text("x\u{1b}]8;;http://h\u{1b}\\y", false), "xy");
        assert_eq!(clean_text("bell\u{7} cr\r bs\u{8}", false), "bell cr bs");
        assert_eq!(clean_text("two\nlines", false), "twolines");
        assert_eq!(clean_text("two\nlines", true), "two\nlines");
        assert_eq!(clean_text("\u{9b}2Jplain", false), "plain");
        assert_eq!(clean_text("é ok\u{202e}", false), "é ok");
        assert_eq!(clean_text(&"a".repeat(10_000), false).len(), MAX_TEXT_CHARS);
    }

    #[test]
    fn record_budget() {
        assert!(check_record(48_000, 2, 2, "t").is_ok());
        assert!(check_record(48_000, 0, 2, "t").is_err());
        assert!(check_record(48_000, 17, 2, "t").is_err());
        assert!(check_record(u64::MAX / 4, 2, 2, "t").is_err());
        assert!(check_record(1 << 22, 16, 32, "t").is_err());
    }

    #[test]
    fn masses() {
        assert!(check_mass(None, "t").is_ok());
        assert!(check_mass(Some(36.5), "t").is_ok());
        for bad in [0.0, -3.0, f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            let e = check_mass(Some(bad), "run file 'a.json'").unwrap_err();
            assert!(
                e.message()
                    .starts_with("run file 'a.json': the mass (variant.mass_g)"),
                "{e}"
            );
        }
    }

    #[test]
    fn prominences() {
        let mut m = ModeConfig::default();
        assert!(check_modes(&m, 48_000.0, "t").is_ok());
        m.min_prominence_db = 0.0;
        assert!(check_modes(&m, 48_000.0, "t").is_ok());
        for bad in [-5.0, 1e9, MAX_PROMINENCE_DB + 1.0, f64::NAN, f64::INFINITY] {
            let m = ModeConfig {
                min_prominence_db: bad,
                ..ModeConfig::default()
            };
            let e = check_modes(&m, 48_000.0, "run file 'a.json'").unwrap_err();
            assert!(e.message().contains("from 0 to 150 dB"), "{e}");
            let m = ModeConfig {
                min_prominence_coherent_db: bad,
                ..ModeConfig::default()
            };
            assert!(check_modes(&m, 48_000.0, "t").is_err(), "{bad}");
        }
    }

    #[test]
    fn rates() {
        assert!(check_rate(48_000.0, "t").is_ok());
        for bad in [0.3, 0.0, -1.0, 1e12, 1e300, f64::NAN, f64::INFINITY] {
            assert!(check_rate(bad, "t").is_err(), "{bad}");
        }
    }
}
