//! Strip test: dynamic Young's and shear modulus of a free strip from its first flexural and
//! first torsional modes (ASTM E1876 formulas in `formulas`), which mode is which and why,
//! uncertainties from the dimensions' tolerances and the frequency spread, the strip file and
//! the comparison of strips.

pub mod bar;
pub mod compare;
pub mod formulas;
pub mod identify;
pub mod session;

use crate::modes::Mode;
use formulas::Strip;
use serde::{Deserialize, Serialize};

/// Standard uncertainties of the measured dimensions (one standard deviation), SI units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Tolerances {
    pub length_m: f64,
    pub width_m: f64,
    pub thickness_m: f64,
    pub mass_kg: f64,
}

impl Tolerances {
    /// Defaults of the command line, in mm and g: a steel rule for the length (0.5 mm),
    /// calipers for the width (0.05 mm), a micrometer for the thickness (0.01 mm), a 0.01 g
    /// scale: common practice, no source.
    pub const DEFAULT_MM_G: [f64; 4] = [0.5, 0.05, 0.01, 0.01];

    pub fn from_mm_g(length_mm: f64, width_mm: f64, thickness_mm: f64, mass_g: f64) -> Self {
        Tolerances {
            length_m: length_mm * 1e-3,
            width_m: width_mm * 1e-3,
            thickness_m: thickness_mm * 1e-3,
            mass_kg: mass_g * 1e-3,
        }
    }

    pub fn problem(&self) -> Option<String> {
        // Reported in the command line's units (mm and g), not the SI values kept here.
        for (name, v, unit) in [
            ("length", self.length_m * 1e3, "mm"),
            ("width", self.width_m * 1e3, "mm"),
            ("thickness", self.thickness_m * 1e3, "mm"),
            ("mass", self.mass_kg * 1e3, "g"),
        ] {
            if !v.is_finite() || v < 0.0 {
                return Some(format!(
                    "the {name} tolerance must be zero or a positive number (got {} {unit})",
                    formulas::show(v)
                ));
            }
        }
        None
    }
}

/// Coverage factor of the expanded uncertainties (about 95 % for a normal distribution:
/// GUM, JCGM 100:2008, sec. 6.3; from memory).
pub const COVERAGE: f64 = 2.0;

/// A modulus with its uncertainty and where it comes from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Modulus {
    pub value_pa: f64,
    /// Combined standard uncertainty (first-order propagation, inputs independent).
    pub standard_uncertainty_pa: f64,
    /// `COVERAGE` x the standard uncertainty.
    pub expanded_uncertainty_pa: f64,
    /// Share of each input in the combined variance, fraction (sums to 1).
    pub budget: Vec<(String, f64)>,
}

/// First-order propagation (GUM, JCGM 100:2008, Eq. 10; from memory) of independent inputs
/// through `f`, with central differences for the sensitivities.
fn propagate(f: &dyn Fn(&[f64]) -> f64, x: &[f64], u: &[f64], names: &[&str]) -> Modulus {
    let value = f(x);
    let mut parts = Vec::new();
    for i in 0..x.len() {
        let h = x[i].abs() * 1e-6;
        let mut hi = x.to_vec();
        let mut lo = x.to_vec();
        hi[i] += h;
        lo[i] -= h;
        let c = (f(&hi) - f(&lo)) / (2.0 * h);
        parts.push((c * u[i]).powi(2));
    }
    let var: f64 = parts.iter().sum();
    let sd = var.sqrt();
    Modulus {
        value_pa: value,
        standard_uncertainty_pa: sd,
        expanded_uncertainty_pa: COVERAGE * sd,
        budget: names
            .iter()
            .zip(&parts)
            .map(|(n, p)| (n.to_string(), if var > 0.0 { p / var } else { 0.0 }))
            .collect(),
    }
}

/// A frequency with its standard uncertainty (standard error of the per-hit mean; 0 when
/// unknown).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Frequency {
    pub hz: f64,
    pub standard_uncertainty_hz: f64,
    /// Index of the mode in the mode list (from 1).
    pub mode: usize,
}

impl Frequency {
    /// From a detected mode: the reported frequency; the per-hit standard error when the
    /// analysis measured one.
    pub fn of(modes: &[Mode], index: usize) -> (Self, Option<String>) {
        let m = &modes[index];
        let (u, note) = match &m.uncertainty {
            Some(u) if u.hits >= 2 => (u.frequency_hz.std_error(u.hits), None),
            _ => (
                0.0,
                Some(format!(
                    "mode {} ({:.1} Hz) has no hit-to-hit spread (fewer than two hits gave an estimate): its frequency counts as exact in the uncertainty",
                    index + 1,
                    m.frequency_hz
                )),
            ),
        };
        (
            Frequency {
                hz: m.frequency_hz,
                standard_uncertainty_hz: u,
                mode: index + 1,
            },
            note,
        )
    }
}

/// Poisson's ratio put into T1 when the user gives none: a typical value for metals and
/// fibre laminates alike (common practice, no source). On a thin strip T1 hardly depends on
/// it (the effect is printed for every run).
pub const DEFAULT_POISSON: f64 = 0.3;

/// What the user says about Poisson's ratio.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PoissonInput {
    /// The ratio for T1 (the starting value of the iteration when `isotropic`).
    pub value: f64,
    /// Whether the user gave `value` (else it is `DEFAULT_POISSON`).
    pub given: bool,
    /// The user declared the material isotropic: only then is `E / (2 G) - 1` Poisson's
    /// ratio (ASTM E1876-15 Eq. 13 holds for isotropic materials only; from memory).
    pub isotropic: bool,
}

impl PoissonInput {
    pub fn new(value: Option<f64>, isotropic: bool) -> Self {
        PoissonInput {
            value: value.unwrap_or(DEFAULT_POISSON),
            given: value.is_some(),
            isotropic,
        }
    }
}

/// Densities a strip can plausibly have, kg/m^3: from light foams to the densest metals
/// (tungsten about 19300, osmium about 22600, from memory); outside, a unit was most likely
/// mistaken (common practice, no source).
pub const DENSITY_RANGE: (f64, f64) = (100.0, 25000.0);
/// Young's moduli a solid strip can plausibly have, Pa: stiff foams (some 0.01 GPa) to
/// diamond (about 1000-1200 GPa, from memory); common practice, no source.
pub const YOUNGS_RANGE: (f64, f64) = (0.01e9, 1200e9);
/// Shear moduli likewise, Pa (diamond about 500 GPa, from memory).
pub const SHEAR_RANGE: (f64, f64) = (0.003e9, 600e9);

/// What the strip test found.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StripResult {
    pub strip: Strip,
    pub tolerances: Tolerances,
    pub flexural: Frequency,
    pub torsional: Frequency,
    pub youngs: Modulus,
    pub shear: Modulus,
    /// Correction factors as applied.
    pub t1: f64,
    pub r: f64,
    /// Poisson's ratio used inside T1.
    pub poisson_in_t1: f64,
    /// Where `poisson_in_t1` comes from: `default`, `--poisson` or `E/(2G) - 1` (isotropic).
    #[serde(default)]
    pub poisson_in_t1_from: String,
    /// Relative change of E when the ratio in T1 goes from 0 to 0.5 (how much the choice
    /// matters for this strip).
    #[serde(default)]
    pub poisson_effect_on_e: f64,
    /// The user declared the material isotropic (`--isotropic`).
    #[serde(default)]
    pub isotropic_declared: bool,
    /// `E / (2 G) - 1`, only for a strip declared isotropic and when it lies in 0..0.5;
    /// else `None` and `poisson_ratio_reason` says why.
    pub poisson_ratio: Option<f64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub poisson_ratio_reason: Option<String>,
    /// `E / (2 G) - 1` whatever its value (an anisotropy indicator for laminates).
    pub e_over_2g_minus_1: f64,
    /// `E / G`.
    #[serde(default)]
    pub e_over_g: f64,
    pub notes: Vec<String>,
}

/// E and G with uncertainties. Poisson's ratio is reported only when the user declares the
/// material isotropic; otherwise T1 takes the given (or default) ratio. Refuses results that
/// are not finite; warns (in `notes`) when density, E or G lie outside what a real strip has.
pub fn evaluate(
    strip: &Strip,
    tol: &Tolerances,
    flexural: Frequency,
    torsional: Frequency,
    poisson: PoissonInput,
) -> crate::error::Result<StripResult> {
    let mut notes = Vec::new();
    let g0 = formulas::shear_modulus(strip, torsional.hz);
    let (e0, mu_used, derived) = if poisson.isotropic {
        formulas::youngs_iterated(strip, flexural.hz, Some(g0), poisson.value)
    } else {
        (
            formulas::youngs_modulus(strip, flexural.hz, poisson.value),
            poisson.value,
            None,
        )
    };
    let ratio = formulas::poisson_from(e0, g0);
    let given = if poisson.given {
        "--poisson"
    } else {
        "default"
    };
    let from = if derived.is_some() {
        "E/(2G) - 1"
    } else {
        given
    };
    let effect = formulas::t1(strip, 0.5) / formulas::t1(strip, 0.0) - 1.0;
    let reason = match (poisson.isotropic, derived) {
        (true, Some(mu)) => {
            notes.push(format!(
                "declared isotropic: Poisson's ratio E/(2G) - 1 = {mu:.3} (ASTM E1876 Eq. 13, from memory), used in T1"
            ));
            None
        }
        (true, None) => {
            let r = format!(
                "declared isotropic, but E/(2G) - 1 = {ratio:.3} lies outside 0..0.5, which an isotropic solid does not give: the strip does not behave isotropically or a mode was mistaken"
            );
            notes.push(format!("warning: {r}; T1 used {mu_used:.2} ({given})"));
            Some(r)
        }
        (false, _) => {
            notes.push(format!(
                "no Poisson's ratio: E/(2G) - 1 is Poisson's ratio only for an isotropic material (ASTM E1876), so it is given only with --isotropic; T1 used {mu_used:.2} ({given}), and any ratio from 0 to 0.5 would move E by {:.3} % on this strip (thin strips hardly depend on it)",
                100.0 * effect
            ));
            Some(
                "not declared isotropic (--isotropic): E/(2G) - 1 is Poisson's ratio only for an isotropic material (ASTM E1876)"
                    .to_string(),
            )
        }
    };
    let x = [
        strip.length_m,
        strip.width_m,
        strip.thickness_m,
        strip.mass_kg,
        flexural.hz,
        torsional.hz,
    ];
    let u = [
        tol.length_m,
        tol.width_m,
        tol.thickness_m,
        tol.mass_kg,
        flexural.standard_uncertainty_hz,
        torsional.standard_uncertainty_hz,
    ];
    let names = [
        "length",
        "width",
        "thickness",
        "mass",
        "flexural frequency",
        "torsional frequency",
    ];
    let s = |x: &[f64]| Strip {
        length_m: x[0],
        width_m: x[1],
        thickness_m: x[2],
        mass_kg: x[3],
    };
    let youngs = propagate(
        &|x| formulas::youngs_modulus(&s(x), x[4], mu_used),
        &x,
        &u,
        &names,
    );
    let shear = propagate(&|x| formulas::shear_modulus(&s(x), x[5]), &x, &u, &names);
    let all = [
        youngs.value_pa,
        youngs.standard_uncertainty_pa,
        shear.value_pa,
        shear.standard_uncertainty_pa,
    ];
    if !all.iter().all(|v| v.is_finite()) || youngs.value_pa <= 0.0 || shear.value_pa <= 0.0 {
        crate::fail!(
            "E or G of this strip (or its uncertainty) is not a finite positive number: check the dimensions, mass, tolerances and frequencies"
        );
    }
    let density = strip.density();
    if !(DENSITY_RANGE.0..=DENSITY_RANGE.1).contains(&density) {
        notes.push(format!(
            "warning: the density {density:.4e} kg/m^3 implied by the dimensions and mass is outside the {:.0}..{:.0} kg/m^3 of real strips: check the units of --length-mm, --width-mm, --thickness-mm and --mass-g",
            DENSITY_RANGE.0, DENSITY_RANGE.1
        ));
    }
    for (what, v, range) in [
        ("Young's modulus E", youngs.value_pa, YOUNGS_RANGE),
        ("shear modulus G", shear.value_pa, SHEAR_RANGE),
    ] {
        if !(range.0..=range.1).contains(&v) {
            notes.push(format!(
                "warning: the {what} of {:.4e} GPa is outside the {}..{} GPa of real solids: check the dimensions, the mass and which modes were taken",
                v / 1e9,
                range.0 / 1e9,
                range.1 / 1e9
            ));
        }
    }
    Ok(StripResult {
        strip: *strip,
        tolerances: *tol,
        flexural,
        torsional,
        t1: formulas::t1(strip, mu_used),
        r: formulas::r_factor(strip),
        poisson_in_t1: mu_used,
        poisson_in_t1_from: from.to_string(),
        poisson_effect_on_e: effect,
        isotropic_declared: poisson.isotropic,
        poisson_ratio: derived,
        poisson_ratio_reason: reason,
        e_over_2g_minus_1: ratio,
        e_over_g: youngs.value_pa / shear.value_pa,
        youngs,
        shear,
        notes,
    })
}

/// Where to support, tap and place the sensor (printed by `tapmodes strip --guide`). The
/// nodal lines at 0.224 L are those of the free-free first flexural mode (Blevins 1979,
/// Table 8-1, 0.2242 L; from memory); the rest is common practice, no source.
pub const GUIDE: &str = "\
Strip test: how to hold, tap and measure
  Cut a strip much longer than wide (length at least 5 x width, width at least 5 x
  thickness works well); measure length, width and thickness at several places and weigh it.
  Support it free: two soft threads or foam lines across the strip at 0.224 x length from
  each end (the nodal lines of the first flexural mode), so the supports hardly damp it.
  The sensor should weigh well under 1 % of the strip (its mass lowers the frequencies).

  First flexural mode (gives Young's modulus E):
    tap the middle of the face, on the centre line; sensor at one end, on the centre line.
    On the centre line the torsional modes have a node, so they hardly show.
  First torsional mode (gives the shear modulus G):
    tap near a corner; sensor near a corner of the other end. Both mode families show.

  Telling them apart, one recording (sensor at one corner, tap at the far end's corner
  on the same edge): the lowest mode is the first flexural; flexural overtones sit at
  2.757, 5.404 and 8.933 x its frequency (free-free beam); the first torsional mode is the
  lowest remaining peak whose E/G comes out between 1 and 50.
  Two recordings (--other-corner): keep the sensor, tap the far end's other corner in the
  second recording. Flexural modes keep their sign between the two corners, torsional
  modes flip it; this needs a force channel (an FRF).
  Force the choice with --flexural-hz / --torsional-hz (the nearest mode is taken).";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn propagation_of_a_power_law_matches_the_log_rule() {
        // E ~ L^3 / t^3 only through these inputs: u(E)/E = sqrt((3 uL/L)^2 + (3 ut/t)^2)
        // (first-order propagation of a product of powers, common practice, no source).
        let f = |x: &[f64]| x[0].powi(3) / x[1].powi(3);
        let m = propagate(&f, &[2.0, 0.5], &[0.01, 0.002], &["a", "b"]);
        let want =
            m.value_pa * ((3.0 * 0.01 / 2.0f64).powi(2) + (3.0 * 0.002 / 0.5f64).powi(2)).sqrt();
        assert!((m.standard_uncertainty_pa - want).abs() < 1e-6 * want);
        let shares: f64 = m.budget.iter().map(|b| b.1).sum();
        assert!((shares - 1.0).abs() < 1e-9);
    }
}
