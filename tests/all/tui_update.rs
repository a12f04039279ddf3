//! Update logic without a terminal: key -> message -> state change, with the engine inline
//! and the simulated bench fed synchronously.

use crate::common::temp_dir;
use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};
use std::path::Path;
use tapmodes::hits::{TriggerLevel, Verdict};
use tapmodes::run::RunFile;
use tapmodes::spectra::{Basis, Estimator};
use tapmodes::tui::model::{Action, Effect, Mode, Msg, action_for, scale_level, update};
use tapmodes::tui::{App, Launch};

/// The demo arm with taps on the simulator's schedule (0.8 s, then every ~2.5 s).
fn demo(seconds: f64, dir: &Path) -> App {
    demo_of(seconds, seconds, dir)
}

/// A `length` s stream of which the first `seconds` are read.
fn demo_of(length: f64, seconds: f64, dir: &Path) -> App {
    crate::common::demo_app("tm9-arm-solid", length, seconds, dir)
}

/// The demo arm without scheduled taps: taps only by key or the app's auto-tap.
fn quiet(seconds: f64, dir: &Path, auto_tap_s: Option<f64>) -> App {
    let mut launch =
        Launch::simulated("tm9-arm-solid", 1, Some(seconds), false, false, dir.into()).unwrap();
    launch.auto_tap_s = auto_tap_s;
    App::headless(launch).unwrap()
}

#[test]
fn keys_map_to_actions() {
    let k = |c| KeyEvent::new(KeyCode::Char(c), KeyModifiers::NONE);
    assert_eq!(action_for(&k('x')), Some(Action::Reject));
    assert_eq!(action_for(&k('y')), Some(Action::Accept));
    assert_eq!(action_for(&k('e')), Some(Action::Estimator));
    assert_eq!(action_for(&k(' ')), Some(Action::Tap));
    assert_eq!(
        action_for(&KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL)),
        Some(Action::Quit)
    );
    assert_eq!(action_for(&k('Q')), None);
    // Every action in the help has a key that maps to it.
    for (_, action, _) in tapmodes::tui::model::KEYS {
        let found = "?a+-yxevio0g,.mlspwctnq "
            .chars()
            .map(k)
            .chain(
                [
                    KeyCode::Up,
                    KeyCode::Down,
                    KeyCode::End,
                    KeyCode::Left,
                    KeyCode::Enter,
                ]
                .map(|c| KeyEvent::new(c, KeyModifiers::NONE)),
            )
            .any(|e| action_for(&e) == Some(*action));
        assert!(found, "{action:?} has no key");
    }
}

#[test]
fn reject_drops_the_selected_tap_and_accept_brings_it_back() {
    let dir = temp_dir("tui-upd-reject");
    let mut app = demo(9.0, &dir);
    assert_eq!(app.model.counts(), (3, 3));
    assert_eq!(
        app.model.selected,
        Some(2),
        "selection follows the newest tap"
    );
    assert!(!app.model.unsaved(), "new taps are saved as they land");
    let modes_before = app.model.analysis.as_ref().unwrap().modes.len();
    app.press('x');
    let a = app.model.analysis.clone().unwrap();
    assert_eq!(app.model.counts(), (2, 3));
    assert_eq!(a.hits[2].verdict, Verdict::Dropped);
    assert!(a.hits[2].by_operator);
    assert!(a.hits[2].reason.contains("dropped by the operator"));
    assert!(app.model.unsaved());
    assert!(!a.modes.is_empty() && a.modes.len() <= modes_before + 2);
    app.press('y');
    assert_eq!(app.model.counts(), (3, 3));
    assert_eq!(
        app.model.analysis.as_ref().unwrap().hits[2].verdict,
        Verdict::Accepted
    );
}

#[test]
fn selecting_another_tap_and_dropping_it() {
    let dir = temp_dir("tui-upd-select");
    let mut app = demo(9.0, &dir);
    app.key(KeyCode::Up);
    app.key(KeyCode::Up);
    assert_eq!(app.model.selected, Some(0));
    assert!(!app.model.follow);
    app.key(KeyCode::Up);
    assert_eq!(app.model.selected, Some(0), "stops at the first tap");
    app.key(KeyCode::Down);
    assert_eq!(app.model.selected, Some(1));
    app.press('x');
    let a = app.model.analysis.clone().unwrap();
    assert_eq!(a.hits[1].verdict, Verdict::Dropped);
    assert_eq!(a.hits[2].verdict, Verdict::Accepted);
    assert_eq!(a.accepted, 2);
    // Back to following: the next tap becomes the selection.
    app.key(KeyCode::End);
    assert!(app.model.follow);
    assert_eq!(app.model.selected, Some(2));
}

#[test]
fn estimator_toggle_switches_the_curve_between_h1_and_h2() {
    let dir = temp_dir("tui-upd-estimator");
    let mut app = demo(6.0, &dir);
    assert_eq!(app.model.estimator, Estimator::H1);
    let h1 = app.model.analysis.as_ref().unwrap().curve.clone().unwrap();
    app.press('e');
    assert_eq!(app.model.estimator, Estimator::H2);
    let a = app.model.analysis.clone().unwrap();
    assert_eq!(a.basis, Basis::Frf(Estimator::H2));
    assert_eq!(a.estimator, Estimator::H2);
    let h2 = a.curve.clone().unwrap();
    assert_ne!(
        h1.db, h2.db,
        "H2 differs from H1 where coherence is below 1"
    );
    assert!(app.screen(80, 24).contains("FRF H2"));
    app.press('e');
    assert_eq!(
        app.model.analysis.as_ref().unwrap().basis,
        Basis::Frf(Estimator::H1)
    );
}

#[test]
fn zoom_pan_and_cursor_change_the_axis() {
    let dir = temp_dir("tui-upd-zoom");
    let mut app = demo(4.0, &dir);
    let band = app.model.header.band_hz;
    assert_eq!(app.model.view_hz, band);
    let f0 = app.model.analysis.as_ref().unwrap().modes[0].frequency_hz;
    assert_eq!(
        app.model.cursor_hz, f0,
        "the cursor starts on the first mode"
    );
    let span = |a: &App| a.model.view_hz.1 - a.model.view_hz.0;
    let full = span(&app);
    app.press('i');
    assert!((span(&app) - full / 2.0).abs() < 1e-6);
    assert!(
        app.model.view_hz.0 <= f0 && f0 <= app.model.view_hz.1,
        "zoom keeps the cursor"
    );
    app.press('i');
    app.press('i');
    assert!((span(&app) - full / 8.0).abs() < 1e-6);
    let before = app.model.view_hz;
    app.press('.');
    assert!((app.model.view_hz.0 - (before.0 + span(&app) / 4.0)).abs() < 1e-6);
    app.press(',');
    app.press(',');
    assert!(app.model.view_hz.0 >= 0.0);
    // The read-out follows the cursor.
    let c0 = app.model.cursor_hz;
    app.key(KeyCode::Right);
    assert!(app.model.cursor_hz > c0);
    let s = app.screen(160, 48);
    assert!(
        s.contains(&format!(
            "cursor {} Hz",
            tapmodes::tui::view::fmt_hz(app.model.cursor_hz)
        )),
        "{s}"
    );
    for _ in 0..12 {
        app.press('o');
    }
    assert_eq!(
        app.model.view_hz,
        (0.0, app.model.nyquist()),
        "zoom out stops at Nyquist"
    );
    app.press('0');
    assert_eq!(app.model.view_hz, band);
    // m walks the cursor through the modes.
    app.press('m');
    let modes = &app.model.analysis.as_ref().unwrap().modes;
    assert!(modes.iter().any(|m| m.frequency_hz == app.model.cursor_hz));
}

#[test]
fn label_entry_renames_the_run_files() {
    let dir = temp_dir("tui-upd-label");
    let mut app = demo(4.0, &dir);
    assert!(
        dir.join("tm9-arm-solid.json").exists(),
        "autosaved after the tap"
    );
    app.press('l');
    assert!(matches!(app.model.mode, Mode::Label(ref b) if b == "tm9-arm-solid"));
    for _ in 0.."tm9-arm-solid".len() {
        app.key(KeyCode::Backspace);
    }
    for c in "braced v2".chars() {
        app.press(c);
    }
    assert!(matches!(app.model.mode, Mode::Label(ref b) if b == "braced v2"));
    app.key(KeyCode::Enter);
    assert_eq!(app.model.mode, Mode::Normal);
    assert_eq!(app.model.label, "braced v2");
    // Files follow the label (spaces become underscores) and the JSON is rewritten.
    assert!(dir.join("braced_v2.wav").exists());
    assert!(dir.join("braced_v2.json").exists());
    assert!(!dir.join("tm9-arm-solid.wav").exists());
    let run = RunFile::load(&dir.join("braced_v2.json")).unwrap();
    assert_eq!(run.variant.label, "braced v2");
    assert_eq!(run.recording.unwrap().wav, "braced_v2.wav");
    // Esc cancels an entry.
    app.press('l');
    app.press('z');
    app.key(KeyCode::Esc);
    assert_eq!(app.model.label, "braced v2");
}

#[test]
fn save_writes_wav_json_and_csv() {
    let dir = temp_dir("tui-upd-save");
    let mut app = demo(6.5, &dir);
    app.press('x');
    assert!(app.model.unsaved());
    app.press('s');
    assert!(!app.model.unsaved());
    assert!(
        app.model
            .notice
            .as_deref()
            .unwrap()
            .starts_with("saved tm9-arm-solid.json")
    );
    let run = RunFile::load(&dir.join("tm9-arm-solid.json")).unwrap();
    assert_eq!(run.hits_total, 2);
    assert_eq!(run.hits_accepted, 1);
    assert!(run.hits[1].by_operator);
    assert!(!run.modes.is_empty());
    assert_eq!(run.frf_csv.as_deref(), Some("tm9-arm-solid.csv"));
    let rec = run.recording.unwrap();
    // The WAV header is valid on disk at every save (flushed), before the app closes.
    let wav = hound::WavReader::open(dir.join(&rec.wav)).unwrap();
    assert_eq!(wav.spec().channels, 2);
    // The simulated bench has 16-bit converters: the codes are stored, as the run file says.
    assert_eq!(wav.spec().sample_format, hound::SampleFormat::Int);
    assert_eq!(wav.spec().bits_per_sample, 16);
    assert_eq!(rec.encoding, tapmodes::run::recording::Encoding::Counts16);
    assert_eq!(wav.duration() as u64, rec.frames);
    assert_eq!(rec.frames, 52_000, "6.5 s at 8 kHz");
    let curve = tapmodes::run::curve_read::read_curve_csv(&dir.join("tm9-arm-solid.csv")).unwrap();
    assert!(curve.coherence.is_some());
}

#[test]
fn disarmed_taps_are_not_counted() {
    let dir = temp_dir("tui-upd-arm");
    let mut app = demo_of(11.0, 2.0, &dir);
    assert_eq!(app.model.counts().1, 1);
    app.press('a');
    assert!(!app.model.armed);
    assert!(!app.model.live.as_ref().unwrap().armed);
    app.pump_seconds(5.0);
    assert_eq!(app.model.counts().1, 1, "taps near 3.1 and 6.0 s ignored");
    assert!(app.screen(80, 24).contains("DISARMED"));
    app.press('a');
    app.pump_seconds(4.0);
    assert_eq!(app.model.counts().1, 2, "the tap near 8.7 s counts again");
    // The recording kept everything.
    assert_eq!(app.model.live.as_ref().unwrap().recorded_frames, 88_000);
}

#[test]
fn trigger_level_keys_scale_the_threshold() {
    let dir = temp_dir("tui-upd-level");
    let mut app = demo(1.0, &dir);
    let th0 = app.model.live.as_ref().unwrap().threshold.unwrap();
    assert_eq!(app.model.level, TriggerLevel::NoiseMultiple(10.0));
    app.press('+');
    assert_eq!(app.model.level, TriggerLevel::NoiseMultiple(12.5));
    let th1 = app.model.live.as_ref().unwrap().threshold.unwrap();
    assert!((th1 / th0 - 1.25).abs() < 1e-9, "{th0} -> {th1}");
    app.press('-');
    app.press('-');
    assert_eq!(app.model.level, TriggerLevel::NoiseMultiple(8.0));
    assert_eq!(
        scale_level(TriggerLevel::Absolute(2.0), 0.5),
        TriggerLevel::Absolute(1.0)
    );
    assert_eq!(
        scale_level(TriggerLevel::NoiseMultiple(1.1), 0.5),
        TriggerLevel::NoiseMultiple(1.0)
    );
}

#[test]
fn quit_asks_when_unsaved_and_can_save_first() {
    let dir = temp_dir("tui-upd-quit");
    let mut app = demo(4.0, &dir);
    app.press('x');
    app.press('q');
    assert_eq!(app.model.mode, Mode::ConfirmQuit);
    assert!(!app.model.quit);
    app.key(KeyCode::Esc);
    assert_eq!(app.model.mode, Mode::Normal);
    app.press('q');
    app.press('s');
    assert!(app.model.quit);
    let run = RunFile::load(&dir.join("tm9-arm-solid.json")).unwrap();
    assert_eq!(
        run.hits[0].verdict,
        Verdict::Dropped,
        "saved before quitting"
    );
    // Quitting without changes does not ask.
    let dir = temp_dir("tui-upd-quit2");
    let mut app = demo(1.0, &dir);
    app.press('q');
    assert!(app.model.quit);
}

#[test]
fn space_fires_a_simulated_tap_and_auto_tap_repeats() {
    let dir = temp_dir("tui-upd-tap");
    let mut app = quiet(30.0, &dir, None);
    app.pump_seconds(1.0);
    assert_eq!(app.model.counts().1, 0);
    app.press(' ');
    app.pump_seconds(1.5);
    assert_eq!(app.model.counts().1, 1, "one tap, one hit");
    // Auto-tap every 2 s.
    app.press('t');
    assert!(app.model.auto_tap_on);
    app.model.auto_tap_s = Some(2.0);
    app.pump_seconds(7.0);
    let n = app.model.counts().1;
    assert!((4..=5).contains(&n), "{n} hits");
    app.press('t');
    assert!(!app.model.auto_tap_on);
    // A tap fired just before may still be recording: let it finish.
    app.pump_seconds(1.5);
    let n = app.model.counts().1;
    app.pump_seconds(4.0);
    assert_eq!(app.model.counts().1, n, "no more taps once off");

    // Given at launch, auto-tap is on from the start.
    let dir = temp_dir("tui-upd-tap2");
    let mut app = quiet(10.0, &dir, Some(2.5));
    assert!(app.model.auto_tap_on);
    app.pump_seconds(9.0);
    assert!(app.model.counts().1 >= 3);
}

#[test]
fn new_run_starts_fresh_files() {
    let dir = temp_dir("tui-upd-newrun");
    let mut app = demo(9.0, &dir);
    app.press('n');
    assert_eq!(app.model.counts(), (0, 0));
    assert_eq!(app.model.live.as_ref().unwrap().stem, "tm9-arm-solid-2");
    app.pump_seconds(0.1);
    let old = RunFile::load(&dir.join("tm9-arm-solid.json")).unwrap();
    assert_eq!(old.hits_total, 3);
    assert!(dir.join("tm9-arm-solid-2.wav").exists());
}

#[test]
fn update_is_a_function_of_the_model() {
    let dir = temp_dir("tui-upd-pure");
    let app = demo(4.0, &dir);
    let mut m = app.model.clone();
    let fx = update(&mut m, Msg::Action(Action::Reject));
    assert_eq!(fx.len(), 1);
    assert!(matches!(
        fx[0],
        Effect::Engine(
            _,
            tapmodes::tui::engine::Cmd::Decide {
                index: 0,
                accept: false
            }
        )
    ));
    assert!(
        m.unsaved(),
        "the change is pending until the engine reports it saved"
    );
    let fx = update(&mut m, Msg::Action(Action::Picker));
    assert_eq!(fx, vec![Effect::ListRuns]);
    let fx = update(&mut m, Msg::Action(Action::Quit));
    assert!(fx.is_empty() && m.mode == Mode::ConfirmQuit);
}

/// Ended from outside (a signal): everything taken reaches the files, the stream after the
/// last tap's save and an operator's unsaved verdict included, and the WAV is closed with
/// its header over all its data.
#[test]
fn stop_from_outside_saves_everything_taken() {
    let dir = temp_dir("tui-upd-stop");
    let mut app = demo_of(10.0, 5.0, &dir);
    assert_eq!(app.model.counts().1, 2);
    app.press('x'); // an unsaved verdict
    app.pump_seconds(0.5); // stream past the last save, no new tap
    assert!(app.model.unsaved());
    app.stop_saving();
    let run = RunFile::load(&dir.join("tm9-arm-solid.json")).unwrap();
    assert_eq!(run.hits_total, 2);
    assert_eq!(run.hits[1].verdict, Verdict::Dropped, "the verdict is kept");
    let rec = run.recording.unwrap();
    assert_eq!(rec.frames, 44_000, "5.5 s at 8 kHz: the whole stream taken");
    let wav = dir.join(&rec.wav);
    let r = hound::WavReader::open(&wav).unwrap();
    assert_eq!(r.duration() as u64, rec.frames);
    assert_eq!(
        std::fs::metadata(&wav).unwrap().len(),
        44 + 2 * 2 * rec.frames,
        "the header covers every byte of data"
    );
    // Without taps there is nothing to save: no run file, and the recording is not left
    // behind without one (as after a quit with no tap).
    let dir = temp_dir("tui-upd-stop0");
    let mut app = quiet(1.0, &dir, None);
    app.pump_seconds(0.5);
    app.stop_saving();
    assert!(!dir.join("tm9-arm-solid.json").exists());
    assert!(!dir.join("tm9-arm-solid.wav").exists());
}

/// Keeping a tap that has no record (cut short by the end of the recording here; a tap too
/// soon after the previous one is the other case) is refused with the reason, not with
/// "there is no tap" (the tap is on the board).
#[test]
fn keeping_a_tap_without_a_record_says_why() {
    let dir = temp_dir("tui-upd-too-soon");
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/independent/tm9-frame-48k-s1.wav");
    let source = tapmodes::source::wav::WavSource::open(&path).unwrap();
    let roles = tapmodes::signal::RoleChoice::default()
        .resolve(tapmodes::source::Source::info(&source))
        .unwrap();
    let launch = Launch {
        source: Box::new(source),
        roles,
        config: tapmodes::pipeline::AnalysisConfig::default(),
        out_dir: dir.clone(),
        variant: "frame".into(),
        auto_tap_s: None,
        demo: false,
        compare_with: Vec::new(),
        drive: None,
    };
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(12.0);
    let hits = app.model.analysis.as_ref().unwrap().hits.clone();
    let soon = (hits.iter())
        .position(|h| h.verdict == Verdict::CutShort)
        .expect("the recording ends inside its last tap's record");
    while app.model.selected != Some(soon) {
        app.key(if app.model.selected.unwrap_or(0) > soon {
            KeyCode::Up
        } else {
            KeyCode::Down
        });
    }
    app.press('y');
    let notice = app.model.notice.clone().unwrap_or_default();
    assert!(
        notice.contains(&format!("tap #{} has no record", soon + 1)),
        "{notice}"
    );
    assert_eq!(
        app.model.analysis.as_ref().unwrap().hits[soon].verdict,
        Verdict::CutShort
    );
}
