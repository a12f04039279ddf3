//! `tapmodes analyze`: a recording in, a mode list out.

use super::args::{AnalysisArgs, ChannelArgs};
use super::report;
use crate::error::Result;
use crate::pipeline::Analysis;
use crate::run::{FileKind, RunFile, Variant, safe_path, validate, write_run_files};
use crate::signal::RoleChoice;
use crate::source::Source;
use crate::source::wav::WavSource;
use clap::Args;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct AnalyzeArgs {
    /// A WAV recording (any PCM or 32-bit float WAV), or a run JSON to re-analyse with its
    /// stored settings and operator verdicts.
    #[arg(value_name = "INPUT")]
    pub input: PathBuf,
    #[command(flatten)]
    pub channels: ChannelArgs,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    #[command(flatten)]
    pub drive: super::drive_args::DriveArgs,
    /// Where to write the mode list (JSON); the FRF CSV goes beside it with the same stem
    /// [default: NAME.modes.json beside a WAV, NAME.again.json beside a run file].
    #[arg(long, short, value_name = "OUT.json", help_heading = "Outputs")]
    pub out: Option<PathBuf>,
    /// Variant label stored in the mode list [default: the input's file stem].
    #[arg(long, value_name = "LABEL", help_heading = "Outputs")]
    pub variant: Option<String>,
    /// Free-text note stored with the variant.
    #[arg(
        long,
        default_value = "",
        value_name = "TEXT",
        help_heading = "Outputs"
    )]
    pub note: String,
    /// Mass of the part as tested, in grams: stored with the variant for the mass-corrected
    /// stiffness ratio of `compare` (re-analysing a run file keeps its mass unless given).
    #[arg(long, value_name = "GRAMS", value_parser = super::args::parse_mass, help_heading = "Outputs")]
    pub mass: Option<f64>,
    /// Also print every hit with its verdict.
    #[arg(long, help_heading = "Outputs")]
    pub hits: bool,
    /// No progress line while a long file is read (it is shown only on a terminal).
    #[arg(long, short, help_heading = "Outputs")]
    pub quiet: bool,
    /// With a base channel: the mount's transmissibility in dB at HZ or over LO:HI (the
    /// motors' excitation band, say), measured and from the fitted mount model.
    #[arg(long, value_name = "HZ|LO:HI", value_parser = super::args::parse_freq_or_band, help_heading = "Outputs")]
    pub isolation: Option<(f64, f64)>,
}

/// Open a WAV with the channel options applied (scales, units, names).
pub fn open_wav(path: &Path, ch: &ChannelArgs, choice: &RoleChoice) -> Result<WavSource> {
    let mut src = WavSource::open(path)?;
    if let Some(n) = src.note() {
        eprintln!("{}", validate::clean_text(&n, false));
    }
    let roles = choice.resolve(src.info())?;
    if let (Some(f), Some(scale)) = (roles.force, ch.force_scale) {
        src.calibrate(f, ch.force_unit.as_deref().unwrap_or("N"), scale);
    } else if let (Some(f), Some(unit)) = (roles.force, &ch.force_unit) {
        src.calibrate(f, unit, 1.0);
    }
    let resp_unit = ch.response_unit.as_deref();
    for c in std::iter::once(roles.response).chain(roles.base) {
        match (ch.response_scale, resp_unit) {
            (Some(s), u) => src.calibrate(c, u.unwrap_or("g"), s),
            (None, Some(u)) => src.calibrate(c, u, 1.0),
            (None, None) => {}
        }
    }
    Ok(src)
}

pub fn run(a: &AnalyzeArgs) -> Result<()> {
    let is_json = a
        .input
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("json"));
    let out = match &a.out {
        Some(o) => {
            if !o
                .extension()
                .is_some_and(|e| e.eq_ignore_ascii_case("json"))
            {
                crate::fail!(
                    "--out names the mode list, which must end in .json (not '{}'); the curve CSV goes beside it",
                    o.display()
                );
            }
            o.clone()
        }
        None => default_out(&a.input),
    };
    let label = a.variant.as_ref().map(|v| validate::clean_text(v, false));
    let cli_note = validate::clean_text(&a.note, true);
    let mut drive = a.drive.drive()?;
    let (mut analysis, wav, mut variant, stored) = if is_json {
        let r = crate::run::reopen::reopen(&a.input)?;
        check_outputs(&out, &[&a.input, &r.wav])?;
        drive = drive.or(r.drive);
        (r.analysis, r.wav, r.variant, Some((r.encoding, r.gaps)))
    } else {
        let choice = a.channels.role_choice();
        let mut src = open_wav(&a.input, &a.channels, &choice)?;
        let roles = choice.resolve(src.info())?;
        let cfg = a.analysis.config()?;
        validate::check_analysis(&cfg, src.info(), &roles, "the command line")?;
        check_outputs(&out, &[&a.input])?;
        // Re-analysed over its own earlier run: keep the operator's verdicts, label and note.
        let earlier = earlier_run(&out, &a.input)?;
        let analysis = Analysis::new(&src.info().clone(), roles, cfg, earlier.is_some())?;
        let mut analysis = drain_shown(&mut src, analysis, a.quiet)?;
        let mut variant = Variant {
            label: stem(&a.input),
            note: String::new(),
            mass_g: None,
        };
        if let Some(run) = earlier {
            analysis.apply_verdicts(&run.hits);
            eprintln!(
                "note: '{}' was a run of this recording; its operator verdicts, label and note are kept",
                out.display()
            );
            variant = run.variant;
            drive = drive.or(run.drive.map(|d| d.description));
        }
        if let Some(l) = label.clone() {
            variant.label = l;
        }
        if !cli_note.is_empty() {
            variant.note = cli_note.clone();
        }
        (analysis, a.input.clone(), variant, None)
    };
    if a.mass.is_some() {
        variant.mass_g = a.mass;
    }
    if let Some(band) = a.isolation {
        if analysis.roles().base.is_none() {
            crate::fail!("--isolation needs a base channel (give --base-channel)");
        }
        analysis.set_isolation_band(Some(band));
    }
    if let Some(d) = &drive {
        d.check()
            .map_err(|e| e.context(format!("the drive stored in '{}'", out.display())))?;
    }
    analysis.set_drive(drive);
    // A recording made elsewhere is described as opened; a run's own recording as the run
    // described it (its encoding and lost stretches carry over).
    let (encoding, gaps) = stored.unwrap_or_else(|| {
        (
            crate::run::recording::Encoding::of_external(analysis.info()),
            Vec::new(),
        )
    });
    let note = crate::run::RecordingNote {
        wav: &wav,
        encoding,
        gaps: &gaps,
    };
    finish(&analysis, variant, &out, note, a.hits)
}

/// The JSON and the CSV beside it must not replace an input, a file of another kind or
/// anything but a regular file.
fn check_outputs(out: &Path, inputs: &[&Path]) -> Result<()> {
    safe_path::check_output(out, FileKind::Json, inputs)?;
    safe_path::check_output(&out.with_extension("csv"), FileKind::Csv, inputs)
}

/// The run already at `out`, when it is a run of `wav`; an error when `out` holds a run of
/// another recording or a JSON file that is not a run (it is not replaced).
fn earlier_run(out: &Path, wav: &Path) -> Result<Option<RunFile>> {
    if std::fs::symlink_metadata(out).is_err() || safe_path::kind_of(out).is_none() {
        return Ok(None);
    }
    let run = RunFile::load(out).map_err(|e| {
        e.context(format!(
            "'{}' exists and is not a run file this command may replace",
            out.display()
        ))
    })?;
    let same = run
        .wav_path(out)
        .and_then(|p| p.ok())
        .is_some_and(|p| same_file(&p, wav));
    if !same {
        crate::fail!(
            "'{}' holds the run of another recording; will not replace it (choose another --out)",
            out.display()
        );
    }
    Ok(Some(run))
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// Drain a WAV through an analysis with a progress line on a terminal.
fn drain_shown(src: &mut WavSource, analysis: Analysis, quiet: bool) -> Result<Analysis> {
    let mut meter = super::progress::Meter::new(src.frames(), src.frame_bytes(), quiet);
    let done = crate::pipeline::drain_with_progress(src, analysis, &mut |p| meter.update(p));
    meter.finish();
    done
}

fn finish(
    analysis: &Analysis,
    variant: Variant,
    out: &Path,
    note: crate::run::RecordingNote<'_>,
    show_hits: bool,
) -> Result<()> {
    let wav = note.wav;
    let fs = analysis.info().sample_rate;
    let hits = analysis.hits();
    if hits.is_empty() {
        crate::fail!(
            "no hit found in '{}': the trigger never fired; lower it with --trigger-noise or --trigger-level",
            wav.display()
        );
    }
    let run = write_run_files(analysis, variant, out, Some(note))?;
    if run
        .recording
        .as_ref()
        .is_some_and(|r| r.wav.starts_with("..") || Path::new(&r.wav).is_absolute())
    {
        eprintln!(
            "note: the recording is not in the folder of '{}'; re-analysing that run file needs the recording beside it",
            out.display()
        );
    }
    if let Some(m) = &run.mount {
        let model = match m.loss_factor {
            Some(eta) => format!("hysteretic, loss factor {eta:.3}"),
            None => m.model_name().to_string(),
        };
        println!(
            "mount (from the transmissibility): {:.1} Hz, damping {:.1} %{}, isolates above {:.1} Hz (model: {model}; {:.0} % unexplained)",
            m.natural_frequency_hz,
            100.0 * m.damping_ratio,
            m.second_text(),
            m.isolation_onset_hz(),
            100.0 * m.error
        );
    }
    if let Some(i) = &run.isolation {
        let db = |v: Option<f64>| v.map_or("-".to_string(), |v| format!("{v:+.1} dB"));
        println!(
            "transmissibility at {:.0}-{:.0} Hz: measured {}, mount model {}",
            i.band_hz.0,
            i.band_hz.1,
            db(i.measured_db),
            db(i.model_db)
        );
    }
    if show_hits {
        print!("{}", report::hit_lines(hits, fs));
    }
    println!(
        "{}: {} hits, {} accepted{}; modes from the {} in {:.0}-{:.0} Hz, resolution {:.3} Hz",
        run.variant.label,
        run.hits_total,
        run.hits_accepted,
        match report::rejection_summary(hits) {
            s if s.is_empty() => String::new(),
            s => format!(" (rejected: {s})"),
        },
        run.setup.basis.label(),
        run.setup.band_hz.0,
        run.setup.band_hz.1,
        run.setup.fft.resolution_hz
    );
    print!("{}", report::mode_table(&run.modes));
    if let Some(d) = &run.drive {
        print!("{}", crate::drive::report::summary(d, &run.modes));
    }
    for n in &run.notes {
        println!("note: {n}");
    }
    println!("wrote {}", out.display());
    if run.hits_accepted == 0 {
        crate::fail!(
            "none of the {} hits passed the checks ({}); see the reasons with --hits",
            hits.len(),
            report::rejection_summary(hits)
        );
    }
    Ok(())
}

fn stem(p: &Path) -> String {
    p.file_stem()
        .map_or("run".into(), |s| s.to_string_lossy().into_owned())
}

/// `bench.wav` -> `bench.modes.json`; a run file is never overwritten by default:
/// `bench.modes.json` -> `bench.again.json`, or `bench.again-2.json` and on when taken.
fn default_out(input: &Path) -> PathBuf {
    let s = stem(input);
    let dir = match input.parent() {
        Some(d) => d.to_path_buf(),
        None => PathBuf::new(),
    };
    let is_json = input
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("json"));
    let again = |base: &str| safe_path::free_name(&dir, &format!("{base}.again"), "json");
    match s.strip_suffix(".modes") {
        Some(base) if is_json => again(base),
        None if is_json => again(&s),
        _ => input.with_file_name(format!("{s}.modes.json")),
    }
}
