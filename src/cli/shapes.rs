//! `tapmodes shapes` (mode shapes over a plan of points), `shapes-compare` (two shape files
//! paired by frequency order and MAC) and `shapes-demo` (a multi-point test of the invented
//! TM9 frame).

use super::args::{AnalysisArgs, ChannelArgs};
use crate::error::Result;
use crate::pipeline::analyse_source;
use crate::run::compare::matching::{Candidate, MatchRules, pair_modes};
use crate::run::{FileKind, safe_path, validate};
use crate::shapes::points::{self, ShapeFile};
use crate::strip::bar::{self, TapPlan};
use clap::Args;
use std::path::{Path, PathBuf};

#[derive(Debug, Args)]
pub struct ShapesArgs {
    /// The plan: one point a line, `name | direction | recording.wav` (recordings relative to
    /// the plan; the same sensor and force channel layout at every point).
    #[arg(value_name = "PLAN.txt")]
    pub plan: PathBuf,
    /// Write the shapes (JSON).
    #[arg(long, short, value_name = "F.json")]
    pub out: Option<PathBuf>,
    /// Label of this test [default: the plan's stem].
    #[arg(long, value_name = "LABEL")]
    pub label: Option<String>,
    /// Draw each mode's deformed shape into this folder (`mode-1.svg`, ...): needs the
    /// points' coordinates in the plan (`| x, y, z` in mm) and directions x, y or z.
    #[arg(long, value_name = "DIR")]
    pub svg: Option<PathBuf>,
    #[command(flatten)]
    pub channels: ChannelArgs,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
}

#[derive(Debug, Args)]
pub struct ShapesCompareArgs {
    /// Shape files from `tapmodes shapes --out`: the baseline, then the variant.
    #[arg(value_name = "A.json")]
    pub baseline: PathBuf,
    #[arg(value_name = "B.json")]
    pub variant: PathBuf,
    /// Largest relative frequency shift of a pair, %.
    #[arg(
        long,
        value_name = "PCT",
        default_value_t = 30.0,
        allow_negative_numbers = true
    )]
    pub max_shift_pct: f64,
}

#[derive(Debug, Args)]
pub struct ShapesDemoArgs {
    /// Folder to write the plan and one recording per point into (created if missing).
    #[arg(value_name = "DIR")]
    pub dir: PathBuf,
    /// The braced variant: the twisting mode rises above the flapping mode (they swap).
    #[arg(long)]
    pub braced: bool,
}

pub fn run(a: &ShapesArgs) -> Result<()> {
    let plan = points::read_plan(&a.plan)?;
    if let Some(out) = &a.out {
        if !out
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("json"))
        {
            crate::fail!("--out must name a .json file (not '{}')", out.display());
        }
        safe_path::check_output(out, FileKind::Json, &[&a.plan])?;
    }
    if a.svg.is_some()
        && let Some(p) = crate::shapes::picture::problem(&plan)
    {
        crate::fail!("--svg: {p}");
    }
    let open = |wav: &Path| {
        let choice = a.channels.role_choice();
        let mut src = super::analyze::open_wav(wav, &a.channels, &choice)?;
        let info = crate::source::Source::info(&src).clone();
        let roles = choice.resolve(&info)?;
        let cfg = a.analysis.config()?;
        validate::check_analysis(&cfg, &info, &roles, "the command line")?;
        analyse_source(&mut src, roles, cfg, false)
    };
    let label = a
        .label
        .as_ref()
        .map(|l| validate::clean_text(l, false))
        .unwrap_or_else(|| {
            a.plan
                .file_stem()
                .map_or("shapes".into(), |s| s.to_string_lossy().into_owned())
        });
    let file = crate::shapes::plan_fit::fit_plan(&a.plan, &plan, &label, &open)?;
    print!("{}", render(&file));
    if let Some(out) = &a.out {
        file.save(out)?;
        println!("wrote {}", out.display());
    }
    if let Some(dir) = &a.svg {
        write_pictures(&file, dir)?;
    }
    Ok(())
}

/// One SVG per mode in `dir` (created if missing).
fn write_pictures(file: &ShapeFile, dir: &Path) -> Result<()> {
    std::fs::create_dir_all(dir)
        .map_err(|e| crate::error::Error::new(format!("cannot create '{}': {e}", dir.display())))?;
    for (i, m) in file.modes.iter().enumerate() {
        let title = format!(
            "{}: mode {}, {:.2} Hz, realness {:.3}",
            file.label,
            i + 1,
            m.shape.frequency_hz,
            m.shape.realness
        );
        let svg = crate::shapes::picture::shape_svg(&file.points, &m.shape, &title)?;
        let path = dir.join(format!("mode-{}.svg", i + 1));
        crate::run::atomic::write_atomic(&path, svg.as_bytes())
            .map_err(|e| e.context(format!("cannot write '{}'", path.display())))?;
        println!("wrote {}", path.display());
    }
    Ok(())
}

/// A bar of `width` characters each side of a centre line for an amplitude in -1..1.
fn bar(v: f64, width: usize) -> String {
    let n = ((v.abs().min(1.0)) * width as f64).round() as usize;
    let (l, r) = if v < 0.0 {
        (format!("{:>width$}", "#".repeat(n)), " ".repeat(width))
    } else {
        (" ".repeat(width), format!("{:<width$}", "#".repeat(n)))
    };
    format!("{l}|{r}")
}

pub fn render(f: &ShapeFile) -> String {
    let mut out = format!(
        "Shapes '{}': {} points, {} modes (shared-pole fit over all points)\n",
        f.label,
        f.points.len(),
        f.modes.len()
    );
    for (i, m) in f.modes.iter().enumerate() {
        out += &format!(
            "mode {}: {:.2} Hz, damping {:.2} % (window's share still in), fit error {:.1} %, realness {:.3}\n",
            i + 1,
            m.shape.frequency_hz,
            100.0 * m.shape.damping_ratio,
            100.0 * m.fit_error,
            m.shape.realness
        );
        for (p, v) in f.points.iter().zip(&m.shape.amplitudes) {
            let name: String = p.name.chars().take(30).collect();
            let line = format!("  {name:<30} {:<5} {v:>+6.3} {}", p.direction, bar(*v, 12));
            out += line.trim_end();
            out.push('\n');
        }
    }
    for s in &f.set_aside {
        out += &format!("set aside: {}\n", s.reason);
    }
    for n in &f.notes {
        out += &format!("note: {n}\n");
    }
    out
}

fn candidates(f: &ShapeFile) -> Vec<Candidate> {
    f.modes
        .iter()
        .map(|m| Candidate {
            frequency_hz: m.shape.frequency_hz,
            sign: None,
            magnitude: None,
            shape: Some(m.shape.amplitudes.clone()),
        })
        .collect()
}

pub fn compare_run(a: &ShapesCompareArgs) -> Result<()> {
    let base = ShapeFile::load(&a.baseline)?;
    let var = ShapeFile::load(&a.variant)?;
    if !(a.max_shift_pct.is_finite() && a.max_shift_pct > 0.0) {
        crate::fail!(
            "--max-shift-pct must be a positive number (got {})",
            a.max_shift_pct
        );
    }
    let same_points = base.points.len() == var.points.len()
        && base
            .points
            .iter()
            .zip(&var.points)
            .all(|(x, y)| x.name == y.name);
    let (mut ca, mut cb) = (candidates(&base), candidates(&var));
    if !same_points {
        eprintln!(
            "note: the two tests did not measure the same points in the same order, so shapes are not compared (pairing by frequency order only)"
        );
        for c in ca.iter_mut().chain(cb.iter_mut()) {
            c.shape = None;
        }
    }
    let rules = MatchRules {
        max_shift: a.max_shift_pct / 100.0,
        ..Default::default()
    };
    let pairs = pair_modes(&ca, &cb, &rules);
    println!(
        "Shapes compared: '{}' (base) against '{}'",
        base.label, var.label
    );
    println!("   pair  base Hz   var Hz    df %    MAC  how      conf");
    for p in &pairs {
        let (x, y) = (&base.modes[p.a].shape, &var.modes[p.b].shape);
        println!(
            "  {:>2}-{:<2} {:>8.2} {:>8.2} {:>+7.2} {:>6} {:<8} {:.2}",
            p.a + 1,
            p.b + 1,
            x.frequency_hz,
            y.frequency_hz,
            100.0 * (y.frequency_hz / x.frequency_hz - 1.0),
            p.mac.map_or("-".into(), |m| format!("{m:.3}")),
            match p.how {
                crate::run::compare::matching::How::Crossed => "crossed",
                crate::run::compare::matching::How::Pinned => "pinned",
                crate::run::compare::matching::How::InOrder => "in order",
            },
            p.confidence
        );
    }
    for (i, _) in base
        .modes
        .iter()
        .enumerate()
        .filter(|(i, _)| !pairs.iter().any(|p| p.a == *i))
    {
        println!(
            "  base mode {} ({:.2} Hz) unpaired",
            i + 1,
            base.modes[i].shape.frequency_hz
        );
    }
    for (j, _) in var
        .modes
        .iter()
        .enumerate()
        .filter(|(j, _)| !pairs.iter().any(|p| p.b == *j))
    {
        println!(
            "  variant mode {} ({:.2} Hz) unpaired",
            j + 1,
            var.modes[j].shape.frequency_hz
        );
    }
    println!(
        "Legend: MAC modal assurance criterion of the two shapes (1 same shape, 0 unrelated;\n  Allemang & Brown 1982); crossed: two modes swapped order, paired by their shapes;\n  conf relative likelihood of the pair against its best rival."
    );
    Ok(())
}

/// The TM9 frame's points for the demo (roving hammer, sensor fixed at point 1).
pub const TM9_POINTS: [&str; 8] = [
    "left front arm, motor mount",
    "left front arm, root",
    "right front arm, motor mount",
    "right front arm, root",
    "right rear arm, motor mount",
    "right rear arm, root",
    "left rear arm, motor mount",
    "left rear arm, root",
];

/// Where the demo's points are, mm (x forward, y left, z up): arms at 45 degrees, motor
/// mounts 160 mm from the centre, roots 45 mm (invented).
pub const TM9_PLACES: [[f64; 3]; 8] = [
    [113.1, 113.1, 0.0],
    [31.8, 31.8, 0.0],
    [113.1, -113.1, 0.0],
    [31.8, -31.8, 0.0],
    [-113.1, -113.1, 0.0],
    [-31.8, -31.8, 0.0],
    [-113.1, 113.1, 0.0],
    [-31.8, 31.8, 0.0],
];

/// The demo's true shapes (invented): yaw twist (the arms bend the same way round the
/// frame, so the tips alternate in z about the diagonals) and fore-aft flap (front arms
/// against rear arms).
pub const TM9_TWIST: [f64; 8] = [1.0, 0.35, -1.0, -0.35, 1.0, 0.35, -1.0, -0.35];
pub const TM9_FLAP: [f64; 8] = [1.0, 0.3, 1.0, 0.3, -0.9, -0.25, -0.9, -0.25];

pub fn demo_run(a: &ShapesDemoArgs) -> Result<()> {
    std::fs::create_dir_all(&a.dir).map_err(|e| {
        crate::error::Error::new(format!("cannot create '{}': {e}", a.dir.display()))
    })?;
    let (twist, flap) = (TM9_TWIST, TM9_FLAP);
    let (f_twist, f_flap) = if a.braced { (74.0, 70.5) } else { (68.0, 71.0) };
    let reference = 0;
    let mut plan = String::from(
        "# TM9 frame, roving hammer, sensor at point 1 (x forward, y left, z up; mm)\n# name | direction | recording | x, y, z\n",
    );
    let mut recordings = Vec::new();
    for p in 0..TM9_POINTS.len() {
        // Modal constants per unit modal mass: phi_p phi_ref (Ewins 2000, sec. 2.6).
        let modes = [
            (f_twist, twist[p] * twist[reference] * 0.05),
            (f_flap, flap[p] * flap[reference] * 0.05),
        ];
        let tap = TapPlan {
            sample_rate: 4000.0,
            taps: 5,
            spacing_s: 3.0,
            pulse_width_s: 1.5e-3,
            damping_ratio: 0.012,
            noise: 2e-4,
            seed: 90 + p as u64,
            ..TapPlan::default()
        };
        recordings.push((bar::synthesise(&modes, &tap), tap.sample_rate));
    }
    // One scale for every point, so the FRFs keep their relative levels.
    let peak = |second: bool| {
        recordings
            .iter()
            .flat_map(|(r, _)| if second { r.1.iter() } else { r.0.iter() })
            .fold(0.0f64, |m, v| m.max(v.abs()))
    };
    let gains = (0.5 / peak(false), 0.5 / peak(true));
    for (p, ((force, accel), fs)) in recordings.iter().enumerate() {
        let file = format!("p{}.wav", p + 1);
        bar::write_wav_scaled(&a.dir.join(&file), *fs, force, accel, gains)?;
        let [x, y, z] = TM9_PLACES[p];
        plan += &format!("{} | z | {file} | {x}, {y}, {z}\n", TM9_POINTS[p]);
    }
    let plan_path = a.dir.join("plan.txt");
    crate::run::atomic::write_atomic(&plan_path, plan.as_bytes())?;
    println!(
        "wrote {} and 8 recordings: TM9 frame{}, yaw twist {f_twist} Hz, fore-aft flap {f_flap} Hz",
        plan_path.display(),
        if a.braced { " (braced)" } else { "" }
    );
    Ok(())
}
