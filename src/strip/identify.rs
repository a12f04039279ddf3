//! Which detected mode is the strip's first flexural and which its first torsional mode, and
//! why: by the user's hint, by the sign pattern of two corner taps, or by frequency ratios.

use super::formulas::{self, Strip};
use crate::error::Result;
use crate::modes::Mode;

/// Free-free flexural overtone ratios `(lambda_n / lambda_1)^2`, n = 2..4, with lambda from
/// Blevins 1979, Table 8-1 (from memory): 2.757, 5.404, 8.933.
pub fn overtone_ratios() -> [f64; 3] {
    let l = super::bar::FREE_FREE_LAMBDA;
    [2, 3, 4].map(|n| (l[n - 1] / l[0]).powi(2))
}

/// How close a peak must sit to a flexural overtone (or the in-plane mode) to be taken for
/// it, as a fraction of the frequency: shear and rotary inertia lower the overtones of a
/// thick strip by a few percent (common practice, no source).
pub const OVERTONE_TOLERANCE: f64 = 0.04;

/// E/G a real strip can have: isotropic solids 2..3, +-45 layups near 1.3..3, unidirectional
/// fibre up to about 40 (common practice, no source).
pub const E_OVER_G: (f64, f64) = (1.0, 50.0);

/// Two modes of different recordings are the same mode when this close (fraction).
pub const SAME_MODE: f64 = 0.02;

/// A hint the user gave.
#[derive(Debug, Clone, Copy, Default)]
pub struct Hints {
    pub flexural_hz: Option<f64>,
    pub torsional_hz: Option<f64>,
}

/// The choice and every reason.
#[derive(Debug, Clone, PartialEq)]
pub struct Identification {
    pub flexural: usize,
    pub torsional: usize,
    /// One label per mode (what it was taken for).
    pub roles: Vec<String>,
    /// Sentences saying which mode was taken for which, and why.
    pub notes: Vec<String>,
}

/// Residue sign of a mode on an FRF: the band fit's modal constant when it is nearly real,
/// else the sign of the sine of the peak's phase (as `compare` reads residue evidence).
pub fn residue_sign(m: &Mode) -> Option<i8> {
    if let Some(fit) = &m.fit {
        let [re, im] = fit.modal_constant;
        let mag = re.hypot(im);
        if mag > 0.0 && mag.is_finite() && re.abs() >= 0.5 * mag {
            return Some(if re > 0.0 { 1 } else { -1 });
        }
    }
    let s = m.phase_deg?.to_radians().sin();
    (s.abs() >= 0.5).then_some(if s > 0.0 { 1 } else { -1 })
}

/// For each mode of the first corner's recording: `Some(true)` when the second corner's
/// recording has the same mode with the same residue sign, `Some(false)` with the opposite
/// sign, `None` when the mode or a sign is missing.
pub fn corner_agreement(first: &[Mode], second: &[Mode]) -> Vec<Option<bool>> {
    first
        .iter()
        .map(|a| {
            let b = second
                .iter()
                .filter(|b| (b.frequency_hz - a.frequency_hz).abs() <= SAME_MODE * a.frequency_hz)
                .min_by(|x, y| {
                    let d = |m: &&Mode| (m.frequency_hz - a.frequency_hz).abs();
                    d(x).total_cmp(&d(y))
                })?;
            Some(residue_sign(a)? == residue_sign(b)?)
        })
        .collect()
}

fn nearest(modes: &[Mode], hz: f64, what: &str, flag: &str) -> Result<usize> {
    let (i, m) = modes
        .iter()
        .enumerate()
        .min_by(|a, b| {
            (a.1.frequency_hz - hz)
                .abs()
                .total_cmp(&(b.1.frequency_hz - hz).abs())
        })
        .expect("modes is not empty");
    if (m.frequency_hz - hz).abs() > 0.1 * hz {
        crate::fail!(
            "{flag} {hz} Hz: no mode lies within 10 % of it (the nearest is {:.1} Hz), so the {what} mode was not found",
            m.frequency_hz
        );
    }
    Ok(i)
}

fn list(modes: &[Mode]) -> String {
    modes
        .iter()
        .map(|m| format!("{:.1}", m.frequency_hz))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Choose the first flexural and first torsional mode. `corners`: the result of
/// `corner_agreement` when a second corner was tapped.
pub fn identify(
    modes: &[Mode],
    strip: &Strip,
    hints: Hints,
    corners: Option<&[Option<bool>]>,
) -> Result<Identification> {
    if modes.is_empty() {
        crate::fail!(
            "no modes were found in the recording, so neither the flexural nor the torsional mode is there (check the taps' verdicts with `tapmodes analyze --hits`)"
        );
    }
    let mut notes = Vec::new();
    let mut roles = vec![String::from("not used"); modes.len()];
    let f = |i: usize| modes[i].frequency_hz;
    let flexural = if let Some(hz) = hints.flexural_hz {
        let i = nearest(modes, hz, "flexural", "--flexural-hz")?;
        notes.push(format!(
            "mode {} ({:.1} Hz) taken for the first flexural mode: nearest to --flexural-hz {hz}",
            i + 1,
            f(i)
        ));
        i
    } else if let Some(c) = corners {
        let Some(i) = (0..modes.len()).find(|&i| c[i] == Some(true)) else {
            crate::fail!(
                "no mode kept its residue sign between the two corner taps, so no flexural mode was found (modes at {} Hz); give --flexural-hz",
                list(modes)
            );
        };
        notes.push(format!(
            "mode {} ({:.1} Hz) taken for the first flexural mode: the lowest mode with the same residue sign at both corners",
            i + 1,
            f(i)
        ));
        i
    } else {
        notes.push(format!(
            "mode 1 ({:.1} Hz) taken for the first flexural mode: on a free strip much longer than wide, out-of-plane bending is the lowest mode (common practice, no source)",
            f(0)
        ));
        0
    };
    roles[flexural] = "first flexural (E)".into();
    let ff = f(flexural);
    let e_est = formulas::youngs_modulus(strip, ff, 0.3);
    let e_over_g = |i: usize| e_est / formulas::shear_modulus(strip, f(i));
    // Label the flexural family first so it is not taken for torsion.
    let mut family = vec![false; modes.len()];
    family[flexural] = true;
    for (n, r) in overtone_ratios().iter().enumerate() {
        let target = ff * r;
        for (i, m) in modes.iter().enumerate() {
            if i != flexural
                && (m.frequency_hz - target).abs() <= OVERTONE_TOLERANCE * target
                && corners.is_none_or(|c| c[i] != Some(false))
            {
                family[i] = true;
                roles[i] = format!("flexural {} ({:.3} x)", n + 2, r);
            }
        }
    }
    let in_plane = ff * strip.width_m / strip.thickness_m;
    for (i, m) in modes.iter().enumerate() {
        if !family[i] && (m.frequency_hz - in_plane).abs() <= OVERTONE_TOLERANCE * in_plane {
            family[i] = true;
            roles[i] = "in-plane flexural (width/thickness x)".into();
        }
    }
    let torsional = if let Some(hz) = hints.torsional_hz {
        let i = nearest(modes, hz, "torsional", "--torsional-hz")?;
        if i == flexural {
            crate::fail!(
                "--torsional-hz {hz} picks mode {} ({:.1} Hz), the one taken for the flexural mode; the two must differ",
                i + 1,
                f(i)
            );
        }
        notes.push(format!(
            "mode {} ({:.1} Hz) taken for the first torsional mode: nearest to --torsional-hz {hz}",
            i + 1,
            f(i)
        ));
        i
    } else if let Some(c) = corners {
        let Some(i) = (0..modes.len()).find(|&i| c[i] == Some(false)) else {
            crate::fail!(
                "no mode changed residue sign between the two corner taps, so no torsional mode was found (modes at {} Hz; a torsional mode flips sign between corners); give --torsional-hz or tap nearer the corners",
                list(modes)
            );
        };
        notes.push(format!(
            "mode {} ({:.1} Hz) taken for the first torsional mode: the lowest mode whose residue sign flips between the two corners",
            i + 1,
            f(i)
        ));
        i
    } else {
        let pick = (0..modes.len()).find(|&i| {
            !family[i] && i != flexural && {
                let r = e_over_g(i);
                r >= E_OVER_G.0 && r <= E_OVER_G.1
            }
        });
        let Some(i) = pick else {
            let why: Vec<String> = (0..modes.len())
                .filter(|&i| i != flexural)
                .map(|i| {
                    if family[i] {
                        format!("{:.1} Hz is {}", f(i), roles[i])
                    } else {
                        format!("{:.1} Hz would give E/G = {:.2}", f(i), e_over_g(i))
                    }
                })
                .collect();
            crate::fail!(
                "no torsional mode found: besides the flexural mode at {ff:.1} Hz {}; a torsional mode must give E/G between {} and {} (tap a corner, sensor at a corner of the other end, see --guide, or give --torsional-hz)",
                if why.is_empty() {
                    "there is no other mode".to_string()
                } else {
                    why.join("; ")
                },
                E_OVER_G.0,
                E_OVER_G.1
            );
        };
        notes.push(format!(
            "mode {} ({:.1} Hz) taken for the first torsional mode: the lowest peak that is neither a flexural overtone (2.757, 5.404, 8.933 x) nor the in-plane mode, with a plausible E/G of {:.2}",
            i + 1,
            f(i),
            e_over_g(i)
        ));
        i
    };
    roles[torsional] = "first torsional (G)".into();
    let ft = f(torsional);
    for (i, m) in modes.iter().enumerate() {
        if roles[i] == "not used"
            && (m.frequency_hz - 2.0 * ft).abs() <= OVERTONE_TOLERANCE * 2.0 * ft
        {
            roles[i] = "torsional 2 (2 x)".into();
        }
    }
    if let Some(c) = corners {
        for (i, what, want) in [
            (flexural, "flexural", true),
            (torsional, "torsional", false),
        ] {
            if c[i] == Some(!want) {
                notes.push(format!(
                    "warning: mode {} taken for the {what} mode has the residue-sign pattern of the other family between the corners",
                    i + 1
                ));
            }
        }
    }
    let r = e_over_g(torsional);
    if !(E_OVER_G.0..=E_OVER_G.1).contains(&r) {
        notes.push(format!(
            "warning: E/G = {r:.2} is outside {}..{} expected of a real strip: check which modes were taken",
            E_OVER_G.0, E_OVER_G.1
        ));
    }
    Ok(Identification {
        flexural,
        torsional,
        roles,
        notes,
    })
}
