//! Text of the drive section for `analyze` and `capture`: the bands, each mode's verdict,
//! and a soft mount's isolation over the bands (80 columns).

use super::{BandVerdict, DriveSection, SAGGED_CELL_VOLTS};
use crate::modes::Mode;

fn db(v: Option<f64>) -> String {
    v.map_or("-".into(), |v| format!("{v:+.1} dB"))
}

/// `+12.1 % below`, `-3.0 % inside` style margin text.
pub fn margin_text(b: &BandVerdict, f_hz: f64, band_hz: Option<(f64, f64)>) -> String {
    if b.margin_pct <= 0.0 {
        format!("{:.1} % deep", -b.margin_pct)
    } else {
        let side = match band_hz {
            Some((lo, _)) if f_hz < lo => "below",
            _ => "above",
        };
        format!("{:.1} % {side}", b.margin_pct)
    }
}

/// The rotation band at the sagged voltage, or why it is not shown (one line, indented).
pub fn sagged_line(section: &DriveSection) -> String {
    let d = &section.description;
    match section.sagged_rotation_hz {
        Some((lo, hi)) => {
            format!("  at {SAGGED_CELL_VOLTS} V/cell under load: rotation {lo:.1}-{hi:.1} Hz\n")
        }
        None if d.rpm.is_some() => String::new(),
        None if d.cells.is_none() => format!(
            "  (no band at {SAGGED_CELL_VOLTS} V/cell under load: the pack voltage was given, not the cells)\n"
        ),
        None => format!(
            "  (the bands are already at {} V/cell, at or below the {SAGGED_CELL_VOLTS} V/cell of a loaded pack)\n",
            d.volts_per_cell()
        ),
    }
}

/// The drive, its bands, the modes' verdicts and the mount's isolation.
pub fn summary(section: &DriveSection, modes: &[Mode]) -> String {
    let mut s = format!("drive: {}\n", section.description.describe());
    s += &format!(
        "bands (estimates from nameplate values; near = within {} % of an edge):\n",
        section.near_pct
    );
    for b in &section.bands {
        s += &format!("  {:<12} {:>7.1}-{:.1} Hz\n", b.name, b.hz.0, b.hz.1);
    }
    s += &sagged_line(section);
    if !modes.is_empty() {
        s += "mode   f Hz    verdict  nearest band  margin\n";
    }
    for (i, m) in modes.iter().enumerate() {
        let Some(b) = &m.band else { continue };
        let hz = section
            .bands
            .iter()
            .find(|x| x.name == b.name)
            .map(|x| x.hz);
        let also = if b.inside.len() > 1 {
            format!(" (in {})", b.inside.join(", "))
        } else {
            String::new()
        };
        s += &format!(
            "{:>4} {:>7.1}   {:<7}  {:<12}  {}{also}\n",
            i + 1,
            m.frequency_hz,
            b.verdict.label(),
            b.name,
            margin_text(b, m.frequency_hz, hz)
        );
    }
    for iso in &section.isolation {
        s += &format!(
            "mount over {} {:.0}-{:.0} Hz: measured {}, mount model {}, coherence {}\n",
            iso.band,
            iso.hz.0,
            iso.hz.1,
            db(iso.measured_db),
            db(iso.model_db),
            match (iso.coherence_mean, iso.coherence_min) {
                (Some(a), Some(m)) => format!("mean {a:.2} min {m:.2}"),
                _ => "-".into(),
            }
        );
        if let Some(w) = &iso.warning {
            s += &format!("  warning: {w}\n");
        }
    }
    s += "note: the bands are estimates from nameplate values; the verdict is guidance, not a\n      substitute for a careful first hover\n";
    s
}
