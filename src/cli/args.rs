//! Command-line options shared by the commands that analyse (analyze, capture, the app).

use crate::error::{Error, Result};
use crate::hits::{CheckConfig, TriggerLevel};
use crate::modes::ModeConfig;
use crate::pipeline::{AnalysisConfig, TriggerChoice};
use crate::run::validate::MAX_PROMINENCE_DB;
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
    #[arg(long, value_name = "N", help_heading = "Channels")]
    pub force_channel: Option<usize>,
    /// Channel (from 0) holding the response [default: 1 with two or more channels, else 0].
    #[arg(long, value_name = "N", help_heading = "Channels")]
    pub response_channel: Option<usize>,
    /// Channel (from 0) measuring the base of a soft-mounted part (enables transmissibility).
    #[arg(long, value_name = "N", help_heading = "Channels")]
    pub base_channel: Option<usize>,
    /// Ignore any force channel: response-only analysis.
    #[arg(long, help_heading = "Channels")]
    pub no_force: bool,
    /// Force sensitivity: force unit per count (e.g. 0.0015 for N per count).
    #[arg(long, value_name = "X", help_heading = "Channels")]
    pub force_scale: Option<f64>,
    /// Unit of the force after scaling [default: N when --force-scale is given].
    #[arg(long, value_name = "UNIT", help_heading = "Channels")]
    pub force_unit: Option<String>,
    /// Response sensitivity: response unit per count (e.g. 0.000488 for g per count).
    #[arg(long, value_name = "X", help_heading = "Channels")]
    pub response_scale: Option<f64>,
    /// Unit of the response (and base) after scaling [default: g when --response-scale is given].
    #[arg(long, value_name = "UNIT", help_heading = "Channels")]
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
    /// Channel the trigger watches [default: the force channel, else the response].
    #[arg(long, value_name = "N", help_heading = "Trigger")]
    pub trigger_channel: Option<usize>,
    /// Trigger when the channel deviates from its baseline by this much (channel unit).
    #[arg(
        long,
        value_name = "X",
        conflicts_with = "trigger_noise",
        help_heading = "Trigger"
    )]
    pub trigger_level: Option<f64>,
    /// Trigger at this multiple of the measured noise floor (RMS) [default: 10].
    #[arg(long, value_name = "K", help_heading = "Trigger")]
    pub trigger_noise: Option<f64>,
    /// Samples kept before the trigger, in ms [default: 10].
    #[arg(long, value_name = "MS", help_heading = "Trigger")]
    pub pretrigger_ms: Option<f64>,
    /// Length of each hit record in s, pre-trigger included [default: 1.0].
    #[arg(long, value_name = "S", help_heading = "Trigger")]
    pub record_s: Option<f64>,
    /// Dead time after a record before the next trigger, in s [default: 0.2].
    #[arg(long, value_name = "S", help_heading = "Trigger")]
    pub holdoff_s: Option<f64>,
    /// Largest end-of-record response level still counted as decayed, % of peak [default: 10].
    #[arg(long, value_name = "PCT", help_heading = "Trigger")]
    pub residual_limit: Option<f64>,
    /// Smallest response peak over the noise floor, dB [default: 20].
    #[arg(long, value_name = "DB", help_heading = "Trigger")]
    pub min_snr_db: Option<f64>,
    /// Length of the flat part of the force window after the trigger, ms [default: 5].
    #[arg(long, value_name = "MS", help_heading = "Spectra")]
    pub force_window_ms: Option<f64>,
    /// Value the exponential window falls to at the record end; 1 turns it off [default: 0.1].
    #[arg(long, value_name = "X", help_heading = "Spectra")]
    pub exp_end: Option<f64>,
    /// Zero-padding factor of the FFT [default: 2].
    #[arg(long, value_name = "N", help_heading = "Spectra")]
    pub pad: Option<usize>,
    /// FRF estimator.
    #[arg(long, value_enum, default_value_t = Estimator::H1, help_heading = "Spectra")]
    pub estimator: Estimator,
    /// Curve the modes are read from [default: frf with a force channel, else spectrum].
    #[arg(long, value_enum, help_heading = "Spectra")]
    pub view: Option<ViewArg>,
    /// Limit the mode search to LO:HI Hz (either side may be empty, e.g. 50: or :1200).
    #[arg(long, value_name = "LO:HI", value_parser = parse_band, help_heading = "Modes")]
    pub band: Option<(f64, f64)>,
    /// Smallest peak prominence, dB [default: 3 on an FRF or transmissibility with two or
    /// more averages (the coherence vouches for the peak), else 6].
    #[arg(long, value_name = "DB", value_parser = parse_prominence, help_heading = "Modes")]
    pub min_prominence_db: Option<f64>,
    /// What the response sensor measures; decides how spectra are weighted before modes are
    /// read (accelerometer: divided by frequency; velocity, piezo, microphone: as is;
    /// displacement: multiplied by frequency) [default: accelerometer].
    #[arg(long, value_enum, value_name = "KIND", help_heading = "Modes")]
    pub response_sensor: Option<crate::signal::SensorKind>,
    /// Most modes listed; peaks beyond it are named in the notes [default: 12].
    #[arg(long, value_name = "N", help_heading = "Modes")]
    pub max_modes: Option<usize>,
}

/// What a band option accepts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BandForm {
    /// `LO:HI` in Hz, either side may be empty (0 and no upper limit), `0` allowed.
    Open,
    /// `HZ` (a single frequency) or `LO:HI`, both sides given and above 0.
    FrequencyOrBand,
    /// `LO:HI` only, both sides given and above 0 (a range to show).
    Closed,
}

/// The one parser of frequency bands on the command line; `(f, f)` for a single frequency.
pub fn parse_band_as(s: &str, form: BandForm) -> std::result::Result<(f64, f64), String> {
    let open = form == BandForm::Open;
    let num = |t: &str, empty: f64| -> std::result::Result<f64, String> {
        if open && t.trim().is_empty() {
            return Ok(empty);
        }
        t.trim()
            .parse::<f64>()
            .ok()
            .filter(|v| v.is_finite() && (*v > 0.0 || open && *v == 0.0))
            .ok_or_else(|| format!("'{t}' is not a frequency in Hz"))
    };
    match s.split_once(':') {
        Some((a, b)) => {
            let (lo, hi) = (num(a, 0.0)?, num(b, f64::INFINITY)?);
            if lo >= hi {
                return Err(format!("the band {s} is empty (LO must be below HI)"));
            }
            Ok((lo, hi))
        }
        None if form != BandForm::FrequencyOrBand => Err(format!(
            "'{s}' is not a band; write LO:HI in Hz, e.g. 50:1500"
        )),
        None => num(s, 0.0).map(|f| (f, f)),
    }
}

/// `--band LO:HI` (either side may be empty).
pub fn parse_band(s: &str) -> std::result::Result<(f64, f64), String> {
    parse_band_as(s, BandForm::Open)
}

/// `LO:HI`, both given (the pictures' `--freq-range`).
pub fn parse_closed_band(s: &str) -> std::result::Result<(f64, f64), String> {
    parse_band_as(s, BandForm::Closed)
}

/// `HZ` or `LO:HI` (the isolation options).
pub fn parse_freq_or_band(s: &str) -> std::result::Result<(f64, f64), String> {
    parse_band_as(s, BandForm::FrequencyOrBand)
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
            // The drive has options of its own (`drive_args`); commands set it on the analysis.
            drive: None,
        })
    }
}

/// A finite number above 0 (clap value parser: rejected with a sentence, never clamped).
pub fn parse_positive(s: &str) -> std::result::Result<f64, String> {
    s.trim()
        .parse::<f64>()
        .ok()
        .filter(|v| v.is_finite() && *v > 0.0)
        .ok_or_else(|| format!("'{s}' is not a positive number"))
}

/// A finite number of at least 0.
pub fn parse_non_negative(s: &str) -> std::result::Result<f64, String> {
    s.trim()
        .parse::<f64>()
        .ok()
        .filter(|v| v.is_finite() && *v >= 0.0)
        .ok_or_else(|| format!("'{s}' is not a number of at least 0"))
}

/// A prominence in dB, from 0 to [`MAX_PROMINENCE_DB`].
pub fn parse_prominence(s: &str) -> std::result::Result<f64, String> {
    s.trim()
        .parse::<f64>()
        .ok()
        .filter(|v| (0.0..=MAX_PROMINENCE_DB).contains(v))
        .ok_or_else(|| format!("'{s}' is not a prominence from 0 to {MAX_PROMINENCE_DB} dB"))
}

/// A count of at least 1.
pub fn parse_count(s: &str) -> std::result::Result<usize, String> {
    s.trim()
        .parse::<usize>()
        .ok()
        .filter(|&n| n >= 1)
        .ok_or_else(|| format!("'{s}' is not a whole number of at least 1"))
}

/// A probability: a number from 0 to 1.
pub fn parse_probability(s: &str) -> std::result::Result<f64, String> {
    s.trim()
        .parse::<f64>()
        .ok()
        .filter(|v| (0.0..=1.0).contains(v))
        .ok_or_else(|| format!("'{s}' is not a chance from 0 to 1"))
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

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn clap_accepts_the_definitions() {
        crate::cli::Cli::command().debug_assert();
    }

    /// The number after `[default: ` in an option's help (first number when it names
    /// several cases).
    fn documented(cmd: &clap::Command, long: &str) -> f64 {
        let arg = cmd
            .get_arguments()
            .find(|a| a.get_long() == Some(long))
            .unwrap_or_else(|| panic!("no --{long} in '{}'", cmd.get_name()));
        let help = arg.get_help().expect("a help text").to_string();
        let at = help
            .find("[default: ")
            .unwrap_or_else(|| panic!("--{long} documents no default: {help}"));
        let rest = &help[at + 10..];
        let end = rest
            .find(|c: char| !(c.is_ascii_digit() || c == '.'))
            .unwrap_or(rest.len());
        rest[..end]
            .parse()
            .unwrap_or_else(|_| panic!("--{long}: '{}' is not a number", &rest[..end]))
    }

    #[test]
    fn documented_defaults_match_the_code() {
        let t = TriggerChoice::default();
        let c = CheckConfig::default();
        let w = WindowConfig::default();
        let m = ModeConfig::default();
        let TriggerLevel::NoiseMultiple(k) = t.level else {
            panic!("the default trigger is a noise multiple, as the help says");
        };
        let expected = [
            ("trigger-noise", k),
            ("pretrigger-ms", t.pretrigger_s * 1000.0),
            ("record-s", t.record_s),
            ("holdoff-s", t.holdoff_s),
            ("residual-limit", c.residual_limit * 100.0),
            ("min-snr-db", c.min_snr_db),
            ("force-window-ms", w.force_s * 1000.0),
            ("exp-end", w.exponential_end),
            ("pad", SpectraConfig::default().pad as f64),
            ("min-prominence-db", m.min_prominence_coherent_db),
            ("max-modes", m.max_modes as f64),
        ];
        let root = crate::cli::Cli::command();
        for sub in ["analyze", "capture", "tui"] {
            let cmd = root.find_subcommand(sub).unwrap();
            for (long, value) in expected {
                let doc = documented(cmd, long);
                assert!(
                    (doc - value).abs() <= 1e-9 * value.abs().max(1.0),
                    "{sub} --{long}: help says {doc}, the code uses {value}"
                );
            }
        }
        // The prominence help names both cases: 3 dB with coherence, else 6 dB.
        let help = root
            .find_subcommand("analyze")
            .unwrap()
            .get_arguments()
            .find(|a| a.get_long() == Some("min-prominence-db"))
            .and_then(|a| a.get_help())
            .unwrap()
            .to_string();
        assert!(
            help.contains(&format!("else {}]", m.min_prominence_db)),
            "{help}"
        );
        // The drive's defaults, on every command that takes a drive.
        for sub in ["analyze", "capture", "tui", "plot", "compare", "report"] {
            let cmd = root.find_subcommand(sub).unwrap();
            for (long, value) in [
                ("cell-volts", crate::drive::NOMINAL_CELL_VOLTS),
                ("near-pct", crate::drive::DEFAULT_NEAR_PCT),
            ] {
                let doc = documented(cmd, long);
                assert!(
                    (doc - value).abs() <= 1e-9 * value.abs().max(1.0),
                    "{sub} --{long}: help says {doc}, the code uses {value}"
                );
            }
        }
        let compare = root.find_subcommand("compare").unwrap();
        use crate::run::compare::{DEFAULT_FLOOR_DAMPING_PCT, DEFAULT_FLOOR_FREQUENCY_PCT};
        assert_eq!(documented(compare, "floor"), DEFAULT_FLOOR_FREQUENCY_PCT);
        assert_eq!(
            documented(compare, "floor-damping"),
            DEFAULT_FLOOR_DAMPING_PCT
        );
    }

    #[test]
    fn every_analysis_option_has_a_heading() {
        let root = crate::cli::Cli::command();
        for sub in ["analyze", "capture", "tui"] {
            let cmd = root.find_subcommand(sub).unwrap();
            for a in cmd.get_arguments().filter(|a| a.get_long().is_some()) {
                let long = a.get_long().unwrap();
                if ["help", "version"].contains(&long) {
                    continue;
                }
                let h = a.get_help_heading();
                assert!(
                    matches!(
                        h,
                        Some(
                            "Source"
                                | "Channels"
                                | "Trigger"
                                | "Spectra"
                                | "Modes"
                                | "Outputs"
                                | "Tasks"
                        )
                    ),
                    "{sub} --{long} is under {h:?}"
                );
            }
        }
    }

    #[test]
    fn numbers_are_rejected_not_clamped() {
        assert_eq!(parse_positive("2.5"), Ok(2.5));
        assert!(parse_positive("0").is_err());
        assert!(parse_positive("-1").is_err());
        assert!(parse_positive("inf").is_err());
        assert_eq!(parse_non_negative("0"), Ok(0.0));
        assert!(parse_non_negative("-0.1").is_err());
        assert_eq!(parse_probability("1"), Ok(1.0));
        assert!(parse_probability("1.5").is_err());
        assert!(parse_probability("NaN").is_err());
        use clap::Parser;
        for bad in [
            &["tapmodes", "tui", "--auto-tap", "0"][..],
            &["tapmodes", "simulate", "--double-hits", "1.5"],
            &["tapmodes", "simulate", "--noise", "-1"],
            &["tapmodes", "simulate", "--force", "0"],
            &["tapmodes", "simulate", "--hum", "-50"],
        ] {
            assert!(
                crate::cli::Cli::try_parse_from(bad).is_err(),
                "{bad:?} accepted"
            );
        }
    }

    /// Source options the chosen source does not use are refused (as `--rate` without
    /// `--columns` is), zero rates and hit counts are rejected, and prominences must lie
    /// from 0 to `MAX_PROMINENCE_DB`; the defaults alone trigger none of it.
    #[test]
    fn source_and_capture_options_are_checked() {
        use clap::Parser;
        use clap::error::ErrorKind::{
            ArgumentConflict as Conflict, MissingRequiredArgument as Missing,
            ValueValidation as Value,
        };
        let parse = |args: &str| {
            crate::cli::Cli::try_parse_from(["tapmodes"].into_iter().chain(args.split(' ')))
        };
        for (bad, kind, needle) in [
            ("capture --demo --fast --hits 0", Value, "at least 1"),
            ("capture --serial /dev/null --baud 0", Value, "--baud"),
            ("capture --audio --audio-rate 0", Value, "--audio-rate"),
            ("capture --baud 9600", Missing, "--serial"),
            ("capture --demo --baud 9600", Conflict, "--baud"),
            ("tui --replay a.wav --baud 9600", Conflict, "--baud"),
            ("tui --audio-rate 44100", Missing, "--audio"),
            ("tui --demo --audio-rate 44100", Conflict, "--audio-rate"),
            (
                "capture --serial /dev/null --audio-rate 8000",
                Conflict,
                "--audio-rate",
            ),
            ("capture --serial /dev/null --seed 3", Conflict, "--seed"),
            ("capture --replay a.wav --seed 3", Conflict, "--seed"),
            ("capture --serial /dev/null --fast", Conflict, "--fast"),
            (
                "analyze a.wav --min-prominence-db=-5",
                Value,
                "from 0 to 150 dB",
            ),
            (
                "analyze a.wav --min-prominence-db=1e9",
                Value,
                "from 0 to 150 dB",
            ),
            ("capture --min-prominence-db=nan", Value, "from 0 to 150 dB"),
        ] {
            let e = parse(bad).expect_err(&format!("{bad:?} accepted"));
            assert_eq!(e.kind(), kind, "{bad:?}: {e}");
            assert!(e.to_string().contains(needle), "{bad:?}: {e}");
        }
        for good in [
            "capture",
            "tui",
            "capture --demo --fast --hits 1 --seed 2",
            "capture --serial /dev/null --baud 9600",
            "capture --audio --audio-rate 44100",
            "capture --replay a.wav --fast",
            "analyze a.wav --min-prominence-db 0",
            "analyze a.wav --min-prominence-db 150",
        ] {
            if let Err(e) = parse(good) {
                panic!("{good:?} refused: {e}");
            }
        }
    }

    #[test]
    fn one_band_parser() {
        assert_eq!(parse_band("50:1500"), Ok((50.0, 1500.0)));
        assert_eq!(parse_band(":1200"), Ok((0.0, 1200.0)));
        assert_eq!(parse_band("50:"), Ok((50.0, f64::INFINITY)));
        assert!(parse_band("120").is_err(), "a band needs LO:HI");
        assert!(parse_band("900:100").is_err());
        assert!(parse_band("-5:100").is_err());
        assert_eq!(parse_freq_or_band("120"), Ok((120.0, 120.0)));
        assert_eq!(parse_freq_or_band("80:200"), Ok((80.0, 200.0)));
        assert!(parse_freq_or_band(":200").is_err(), "both sides needed");
        assert!(parse_freq_or_band("0").is_err(), "a frequency is above 0");
        assert!(parse_freq_or_band("nan").is_err());
        assert_eq!(parse_closed_band("20:1500"), Ok((20.0, 1500.0)));
        assert!(parse_closed_band("20:").is_err(), "both sides needed");
        assert!(parse_closed_band("0:100").is_err(), "LO above 0");
        assert!(
            parse_closed_band("1500").is_err(),
            "a range, not a frequency"
        );
        assert!(parse_closed_band("600:500").is_err());
    }
}
