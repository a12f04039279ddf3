//! Dynamic Young's and shear modulus of a free rectangular bar from its first flexural and
//! first torsional frequencies (impulse excitation of a free bar, ASTM E1876).
//!
//! Source: ASTM E1876-15, *Standard Test Method for Dynamic Young's Modulus, Shear Modulus,
//! and Poisson's Ratio by Impulse Excitation of Vibration*, section 9 (calculation). Every
//! coefficient below and the equation numbers are recalled from memory (the standard could
//! not be consulted); the numbers of the equations may be off by one or two:
//! - Eq. 1: `E = 0.9465 (m ff^2 / b) (L^3 / t^3) T1`
//! - Eq. 2: `T1 = 1 + 6.585 (1 + 0.0752 mu + 0.8109 mu^2)(t/L)^2 - 0.868 (t/L)^4
//!   - 8.340 (1 + 0.2023 mu + 2.173 mu^2)(t/L)^4 / (1 + 6.338 (1 + 0.1408 mu + 1.536 mu^2)(t/L)^2)`
//! - Eq. 3: `T1 = 1 + 6.585 (t/L)^2` when `L/t >= 20` (not used: Eq. 2 is always applied)
//! - Eq. 10: `G = (4 L m ft^2 / (b t)) R`
//! - Eq. 11: `R = [(1 + (b/t)^2) / (4 - 2.521 (t/b)(1 - 1.991 / (e^(pi b/t) + 1)))]
//!   [1 + 0.00851 n^2 (b/L)^2] - 0.060 (n b/L)^(3/2) (b/t - 1)^2`, n = 1 (fundamental)
//! - Eq. 13: `mu = E / (2 G) - 1` (isotropic material only)
//!
//! Units: SI throughout (m, kg, Hz, Pa). `b` is the width, `t` the thickness (the
//! direction of the flexural vibration), `L` the length.
//!
//! The 0.9465 of Eq. 1 is `48 pi^2 / lambda_1^4` with the free-free Euler-Bernoulli
//! eigenvalue `lambda_1 = 4.7300` (Blevins 1979, *Formulas for Natural Frequency and Mode
//! Shape*, Table 8-1; from memory); `tests/all/strip.rs` checks that link.

use serde::{Deserialize, Serialize};

/// A number for a message: as typed when moderate, in exponent form when huge or tiny (so
/// `1e300` does not fill the screen).
pub fn show(v: f64) -> String {
    if v == 0.0 || !v.is_finite() || (1e-4..1e7).contains(&v.abs()) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// A rectangular strip as measured.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Strip {
    pub length_m: f64,
    pub width_m: f64,
    pub thickness_m: f64,
    pub mass_kg: f64,
}

impl Strip {
    /// From the command line's millimetres and grams.
    pub fn from_mm_g(length_mm: f64, width_mm: f64, thickness_mm: f64, mass_g: f64) -> Self {
        Strip {
            length_m: length_mm * 1e-3,
            width_m: width_mm * 1e-3,
            thickness_m: thickness_mm * 1e-3,
            mass_kg: mass_g * 1e-3,
        }
    }

    /// One sentence naming what is wrong with the dimensions, if anything.
    pub fn problem(&self) -> Option<String> {
        let named = [
            ("length", self.length_m),
            ("width", self.width_m),
            ("thickness", self.thickness_m),
            ("mass", self.mass_kg),
        ];
        for (name, v) in named {
            if !v.is_finite() || v <= 0.0 {
                return Some(format!(
                    "the strip's {name} must be a positive number (got {})",
                    show(v)
                ));
            }
        }
        if self.thickness_m > self.width_m {
            return Some(format!(
                "the thickness ({:.3} mm) is larger than the width ({:.3} mm): give the \
                 smaller cross-section side as --thickness-mm (the direction the strip bends in)",
                self.thickness_m * 1e3,
                self.width_m * 1e3
            ));
        }
        if self.width_m >= self.length_m {
            return Some(format!(
                "the width ({:.1} mm) is not smaller than the length ({:.1} mm): the bar \
                 formulas need a strip much longer than it is wide",
                self.width_m * 1e3,
                self.length_m * 1e3
            ));
        }
        // Numbers each finite on their own can still overflow in the formulas (1e300 mm).
        let d = self.density();
        let e = youngs_modulus(self, 1.0, 0.3);
        let g = shear_modulus(self, 1.0);
        if !(d.is_finite() && d > 0.0 && e.is_finite() && e > 0.0 && g.is_finite() && g > 0.0) {
            return Some(format!(
                "the strip's dimensions and mass ({} x {} x {} mm, {} g) give no finite density or modulus: they are far outside any real strip",
                show(self.length_m * 1e3),
                show(self.width_m * 1e3),
                show(self.thickness_m * 1e3),
                show(self.mass_kg * 1e3)
            ));
        }
        None
    }

    /// Density implied by the dimensions and mass, kg/m^3.
    pub fn density(&self) -> f64 {
        self.mass_kg / (self.length_m * self.width_m * self.thickness_m)
    }
}

/// Correction factor T1 for the fundamental flexural mode (ASTM E1876-15 Eq. 2, from
/// memory); `mu` is Poisson's ratio.
pub fn t1(strip: &Strip, mu: f64) -> f64 {
    let r = strip.thickness_m / strip.length_m;
    let r2 = r * r;
    let r4 = r2 * r2;
    1.0 + 6.585 * (1.0 + 0.0752 * mu + 0.8109 * mu * mu) * r2
        - 0.868 * r4
        - 8.340 * (1.0 + 0.2023 * mu + 2.173 * mu * mu) * r4
            / (1.0 + 6.338 * (1.0 + 0.1408 * mu + 1.536 * mu * mu) * r2)
}

/// Dynamic Young's modulus, Pa, from the first flexural frequency (ASTM E1876-15 Eq. 1,
/// from memory).
pub fn youngs_modulus(strip: &Strip, flexural_hz: f64, mu: f64) -> f64 {
    let (l, b, t, m) = (
        strip.length_m,
        strip.width_m,
        strip.thickness_m,
        strip.mass_kg,
    );
    0.9465 * (m * flexural_hz * flexural_hz / b) * (l.powi(3) / t.powi(3)) * t1(strip, mu)
}

/// Correction factor R for the fundamental torsional mode of a rectangular bar (ASTM
/// E1876-15 Eq. 11 with n = 1, from memory).
pub fn r_factor(strip: &Strip) -> f64 {
    let (l, b, t) = (strip.length_m, strip.width_m, strip.thickness_m);
    let bt = b / t;
    let den = 4.0 - 2.521 * (t / b) * (1.0 - 1.991 / ((std::f64::consts::PI * bt).exp() + 1.0));
    (1.0 + bt * bt) / den * (1.0 + 0.00851 * (b / l).powi(2))
        - 0.060 * (b / l).powf(1.5) * (bt - 1.0).powi(2)
}

/// Dynamic shear modulus, Pa, from the first torsional frequency (ASTM E1876-15 Eq. 10,
/// from memory).
pub fn shear_modulus(strip: &Strip, torsional_hz: f64) -> f64 {
    let (l, b, t, m) = (
        strip.length_m,
        strip.width_m,
        strip.thickness_m,
        strip.mass_kg,
    );
    4.0 * l * m * torsional_hz * torsional_hz / (b * t) * r_factor(strip)
}

/// `E / (2 G) - 1` (ASTM E1876-15 Eq. 13, from memory): Poisson's ratio only for an
/// isotropic material.
pub fn poisson_from(e: f64, g: f64) -> f64 {
    e / (2.0 * g) - 1.0
}

/// Poisson's ratio a result may be called by (an isotropic solid lies in 0..0.5: common
/// practice, no source).
pub fn plausible_poisson(mu: f64) -> bool {
    (0.0..=0.5).contains(&mu)
}

/// E and, when the implied Poisson's ratio is plausible, the ratio used in T1: starts from
/// `mu_assumed`, then iterates E -> mu -> T1 -> E as ASTM E1876 describes for isotropic
/// material (from memory). Returns (E, mu used in T1, mu derived or None).
pub fn youngs_iterated(
    strip: &Strip,
    ff: f64,
    g: Option<f64>,
    mu_assumed: f64,
) -> (f64, f64, Option<f64>) {
    let mut mu = mu_assumed;
    let mut e = youngs_modulus(strip, ff, mu);
    let Some(g) = g else {
        return (e, mu, None);
    };
    let mut derived = None;
    for _ in 0..20 {
        let m = poisson_from(e, g);
        if !plausible_poisson(m) {
            break;
        }
        derived = Some(m);
        let next = youngs_modulus(strip, ff, m);
        let done = (next - e).abs() <= 1e-12 * e;
        e = next;
        mu = m;
        if done {
            break;
        }
    }
    if let Some(m) = derived {
        // Report the ratio consistent with the final E.
        let last = poisson_from(e, g);
        derived = Some(if plausible_poisson(last) { last } else { m });
    }
    (e, mu, derived)
}
