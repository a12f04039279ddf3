//! Spectral stage: windows, FFT, averaging over hits, and the estimators read from it.

pub mod averager;
mod single;
pub(crate) mod window;

use crate::signal::Roles;
pub use averager::Transformer;
use averager::{CrossAccumulator, Scaling, Spread, line_factors};
use realfft::num_complex::Complex64;
use serde::{Deserialize, Serialize};
pub use single::LineSet;
pub use window::{WindowConfig, Windows, remove_window_damping};

/// Which FRF estimator to read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize, clap::ValueEnum)]
#[serde(rename_all = "snake_case")]
pub enum Estimator {
    /// Gfx/Gff: best when the response is the noisier channel.
    #[default]
    H1,
    /// Gxx/Gxf: best when the force is the noisier channel.
    H2,
}

/// What the modes are read from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "estimator")]
pub enum Basis {
    /// Force-to-response FRF (accelerance when the response is an accelerometer).
    Frf(Estimator),
    /// Averaged energy spectrum of the response alone (no force channel).
    Autospectrum,
    /// Base-to-response transmissibility (H1 form, base as input).
    Transmissibility,
}

impl Basis {
    pub fn label(self) -> &'static str {
        match self {
            Basis::Frf(Estimator::H1) => "FRF H1",
            Basis::Frf(Estimator::H2) => "FRF H2",
            Basis::Autospectrum => "response spectrum",
            Basis::Transmissibility => "transmissibility",
        }
    }
}

/// A curve over frequency ready for display and mode finding.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    pub basis: Basis,
    /// Magnitude per line: |H| in response unit per force unit, |T| (ratio), or the
    /// square root of the energy spectral density, i.e. the magnitude of the response's
    /// Fourier transform (unit/Hz).
    pub magnitude: Vec<f64>,
    /// Phase in degrees, where defined.
    pub phase_deg: Option<Vec<f64>>,
    pub coherence: Option<Vec<f64>>,
    /// Hit-to-hit standard deviation of the level in dB (response spectrum only).
    pub spread_db: Option<Vec<f64>>,
    pub unit: String,
}

/// Everything the averager knows after the hits so far.
#[derive(Debug, Clone, PartialEq)]
pub struct Spectra {
    pub freqs: Vec<f64>,
    /// True resolution fs / record length, in Hz (zero padding does not improve it).
    pub resolution_hz: f64,
    pub hits: usize,
    pub tau_s: Option<f64>,
    /// Force-to-response auto and cross spectra (if there is a force channel).
    pub force_response: Option<(Vec<f64>, Vec<f64>, Vec<Complex64>)>,
    /// Base-to-response spectra (if there is a base channel).
    pub base_response: Option<(Vec<f64>, Vec<f64>, Vec<Complex64>)>,
    /// Response energy spectral density, unit^2 s/Hz.
    pub response_esd: Vec<f64>,
    /// The same for quiet stretches with no tap (same windows, same scaling), averaged
    /// over `background_records`: what the response holds without a tap (hum, pickup,
    /// noise). Empty when no quiet stretch of a record's length was seen.
    pub background_esd: Vec<f64>,
    pub background_records: usize,
    pub spread_db: Vec<f64>,
    pub response_unit: String,
    pub force_unit: String,
}

impl Spectra {
    /// The curve for a basis, or `None` when the channels for it are missing.
    pub fn curve(&self, basis: Basis) -> Option<Curve> {
        let phase = |h: &[Complex64]| h.iter().map(|z| z.arg().to_degrees()).collect();
        match basis {
            Basis::Frf(est) => {
                let (gff, gxx, gfx) = self.force_response.as_ref()?;
                let h = match est {
                    Estimator::H1 => averager::h1(gff, gfx),
                    Estimator::H2 => averager::h2(gxx, gfx),
                };
                Some(Curve {
                    basis,
                    magnitude: h.iter().map(|z| z.norm()).collect(),
                    phase_deg: Some(phase(&h)),
                    coherence: Some(averager::coherence(gff, gxx, gfx)),
                    spread_db: None,
                    unit: format!("{}/{}", self.response_unit, self.force_unit),
                })
            }
            Basis::Transmissibility => {
                let (gbb, gxx, gbx) = self.base_response.as_ref()?;
                let t = averager::h1(gbb, gbx);
                Some(Curve {
                    basis,
                    magnitude: t.iter().map(|z| z.norm()).collect(),
                    phase_deg: Some(phase(&t)),
                    coherence: Some(averager::coherence(gbb, gxx, gbx)),
                    spread_db: None,
                    unit: "ratio".into(),
                })
            }
            Basis::Autospectrum => Some(Curve {
                basis,
                magnitude: self.response_esd.iter().map(|g| g.sqrt()).collect(),
                phase_deg: None,
                coherence: None,
                spread_db: Some(self.spread_db.clone()),
                unit: format!("{}/Hz", self.response_unit),
            }),
        }
    }

    /// (force unit, response unit).
    pub fn units(&self) -> (String, String) {
        (self.force_unit.clone(), self.response_unit.clone())
    }

    /// The natural basis for these channels: FRF if there is a force, else the spectrum.
    pub fn default_basis(&self, estimator: Estimator) -> Basis {
        if self.force_response.is_some() {
            Basis::Frf(estimator)
        } else {
            Basis::Autospectrum
        }
    }
}

/// Settings of the spectral stage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SpectraConfig {
    pub windows: WindowConfig,
    /// Zero-padding factor of the FFT (1 = none). Valid for records windowed to decay.
    pub pad: usize,
}

impl Default for SpectraConfig {
    fn default() -> Self {
        SpectraConfig {
            windows: WindowConfig::default(),
            pad: 2,
        }
    }
}

/// Windows each accepted record, transforms it and adds it to the averages.
pub struct SpectralAverager {
    roles: Roles,
    windows: Windows,
    /// Force window times the exponential window.
    force_exp: Vec<f64>,
    fft: Transformer,
    fs: f64,
    record_len: usize,
    factors: Vec<f64>,
    force_response: Option<CrossAccumulator>,
    base_response: Option<CrossAccumulator>,
    /// Sum of the response's |X|^2 when there is no force channel; with one, the force
    /// accumulator's `gbb` is that very sum (same terms, same order) and is used instead.
    response_auto: Vec<f64>,
    background_auto: Vec<f64>,
    background_count: usize,
    /// Hit-to-hit spread of the response level (a logarithm per line per hit, so only
    /// kept when someone will look at it).
    spread: Option<Spread>,
    count: usize,
    units: (String, String),
}

/// Window a record's response (exponential window), force (force window times the same
/// exponential, so the pole shift is exact) and base channels and transform them into `hs`.
fn window_and_transform(
    roles: Roles,
    exponential: &[f64],
    force_exp: &[f64],
    fft: &mut Transformer,
    record: &[Vec<f64>],
    hs: &mut HitSpectra,
) {
    fft.transform(&record[roles.response], exponential, &mut hs.response);
    if let (Some(f), Some(fx)) = (roles.force, hs.force.as_mut()) {
        fft.transform(&record[f], force_exp, fx);
    }
    if let (Some(b), Some(bx)) = (roles.base, hs.base.as_mut()) {
        fft.transform(&record[b], exponential, bx);
    }
}

/// A record's transforms made away from the averager (on another thread), exactly as
/// `SpectralAverager::transform` makes them.
pub struct RecordTransform {
    roles: Roles,
    exponential: std::sync::Arc<[f64]>,
    force_exp: std::sync::Arc<[f64]>,
    fft: Transformer,
    force: bool,
    base: bool,
}

impl RecordTransform {
    /// Another one with its own FFT buffers (one per thread).
    pub fn fresh(&self) -> Self {
        RecordTransform {
            roles: self.roles,
            exponential: std::sync::Arc::clone(&self.exponential),
            force_exp: std::sync::Arc::clone(&self.force_exp),
            fft: self.fft.fresh(),
            force: self.force,
            base: self.base,
        }
    }

    /// Buffers for one hit's transforms.
    pub fn blank(&self) -> HitSpectra {
        let zero = || vec![Complex64::new(0.0, 0.0); self.fft.lines()];
        HitSpectra {
            response: zero(),
            force: self.force.then(zero),
            base: self.base.then(zero),
        }
    }

    /// Transform one record (one vector per stream channel, baseline removed) into `hs`
    /// (buffers from `blank`).
    pub fn transform_into(&mut self, record: &[Vec<f64>], hs: &mut HitSpectra) {
        let (exp, force_exp) = (&self.exponential, &self.force_exp);
        window_and_transform(self.roles, exp, force_exp, &mut self.fft, record, hs);
    }
}

/// The transforms of one record as the averager adds them (windowed, zero-padded real
/// DFT times `dt`, see `averager`): computed once and shared by the average and the
/// per-hit uncertainty.
#[derive(Debug, Clone, PartialEq)]
pub struct HitSpectra {
    pub response: Vec<Complex64>,
    /// Present when the averager has a force channel.
    pub force: Option<Vec<Complex64>>,
    /// Present when the averager has a base channel.
    pub base: Option<Vec<Complex64>>,
}

impl SpectralAverager {
    /// `record_len` samples per record with the trigger at `trigger_index`.
    pub fn new(
        roles: Roles,
        record_len: usize,
        trigger_index: usize,
        fs: f64,
        cfg: &SpectraConfig,
        units: (String, String),
        track_spread: bool,
    ) -> Self {
        let windows = Windows::new(&cfg.windows, record_len, trigger_index, fs);
        let fft = Transformer::new(record_len * cfg.pad.max(1), fs);
        let lines = fft.lines();
        let factors = line_factors(fft.n_fft(), fs, Scaling::Energy);
        let force_exp = (windows.force.iter().zip(&windows.exponential))
            .map(|(a, b)| a * b)
            .collect();
        SpectralAverager {
            force_exp,
            force_response: roles.force.map(|_| CrossAccumulator::new(lines)),
            base_response: roles.base.map(|_| CrossAccumulator::new(lines)),
            response_auto: vec![0.0; lines],
            background_auto: vec![0.0; lines],
            background_count: 0,
            spread: track_spread.then(|| Spread::new(lines)),
            count: 0,
            roles,
            windows,
            fft,
            fs,
            record_len,
            factors,
            units,
        }
    }

    pub fn windows(&self) -> &Windows {
        &self.windows
    }

    /// Add one record (one vector per stream channel, baseline removed).
    pub fn add(&mut self, record: &[Vec<f64>]) {
        let mut fft = self.fft.fresh();
        let hs = self.transform_with(&mut fft, record);
        self.add_spectra(&hs);
    }

    /// The transforms of one record, as `add` makes them.
    pub fn transform(&self, record: &[Vec<f64>]) -> HitSpectra {
        self.transform_with(&mut self.fft.fresh(), record)
    }

    /// The transforms of many records, on all cores, in order.
    pub fn transform_all(&self, records: &[&[Vec<f64>]]) -> Vec<HitSpectra> {
        crate::parallel::map_with(
            records,
            || self.fft.fresh(),
            |fft, r| self.transform_with(fft, r),
        )
    }

    fn transform_with(&self, fft: &mut Transformer, record: &[Vec<f64>]) -> HitSpectra {
        let mut hs = self.blank();
        self.transform_into(fft, record, &mut hs);
        hs
    }

    /// Buffers for one hit's transforms.
    fn blank(&self) -> HitSpectra {
        let zero = || vec![Complex64::new(0.0, 0.0); self.fft.lines()];
        HitSpectra {
            response: zero(),
            force: self.force_response.as_ref().map(|_| zero()),
            base: self.base_response.as_ref().map(|_| zero()),
        }
    }

    fn transform_into(&self, fft: &mut Transformer, record: &[Vec<f64>], hs: &mut HitSpectra) {
        let (exp, force_exp) = (&self.windows.exponential, &self.force_exp);
        window_and_transform(self.roles, exp, force_exp, fft, record, hs);
    }

    /// What transforming records as this averager does needs (windows, roles, an FFT with
    /// its own buffers), apart from the sums: for transforms on other threads.
    pub fn record_transform(&self) -> RecordTransform {
        RecordTransform {
            roles: self.roles,
            exponential: std::sync::Arc::from(self.windows.exponential.as_slice()),
            force_exp: std::sync::Arc::from(self.force_exp.as_slice()),
            fft: self.fft.fresh(),
            force: self.force_response.is_some(),
            base: self.base_response.is_some(),
        }
    }

    /// Add one record's transforms (from `transform` of this averager or one like it).
    pub fn add_spectra(&mut self, hs: &HitSpectra) {
        let rx = &hs.response;
        // With a force channel the response's own sum is the force accumulator's `gbb`.
        if let (Some(fx), Some(acc)) = (&hs.force, self.force_response.as_mut()) {
            acc.add(fx, rx);
        } else {
            for (s, x) in self.response_auto.iter_mut().zip(rx.iter()) {
                *s += x.norm_sqr();
            }
        }
        if let (Some(bx), Some(acc)) = (&hs.base, self.base_response.as_mut()) {
            acc.add(bx, rx);
        }
        if let Some(spread) = self.spread.as_mut() {
            let factors = &self.factors;
            spread.add(
                rx.iter()
                    .zip(factors)
                    .map(|(x, c)| 10.0 * (x.norm_sqr() * c).max(1e-300).log10()),
            );
        }
        self.count += 1;
    }

    fn freqs(&self) -> Vec<f64> {
        let df = self.fs / self.fft.n_fft() as f64;
        (0..self.fft.lines()).map(|k| k as f64 * df).collect()
    }

    pub fn count(&self) -> usize {
        self.count
    }

    /// Add a quiet stretch of the response (no tap in it, at most a record long) to the
    /// background spectrum. It gets the record's windows from the start; a shorter stretch
    /// is zero-padded to the record and scaled by `(sum w_record / sum w_stretch)^2`, which
    /// makes a steady sine (hum, the lines this spectrum is for) read at the level it has
    /// in a tap's record; broadband noise then reads up to a few dB high, on the safe side
    /// of the test it serves.
    pub fn add_background(&mut self, response: &[f64]) {
        let n = response.len().min(self.record_len);
        let w = &self.windows.exponential;
        let full: f64 = w.iter().sum();
        let part: f64 = w[..n].iter().sum();
        let scale = if part > 0.0 {
            (full / part).powi(2)
        } else {
            1.0
        };
        let mut padded = vec![0.0; self.record_len];
        padded[..n].copy_from_slice(&response[..n]);
        let mut rx = vec![Complex64::new(0.0, 0.0); self.fft.lines()];
        self.fft.transform(&padded, w, &mut rx);
        for (s, x) in self.background_auto.iter_mut().zip(rx.iter()) {
            *s += scale * x.norm_sqr();
        }
        self.background_count += 1;
    }

    /// Move the background spectrum of another averager over (after a re-average).
    pub fn take_background(&mut self, other: &mut SpectralAverager) {
        self.background_auto = std::mem::take(&mut other.background_auto);
        self.background_count = other.background_count;
    }

    pub fn spectra(&self) -> Spectra {
        let n = self.count.max(1) as f64;
        Spectra {
            freqs: self.freqs(),
            resolution_hz: self.fs / self.record_len as f64,
            hits: self.count,
            tau_s: self.windows.tau_s,
            force_response: self
                .force_response
                .as_ref()
                .map(|a| a.averaged(&self.factors)),
            base_response: self
                .base_response
                .as_ref()
                .map(|a| a.averaged(&self.factors)),
            response_esd: (self.force_response.as_ref())
                .map_or(&self.response_auto, |a| &a.gbb)
                .iter()
                .zip(&self.factors)
                .map(|(g, c)| g * c / n)
                .collect(),
            background_esd: if self.background_count == 0 {
                Vec::new()
            } else {
                let nb = self.background_count as f64;
                (self.background_auto.iter().zip(&self.factors))
                    .map(|(g, c)| g * c / nb)
                    .collect()
            },
            background_records: self.background_count,
            spread_db: self
                .spread
                .as_ref()
                .map_or_else(|| vec![0.0; self.fft.lines()], Spread::std_dev),
            force_unit: self.units.0.clone(),
            response_unit: self.units.1.clone(),
        }
    }
}
