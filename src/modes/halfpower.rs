//! Peak refinement and half-power bandwidth damping.

/// A peak refined between spectral lines.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Refined {
    pub frequency_hz: f64,
    pub level_db: f64,
}

/// Parabolic interpolation of the dB level through the peak line and its neighbours
/// (Smith & Serra 1987, "PARSHL", quadratic interpolation of spectral peaks).
pub fn refine_peak(freqs: &[f64], db: &[f64], i: usize) -> Refined {
    if i == 0 || i + 1 >= db.len() {
        return Refined {
            frequency_hz: freqs[i],
            level_db: db[i],
        };
    }
    let (a, b, c) = (db[i - 1], db[i], db[i + 1]);
    let den = a - 2.0 * b + c;
    let d = if den.abs() > 0.0 {
        (0.5 * (a - c) / den).clamp(-0.5, 0.5)
    } else {
        0.0
    };
    let df = freqs[i + 1] - freqs[i];
    Refined {
        frequency_hz: freqs[i] + d * df,
        level_db: b - 0.25 * (a - c) * d,
    }
}

/// Why no half-power band could be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Blocked {
    /// The curve turned up again (another peak) before falling 3 dB.
    Overlap,
    /// The curve ended before falling 3 dB.
    Edge,
}

/// Frequencies where the curve falls 3.01 dB (half power) below `peak_db` on each side of
/// line `i`, linearly interpolated in dB between the lines that straddle the level.
pub fn half_power(
    freqs: &[f64],
    db: &[f64],
    i: usize,
    peak_db: f64,
) -> Result<(f64, f64), Blocked> {
    let level = peak_db - 10.0 * 2f64.log10();
    let crossing = |step: isize| -> Result<f64, Blocked> {
        let mut j = i as isize;
        let mut lowest = db[i];
        loop {
            let k = j + step;
            if k < 0 || k as usize >= db.len() {
                return Err(Blocked::Edge);
            }
            let (a, b) = (db[j as usize], db[k as usize]);
            if b <= level {
                let t = (a - level) / (a - b);
                let (fa, fb) = (freqs[j as usize], freqs[k as usize]);
                return Ok(fa + t * (fb - fa));
            }
            // Rising by more than 1 dB over the lowest point so far: another peak.
            if b > lowest + 1.0 {
                return Err(Blocked::Overlap);
            }
            lowest = lowest.min(b);
            j = k;
        }
    };
    let lo = crossing(-1)?;
    let hi = crossing(1)?;
    Ok((lo, hi))
}

/// Damping ratio from the half-power frequencies: `eta = (f2^2 - f1^2) / (2 fn^2)` and
/// `zeta = eta / 2` (Ewins 2000, *Modal Testing*, 2nd ed., sec. 4.3.3, eq. 4.7; exact for
/// hysteretic damping, first-order in the damping for viscous).
pub fn damping_from_band(f1: f64, f2: f64, fn_hz: f64) -> f64 {
    (f2 * f2 - f1 * f1) / (4.0 * fn_hz * fn_hz)
}

/// Natural frequency and damping from the half-power frequencies of a mobility peak:
/// `fn = sqrt(f1 f2)` and `z = (f2 - f1) / (2 fn)`, exact for a viscous SDOF (the
/// half-power points solve `m w^2 -+ c w - k = 0`; Ewins 2000, ch. 2; from memory).
pub fn mobility_band(f1: f64, f2: f64) -> (f64, f64) {
    let fn_hz = (f1 * f2).sqrt();
    (fn_hz, (f2 - f1) / (2.0 * fn_hz))
}
