//! Command-line options shared by the commands that analyse (analyze, capture, the app).

use crate::error::{Error, Result};
use crate::hits::{CheckConfig, TriggerLevel};
use crate::modes::ModeConfig;
use crate::pipeline::{AnalysisConfig, TriggerChoice};
use crate::signal::RoleChoice;
use crate::spectra::{Basis, Estimator, SpectraConfig, WindowConfig};
use clap::{Args, ValueEnum};

/// Which curve the modes are read from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ViewArg {
    /// Force-to-response FRF (needs a force channel).
    Frf,
    /// Response spectrum alone (response-only test).
    Spectrum,
    /// Base-to-response transmissibility (needs --base-channel).
    Transmissibility,
}

#[derive(Debug, Clone, Args)]
pub struct ChannelArgs {
    /// Channel (from 0) holding the hammer force [default: 0 with two or more channels].
    #[arg(long, value_name = "N")]
    pub force_channel: Option<usize>,
    /// Channel (from 0) holding the response [default: 1 with two or more channels, else 0].
    #[arg(long, value_name = "N")]
    pub response_channel: Option<usize>,
    /// Channel (from 0) measuring the base of a soft-mounted part (enables transmissibility).
    #[arg(long, value_name = "N")]
    pub base_channel: Option<usize>,
    /// Ignore any force channel: response-only analysis.
    #[arg(long)]
    pub no_force: bool,
    /// Force sensitivity: force unit per count (e.g. 0.0015 for N per count).
    #[arg(long, value_name = "X")]
    pub force_scale: Option<f64>,
    /// Unit of the force after scaling [default: N when --force-scale is given].
    #[arg(long, value_name = "UNIT")]
    pub force_unit: Option<String>,
    /// Response sensitivity: response unit per count (e.g. 0.000488 for g per count).
    #[arg(long, value_name = "X")]
    pub response_scale: Option<f64>,
    /// Unit of the response (and base) after scaling [default: g when --response-scale is given].
    #[arg(long, value_name = "UNIT")]
    pub response_unit: Option<String>,
}

impl ChannelArgs {
    pub fn role_choice(&self) -> RoleChoice {
        RoleChoice {
            force: self.force_channel,
            response: self.response_channel,
            base: self.base_channel,
            no_force: self.no_force,
        }
    }
}

#[derive(Debug, Clone, Args)]
pub struct AnalysisArgs {
    /// Limit the mode search to LO:HI Hz (either side may be empty, e.g. 50: or :1200).
    #[arg(long, value_name = "LO:HI", value_parser = parse_band)]
    pub band: Option<(f64, f64)>,
    /// Channel the trigger watches [default: the force channel, else the response].
    #[arg(long, value_name = "N")]
    pub trigger_channel: Option<usize>,
    /// Trigger when the channel deviates from its baseline by this much (channel unit).
    #[arg(long, value_name = "X", conflicts_with = "trigger_noise")]
    pub trigger_level: Option<f64>,
    /// Trigger at this multiple of the measured noise floor (RMS) [default: 10].
    #[arg(long, value_name = "K")]
    pub trigger_noise: Option<f64>,
    /// Samples kept before the trigger, in ms [default: 10].
    #[arg(long, value_name = "MS")]
    pub pretrigger_ms: Option<f64>,
    /// Length of each hit record in s, pre-trigger included [default: 1.0].
    #[arg(long, value_name = "S")]
    pub record_s: Option<f64>,
    /// Dead time after a record before the next trigger, in s [default: 0.2].
    #[arg(long, value_name = "S")]
    pub holdoff_s: Option<f64>,
    /// Largest end-of-record response level still counted as decayed, % of peak [default: 10].
    #[arg(long, value_name = "PCT")]
    pub residual_limit: Option<f64>,
    /// Smallest response peak over the noise floor, dB [default: 20].
    #[arg(long, value_name = "DB")]
    pub min_snr_db: Option<f64>,
    /// Length of the flat part of the force window after the trigger, ms [default: 5].
    #[arg(long, value_name = "MS")]
    pub force_window_ms: Option<f64>,
    /// Value the exponential window falls to at the record end; 1 turns it off [default: 0.1].
    #[arg(long, value_name = "X")]
    pub exp_end: Option<f64>,
    /// Zero-padding factor of the FFT [default: 2].
    #[arg(long, value_name = "N")]
    pub pad: Option<usize>,
    /// FRF estimator.
    #[arg(long, value_enum, default_value_t = Estimator::H1)]
    pub estimator: Estimator,
    /// Curve the modes are read from [default: frf with a force channel, else spectrum].
    #[arg(long, value_enum)]
    pub view: Option<ViewArg>,
    /// Smallest peak prominence, dB [default: 3 on an FRF or transmissibility with two or
    /// more averages (the coherence vouches for the peak), else 6].
    #[arg(long, value_name = "DB")]
    pub min_prominence_db: Option<f64>,
    /// What the response sensor measures; decides how spectra are weighted before modes are
    /// read (accelerometer: divided by frequency; velocity, piezo, microphone: as is;
    /// displacement: multiplied by frequency) [default: accelerometer].
    #[arg(long, value_enum, value_name = "KIND")]
    pub response_sensor: Option<crate::signal::SensorKind>,
    /// Most modes listed; peaks beyond it are named in the notes [default: 12].
    #[arg(long, value_name = "N")]
    pub max_modes: Option<usize>,
}

fn parse_band(s: &str) -> std::result::Result<(f64, f64), String> {
    let (a, b) = s
        .split_once(':')
        .ok_or_else(|| format!("'{s}' is not a band; write LO:HI in Hz, e.g. 50:1500"))?;
    let num = |t: &str, empty: f64| -> std::result::Result<f64, String> {
        if t.trim().is_empty() {
            return Ok(empty);
        }
        t.trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite() && *v >= 0.0)
            .ok_or_else(|| format!("'{t}' is not a frequency in Hz"))
    };
    let (lo, hi) = (num(a, 0.0)?, num(b, f64::INFINITY)?);
    if lo >= hi {
        return Err(format!("the band {s} is empty (LO must be below HI)"));
    }
    Ok((lo, hi))
}

impl AnalysisArgs {
    pub fn config(&self) -> Result<AnalysisConfig> {
        let d = TriggerChoice::default();
        let level = match (self.trigger_level, self.trigger_noise) {
            (Some(v), _) => TriggerLevel::Absolute(positive(v, "--trigger-level")?),
            (None, Some(k)) => TriggerLevel::NoiseMultiple(positive(k, "--trigger-noise")?),
            (None, None) => d.level,
        };
        let mut checks = CheckConfig::default();
        if let Some(r) = self.residual_limit {
            checks.residual_limit = positive(r, "--residual-limit")? / 100.0;
        }
        if let Some(s) = self.min_snr_db {
            checks.min_snr_db = s;
        }
        let mut windows = WindowConfig::default();
        if let Some(ms) = self.force_window_ms {
            windows.force_s = positive(ms, "--force-window-ms")? / 1000.0;
        }
        if let Some(e) = self.exp_end {
            if !(e > 0.0 && e <= 1.0) {
                return Err(Error::new("--exp-end must be above 0 and at most 1"));
            }
            windows.exponential_end = e;
        }
        let mut modes = ModeConfig::default();
        if let Some(b) = self.band {
            modes.band_hz = b;
        }
        modes.response_sensor = self.response_sensor;
        if let Some(n) = self.max_modes {
            if n == 0 {
                crate::fail!("--max-modes must be at least 1");
            }
            modes.max_modes = n;
        }
        if let Some(p) = self.min_prominence_db {
            modes.min_prominence_db = p;
            modes.min_prominence_coherent_db = p;
        }
        let basis = self.view.map(|v| match v {
            ViewArg::Frf => Basis::Frf(self.estimator),
            ViewArg::Spectrum => Basis::Autospectrum,
            ViewArg::Transmissibility => Basis::Transmissibility,
        });
        Ok(AnalysisConfig {
            trigger: TriggerChoice {
                channel: self.trigger_channel,
                level,
                pretrigger_s: self.pretrigger_ms.map_or(d.pretrigger_s, |m| m / 1000.0),
                record_s: self
                    .record_s
                    .map_or(Ok(d.record_s), |r| positive(r, "--record-s"))?,
                holdoff_s: self.holdoff_s.unwrap_or(d.holdoff_s),
            },
            checks,
            spectra: SpectraConfig {
                windows,
                // Checked (1 to 16) with the rest in `run::validate`, not clamped silently.
                pad: self.pad.unwrap_or(SpectraConfig::default().pad),
            },
            modes,
            estimator: self.estimator,
            basis,
            isolation_band: None,
        })
    }
}

/// `--mass GRAMS`: a positive, finite mass in grams.
pub fn parse_mass(s: &str) -> std::result::Result<f64, String> {
    s.trim()
        .parse::<f64>()
        .ok()
        .filter(|v| v.is_finite() && *v > 0.0)
        .ok_or_else(|| format!("'{s}' is not a mass in grams (a positive number, e.g. 41.5)"))
}

fn positive(v: f64, what: &str) -> Result<f64> {
    if v > 0.0 && v.is_finite() {
        Ok(v)
    } else {
        Err(Error::new(format!(
            "{what} must be a positive number, not {v}"
        )))
    }
}
