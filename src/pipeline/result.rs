//! The result of an analysis: computed once by the pipeline, rendered by every front end
//! (the command-line printer, the app, run files, benchmarks). Nothing outside the
//! pipeline calls into `spectra` or `modes` to assemble a result of its own.

use super::{Analysis, COHERENT_SPAN, FORCE_BAND_DB, FORCE_BAND_MAX_DB};
use crate::modes::softmount::{DOUBTFUL_ERROR, Isolation, MountFit};
use crate::modes::{Flag, MIN_LINES, Mode, ModeSearch, SearchContext, search_modes};
use crate::spectra::{Basis, Curve, Spectra};
use std::sync::Arc;

/// Everything one analysis found, at one moment (after a given set of hits and settings).
#[derive(Debug, Clone, PartialEq)]
pub struct AnalysisResult {
    /// The averaged spectra (every estimator can be read from them).
    pub spectra: Spectra,
    /// The curve the modes were read from and its basis (no curve before the first
    /// accepted hit).
    pub basis: Basis,
    pub curve: Option<Curve>,
    /// Modes with flags, verdicts and uncertainty; peaks set aside; the band searched.
    pub search: ModeSearch,
    /// The soft mount fitted to the transmissibility (base channel only).
    pub mount: Option<MountFit>,
    /// Isolation over the band the user asked for (`AnalysisConfig::isolation_band`).
    pub isolation: Option<Isolation>,
    /// With a drive (`AnalysisConfig::drive`): its bands and, for a soft mount, the
    /// isolation over them; each mode's verdict is in its `band`.
    pub drive: Option<crate::drive::DriveSection>,
    /// Every sentence the reader should see: what was dropped or is doubtful, and why.
    pub notes: Vec<String>,
}

impl AnalysisResult {
    pub fn modes(&self) -> &[Mode] {
        &self.search.modes
    }
}

impl Analysis {
    /// The result of the analysis so far, computed once and kept until hits, verdicts or
    /// settings change.
    pub fn result(&self) -> Arc<AnalysisResult> {
        let mut cache = self.cache.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(r) = cache.as_ref() {
            return Arc::clone(r);
        }
        let r = Arc::new(self.compute());
        *cache = Some(Arc::clone(&r));
        r
    }

    /// Forget the cached result (hits, verdicts or settings changed).
    pub(super) fn invalidate(&self) {
        *self.cache.lock().unwrap_or_else(|e| e.into_inner()) = None;
    }

    fn compute(&self) -> AnalysisResult {
        let spectra = self.spectra();
        let basis = self.basis();
        let curve = (spectra.hits > 0).then(|| spectra.curve(basis)).flatten();
        let mut search = self.search(&spectra);
        let mount = (spectra.hits > 0).then(|| self.mount(&spectra)).flatten();
        let drive = self.cfg.drive.as_ref().map(|d| {
            crate::drive::assess(
                d,
                &mut search.modes,
                &spectra,
                mount.as_ref(),
                self.roles.base.is_some(),
            )
        });
        let isolation = self
            .cfg
            .isolation_band
            .and_then(|band| isolation(&spectra, mount.as_ref(), band));
        let mut notes = search.notes.clone();
        if search
            .modes
            .iter()
            .any(|m| m.flags.contains(&Flag::FewLines))
        {
            notes.push(format!(
                "some half-power bands span fewer than {MIN_LINES} spectral lines of {:.3} Hz: their damping is resolution-limited; lengthen the record (--record-s)",
                spectra.resolution_hz
            ));
        }
        if let Some(tau) = spectra.tau_s {
            notes.push(format!(
                "an exponential window (tau {tau:.4} s) added damping; the damping ratios have it removed"
            ));
        }
        if let Some(m) = mount.as_ref().filter(|m| m.error > DOUBTFUL_ERROR) {
            notes.push(format!(
                "the mount model ({}) leaves {:.0} % of the transmissibility unexplained: {}an elastomer whose stiffness changes with frequency, or a poor base signal; treat the mount's frequency and damping as approximate",
                m.model_name(),
                100.0 * m.error,
                if m.second.is_some() {
                    ""
                } else {
                    "two mount modes (bounce and pitch), "
                }
            ));
        }
        if self.cfg.isolation_band.is_some() && isolation.is_none() {
            notes.push(
                "no isolation could be read: the transmissibility needs a base channel and an accepted hit".into(),
            );
        }
        AnalysisResult {
            spectra,
            basis,
            curve,
            search,
            mount,
            isolation,
            drive,
            notes,
        }
    }

    /// The mode search on the current basis (empty before the first accepted hit): modes
    /// with their hit-to-hit uncertainty (ring-down damping for response-only runs), the
    /// peaks set aside, and notes on what is doubtful.
    pub(super) fn search(&self, spectra: &Spectra) -> ModeSearch {
        let nothing = ModeSearch {
            band_hz: self.cfg.modes.band_hz,
            ..ModeSearch::default()
        };
        if spectra.hits == 0 {
            return nothing;
        }
        let basis = self.basis();
        let Some(curve) = spectra.curve(basis) else {
            return nothing;
        };
        let mut notes = Vec::new();
        let cfg = crate::modes::ModeConfig {
            averages: spectra.hits,
            band_hz: self.band(spectra, &mut notes),
            ..self.cfg.modes.clone()
        };
        // The kept taps' transforms, made once for the alignment and the per-hit curves.
        let hit_spectra = self.accepted_hit_spectra();
        let aligned = (basis == Basis::Autospectrum)
            .then(|| self.aligned_taps(spectra, &hit_spectra, cfg.band_hz))
            .flatten();
        let ctx = SearchContext {
            background: (spectra.background_records > 0)
                .then(|| (&spectra.background_esd[..], &spectra.response_esd[..])),
            response_complex: aligned.as_ref().map(|a| &a.mean[..]),
            tap_agreement: aligned.as_ref().map(|a| &a.agreement[..]),
        };
        if spectra.background_records == 0 {
            notes.push(
                "no quiet stretch of a record's length was seen before or between the taps, so peaks could not be checked against the response without taps (hum, pickup): leave a few quiet seconds before the first tap".into(),
            );
        }
        if spectra.hits == 1 {
            notes.push(
                "one accepted hit: no coherence and no hit-to-hit spread can be estimated, so the modes are unconfirmed; tap a few more times".into(),
            );
        }
        let mut found = search_modes(
            &spectra.freqs,
            &curve,
            spectra.resolution_hz,
            spectra.tau_s,
            &cfg,
            &ctx,
        );
        notes.append(&mut found.notes);
        found.notes = notes;
        let modes = &mut found.modes;
        let records = self.accepted_records();
        if records.len() >= 2 {
            use crate::modes::uncertainty::{hit_curves, hit_lines};
            let lines = hit_lines(modes, &spectra.freqs);
            let mut curves = hit_curves(&self.averager, &hit_spectra, basis, &lines);
            if basis == Basis::Autospectrum {
                // Each tap's phase about its trigger, so modes the band fit read on the mean
                // complex spectrum are refitted tap by tap like an FRF's.
                let turn = super::align::turn_to(&spectra.freqs, self.trigger_time());
                for (c, h) in curves.iter_mut().zip(&hit_spectra) {
                    let mut phase = vec![0.0; c.magnitude.len()];
                    for r in &lines.ranges {
                        for k in r.clone() {
                            phase[k] = (h.response[k] * turn[k]).arg().to_degrees();
                        }
                    }
                    c.phase_deg = Some(phase);
                }
            }
            crate::modes::uncertainty::attach(
                modes,
                &spectra.freqs,
                &curves,
                spectra.resolution_hz,
                spectra.tau_s,
            );
        }
        if basis == Basis::Autospectrum && !records.is_empty() {
            let responses: Vec<&[f64]> = records
                .iter()
                .map(|r| r[self.roles.response].as_slice())
                .collect();
            crate::modes::ringdown::attach_ringdown(
                modes,
                &responses,
                self.info.sample_rate,
                &crate::modes::ringdown::RingdownConfig::default(),
            );
        }
        found
    }

    /// Response only: the accepted taps (those kept for the uncertainty, up to 16) turned
    /// to their triggers (see `align`): their mean complex spectrum and the agreement per
    /// line. `None` with fewer than two taps.
    fn aligned_taps(
        &self,
        spectra: &Spectra,
        hits: &[std::borrow::Cow<'_, crate::spectra::HitSpectra>],
        band: (f64, f64),
    ) -> Option<super::align::AlignedTaps> {
        let taps: Vec<&[realfft::num_complex::Complex64]> =
            hits.iter().map(|h| &h.response[..]).collect();
        super::align::align(&spectra.freqs, &taps, self.trigger_time(), band)
    }

    /// The trigger's time in a record (s): the pre-trigger length.
    fn trigger_time(&self) -> f64 {
        self.detector.pretrigger_len() as f64 / self.info.sample_rate
    }

    /// The band the modes are searched in. A given band is used as is; without an upper
    /// edge, the search stops below the anti-alias limit (0.4 fs) and, with a force
    /// channel, where the hammer's force spectrum has fallen 20 dB below its level at the
    /// bottom of the band: above that the tap puts little energy in and the FRF is the
    /// ratio of two noises (the usable band of an impact is commonly taken to end 10 to
    /// 20 dB down; common practice, no source). Where the FRF is still coherent there
    /// (a sensitive sensor, a quiet room), the band goes on as long as it stays coherent,
    /// down to `FORCE_BAND_MAX_DB`.
    pub(super) fn band(&self, spectra: &Spectra, notes: &mut Vec<String>) -> (f64, f64) {
        let (lo, hi) = self.cfg.modes.band_hz;
        if !self.cfg.modes.band_from_data || !matches!(self.basis(), Basis::Frf(_)) {
            return (lo, hi);
        }
        let Some((gff, gxx, gfx)) = spectra.force_response.as_ref() else {
            return (lo, hi);
        };
        let f = &spectra.freqs;
        let start = f.partition_point(|&x| x < lo.max(f.get(1).copied().unwrap_or(0.0)));
        let stop = f
            .partition_point(|&x| x < (2.0 * lo).max(lo + 10.0))
            .max(start + 1);
        let mut base: Vec<f64> = gff[start..stop.min(gff.len())].to_vec();
        if base.is_empty() {
            return (lo, hi);
        }
        base.sort_by(f64::total_cmp);
        let reference = base[base.len() / 2];
        let limit = reference * 10f64.powf(-FORCE_BAND_DB / 10.0);
        let floor = reference * 10f64.powf(-FORCE_BAND_MAX_DB / 10.0);
        let Some(mut k) = (start..gff.len()).find(|&k| gff[k] < limit) else {
            return (lo, hi);
        };
        let force_cut = f[k];
        // Past that point the band goes on while the FRF stays coherent (median over
        // `COHERENT_SPAN` lines at least `LOW_COHERENCE`, and above what noise reaches by
        // chance) and the force is no more than `FORCE_BAND_MAX_DB` down.
        let hits = spectra.hits;
        let needed = crate::modes::LOW_COHERENCE.max(crate::modes::noise_coherence(hits));
        let coherence = |j: usize| {
            let d = gff[j] * gxx[j];
            if d > 0.0 { gfx[j].norm_sqr() / d } else { 0.0 }
        };
        if hits >= 2 {
            let mut window: Vec<f64> = Vec::with_capacity(COHERENT_SPAN);
            while k + COHERENT_SPAN <= gff.len() && gff[k] >= floor && f[k] < hi {
                window.clear();
                window.extend((k..k + COHERENT_SPAN).map(coherence));
                window.sort_by(f64::total_cmp);
                if window[COHERENT_SPAN / 2] < needed {
                    break;
                }
                k += 1;
            }
        }
        let cut = f[k.min(f.len() - 1)];
        if !(cut < hi && cut > lo) {
            return (lo, hi);
        }
        notes.push(if cut > force_cut {
            format!(
                "modes searched up to {cut:.0} Hz: the hammer's force spectrum is {FORCE_BAND_DB:.0} dB below its level at the bottom of the band from {force_cut:.0} Hz, and the curve stays coherent up to {cut:.0} Hz (--band overrides)"
            )
        } else {
            format!(
                "modes searched up to {cut:.0} Hz: there the hammer's force spectrum is {FORCE_BAND_DB:.0} dB below its level at the bottom of the band, so the tap drives little above it (a harder tip reaches higher; --band overrides)"
            )
        });
        (lo, cut)
    }

    /// The soft mount read from the transmissibility, when there is a base channel.
    pub(super) fn mount(&self, spectra: &Spectra) -> Option<crate::modes::softmount::MountFit> {
        let curve = spectra.curve(Basis::Transmissibility)?;
        crate::modes::softmount::fit_mount(&spectra.freqs, &curve, None, spectra.tau_s)
    }
}

/// Transmissibility in dB at a frequency (`band.0 == band.1`) or over a band, measured and
/// from the mount model.
fn isolation(spectra: &Spectra, mount: Option<&MountFit>, band: (f64, f64)) -> Option<Isolation> {
    use crate::modes::softmount::{isolation_band_db, isolation_db};
    let curve = spectra.curve(Basis::Transmissibility)?;
    if spectra.hits == 0 {
        return None;
    }
    let point = band.0 == band.1;
    let measured = if point {
        isolation_db(&spectra.freqs, &curve, band.0)
    } else {
        isolation_band_db(&spectra.freqs, &curve, band)
    };
    let model = mount.map(|m| {
        if point {
            m.model_db(band.0)
        } else {
            m.model_band_db(band)
        }
    });
    Some(Isolation {
        band_hz: band,
        measured_db: measured,
        model_db: model,
    })
}

#[cfg(test)]
mod tests {
    use crate::pipeline::{AnalysisConfig, analyse_source};
    use crate::signal::RoleChoice;
    use crate::source::Source;
    use crate::source::simulator::Simulator;
    use crate::source::simulator::presets::preset;
    use std::sync::Arc;

    #[test]
    fn the_result_is_computed_once_until_the_hits_change() {
        let mut sim = Simulator::new(preset("tm9-arm-solid", 3).unwrap(), Some(8.0), true);
        let roles = RoleChoice::default().resolve(sim.info()).unwrap();
        let mut a = analyse_source(&mut sim, roles, AnalysisConfig::default(), true).unwrap();
        let first = a.result();
        assert!(first.spectra.hits >= 2 && !first.modes().is_empty());
        assert!(
            Arc::ptr_eq(&first, &a.result()),
            "recomputed without a change"
        );
        assert!(a.decide(0, false));
        let after = a.result();
        assert!(!Arc::ptr_eq(&first, &after));
        assert_eq!(after.spectra.hits, first.spectra.hits - 1);
        // What the run file and the app show is this value, not a second computation.
        assert_eq!(after.search, a.search(&a.spectra()));
    }

    /// The band verdicts are part of the one result: every mode carries its verdict and the
    /// result the drive's section; a new drive makes a new result, no drive none.
    #[test]
    fn band_verdicts_are_part_of_the_result() {
        let mut sim = Simulator::new(preset("tm9-arm-solid", 3).unwrap(), Some(8.0), true);
        let roles = RoleChoice::default().resolve(sim.info()).unwrap();
        let mut a = analyse_source(&mut sim, roles, AnalysisConfig::default(), true).unwrap();
        let plain = a.result();
        assert!(plain.drive.is_none() && plain.modes().iter().all(|m| m.band.is_none()));
        let drive = crate::drive::Drive::from_rpm((6000.0, 18000.0), 3).unwrap();
        a.set_drive(Some(drive.clone()));
        let judged = a.result();
        assert!(!Arc::ptr_eq(&plain, &judged));
        let section = judged.drive.as_ref().expect("the drive's section");
        assert_eq!(section.description, drive);
        assert!(!judged.modes().is_empty());
        for m in judged.modes() {
            let b = m.band.as_ref().expect("a verdict per mode");
            // 6000-18000 rpm: rotation 100-300 Hz, its harmonics and blade pass above.
            let inside = (section.bands.iter())
                .any(|band| (band.hz.0..=band.hz.1).contains(&m.frequency_hz));
            assert_eq!(b.verdict == crate::drive::Verdict::Inside, inside, "{m:?}");
        }
        a.set_drive(None);
        assert!(a.result().modes().iter().all(|m| m.band.is_none()));
    }
}
