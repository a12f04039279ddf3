//! Run files: the recording (WAV), the mode list (JSON) and the FRF table (CSV) of a variant.

pub(crate) mod atomic;
pub mod compare;
pub mod curve_read;
pub(crate) mod modes_csv;
pub(crate) mod naming;
pub mod recording;
pub(crate) mod reopen;
pub(crate) mod safe_path;
pub(crate) mod validate;

use crate::error::{Context, Error, Result};
use crate::hits::{CheckConfig, TriggerConfig};
use crate::modes::{LeftOut, Mode, ModeConfig};
use crate::pipeline::AnalysisResult;
use crate::pipeline::{Analysis, HitSummary};
use crate::signal::{ChannelInfo, Roles};
use crate::spectra::{Basis, Curve, Estimator, WindowConfig};
pub use safe_path::FileKind;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// Version of the mode-list layout; bump on incompatible change (see schema/run.schema.json).
pub const SCHEMA_VERSION: u32 = 1;

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Variant {
    pub label: String,
    pub note: String,
    /// Mass of the part as tested, in grams (given with `--mass` at capture or analysis, or
    /// later with `tapmodes amend`); used for the mass-corrected stiffness ratio.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mass_g: Option<f64>,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FftSetup {
    pub record_samples: usize,
    pub fft_len: usize,
    /// True resolution fs / record length.
    pub resolution_hz: f64,
    /// Line spacing after zero padding.
    pub line_spacing_hz: f64,
    pub zero_pad: usize,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Setup {
    pub source: String,
    pub sample_rate_hz: f64,
    pub channels: Vec<ChannelInfo>,
    pub roles: Roles,
    pub trigger: TriggerConfig,
    pub checks: CheckConfig,
    pub windows: WindowConfig,
    /// Time constant of the exponential window in s (absent when off).
    pub exponential_tau_s: Option<f64>,
    pub fft: FftSetup,
    pub estimator: Estimator,
    pub basis: Basis,
    pub band_hz: (f64, f64),
    pub mode_search: ModeConfig,
}

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RecordingRef {
    /// Path of the WAV relative to this JSON file.
    pub wav: String,
    pub frames: u64,
    /// How the WAV holds its samples (readable text in the file).
    pub encoding: recording::Encoding,
    /// Stretches lost before they reached the recording: (WAV frame where the stream
    /// jumps, frames lost). The WAV holds only what arrived; re-analysis skips ahead here.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub gaps: Vec<(u64, u64)>,
}

/// What `write_run_files` records about the WAV of a run.
#[derive(Debug, Clone, Copy)]
pub struct RecordingNote<'a> {
    pub wav: &'a Path,
    pub encoding: recording::Encoding,
    pub gaps: &'a [(u64, u64)],
}

/// The mode list of one variant, with everything needed to reproduce it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunFile {
    pub schema_version: u32,
    pub tool: String,
    pub tool_version: String,
    /// UTC time of writing, RFC 3339.
    pub created_utc: String,
    pub variant: Variant,
    pub setup: Setup,
    pub recording: Option<RecordingRef>,
    pub hits_total: usize,
    pub hits_accepted: usize,
    pub hits: Vec<HitSummary>,
    pub modes: Vec<Mode>,
    /// Path of the FRF CSV relative to this JSON file.
    pub frf_csv: Option<String>,
    /// The soft mount fitted to the base-to-response transmissibility (base channel only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mount: Option<crate::modes::softmount::MountFit>,
    /// Isolation of the mount where the user asked for it (transmissibility in dB).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub isolation: Option<Isolation>,
    /// The motors' excitation bands and the mount's isolation over them (see `drive`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drive: Option<crate::drive::DriveSection>,
    /// Things the reader of these numbers should know.
    pub notes: Vec<String>,
    /// Peaks of the curve that are not listed as modes, each with its reason.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub left_out: Vec<LeftOut>,
    /// Peaks whose coherence was below what noise reaches by chance: counted, not listed.
    #[serde(default)]
    pub incoherent_peaks: usize,
    /// Stream ranges `[start, end)` in samples where the trigger was disarmed: not searched
    /// for taps, also not on re-analysis.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub disarmed: Vec<(u64, u64)>,
}

pub use crate::modes::softmount::Isolation;

impl RunFile {
    /// Describe the current state of an analysis.
    pub fn from_analysis(a: &Analysis, result: &AnalysisResult, variant: Variant) -> Self {
        let spectra = &result.spectra;
        let found = &result.search;
        let info = a.info();
        let cfg = a.config();
        let d = a.detector();
        let fft_len = (spectra.freqs.len() - 1) * 2;
        RunFile {
            schema_version: SCHEMA_VERSION,
            tool: "tapmodes".into(),
            tool_version: env!("CARGO_PKG_VERSION").into(),
            created_utc: now_rfc3339(),
            variant,
            setup: Setup {
                source: info.source.clone(),
                sample_rate_hz: info.sample_rate,
                channels: info.channels.clone(),
                roles: a.roles(),
                trigger: d.trigger_config().clone(),
                checks: cfg.checks.clone(),
                windows: cfg.spectra.windows.clone(),
                exponential_tau_s: spectra.tau_s,
                fft: FftSetup {
                    record_samples: d.record_len(),
                    fft_len,
                    resolution_hz: spectra.resolution_hz,
                    line_spacing_hz: spectra.freqs.get(1).copied().unwrap_or(0.0),
                    zero_pad: cfg.spectra.pad,
                },
                estimator: cfg.estimator,
                basis: result.basis,
                band_hz: found.band_hz,
                mode_search: cfg.modes.clone(),
            },
            recording: None,
            hits_total: a.hits().len(),
            hits_accepted: a.accepted(),
            hits: a.hits().to_vec(),
            modes: found.modes.clone(),
            frf_csv: None,
            mount: result.mount.clone(),
            isolation: result.isolation.clone(),
            drive: result.drive.clone(),
            notes: result.notes.clone(),
            left_out: found.left_out.clone(),
            incoherent_peaks: found.incoherent_peaks,
            disarmed: a.disarmed().to_vec(),
        }
    }

    /// Read and check a run file: untrusted input (see `check`). Text meant for a
    /// terminal comes back cleaned of control and escape sequences.
    pub fn load(path: &Path) -> Result<Self> {
        let shown = path.display();
        safe_path::check_input(path)?;
        let meta = std::fs::metadata(path).with_context(|| format!("cannot read '{shown}'"))?;
        if meta.len() > MAX_RUN_FILE_BYTES {
            crate::fail!(
                "'{shown}' is {} MiB, too large for a run file (the most is {} MiB)",
                meta.len() >> 20,
                MAX_RUN_FILE_BYTES >> 20
            );
        }
        let text =
            std::fs::read_to_string(path).with_context(|| format!("cannot read '{shown}'"))?;
        Self::from_json(&text, &shown.to_string())
    }

    /// Parse, check and clean the text of a run file called `name`.
    pub fn from_json(text: &str, name: &str) -> Result<Self> {
        let mut run: RunFile = serde_json::from_str(text).map_err(|e| {
            Error::new(format!(
                "'{name}' is not a tapmodes run file: {}",
                validate::clean_text(&e.to_string(), false)
            ))
        })?;
        if run.schema_version > SCHEMA_VERSION {
            crate::fail!(
                "'{name}' has schema version {} but this tool reads up to {SCHEMA_VERSION}",
                run.schema_version
            );
        }
        run.clean();
        run.check(name)?;
        Ok(run)
    }

    /// Clean every text that may reach a terminal.
    fn clean(&mut self) {
        let c = |s: &mut String| *s = validate::clean_text(s, false);
        c(&mut self.variant.label);
        self.variant.note = validate::clean_text(&self.variant.note, true);
        c(&mut self.setup.source);
        for ch in &mut self.setup.channels {
            c(&mut ch.name);
            c(&mut ch.unit);
        }
        for n in &mut self.notes {
            c(n);
        }
        for h in &mut self.hits {
            c(&mut h.reason);
        }
        for m in &mut self.modes {
            c(&mut m.method);
        }
    }

    /// The settings against the same limits as the command line, and the numbers other
    /// commands rely on (mode frequencies, hit positions).
    pub fn check(&self, name: &str) -> Result<()> {
        let what = format!("run file '{name}'");
        let s = &self.setup;
        let info = crate::signal::StreamInfo {
            source: s.source.clone(),
            sample_rate: s.sample_rate_hz,
            channels: s.channels.clone(),
        };
        validate::check_stream(&info, &what)?;
        if s.trigger.channel >= s.channels.len() {
            crate::fail!(
                "{what} names channel {} as the trigger channel, but there are {} channels",
                s.trigger.channel,
                s.channels.len()
            );
        }
        validate::check_analysis(&self.analysis_config(), &info, &s.roles, &what)?;
        validate::check_mass(self.variant.mass_g, &what)?;
        for (i, m) in self.modes.iter().enumerate() {
            let ok = m.frequency_hz.is_finite()
                && m.frequency_hz > 0.0
                && m.damping_ratio.is_none_or(|z| z.is_finite() && z >= 0.0)
                && m.magnitude.is_finite();
            if !ok {
                crate::fail!(
                    "{what}: mode {} has a frequency, damping or magnitude that is not a usable number",
                    i + 1
                );
            }
        }
        if self.hits.len() > MAX_HITS || self.modes.len() > MAX_HITS {
            crate::fail!("{what} lists more than {MAX_HITS} hits or modes");
        }
        if self.hits_accepted > self.hits_total {
            crate::fail!(
                "{what} says {} of {} hits were accepted",
                self.hits_accepted,
                self.hits_total
            );
        }
        if let Some(r) = &self.recording {
            let total = r.gaps.iter().try_fold(0u64, |a, g| a.checked_add(g.1));
            if total.is_none_or(|t| t > r.frames) || r.gaps.iter().any(|g| g.0 > r.frames) {
                crate::fail!("{what} lists lost stretches that do not fit its recording");
            }
        }
        Ok(())
    }

    /// The analysis settings the run was made with.
    pub fn analysis_config(&self) -> crate::pipeline::AnalysisConfig {
        let s = &self.setup;
        crate::pipeline::AnalysisConfig {
            trigger: crate::pipeline::TriggerChoice {
                channel: Some(s.trigger.channel),
                level: s.trigger.level,
                pretrigger_s: s.trigger.pretrigger_s,
                record_s: s.trigger.record_s,
                holdoff_s: s.trigger.holdoff_s,
            },
            checks: s.checks.clone(),
            spectra: crate::spectra::SpectraConfig {
                windows: s.windows.clone(),
                pad: s.fft.zero_pad,
            },
            modes: s.mode_search.clone(),
            estimator: s.estimator,
            basis: Some(s.basis),
            isolation_band: self.isolation.as_ref().map(|i| i.band_hz),
            drive: self.drive.as_ref().map(|d| d.description.clone()),
        }
    }

    pub fn save(&self, path: &Path) -> Result<()> {
        let mut text = serde_json::to_string_pretty(self)
            .map_err(|e| Error::new(format!("cannot encode the run file: {e}")))?;
        text.push('\n');
        atomic::write_atomic(path, text.as_bytes())
    }

    /// Path of the recording, resolved against the JSON's folder and confined to it
    /// (see `safe_path::resolve_ref`); `None` when the run names no recording.
    pub fn wav_path(&self, json_path: &Path) -> Option<Result<PathBuf>> {
        let r = self.recording.as_ref()?;
        Some(safe_path::resolve_ref(json_path, &r.wav, "recording"))
    }

    /// Path of the curve CSV, confined like the recording.
    pub fn csv_path(&self, json_path: &Path) -> Option<Result<PathBuf>> {
        let c = self.frf_csv.as_ref()?;
        Some(safe_path::resolve_ref(json_path, c, "curve table"))
    }
}

/// Largest run file read, bytes.
pub const MAX_RUN_FILE_BYTES: u64 = 64 << 20;
/// Most hits or modes a run file may list.
pub const MAX_HITS: usize = 100_000;

/// Path of `target` relative to the folder of `json` (falls back to `target` as given).
pub fn relative_to(json: &Path, target: &Path) -> String {
    let abs = |p: &Path| std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    let dir = abs(json.parent().unwrap_or(Path::new(".")));
    let dir = if dir.as_os_str().is_empty() {
        abs(Path::new("."))
    } else {
        dir
    };
    let t = abs(target);
    let dc: Vec<_> = dir.components().collect();
    let tc: Vec<_> = t.components().collect();
    let common = dc.iter().zip(&tc).take_while(|(a, b)| a == b).count();
    if common == 0 {
        return target.to_string_lossy().into_owned();
    }
    let mut rel = PathBuf::new();
    for _ in common..dc.len() {
        rel.push("..");
    }
    for c in &tc[common..] {
        rel.push(c.as_os_str());
    }
    rel.to_string_lossy().replace('\\', "/")
}

/// Write the FRF (or the curve modes were read from) as CSV: one row per spectral line.
/// Columns: frequency (Hz), magnitude (curve unit), magnitude in dB re 1 unit, phase
/// (degrees, where defined), coherence (where defined), hit-to-hit spread (dB, response
/// spectrum only).
pub fn write_curve_csv(path: &Path, freqs: &[f64], curve: &Curve, band: (f64, f64)) -> Result<()> {
    use std::fmt::Write as _;
    let mut w = csv::Writer::from_writer(Vec::new());
    let unit = &curve.unit;
    let header = [
        "frequency_hz".to_string(),
        format!("magnitude_{}", unit.replace(' ', "_")),
        "magnitude_db".into(),
        "phase_deg".into(),
        "coherence".into(),
        "spread_db".into(),
    ];
    let enc = |e: csv::Error| Error::new(format!("cannot encode '{}': {e}", path.display()));
    w.write_record(&header).map_err(enc)?;
    let mut bytes = w
        .into_inner()
        .map_err(|e| Error::new(format!("cannot encode '{}': {e}", path.display())))?;
    // The rows hold only numbers (nothing to quote): formatted straight into one buffer,
    // written at once.
    let mut rows = String::with_capacity(freqs.len() * 64);
    let opt = |rows: &mut String, v: Option<&Vec<f64>>, k: usize| {
        rows.push(',');
        if let Some(v) = v {
            let _ = write!(rows, "{:.6}", v[k]);
        }
    };
    for (k, &f) in freqs.iter().enumerate() {
        if f < band.0 || f > band.1 {
            continue;
        }
        let m = curve.magnitude[k];
        let _ = write!(rows, "{f:.4},{m:.6e},{:.3}", 20.0 * m.max(1e-300).log10());
        opt(&mut rows, curve.phase_deg.as_ref(), k);
        opt(&mut rows, curve.coherence.as_ref(), k);
        opt(&mut rows, curve.spread_db.as_ref(), k);
        rows.push('\n');
    }
    bytes.extend_from_slice(rows.as_bytes());
    atomic::write_atomic(path, &bytes)
}

/// Current UTC time as RFC 3339, from the system clock.
pub fn now_rfc3339() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    format_utc(secs)
}

/// Seconds since 1970 as `YYYY-MM-DDThh:mm:ssZ` (civil-from-days algorithm of
/// H. Hinnant, "chrono-Compatible Low-Level Date Algorithms").
pub fn format_utc(secs: u64) -> String {
    let days = (secs / 86_400) as i64;
    let rem = secs % 86_400;
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

/// Write the mode list (JSON) and the curve (CSV, same stem) for an analysis. The JSON
/// names its recording and CSV by paths relative to itself. With a drive in the analysis'
/// configuration, the modes carry their band verdicts and the run its drive section.
pub fn write_run_files(
    analysis: &Analysis,
    variant: Variant,
    json_path: &Path,
    recording: Option<RecordingNote<'_>>,
) -> Result<RunFile> {
    RunFiles::of(analysis, variant).write(json_path, recording)
}

/// A run's JSON and CSV content computed from an analysis (the spectra and the mode search
/// done), ready to be written elsewhere, later (the app's saver thread).
#[derive(Debug, Clone)]
pub struct RunFiles {
    run: RunFile,
    /// Frequencies and the curve for the CSV (absent before the first accepted hit).
    curve: Option<(Vec<f64>, Curve)>,
    /// Stream frames the analysis has seen (the recording's length).
    frames: u64,
}

impl RunFiles {
    /// Render the analysis' one result (computed once, see `pipeline::AnalysisResult`) into
    /// run-file content.
    pub fn of(analysis: &Analysis, variant: Variant) -> RunFiles {
        let result = analysis.result();
        let run = RunFile::from_analysis(analysis, &result, variant);
        let curve = result
            .curve
            .clone()
            .map(|c| (result.spectra.freqs.clone(), c));
        RunFiles {
            run,
            curve,
            frames: analysis.detector().position(),
        }
    }

    /// Write the JSON at `json_path` and the CSV beside it.
    pub fn write(self, json_path: &Path, recording: Option<RecordingNote<'_>>) -> Result<RunFile> {
        let mut run = self.run;
        if let Some(r) = recording {
            run.recording = Some(RecordingRef {
                wav: relative_to(json_path, r.wav),
                frames: self.frames,
                encoding: r.encoding,
                gaps: r.gaps.to_vec(),
            });
        }
        if let Some((freqs, curve)) = &self.curve {
            let csv_path = json_path.with_extension("csv");
            write_curve_csv(&csv_path, freqs, curve, run.setup.band_hz)?;
            run.frf_csv = Some(relative_to(json_path, &csv_path));
        }
        run.save(json_path)?;
        Ok(run)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates() {
        // 2000-03-01 is day 11017 since 1970-01-01 (leap-year boundary; from memory,
        // cross-checked with `date -u -d @951868800`).
        assert_eq!(format_utc(951_868_800), "2000-03-01T00:00:00Z");
        assert_eq!(format_utc(0), "1970-01-01T00:00:00Z");
        assert_eq!(format_utc(1_798_761_599), "2026-12-31T23:59:59Z");
    }

    #[test]
    fn relative_paths() {
        assert_eq!(
            relative_to(Path::new("out/a.json"), Path::new("out/a.wav")),
            "a.wav"
        );
        assert_eq!(
            relative_to(Path::new("out/sub/a.json"), Path::new("rec/a.wav")),
            "../../rec/a.wav"
        );
    }
}
