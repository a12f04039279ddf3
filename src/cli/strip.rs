//! `tapmodes strip` (E and G of a free strip), `strip-compare` (strips side by side) and
//! `strip-demo` (taps on a simulated free-free bar of known E and G).

use super::args::{AnalysisArgs, ChannelArgs};
use crate::error::Result;
use crate::modes::Mode;
use crate::pipeline::analyse_source;
use crate::run::{FileKind, safe_path, validate};
use crate::strip::{
    self, Frequency, StripResult, Tolerances,
    bar::{self, Bar, TapPlan},
    compare::{self, StripFile},
    formulas::Strip,
    identify::{self, Hints, Identification},
};
use clap::Args;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
#[command(after_long_help = strip::GUIDE)]
pub struct StripArgs {
    /// A WAV of taps on the free strip (force and response channels, or response only).
    #[arg(value_name = "IN.wav", required_unless_present = "guide")]
    pub input: Option<PathBuf>,
    /// Print where to support, tap and place the sensor for each mode, and stop.
    #[arg(long)]
    pub guide: bool,
    /// Strip length, mm.
    #[arg(
        long,
        value_name = "MM",
        required_unless_present = "guide",
        allow_negative_numbers = true
    )]
    pub length_mm: Option<f64>,
    /// Strip width, mm.
    #[arg(
        long,
        value_name = "MM",
        required_unless_present = "guide",
        allow_negative_numbers = true
    )]
    pub width_mm: Option<f64>,
    /// Strip thickness (the direction it bends in), mm.
    #[arg(
        long,
        value_name = "MM",
        required_unless_present = "guide",
        allow_negative_numbers = true
    )]
    pub thickness_mm: Option<f64>,
    /// Strip mass, g.
    #[arg(
        long,
        value_name = "G",
        required_unless_present = "guide",
        allow_negative_numbers = true
    )]
    pub mass_g: Option<f64>,
    /// Standard uncertainty of the length, mm (a steel rule).
    #[arg(long, value_name = "MM", default_value_t = Tolerances::DEFAULT_MM_G[0], allow_negative_numbers = true)]
    pub length_tol_mm: f64,
    /// Standard uncertainty of the width, mm (calipers).
    #[arg(long, value_name = "MM", default_value_t = Tolerances::DEFAULT_MM_G[1], allow_negative_numbers = true)]
    pub width_tol_mm: f64,
    /// Standard uncertainty of the thickness, mm (a micrometer).
    #[arg(long, value_name = "MM", default_value_t = Tolerances::DEFAULT_MM_G[2], allow_negative_numbers = true)]
    pub thickness_tol_mm: f64,
    /// Standard uncertainty of the mass, g.
    #[arg(long, value_name = "G", default_value_t = Tolerances::DEFAULT_MM_G[3], allow_negative_numbers = true)]
    pub mass_tol_g: f64,
    /// Poisson's ratio put into the flexural correction T1 [default: 0.3]; with --isotropic
    /// the starting value of the iteration. Its effect on a thin strip is far below 0.1 %
    /// (printed for every run).
    #[arg(long, value_name = "NU", allow_negative_numbers = true)]
    pub poisson: Option<f64>,
    /// The strip is an isotropic material (a metal, an unfilled plastic): only then is
    /// E/(2G) - 1 reported as Poisson's ratio (ASTM E1876) and used in T1. Laminates and
    /// fibre layups are not isotropic: E/G is reported instead.
    #[arg(long)]
    pub isotropic: bool,
    /// A second recording with the same sensor and the hammer on the other corner of the
    /// same end: flexural modes keep their residue sign, torsional modes flip it.
    #[arg(long, value_name = "IN2.wav")]
    pub other_corner: Option<PathBuf>,
    /// Take the mode nearest this frequency for the first flexural mode.
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
    pub flexural_hz: Option<f64>,
    /// Take the mode nearest this frequency for the first torsional mode.
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
    pub torsional_hz: Option<f64>,
    /// Write E, G, their uncertainties and the modes to this JSON file.
    #[arg(long, short, value_name = "F.json")]
    pub out: Option<PathBuf>,
    /// Label of the strip in the file and in `strip-compare` [default: the input's stem].
    #[arg(long, value_name = "LABEL")]
    pub label: Option<String>,
    #[command(flatten)]
    pub channels: ChannelArgs,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
}

#[derive(Debug, Args)]
pub struct StripCompareArgs {
    /// Strip files written by `tapmodes strip --out`; the first is the baseline.
    #[arg(value_name = "STRIP.json", num_args = 2.., required = true)]
    pub files: Vec<PathBuf>,
}

#[derive(Debug, Args)]
pub struct StripDemoArgs {
    /// Where to write the recording (2 channels: force N, acceleration m/s^2, 32-bit float).
    #[arg(value_name = "OUT.wav")]
    pub out: PathBuf,
    #[arg(
        long,
        value_name = "MM",
        default_value_t = 180.0,
        allow_negative_numbers = true
    )]
    pub length_mm: f64,
    #[arg(
        long,
        value_name = "MM",
        default_value_t = 20.0,
        allow_negative_numbers = true
    )]
    pub width_mm: f64,
    #[arg(
        long,
        value_name = "MM",
        default_value_t = 2.0,
        allow_negative_numbers = true
    )]
    pub thickness_mm: f64,
    /// Density, kg/m^3.
    #[arg(
        long,
        value_name = "KG/M3",
        default_value_t = 1550.0,
        allow_negative_numbers = true
    )]
    pub density: f64,
    /// Young's modulus along the length, GPa.
    #[arg(
        long,
        value_name = "GPA",
        default_value_t = 45.0,
        allow_negative_numbers = true
    )]
    pub e_gpa: f64,
    /// Shear modulus, GPa.
    #[arg(
        long,
        value_name = "GPA",
        default_value_t = 3.5,
        allow_negative_numbers = true
    )]
    pub g_gpa: f64,
    /// Tap the other corner of the far end (the second recording of the corner sign test).
    #[arg(long)]
    pub other_corner: bool,
    /// Number of taps.
    #[arg(long, default_value_t = 6)]
    pub taps: usize,
    /// Noise seed.
    #[arg(long, default_value_t = 16)]
    pub seed: u64,
}

fn positive(name: &str, v: Option<f64>) -> Result<f64> {
    match v {
        Some(v) if v.is_finite() && v > 0.0 => Ok(v),
        Some(v) => crate::fail!(
            "--{name} must be a positive number (got {})",
            crate::strip::formulas::show(v)
        ),
        None => crate::fail!("--{name} is required"),
    }
}

/// Analyse one recording through the pipeline and return its modes.
fn modes_of(path: &Path, a: &StripArgs) -> Result<(Vec<Mode>, bool, Vec<String>)> {
    let choice = a.channels.role_choice();
    let mut src = super::analyze::open_wav(path, &a.channels, &choice)?;
    let roles = choice.resolve(crate::source::Source::info(&src))?;
    let cfg = a.analysis.config()?;
    validate::check_analysis(
        &cfg,
        crate::source::Source::info(&src),
        &roles,
        "the command line",
    )?;
    let analysis = analyse_source(&mut src, roles, cfg, false)?;
    let result = analysis.result();
    if analysis.accepted() == 0 {
        crate::fail!(
            "no tap in '{}' was accepted, so there are no modes (see `tapmodes analyze --hits`)",
            path.display()
        );
    }
    Ok((
        result.modes().to_vec(),
        roles.force.is_some(),
        result.notes.clone(),
    ))
}

pub fn run(a: &StripArgs) -> Result<()> {
    if a.guide {
        println!("{}", strip::GUIDE);
        return Ok(());
    }
    let input = a
        .input
        .as_ref()
        .expect("clap requires the input without --guide");
    let strip = Strip::from_mm_g(
        positive("length-mm", a.length_mm)?,
        positive("width-mm", a.width_mm)?,
        positive("thickness-mm", a.thickness_mm)?,
        positive("mass-g", a.mass_g)?,
    );
    if let Some(p) = strip.problem() {
        crate::fail!("{p}");
    }
    let tol = Tolerances::from_mm_g(
        a.length_tol_mm,
        a.width_tol_mm,
        a.thickness_tol_mm,
        a.mass_tol_g,
    );
    if let Some(p) = tol.problem() {
        crate::fail!("{p}");
    }
    if let Some(nu) = a.poisson
        && !(nu.is_finite() && (-1.0..0.5).contains(&nu))
    {
        crate::fail!("--poisson must lie between -1 and 0.5 (got {nu})");
    }
    for (name, v) in [
        ("flexural-hz", a.flexural_hz),
        ("torsional-hz", a.torsional_hz),
    ] {
        if let Some(v) = v {
            positive(name, Some(v))?;
        }
    }
    if let Some(out) = &a.out {
        if !out
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("json"))
        {
            crate::fail!("--out must name a .json file (not '{}')", out.display());
        }
        let mut inputs: Vec<&Path> = vec![input];
        if let Some(o) = &a.other_corner {
            inputs.push(o);
        }
        safe_path::check_output(out, FileKind::Json, &inputs)?;
    }
    let (modes, has_force, analysis_notes) = modes_of(input, a)?;
    let corners = match &a.other_corner {
        Some(path) => {
            if !has_force {
                crate::fail!(
                    "--other-corner compares residue signs, which needs a force channel (an FRF); without one, leave it out and the modes are told apart by frequency ratios"
                );
            }
            let (second, _, _) = modes_of(path, a)?;
            Some(identify::corner_agreement(&modes, &second))
        }
        None => None,
    };
    let hints = Hints {
        flexural_hz: a.flexural_hz,
        torsional_hz: a.torsional_hz,
    };
    let id = identify::identify(&modes, &strip, hints, corners.as_deref())?;
    let (ff, note_f) = Frequency::of(&modes, id.flexural);
    let (ft, note_t) = Frequency::of(&modes, id.torsional);
    let poisson = strip::PoissonInput::new(a.poisson, a.isotropic);
    let mut result = strip::evaluate(&strip, &tol, ff, ft, poisson)?;
    result.notes.extend(note_f);
    result.notes.extend(note_t);
    let label = a
        .label
        .as_ref()
        .map(|l| validate::clean_text(l, false))
        .unwrap_or_else(|| {
            input
                .file_stem()
                .map_or("strip".into(), |s| s.to_string_lossy().into_owned())
        });
    print!(
        "{}",
        render(&label, &modes, &id, corners.as_deref(), &result)
    );
    for n in &analysis_notes {
        println!("note (analysis): {n}");
    }
    if let Some(out) = &a.out {
        let mut notes = id.notes.clone();
        notes.extend(result.notes.iter().cloned());
        notes.extend(analysis_notes);
        let file = StripFile {
            kind: compare::KIND.into(),
            schema_version: compare::SCHEMA_VERSION,
            tool_version: env!("CARGO_PKG_VERSION").into(),
            created_utc: crate::run::now_rfc3339(),
            label,
            recording: input.display().to_string(),
            other_corner: a.other_corner.as_ref().map(|p| p.display().to_string()),
            length_mm: strip.length_m * 1e3,
            width_mm: strip.width_m * 1e3,
            thickness_mm: strip.thickness_m * 1e3,
            mass_g: strip.mass_kg * 1e3,
            density_kg_m3: strip.density(),
            youngs_modulus_pa: result.youngs.value_pa,
            youngs_modulus_uncertainty_pa: result.youngs.expanded_uncertainty_pa,
            shear_modulus_pa: result.shear.value_pa,
            shear_modulus_uncertainty_pa: result.shear.expanded_uncertainty_pa,
            poisson_ratio: result.poisson_ratio,
            poisson_ratio_reason: result.poisson_ratio_reason.clone(),
            result,
            mode_roles: id.roles.clone(),
            notes,
            modes,
        };
        file.save(out)?;
        println!("wrote {}", out.display());
    }
    Ok(())
}

fn budget_line(m: &strip::Modulus) -> String {
    let mut parts: Vec<_> = m.budget.iter().filter(|(_, s)| *s >= 0.005).collect();
    parts.sort_by(|a, b| b.1.total_cmp(&a.1));
    parts
        .iter()
        .map(|(n, s)| format!("{n} {:.0} %", 100.0 * s))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The printed report.
pub fn render(
    label: &str,
    modes: &[Mode],
    id: &Identification,
    corners: Option<&[Option<bool>]>,
    r: &StripResult,
) -> String {
    let mut out = format!(
        "Strip '{label}': {:.2} x {:.2} x {:.3} mm, {:.3} g ({:.0} kg/m^3)\n",
        r.strip.length_m * 1e3,
        r.strip.width_m * 1e3,
        r.strip.thickness_m * 1e3,
        r.strip.mass_kg * 1e3,
        r.strip.density()
    );
    out += "  mode  freq Hz   +-u Hz  corners  taken for\n";
    for (i, m) in modes.iter().enumerate() {
        let u = m
            .uncertainty
            .as_ref()
            .filter(|u| u.hits >= 2)
            .map_or("-".to_string(), |u| {
                format!("{:.3}", u.frequency_hz.std_error(u.hits))
            });
        let c = match corners.map(|c| c[i]) {
            None => "",
            Some(None) => "?",
            Some(Some(true)) => "same",
            Some(Some(false)) => "flip",
        };
        out += &format!(
            "  {:>4} {:>8.1} {:>8} {:>8}  {}\n",
            i + 1,
            m.frequency_hz,
            u,
            c,
            id.roles[i]
        );
    }
    for n in &id.notes {
        out += &format!("  {n}\n");
    }
    out += &format!(
        "Young's modulus E = {:.3} GPa +- {:.3} GPa (k = 2)   [T1 = {:.5}, Poisson's ratio in T1 {:.3}]\n",
        r.youngs.value_pa / 1e9,
        r.youngs.expanded_uncertainty_pa / 1e9,
        r.t1,
        r.poisson_in_t1
    );
    out += &format!("  uncertainty from: {}\n", budget_line(&r.youngs));
    out += &format!(
        "Shear modulus   G = {:.3} GPa +- {:.3} GPa (k = 2)   [R = {:.4}]\n",
        r.shear.value_pa / 1e9,
        r.shear.expanded_uncertainty_pa / 1e9,
        r.r
    );
    out += &format!("  uncertainty from: {}\n", budget_line(&r.shear));
    match r.poisson_ratio {
        Some(mu) => {
            out += &format!(
                "Poisson's ratio nu = {mu:.3} (E/(2G) - 1, the strip declared isotropic)   E/G = {:.2}\n",
                r.e_over_g
            )
        }
        None => {
            out += &format!(
                "E/G = {:.2} (no Poisson's ratio: see the note)\n",
                r.e_over_g
            )
        }
    }
    for n in &r.notes {
        out += &format!("note: {n}\n");
    }
    out += "Method: ASTM E1876-15 rectangular-bar formulas (Eq. 1-2 and 10-11 as recalled from memory).\n";
    out
}

pub fn compare_run(a: &StripCompareArgs) -> Result<()> {
    let strips = a
        .files
        .iter()
        .map(|p| StripFile::load(p))
        .collect::<Result<Vec<_>>>()?;
    print!("{}", compare::render(&strips));
    Ok(())
}

pub fn demo_run(a: &StripDemoArgs) -> Result<()> {
    for (name, v) in [
        ("length-mm", a.length_mm),
        ("width-mm", a.width_mm),
        ("thickness-mm", a.thickness_mm),
        ("density", a.density),
        ("e-gpa", a.e_gpa),
        ("g-gpa", a.g_gpa),
    ] {
        positive(name, Some(v))?;
    }
    if a.taps == 0 {
        crate::fail!("--taps must be at least 1");
    }
    if !a
        .out
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("wav"))
    {
        crate::fail!("the recording must end in .wav (not '{}')", a.out.display());
    }
    safe_path::check_output(&a.out, FileKind::Wav, &[])?;
    let b = Bar {
        length_m: a.length_mm * 1e-3,
        width_m: a.width_mm * 1e-3,
        thickness_m: a.thickness_mm * 1e-3,
        density: a.density,
        youngs_pa: a.e_gpa * 1e9,
        shear_pa: a.g_gpa * 1e9,
    };
    if let Some(p) =
        Strip::from_mm_g(a.length_mm, a.width_mm, a.thickness_mm, b.mass_kg() * 1e3).problem()
    {
        crate::fail!("{p}");
    }
    let half = b.width_m / 2.0;
    let tap = (1.0, if a.other_corner { -half } else { half });
    let modes = b.modes_for(tap, (0.0, half));
    let plan = TapPlan {
        taps: a.taps,
        seed: a.seed,
        ..TapPlan::default()
    };
    let (force, accel) = bar::synthesise(&modes, &plan);
    bar::write_wav(&a.out, plan.sample_rate, &force, &accel)?;
    println!(
        "wrote {} ({} taps): free-free strip {:.1} x {:.2} x {:.3} mm, {:.3} g, E {} GPa, G {} GPa",
        a.out.display(),
        a.taps,
        a.length_mm,
        a.width_mm,
        a.thickness_mm,
        b.mass_kg() * 1e3,
        a.e_gpa,
        a.g_gpa
    );
    println!(
        "  true frequencies: flexural {:.2}, {:.2}, {:.2} Hz; torsional {:.2}, {:.2} Hz",
        b.flexural_hz(1),
        b.flexural_hz(2),
        b.flexural_hz(3),
        b.torsional_hz(1),
        b.torsional_hz(2)
    );
    Ok(())
}
