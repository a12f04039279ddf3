//! The soft mounts of two runs compared like a mode: frequency, damping, isolation.

use super::{CompareOptions, Verdict};
use crate::modes::softmount::DOUBTFUL_ERROR;
use crate::run::RunFile;
use serde::Serialize;

/// The mount of one run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MountSide {
    pub natural_frequency_hz: f64,
    pub damping_ratio: f64,
    /// Normalised residual of the mount fit (0 = perfect).
    pub fit_error: f64,
    /// `sqrt(2) f_n`: above it the mount isolates.
    pub isolation_onset_hz: f64,
}

/// Transmissibility of both mounts over the band of interest.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IsolationChange {
    pub band_hz: (f64, f64),
    /// From each fitted mount model, dB (negative = isolation).
    pub baseline_model_db: f64,
    pub variant_model_db: f64,
    /// variant - baseline, dB (negative = the variant isolates better).
    pub model_change_db: f64,
    /// Measured values, when both run files stored them for this band.
    pub baseline_measured_db: Option<f64>,
    pub variant_measured_db: Option<f64>,
}

/// The soft mounts of the baseline and a variant, compared like a mode.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MountComparison {
    pub baseline: Option<MountSide>,
    pub variant: Option<MountSide>,
    pub frequency_change_pct: Option<f64>,
    /// (f_b / f_a)^2: the mount's stiffness ratio for the same supported mass.
    pub stiffness_ratio: Option<f64>,
    pub damping_change: Option<f64>,
    pub frequency_verdict: Option<Verdict>,
    pub damping_verdict: Option<Verdict>,
    pub isolation: Option<IsolationChange>,
    /// What could not be compared.
    pub note: Option<String>,
    /// Why the verdicts are `doubtful`: a mount fit leaves more than `DOUBTFUL_ERROR` of the
    /// transmissibility unexplained, so its frequency and damping are approximate.
    pub doubt: Option<String>,
}

pub(super) fn compare_mounts(
    base: &RunFile,
    run: &RunFile,
    o: &CompareOptions,
) -> Option<MountComparison> {
    let side = |r: &RunFile| {
        r.mount.as_ref().map(|m| MountSide {
            natural_frequency_hz: m.natural_frequency_hz,
            damping_ratio: m.damping_ratio,
            fit_error: m.error,
            isolation_onset_hz: m.isolation_onset_hz(),
        })
    };
    let (sa, sb) = (side(base), side(run));
    if sa.is_none() && sb.is_none() {
        return None;
    }
    let mut c = MountComparison {
        baseline: sa.clone(),
        variant: sb.clone(),
        frequency_change_pct: None,
        stiffness_ratio: None,
        damping_change: None,
        frequency_verdict: None,
        damping_verdict: None,
        isolation: None,
        note: None,
        doubt: None,
    };
    let (Some(ma), Some(mb)) = (base.mount.as_ref(), run.mount.as_ref()) else {
        let which = if sa.is_some() {
            &base.variant.label
        } else {
            &run.variant.label
        };
        c.note = Some(format!(
            "only '{which}' has a mount fit (the other run has no base channel): the mounts are not compared"
        ));
        return Some(c);
    };
    let r = mb.natural_frequency_hz / ma.natural_frequency_hz;
    let df = 100.0 * (r - 1.0);
    c.frequency_change_pct = Some(df);
    c.stiffness_ratio = Some(r * r);
    c.damping_change = Some(mb.damping_ratio - ma.damping_ratio);
    // A poor fit is like a flagged mode: a change beyond the floor is doubtful, not real.
    let poor: Vec<String> = [(ma, &base.variant.label), (mb, &run.variant.label)]
        .iter()
        .filter(|(m, _)| m.error > DOUBTFUL_ERROR || m.error.is_nan())
        .map(|(m, l)| format!("'{l}' leaves {:.0} %", 100.0 * m.error))
        .collect();
    if !poor.is_empty() {
        c.doubt = Some(format!(
            "the mount fit of {} of the transmissibility unexplained (more than {:.0} %): the mount's frequency and damping changes are doubtful, not real",
            poor.join(" and that of "),
            100.0 * DOUBTFUL_ERROR
        ));
    }
    let judge = |change: f64, floor: f64| {
        // The mount fit stores no hit-to-hit spread: the floors alone decide.
        let v = Verdict::judge(change, floor, None);
        if v != Verdict::WithinFloor && !poor.is_empty() {
            Verdict::Doubtful
        } else {
            v
        }
    };
    c.frequency_verdict = Some(judge(df, o.floor_frequency_pct));
    if ma.damping_ratio > 0.0 {
        let dz = 100.0 * (mb.damping_ratio - ma.damping_ratio) / ma.damping_ratio;
        c.damping_verdict = Some(judge(dz, o.floor_damping_pct));
    }
    let band = o.isolation_band.or_else(|| {
        base.isolation
            .as_ref()
            .zip(run.isolation.as_ref())
            .filter(|(x, y)| x.band_hz == y.band_hz)
            .map(|(x, _)| x.band_hz)
    });
    match band {
        Some(b) => {
            let model = |m: &crate::modes::softmount::MountFit| {
                if b.0 == b.1 { m.model_db(b.0) } else { m.model_band_db(b) }
            };
            let measured = |r: &RunFile| {
                r.isolation
                    .as_ref()
                    .filter(|i| i.band_hz == b)
                    .and_then(|i| i.measured_db)
            };
            let (xa, xb) = (model(ma), model(mb));
            c.isolation = Some(IsolationChange {
                band_hz: b,
                baseline_model_db: xa,
                variant_model_db: xb,
                model_change_db: xb - xa,
                baseline_measured_db: measured(base),
                variant_measured_db: measured(run),
            });
        }
        None => {
            c.note = Some(
                "no band of interest: give --isolation LO:HI (the motors' excitation band) to compare isolation"
                    .into(),
            )
        }
    }
    Some(c)
}
