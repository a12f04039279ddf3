//! The app's strip test and point walk: screens at 80x24 and 160x48, the walk's moves
//! (keep and go on, back, take again, the refusal to write over a recording), the walk end
//! to end on the simulated TM9 points, and bad plans refused before the terminal is used.

use std::path::{Path, PathBuf};
use tapmodes::error::Result;
use tapmodes::shapes::mac;
use tapmodes::shapes::points::ShapeFile;
use tapmodes::signal::{Block, StreamInfo};
use tapmodes::source::Source;
use tapmodes::source::wav::WavSource;
use tapmodes::strip::session::StripSetup;
use tapmodes::tui::task::{Fit, Task, Walk};
use tapmodes::tui::{App, Launch};

/// Several WAVs played one after the other as one stream (the points of a walk, tapped in
/// turn with the sensor left in place).
struct Chain {
    parts: Vec<WavSource>,
    at: usize,
    offset: u64,
    info: StreamInfo,
}

impl Chain {
    fn open(paths: &[PathBuf]) -> (Chain, Vec<f64>) {
        let parts: Vec<WavSource> = paths.iter().map(|p| WavSource::open(p).unwrap()).collect();
        let info = parts[0].info().clone();
        let secs = parts
            .iter()
            .map(|p| p.frames() as f64 / info.sample_rate)
            .collect();
        (
            Chain {
                parts,
                at: 0,
                offset: 0,
                info,
            },
            secs,
        )
    }
}

impl Source for Chain {
    fn info(&self) -> &StreamInfo {
        &self.info
    }

    fn next_block(&mut self) -> Result<Option<Block>> {
        while self.at < self.parts.len() {
            if let Some(mut b) = self.parts[self.at].next_block()? {
                b.start += self.offset;
                return Ok(Some(b));
            }
            self.offset += self.parts[self.at].frames();
            self.at += 1;
        }
        Ok(None)
    }
}

fn launch(source: Box<dyn Source>, dir: &Path) -> Launch {
    let roles = tapmodes::signal::RoleChoice::default()
        .resolve(source.info())
        .unwrap();
    Launch {
        source,
        roles,
        config: tapmodes::pipeline::AnalysisConfig::default(),
        out_dir: dir.to_path_buf(),
        variant: "strip".into(),
        auto_tap_s: None,
        demo: false,
        compare_with: Vec::new(),
        drive: None,
    }
}

fn walk(app: &App) -> &Walk {
    match &app.model.task {
        Task::Walk(w) => w,
        _ => panic!("not a walk"),
    }
}

fn flat(s: &str) -> String {
    s.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// A strip tapped on a simulated free-free bar (`strip-demo`, E 45 GPa, G 3.5 GPa): the
/// task line says where to tap at both sizes; once taps are kept the panel shows the same
/// E and G as `tapmodes strip` (README example: 45.043 GPa, 3.477 GPa), and a save writes
/// the strip file beside the run files.
#[test]
fn strip_test_shows_the_guide_then_e_and_g_and_saves_the_strip_file() {
    let dir = crate::common::temp_dir("tui-strip");
    let wav = dir.join("s.wav");
    let (code, _, err) = crate::common::tapmodes(&["strip-demo", wav.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    let setup = StripSetup::from_mm_g(180.0, 20.0, 2.0, 11.16).unwrap();
    let out = dir.join("runs");
    let src = WavSource::open(&wav).unwrap();
    let mut app = App::headless_with(launch(Box::new(src), &out), Task::Strip(setup)).unwrap();
    // Before any tap: the guide, at both sizes.
    let small = app.screen(80, 24);
    assert!(small.contains("E: tap mid-face"), "{small}");
    assert!(small.contains("G: tap corner"), "{small}");
    let large = app.screen(160, 48);
    assert!(large.contains("Where to tap"), "{large}");
    assert!(large.contains("E and G show once a tap is kept"), "{large}");
    app.pump(100_000);
    let small = flat(&app.screen(80, 24));
    assert!(small.contains("E 45.04 GPa +- 1.56"), "{small}");
    assert!(small.contains("G 3.477 GPa +- 0.104"), "{small}");
    assert!(small.contains("first flexural (E)"), "{small}");
    assert!(small.contains("first torsional (G)"), "{small}");
    assert!(
        small.contains("s save") && small.contains("? help"),
        "{small}"
    );
    let large = flat(&app.screen(160, 48));
    assert!(large.contains("E 45.04 GPa"), "{large}");
    assert!(
        large.contains("sensor at one end on the centre line"),
        "{large}"
    );
    assert!(large.contains("Where to tap"), "{large}");
    app.press('s');
    let strip = tapmodes::strip::compare::StripFile::load(&out.join("strip.strip.json")).unwrap();
    assert!((strip.youngs_modulus_pa / 45.0e9 - 1.0).abs() < 0.005);
    assert_eq!(strip.recording, "strip.wav");
    assert!(out.join("strip.json").is_file());
    // The run picker offers runs only, not the strip file.
    let listed = tapmodes::tui::app::list_runs(&out, &[]);
    assert_eq!(listed, vec![out.join("strip.json")]);
    app.shutdown();
}

/// A plan of three points on the simulated arm.
fn three_points(dir: &Path) -> PathBuf {
    std::fs::create_dir_all(dir).unwrap();
    let plan = dir.join("plan.txt");
    std::fs::write(
        &plan,
        "# test plan\nleft arm tip | z | p1.wav\nleft arm root | z | p2.wav\nright arm tip | y | p3.wav\n",
    )
    .unwrap();
    plan
}

fn demo_walk(dir: &Path) -> App {
    let plan = three_points(dir);
    let sim =
        Launch::simulated("tm9-arm-solid", 3, Some(120.0), false, false, dir.join("x")).unwrap();
    App::headless_with(sim, Task::Walk(Walk::load(&plan).unwrap())).unwrap()
}

/// Tap (demo) `n` times, after a second of quiet for the trigger's noise floor, each
/// record let run out.
fn taps(app: &mut App, n: usize) {
    app.pump_seconds(1.0);
    for _ in 0..n {
        app.press(' ');
        app.pump_seconds(3.0);
    }
}

#[test]
fn the_walk_prompts_for_each_point_at_both_sizes() {
    let dir = crate::common::temp_dir("tui-walk-prompt");
    let app = demo_walk(&dir);
    for (w, h) in [(80, 24), (160, 48)] {
        let s = app.screen(w, h);
        assert!(s.contains("point 1 of 3: left arm tip (z)"), "{w}x{h}\n{s}");
        assert!(s.contains("] keep point"), "{w}x{h}\n{s}");
        assert!(s.contains("? help"), "{w}x{h}\n{s}");
    }
    assert!(app.screen(160, 48).contains("Points 0 of 3 recorded"));
}

/// `]` keeps the take as the plan's recording (p1.wav + JSON + CSV, the take's files gone)
/// and opens the next point; `[` goes back (asking first when the take has taps); `r` takes
/// a point again; a point whose recording exists is refused, the taps going on.
#[test]
fn the_walk_keeps_goes_back_retakes_and_never_overwrites() {
    let dir = crate::common::temp_dir("tui-walk-moves");
    let mut app = demo_walk(&dir);
    app.press(']');
    assert!(
        app.model
            .notice
            .as_deref()
            .unwrap_or("")
            .contains("no accepted tap"),
        "{:?}",
        app.model.notice
    );
    taps(&mut app, 3);
    let first = app.model.counts().0;
    assert!(first >= 2, "{:?}", app.model.counts());
    app.press(']');
    assert_eq!(walk(&app).current, 1, "{:?}", app.model.notice);
    assert!(walk(&app).points[0].done);
    for f in ["p1.wav", "p1.json", "p1.csv"] {
        assert!(dir.join(f).is_file(), "{f}");
    }
    assert!(!dir.join("p1.take.wav").exists());
    let run = tapmodes::run::RunFile::load(&dir.join("p1.json")).unwrap();
    assert_eq!(run.variant.label, "left arm tip");
    assert!(
        run.variant.note.starts_with("point 1 of 3 of the plan"),
        "{}",
        run.variant.note
    );
    assert_eq!(app.model.counts(), (0, 0), "point 2 starts empty");
    assert!(
        app.screen(80, 24)
            .contains("point 2 of 3: left arm root (z)")
    );
    // The kept point re-analyses by itself (its WAV starts with the take).
    let (code, out, err) =
        crate::common::tapmodes(&["analyze", dir.join("p1.json").to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains(&format!("{first} accepted")), "{out}");

    // Back with taps on the take: asked first; Esc stays.
    taps(&mut app, 1);
    let before = app.model.counts();
    assert!(before.0 >= 1);
    app.press('[');
    assert!(matches!(
        app.model.mode,
        tapmodes::tui::model::Mode::ConfirmLeave { to: 0 }
    ));
    assert!(app.screen(80, 24).contains("Leave this point?"));
    app.key(ratatui::crossterm::event::KeyCode::Esc);
    assert_eq!(walk(&app).current, 1);
    assert_eq!(app.model.counts(), before, "the taps are still there");
    // Take point 2 again: a fresh take; the first take's files stay on disk.
    app.press('r');
    app.press('y');
    assert_eq!(walk(&app).current, 1);
    assert_eq!(app.model.counts(), (0, 0));
    assert!(dir.join("p2.take.wav").is_file() && dir.join("p2.take.json").is_file());

    // Someone puts a p2.wav there: keeping is refused, nothing is replaced, taps go on.
    std::fs::write(dir.join("p2.wav"), b"not ours").unwrap();
    taps(&mut app, 2);
    app.press(']');
    let notice = app.model.notice.clone().unwrap_or_default();
    assert!(
        notice.starts_with("p2.wav exists: never overwritten"),
        "{notice}"
    );
    assert_eq!(walk(&app).current, 1);
    assert_eq!(std::fs::read(dir.join("p2.wav")).unwrap(), b"not ours");
    let kept = app.model.counts();
    assert!(kept.0 >= 1, "{kept:?}");
    taps(&mut app, 1);
    assert!(
        app.model.counts().1 > kept.1,
        "the take goes on after the refusal"
    );

    // Back to point 1 (its recording is on disk): the prompt says so.
    app.press('[');
    app.press('y');
    assert_eq!(walk(&app).current, 0);
    assert!(
        app.model
            .notice
            .as_deref()
            .unwrap_or("")
            .contains("is on disk")
    );
    app.shutdown();
}

/// End to end: the simulated TM9 frame's eight points (`shapes-demo`) played one after the
/// other through the app's walk; the shapes it fits match the demo's true shapes with MAC
/// above 0.99 (as `tests/all/shapes.rs` checks for `tapmodes shapes`), the shape file is
/// written beside the plan, and the bars and the table are drawn at both sizes.
#[test]
fn the_walk_over_the_tm9_points_gives_the_true_shapes() {
    use tapmodes::cli::shapes::{TM9_FLAP, TM9_POINTS, TM9_TWIST};
    let dir = crate::common::temp_dir("tui-walk-tm9");
    let demo = dir.join("demo");
    let (code, _, err) = crate::common::tapmodes(&["shapes-demo", demo.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    let wavs: Vec<PathBuf> = (1..=8).map(|p| demo.join(format!("p{p}.wav"))).collect();
    let (chain, secs) = Chain::open(&wavs);
    let walk_dir = dir.join("walk");
    std::fs::create_dir_all(&walk_dir).unwrap();
    let plan = walk_dir.join("tm9.txt");
    let text: String = TM9_POINTS
        .iter()
        .enumerate()
        .map(|(i, n)| format!("{n} | z | pt{}.wav\n", i + 1))
        .collect();
    std::fs::write(&plan, text).unwrap();
    let w = Walk::load(&plan).unwrap();
    let mut app = App::headless_with(launch(Box::new(chain), &walk_dir), Task::Walk(w)).unwrap();
    for (p, s) in secs.iter().enumerate() {
        app.pump_seconds(*s);
        assert_eq!(walk(&app).current, p);
        assert!(
            app.model.counts().0 >= 4,
            "point {}: {:?}",
            p + 1,
            app.model.counts()
        );
        app.press(']');
    }
    let w = walk(&app);
    assert!(w.complete);
    let Fit::Done(shapes, path) = &w.fit else {
        panic!("no shapes: {:?}", w.fit)
    };
    assert_eq!(path, &walk_dir.join("tm9.shapes.json"));
    let file = ShapeFile::load(path).unwrap();
    assert_eq!(file.modes.len(), shapes.modes.len());
    // The same shapes as `tapmodes shapes` on the demo's own recordings.
    let cli = demo.join("cli.json");
    let (code, _, err) = crate::common::tapmodes(&[
        "shapes",
        demo.join("plan.txt").to_str().unwrap(),
        "--out",
        cli.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let cli = ShapeFile::load(&cli).unwrap();
    assert_eq!(cli.modes.len(), file.modes.len());
    for (a, b) in file.modes.iter().zip(&cli.modes) {
        assert!((a.shape.frequency_hz - b.shape.frequency_hz).abs() < 1e-6);
        assert!(mac(&a.shape.amplitudes, &b.shape.amplitudes).unwrap() > 0.999_999);
    }
    let twist = mac(&file.modes[0].shape.amplitudes, &TM9_TWIST).unwrap();
    let flap = mac(&file.modes[1].shape.amplitudes, &TM9_FLAP).unwrap();
    assert!(
        twist > 0.99 && flap > 0.99,
        "MAC twist {twist}, flap {flap}"
    );
    assert!((file.modes[0].shape.frequency_hz - 68.0).abs() < 0.5);
    for (wd, h) in [(80, 24), (160, 48)] {
        let s = app.screen(wd, h);
        assert!(s.contains("Shape 1/2: 68.0 Hz"), "{wd}x{h}\n{s}");
        assert!(
            s.contains("#|") && s.contains("|#"),
            "signed bars {wd}x{h}\n{s}"
        );
        assert!(s.contains("every point recorded"), "{wd}x{h}\n{s}");
    }
    let large = app.screen(160, 48);
    assert!(large.contains("Shape 2/2: 71.0 Hz"), "{large}");
    assert!(large.contains("largest at"), "{large}");
    app.press('b');
    assert!(app.screen(80, 24).contains("Shape 2/2: 71.0 Hz"));
    app.shutdown();
}

/// A plan that is missing or malformed: one sentence and exit 1, before the source is
/// opened or the terminal taken over.
#[test]
fn bad_plans_stop_the_app_before_it_starts() {
    let dir = crate::common::temp_dir("tui-walk-bad");
    let bad = dir.join("bad.txt");
    std::fs::write(&bad, "one | z | p1.wav\ntwo | p2.wav\n").unwrap();
    let missing = dir.join("missing.txt");
    for (plan, says) in [(&missing, "no such file"), (&bad, "line 2 of the plan")] {
        let (code, out, err) = crate::common::tapmodes(&["tui", "--plan", plan.to_str().unwrap()]);
        assert_eq!(code, 1, "{err}");
        assert!(out.is_empty(), "nothing drawn: {out:?}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(err.contains(says), "{err}");
    }
    let (code, _, err) = crate::common::tapmodes(&[
        "tui",
        "--plan",
        bad.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "the plan says where the files go: {err}");
    let (code, _, err) =
        crate::common::tapmodes(&["tui", "--strip-mm", "180:x:2", "--strip-g", "11"]);
    assert_eq!(code, 1);
    assert!(
        err.contains("--strip-mm must be length:width:thickness"),
        "{err}"
    );
}
