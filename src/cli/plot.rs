//! `tapmodes plot`: a picture (SVG or PNG) of one or more runs, and the mode lists as CSV.

use crate::error::{Error, Result};
use crate::plot::build::{bands_of, mount_trace, trace_from_run};
use crate::plot::{Figure, PictureKind, PlotOptions};
use crate::run::curve_read::read_curve_csv;
use crate::run::{FileKind, RunFile, safe_path};
use clap::Args;
use std::path::{Path, PathBuf};

/// Stacked FRF magnitude, phase and coherence of every run (or the response spectrum with
/// its hit-to-hit spread), mode markers, excitation bands and soft mounts. Traces differ by
/// line style as well as colour.
#[derive(Debug, Args)]
pub struct PlotArgs {
    /// Run files (JSON); their curve tables (CSV) are read from beside them.
    #[arg(required = true, value_name = "RUN.json")]
    pub runs: Vec<PathBuf>,
    /// The picture to write: .svg, or .png (rendered from the SVG; needs a system font).
    #[arg(long, short, value_name = "FILE.svg|FILE.png")]
    pub out: PathBuf,
    #[command(flatten)]
    pub look: LookArgs,
    /// Also write the runs' mode lists as one CSV table (units in the header).
    #[arg(long, value_name = "FILE.csv")]
    pub modes_csv: Option<PathBuf>,
    /// Shade the bands of this drive [default: the bands stored in the runs].
    #[command(flatten)]
    pub drive: super::drive_args::DriveArgs,
}

/// How the plot looks (shared with `report`).
#[derive(Debug, Args)]
pub struct LookArgs {
    /// Magnitude on a linear scale in the curve's unit [default: dB].
    #[arg(long)]
    pub linear: bool,
    /// Logarithmic frequency axis [default: linear].
    #[arg(long)]
    pub log_freq: bool,
    /// Frequency range to show, LO:HI in Hz [default: the curves' range].
    #[arg(long, value_name = "LO:HI", value_parser = super::args::parse_closed_band)]
    pub freq_range: Option<(f64, f64)>,
    /// Picture width in pixels (400 to 4000).
    #[arg(long, default_value_t = 1000, value_parser = clap::value_parser!(u32).range(400..=4000))]
    pub width: u32,
    /// Picture height in pixels, 300 to 6000 [default: from the panels shown].
    #[arg(long, value_parser = clap::value_parser!(u32).range(300..=6000))]
    pub height: Option<u32>,
    /// Draw soft mounts from their fitted model alone, without re-reading the recordings
    /// for the measured transmissibility.
    #[arg(long)]
    pub fit_only: bool,
}

impl LookArgs {
    pub fn options(&self) -> PlotOptions {
        PlotOptions {
            width: self.width,
            height: self.height.unwrap_or(0),
            db: !self.linear,
            log_frequency: self.log_freq,
            range_hz: self.freq_range,
        }
    }
}

/// Runs loaded with the files they reference (for the overwrite checks).
pub struct Loaded {
    pub runs: Vec<(String, RunFile)>,
    pub inputs: Vec<PathBuf>,
    pub figure: Figure,
}

/// Load the runs and make their figure. A run without a curve table, or whose table cannot
/// be read, is named in the figure's notes (and on stderr) and drawn by its mode list alone
/// in the tables; a soft mount's measured transmissibility comes from re-analysing its
/// recording unless `fit_only`. With a drive, every run is judged against it
/// (`drive::rejudge`): its modes' verdicts and its drive section are the given drive's.
pub fn load(
    paths: &[PathBuf],
    fit_only: bool,
    drive: Option<crate::drive::Drive>,
) -> Result<Loaded> {
    let mut runs = Vec::new();
    let mut inputs: Vec<PathBuf> = Vec::new();
    let mut fig = Figure::default();
    for p in paths {
        let mut run = RunFile::load(p)?;
        if let Some(d) = &drive
            && let Some(n) = crate::drive::rejudge(&mut run, d)
        {
            fig.notes.push(n);
        }
        let shown = p.display().to_string();
        inputs.push(p.clone());
        let label = run.variant.label.clone();
        match run.csv_path(p) {
            None => fig.notes.push(format!(
                "{label} ('{shown}') is not drawn: the run has no curve table"
            )),
            Some(Err(e)) => fig
                .notes
                .push(format!("{label} ('{shown}') is not drawn: {e}")),
            Some(Ok(csv)) => {
                inputs.push(csv.clone());
                match read_curve_csv(&csv) {
                    Ok(c) => fig.traces.push(trace_from_run(&run, &c)),
                    Err(e) => fig
                        .notes
                        .push(format!("{label} ('{shown}') is not drawn: {e}")),
                }
            }
        }
        if let Some(Ok(w)) = run.wav_path(p) {
            inputs.push(w);
        }
        if run.mount.is_some() {
            let measured = if fit_only {
                None
            } else {
                match crate::run::reopen::reanalyse(p) {
                    Ok((a, ..)) => {
                        let r = a.result();
                        r.spectra
                            .curve(crate::spectra::Basis::Transmissibility)
                            .map(|c| (r.spectra.freqs.clone(), c))
                    }
                    Err(e) => {
                        fig.notes.push(format!(
                            "{label}: the mount is drawn from its fit alone ({e})"
                        ));
                        None
                    }
                }
            };
            let m = mount_trace(
                &label,
                &run,
                measured.as_ref().map(|(f, c)| (f.as_slice(), c)),
            );
            fig.mounts.extend(m);
        }
        runs.push((shown, run));
    }
    fig.bands = match drive {
        Some(d) => d.bands().bands,
        None => bands_of(runs.iter().map(|r| &r.1)),
    };
    for n in &fig.notes {
        eprintln!("note: {n}");
    }
    Ok(Loaded {
        runs,
        inputs,
        figure: fig,
    })
}

/// May `out` be written as a picture or page? Never over an input, a link, a non-file, or a
/// file that holds something else (a WAV, a JSON, a table, bytes of another picture kind).
pub fn check_picture_out(out: &Path, inputs: &[PathBuf], what: &str, head: &[&[u8]]) -> Result<()> {
    let refs: Vec<&Path> = inputs.iter().map(|p| p.as_path()).collect();
    let kind = safe_path::kind_of(out);
    safe_path::check_output(out, kind.unwrap_or(FileKind::Other), &refs)?;
    if kind.is_some() {
        let mut buf = [0u8; 64];
        let n = std::fs::File::open(out)
            .and_then(|mut f| std::io::Read::read(&mut f, &mut buf))
            .unwrap_or(0);
        let start = buf[..n]
            .iter()
            .position(|b| !b.is_ascii_whitespace())
            .map_or(&buf[..0], |i| &buf[i..n]);
        if !head.iter().any(|h| start.starts_with(h)) {
            crate::fail!(
                "'{}' exists and does not hold {what}; will not replace it",
                out.display()
            );
        }
    }
    Ok(())
}

pub fn run(a: &PlotArgs) -> Result<()> {
    let kind = PictureKind::of(&a.out)?;
    let drive = a.drive.drive()?;
    let loaded = load(&a.runs, a.look.fit_only, drive)?;
    match kind {
        PictureKind::Svg => check_picture_out(
            &a.out,
            &loaded.inputs,
            "an SVG picture",
            &[b"<svg", b"<?xml"],
        )?,
        PictureKind::Png => {
            check_picture_out(&a.out, &loaded.inputs, "a PNG picture", &[b"\x89PNG"])?
        }
    }
    if let Some(m) = &a.modes_csv {
        if !m.extension().is_some_and(|e| e.eq_ignore_ascii_case("csv")) {
            crate::fail!("--modes-csv must end in .csv (not '{}')", m.display());
        }
        if same_path(m, &a.out) {
            crate::fail!("--modes-csv and --out name the same file '{}'", m.display());
        }
        let refs: Vec<&Path> = loaded.inputs.iter().map(|p| p.as_path()).collect();
        safe_path::check_output(m, FileKind::Csv, &refs)?;
    }
    // Everything is made and every folder checked before anything is written: a failure
    // leaves no half of the outputs behind.
    let modes_text = match &a.modes_csv {
        Some(_) => Some(crate::run::modes_csv::modes_csv(&loaded.runs)?),
        None => None,
    };
    let (r, bytes) = crate::plot::picture_bytes(&loaded.figure, &a.look.options(), kind)?;
    check_folder(&a.out)?;
    if let Some(m) = &a.modes_csv {
        check_folder(m)?;
    }
    crate::run::atomic::write_atomic(&a.out, &bytes)?;
    println!(
        "wrote {} ({}x{} px, {} trace{}, {} mount{}, {} band{})",
        a.out.display(),
        r.width,
        r.height,
        loaded.figure.traces.len(),
        if loaded.figure.traces.len() == 1 {
            ""
        } else {
            "s"
        },
        loaded.figure.mounts.len(),
        if loaded.figure.mounts.len() == 1 {
            ""
        } else {
            "s"
        },
        loaded.figure.bands.len(),
        if loaded.figure.bands.len() == 1 {
            ""
        } else {
            "s"
        },
    );
    if let (Some(m), Some(text)) = (&a.modes_csv, &modes_text) {
        crate::run::atomic::write_atomic(m, text.as_bytes())?;
        println!("wrote {}", m.display());
    }
    Ok(())
}

/// The folder an output goes into must exist (checked before any output is written).
pub fn check_folder(out: &Path) -> Result<()> {
    let dir = match out.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    if !dir.is_dir() {
        crate::fail!(
            "cannot write '{}': the folder '{}' does not exist",
            out.display(),
            dir.display()
        );
    }
    Ok(())
}

fn same_path(a: &Path, b: &Path) -> bool {
    let abs = |p: &Path| std::path::absolute(p).unwrap_or_else(|_| p.to_path_buf());
    abs(a) == abs(b)
}

/// Figure notes as an error when nothing at all can be drawn.
pub fn nothing_drawn(fig: &Figure) -> Option<Error> {
    (fig.traces.is_empty() && fig.mounts.is_empty())
        .then(|| Error::new(format!("nothing to plot: {}", fig.notes.join("; "))))
}
