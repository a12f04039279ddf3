//! One hit's curve on chosen lines: what the per-hit refits of the uncertainty read.

use super::averager::{CrossAccumulator, h1, h2};
use super::{Basis, Curve, Estimator, HitSpectra, SpectralAverager};
use realfft::num_complex::Complex64;
use std::ops::Range;

/// The lines one hit's curve is made on: magnitude and phase on `ranges` (line indices),
/// and the magnitude alone on every line when `magnitude_everywhere` (a half-power
/// reading walks out from its peak as far as the curve takes it).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LineSet {
    pub ranges: Vec<Range<usize>>,
    pub magnitude_everywhere: bool,
}

impl SpectralAverager {
    /// One hit's curve on `basis`, as a fresh averager of the same settings given only
    /// this hit would read it, without redoing its FFTs, on the lines of `lines` only:
    /// magnitude and phase there (the same arithmetic line by line, so the same values),
    /// zero elsewhere, no coherence (a single hit's is 1) and no spread. The phase of a
    /// response spectrum is left to the caller (it needs the trigger's time). `None` when
    /// the channels for `basis` are missing.
    pub fn single_curve_on(&self, hs: &HitSpectra, basis: Basis, lines: &LineSet) -> Option<Curve> {
        let n = self.fft.lines();
        let rx = &hs.response;
        let all = std::slice::from_ref(&(0..n)).to_vec();
        let mag_ranges: &[Range<usize>] = if lines.magnitude_everywhere {
            &all
        } else {
            &lines.ranges
        };
        let mut magnitude = vec![0.0; n];
        let (input, unit) = match basis {
            Basis::Frf(_) => (
                Some(
                    hs.force
                        .as_ref()
                        .filter(|_| self.force_response.is_some())?,
                ),
                format!("{}/{}", self.units.1, self.units.0),
            ),
            Basis::Transmissibility => (
                Some(hs.base.as_ref().filter(|_| self.base_response.is_some())?),
                "ratio".to_string(),
            ),
            Basis::Autospectrum => (None, format!("{}/Hz", self.units.1)),
        };
        let Some(a) = input else {
            for r in mag_ranges {
                for k in r.clone() {
                    magnitude[k] = (rx[k].norm_sqr() * self.factors[k]).sqrt();
                }
            }
            return Some(Curve {
                basis,
                magnitude,
                phase_deg: None,
                coherence: None,
                spread_db: None,
                unit,
            });
        };
        // The estimator on lines `r`, as `single` spectra and `Spectra::curve` make it.
        let ratio = |r: &Range<usize>| -> Vec<Complex64> {
            let mut acc = CrossAccumulator::new(r.len());
            acc.add(&a[r.clone()], &rx[r.clone()]);
            let (gaa, gbb, gab) = acc.averaged(&self.factors[r.clone()]);
            match basis {
                Basis::Frf(Estimator::H2) => h2(&gbb, &gab),
                _ => h1(&gaa, &gab),
            }
        };
        let mut phase = vec![0.0; n];
        if lines.magnitude_everywhere {
            let h = ratio(&(0..n));
            for (m, z) in magnitude.iter_mut().zip(&h) {
                *m = z.norm();
            }
            for r in &lines.ranges {
                for k in r.clone() {
                    phase[k] = h[k].arg().to_degrees();
                }
            }
        } else {
            for r in &lines.ranges {
                for (k, z) in r.clone().zip(ratio(r)) {
                    magnitude[k] = z.norm();
                    phase[k] = z.arg().to_degrees();
                }
            }
        }
        Some(Curve {
            basis,
            magnitude,
            phase_deg: Some(phase),
            coherence: None,
            spread_db: None,
            unit,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::Roles;
    use crate::spectra::SpectraConfig;

    /// A decaying two-tone record on each of three channels, different per channel.
    fn record(len: usize, fs: f64, seed: f64) -> Vec<Vec<f64>> {
        (0..3)
            .map(|c| {
                (0..len)
                    .map(|i| {
                        let t = i as f64 / fs;
                        let k = c as f64 + seed;
                        (-(t * (20.0 + k))).exp()
                            * ((2.0 * std::f64::consts::PI * (150.0 + 7.0 * k) * t).sin()
                                + 0.3 * (2.0 * std::f64::consts::PI * (410.0 - k) * t).cos())
                    })
                    .collect()
            })
            .collect()
    }

    fn averager(roles: Roles) -> SpectralAverager {
        let cfg = SpectraConfig::default();
        SpectralAverager::new(
            roles,
            1024,
            16,
            2048.0,
            &cfg,
            ("N".into(), "g".into()),
            false,
        )
    }

    /// On its lines the curve equals the one a fresh averager given only this hit reads
    /// (bit for bit); off them it is zero; with `magnitude_everywhere` the magnitude is
    /// whole.
    #[test]
    fn equals_a_one_hit_average_on_its_lines() {
        let roles = Roles {
            force: Some(0),
            response: 1,
            base: Some(2),
        };
        let runner = averager(roles);
        let rec = record(1024, 2048.0, 0.5);
        let hs = runner.transform(&rec);
        let mut fresh = averager(roles);
        fresh.add(&rec);
        let whole = fresh.spectra();
        let bases = [
            Basis::Frf(Estimator::H1),
            Basis::Frf(Estimator::H2),
            Basis::Transmissibility,
            Basis::Autospectrum,
        ];
        for basis in bases {
            let want = whole.curve(basis).unwrap();
            for everywhere in [false, true] {
                let lines = LineSet {
                    ranges: vec![40..90, 180..230],
                    magnitude_everywhere: everywhere,
                };
                let got = runner.single_curve_on(&hs, basis, &lines).unwrap();
                assert_eq!(got.magnitude.len(), want.magnitude.len());
                for k in 0..want.magnitude.len() {
                    let inside = lines.ranges.iter().any(|r| r.contains(&k));
                    if inside || everywhere {
                        assert_eq!(got.magnitude[k], want.magnitude[k], "{basis:?} line {k}");
                    } else {
                        assert_eq!(got.magnitude[k], 0.0, "{basis:?} line {k}");
                    }
                    if let (Some(g), Some(w)) = (&got.phase_deg, &want.phase_deg) {
                        let expect = if inside { w[k] } else { 0.0 };
                        assert_eq!(g[k], expect, "{basis:?} phase line {k}");
                    }
                }
                assert_eq!(got.phase_deg.is_some(), want.phase_deg.is_some());
                assert_eq!(got.unit, want.unit);
            }
        }
        // A basis whose channel is missing gives nothing.
        let bare = averager(Roles {
            force: None,
            response: 1,
            base: None,
        });
        let hs = bare.transform(&rec);
        let lines = LineSet::default();
        assert!(
            bare.single_curve_on(&hs, Basis::Transmissibility, &lines)
                .is_none()
        );
        assert!(
            bare.single_curve_on(&hs, Basis::Autospectrum, &lines)
                .is_some()
        );
    }
}
