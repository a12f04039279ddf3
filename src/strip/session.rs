//! A strip test as one call over a mode list: which mode is which, E and G with their
//! uncertainties, and the strip file. The command line (`tapmodes strip`) and the terminal
//! app's strip mode both end here, so neither does anything but render the outcome.

use super::compare::{KIND, StripFile};
use super::formulas::Strip;
use super::identify::{self, Hints, Identification};
use super::{Frequency, PoissonInput, StripResult, Tolerances, evaluate};
use crate::error::Result;
use crate::modes::Mode;

/// What a strip test needs besides the modes: the strip, its tolerances, the Poisson's
/// ratio put into T1 (and whether the material is declared isotropic), and any hint of
/// which mode is which.
#[derive(Debug, Clone, Copy)]
pub struct StripSetup {
    pub strip: Strip,
    pub tolerances: Tolerances,
    pub poisson: PoissonInput,
    pub hints: Hints,
}

impl StripSetup {
    /// The strip from millimetres and grams with the default tolerances
    /// (`Tolerances::DEFAULT_MM_G`), the default Poisson's ratio in T1 and no declaration of
    /// isotropy (the defaults of `tapmodes strip`); one sentence when a dimension or the
    /// mass is not usable.
    pub fn from_mm_g(
        length_mm: f64,
        width_mm: f64,
        thickness_mm: f64,
        mass_g: f64,
    ) -> Result<Self> {
        for (name, v) in [
            ("length", length_mm),
            ("width", width_mm),
            ("thickness", thickness_mm),
            ("mass", mass_g),
        ] {
            if !(v.is_finite() && v > 0.0) {
                crate::fail!("the strip's {name} must be a positive number (got {v})");
            }
        }
        let strip = Strip::from_mm_g(length_mm, width_mm, thickness_mm, mass_g);
        if let Some(p) = strip.problem() {
            crate::fail!("{p}");
        }
        let [l, w, t, m] = Tolerances::DEFAULT_MM_G;
        Ok(StripSetup {
            strip,
            tolerances: Tolerances::from_mm_g(l, w, t, m),
            poisson: PoissonInput::new(None, false),
            hints: Hints::default(),
        })
    }
}

/// The strip test on one mode list.
#[derive(Debug, Clone, PartialEq)]
pub struct StripOutcome {
    pub identification: Identification,
    pub result: StripResult,
}

/// Identify the first flexural and first torsional mode among `modes` and compute E and G
/// with their uncertainties (one recording: no corner signs).
pub fn assess(setup: &StripSetup, modes: &[Mode]) -> Result<StripOutcome> {
    if modes.len() < 2 {
        crate::fail!(
            "{} mode(s) found so far; E and G need the first flexural and the first torsional mode (tap near a corner so both show)",
            modes.len()
        );
    }
    let id = identify::identify(modes, &setup.strip, setup.hints, None)?;
    let (ff, note_f) = Frequency::of(modes, id.flexural);
    let (ft, note_t) = Frequency::of(modes, id.torsional);
    let mut result = evaluate(&setup.strip, &setup.tolerances, ff, ft, setup.poisson)?;
    result.notes.extend(note_f);
    result.notes.extend(note_t);
    Ok(StripOutcome {
        identification: id,
        result,
    })
}

/// The strip file for an outcome (the content `tapmodes strip --out` writes).
pub fn strip_file(
    label: &str,
    recording: &str,
    outcome: &StripOutcome,
    modes: &[Mode],
    analysis_notes: &[String],
) -> StripFile {
    let r = &outcome.result;
    let mut notes = outcome.identification.notes.clone();
    notes.extend(r.notes.iter().cloned());
    notes.extend(analysis_notes.iter().cloned());
    StripFile {
        kind: KIND.into(),
        schema_version: super::compare::SCHEMA_VERSION,
        tool_version: env!("CARGO_PKG_VERSION").into(),
        created_utc: crate::run::now_rfc3339(),
        label: label.into(),
        recording: recording.into(),
        other_corner: None,
        length_mm: r.strip.length_m * 1e3,
        width_mm: r.strip.width_m * 1e3,
        thickness_mm: r.strip.thickness_m * 1e3,
        mass_g: r.strip.mass_kg * 1e3,
        density_kg_m3: r.strip.density(),
        youngs_modulus_pa: r.youngs.value_pa,
        youngs_modulus_uncertainty_pa: r.youngs.expanded_uncertainty_pa,
        shear_modulus_pa: r.shear.value_pa,
        shear_modulus_uncertainty_pa: r.shear.expanded_uncertainty_pa,
        poisson_ratio: r.poisson_ratio,
        poisson_ratio_reason: r.poisson_ratio_reason.clone(),
        result: r.clone(),
        mode_roles: outcome.identification.roles.clone(),
        notes,
        modes: modes.to_vec(),
    }
}

/// Where to tap and where to put the sensor, short enough for a panel (the whole text is
/// `GUIDE`, shown by `tapmodes strip --guide` and the app's help). Same advice, common
/// practice, no source.
pub const BENCH_STEPS: &[&str] = &[
    "Hang the strip free: threads at 0.224 x length from each end.",
    "E (first flexural): tap the middle of the face on the centre line;",
    "  sensor at one end, on the centre line.",
    "G (first torsional): tap near a corner; sensor near a corner of",
    "  the other end (both mode families show).",
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bad_dimensions_are_one_sentence() {
        let e = StripSetup::from_mm_g(180.0, 0.0, 2.0, 11.0).unwrap_err();
        assert!(
            e.to_string().contains("width must be a positive number"),
            "{e}"
        );
        assert!(StripSetup::from_mm_g(180.0, 20.0, 2.0, f64::NAN).is_err());
        assert!(StripSetup::from_mm_g(180.0, 20.0, 2.0, 11.16).is_ok());
    }

    #[test]
    fn fewer_than_two_modes_cannot_give_e_and_g() {
        let s = StripSetup::from_mm_g(180.0, 20.0, 2.0, 11.16).unwrap();
        let e = assess(&s, &[]).unwrap_err();
        assert!(e.to_string().contains("0 mode(s) found so far"), "{e}");
    }
}
