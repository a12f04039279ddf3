//! A soft mount's isolation over the motors' bands: transmissibility in dB across the
//! rotation band and over blade pass, measured and from the fitted mount model, with the
//! coherence there and a warning where it is too low to trust the measured value.
//!
//! Measured: `10 log10(mean |T|^2)` over the lines in the band (`modes::softmount`); model:
//! the same mean over the fitted single-degree-of-freedom mount. Negative dB = isolation.
//!
//! Trust: the normalised random error of a measured FRF magnitude is about
//! `sqrt(1 - g2) / (sqrt(g2) sqrt(2 n))` for coherence `g2` after `n` averages (Bendat &
//! Piersol, *Random Data*, 4th ed., sec. 9.2.4; equation from memory). With 5 taps and
//! `g2 = 0.8` that is 16 % (1.3 dB); below it the error grows fast, so lines under
//! [`MIN_TRUSTED_COHERENCE`] make the measured value doubtful and the warning says so.

use super::Bands;
use crate::modes::softmount::{MountFit, isolation_band_db, isolation_db};
use crate::spectra::{Basis, Spectra};
use serde::{Deserialize, Serialize};

/// Coherence below which a measured transmissibility is not trusted (see above).
pub const MIN_TRUSTED_COHERENCE: f64 = 0.8;

/// Isolation over one band.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BandIsolation {
    /// Name of the band ("rotation" or "blade pass").
    pub band: String,
    pub hz: (f64, f64),
    /// Measured transmissibility, dB (power mean over the band's lines).
    pub measured_db: Option<f64>,
    /// The fitted mount model over the band, dB.
    pub model_db: Option<f64>,
    /// Mean and lowest base-to-response coherence over the band's lines.
    pub coherence_mean: Option<f64>,
    pub coherence_min: Option<f64>,
    /// Share of the band's lines below [`MIN_TRUSTED_COHERENCE`], percent.
    pub low_coherence_pct: Option<f64>,
    /// Why the measured value should not be trusted, when it should not.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub warning: Option<String>,
}

/// Isolation across the rotation band and over blade pass, from the transmissibility of
/// `spectra` (none without a base channel) and the fitted mount.
pub fn over_bands(
    bands: &Bands,
    spectra: &Spectra,
    mount: Option<&MountFit>,
) -> Vec<BandIsolation> {
    let curve = spectra.curve(Basis::Transmissibility);
    bands
        .bands
        .iter()
        .filter(|b| b.name == "rotation" || b.name == "blade pass")
        .map(|b| {
            let freqs = &spectra.freqs;
            let point = b.hz.0 == b.hz.1;
            let measured = curve.as_ref().and_then(|c| {
                if point {
                    isolation_db(freqs, c, b.hz.0)
                } else {
                    isolation_band_db(freqs, c, b.hz)
                }
            });
            let model = mount.map(|m| {
                if point {
                    m.model_db(b.hz.0)
                } else {
                    m.model_band_db(b.hz)
                }
            });
            let coh: Vec<f64> = curve
                .as_ref()
                .and_then(|c| c.coherence.as_ref())
                .map(|g| lines_in(freqs, g, b.hz))
                .unwrap_or_default();
            from_parts(&b.name, b.hz, measured, model, &coh)
        })
        .collect()
}

/// Coherence values of the lines in a band (the nearest line for a single frequency).
fn lines_in(freqs: &[f64], vals: &[f64], hz: (f64, f64)) -> Vec<f64> {
    let v: Vec<f64> = freqs
        .iter()
        .zip(vals)
        .filter(|(f, _)| **f >= hz.0 && **f <= hz.1)
        .map(|(_, g)| *g)
        .collect();
    if !v.is_empty() || freqs.is_empty() {
        return v;
    }
    let i = freqs.partition_point(|f| *f < hz.0).min(freqs.len() - 1);
    vec![vals[i]]
}

/// One band's isolation from its numbers; the warning is decided here.
pub fn from_parts(
    band: &str,
    hz: (f64, f64),
    measured_db: Option<f64>,
    model_db: Option<f64>,
    coherence: &[f64],
) -> BandIsolation {
    let finite: Vec<f64> = coherence
        .iter()
        .copied()
        .filter(|g| g.is_finite())
        .collect();
    let (mean, min, low) = if finite.is_empty() {
        (None, None, None)
    } else {
        let n = finite.len() as f64;
        let low = finite
            .iter()
            .filter(|g| **g < MIN_TRUSTED_COHERENCE)
            .count();
        (
            Some(finite.iter().sum::<f64>() / n),
            Some(finite.iter().copied().fold(f64::INFINITY, f64::min)),
            Some(100.0 * low as f64 / n),
        )
    };
    let warning = match (measured_db, min, low) {
        (None, _, _) => Some(format!(
            "no measured transmissibility at {:.0}-{:.0} Hz (outside the analysed band, or no base channel)",
            hz.0, hz.1
        )),
        (Some(_), None, _) => Some(
            "no coherence for the measured transmissibility: its value cannot be checked".into(),
        ),
        (Some(_), Some(m), Some(p)) if m < MIN_TRUSTED_COHERENCE => Some(format!(
            "coherence falls to {m:.2} ({p:.0} % of the lines below {MIN_TRUSTED_COHERENCE}): the measured value is not to be trusted there; rely on the mount model or tap more"
        )),
        _ => None,
    };
    BandIsolation {
        band: band.into(),
        hz,
        measured_db,
        model_db,
        coherence_mean: mean,
        coherence_min: min,
        low_coherence_pct: low,
        warning,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn low_coherence_warns_and_high_does_not() {
        let ok = from_parts(
            "rotation",
            (100.0, 200.0),
            Some(-6.0),
            Some(-7.0),
            &[0.95, 0.9, 0.99],
        );
        assert!(ok.warning.is_none());
        assert_eq!(ok.low_coherence_pct, Some(0.0));
        let bad = from_parts(
            "rotation",
            (100.0, 200.0),
            Some(-6.0),
            Some(-7.0),
            &[0.95, 0.5, 0.99, 0.7],
        );
        assert_eq!(bad.low_coherence_pct, Some(50.0));
        assert_eq!(bad.coherence_min, Some(0.5));
        assert!(bad.warning.unwrap().contains("not to be trusted"));
    }
}
