//! The app's screens at 80x24, 120x40 and 160x48 (ratatui's test backend, the simulated
//! bench fed synchronously): keys that must stay visible, review of an older tap, the
//! recording state, the soft mount, the help pages; and the files a session leaves.

use crate::common::temp_dir;
use ratatui::crossterm::event::KeyCode;
use std::path::Path;
use tapmodes::pipeline::AnalysisConfig;
use tapmodes::signal::{RoleChoice, StreamInfo};
use tapmodes::source::Source;
use tapmodes::source::simulator::Simulator;
use tapmodes::source::simulator::presets::preset;
use tapmodes::tui::keys::{WORDS_BOARD, WORDS_CURVE, WORKFLOW};
use tapmodes::tui::model::Mode;
use tapmodes::tui::view::fmt_sig;
use tapmodes::tui::{App, Launch};

const SIZES: [(u16, u16); 2] = [(80, 24), (160, 48)];

/// A demo preset with taps on the simulator's schedule (0.8 s, then every ~2.5 s).
fn demo(preset_name: &str, seconds: f64, dir: &Path) -> App {
    crate::common::demo_app(preset_name, seconds, seconds, dir)
}

/// Screen text with borders and line breaks turned into blanks, blanks collapsed.
fn flat(s: &str) -> String {
    s.replace(['\n', '│'], " ")
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ")
}

fn last_line(s: &str) -> &str {
    s.lines().last().unwrap_or("")
}

fn assert_footer(s: &str, what: &str) {
    let foot = last_line(s);
    for k in ["s save", "p runs", "q quit", "? help"] {
        assert!(
            foot.contains(k),
            "{what}: '{k}' missing from the footer\n{s}"
        );
    }
}

#[test]
fn save_runs_quit_and_help_stay_on_the_footer_in_every_view() {
    let dir = temp_dir("tui-scr-footer");
    let mut app = demo("tm9-stack-soft", 9.0, &dir);
    let (kept, total) = app.model.counts();
    assert!(total >= 3 && kept == total, "{kept}/{total}");
    let taps = format!("taps {kept}/{total} kept");
    for view in ["FRF H1", "response spectrum", "transmissibility"] {
        for (w, h) in SIZES.into_iter().chain([(120, 40)]) {
            let s = app.screen(w, h);
            assert!(s.contains(view), "{view} at {w}x{h}\n{s}");
            assert_footer(&s, &format!("{view} at {w}x{h}"));
            // The states, counters and label on the status line are never cut.
            let top = s.lines().next().unwrap();
            for part in ["ARMED", &taps, "lost 0 pkt, overrun 0", "'tm9-stack-soft'"] {
                assert!(top.contains(part), "{part} at {w}x{h}: {top}");
            }
            if w >= 120 {
                assert!(top.contains("8000 Hz"), "{w}x{h}: {top}");
            }
        }
        app.press('v');
    }
    // With a message on the footer (a save) and with the comparison panel.
    app.press('s');
    let s = app.screen(80, 24);
    assert!(last_line(&s).contains("saved tm9-stack-soft.json"), "{s}");
    assert_footer(&s, "after a save");
    app.press('c');
    let s = app.screen(80, 24);
    assert!(s.contains("Compare: now vs saved"), "{s}");
    assert_footer(&s, "compare panel");
}

#[test]
fn wider_screens_keep_the_source_and_the_cursor_line_whole() {
    let dir = temp_dir("tui-scr-wide");
    let app = demo("tm9-stack-soft", 9.0, &dir);
    let source = app.model.header.source.clone();
    for (w, h) in [(120, 40), (160, 48)] {
        let s = app.screen(w, h);
        assert!(s.lines().next().unwrap().contains(&source), "{w}x{h}\n{s}");
        let cursor = s
            .lines()
            .find(|l| l.contains("cursor ") && l.contains(" Hz"))
            .unwrap_or_else(|| panic!("no cursor line at {w}x{h}\n{s}"));
        // Read-out whole: level, magnitude with its unit, coherence, then the range.
        assert!(
            cursor.contains("dB (") && cursor.contains("g/N)"),
            "{cursor}"
        );
        assert!(
            cursor.contains("coh 0.") || cursor.contains("coh 1."),
            "{cursor}"
        );
        assert!(
            cursor.contains("view ") && cursor.contains("-3200 Hz"),
            "{cursor}"
        );
    }
    // At 80 columns a short label leaves room for the start of the source, cut with a
    // mark, never silently.
    let dir = temp_dir("tui-scr-wide-short");
    let mut launch = Launch::simulated("tm9-stack-soft", 1, Some(1.0), false, false, dir).unwrap();
    launch.variant = "v1".into();
    let mut short = App::headless(launch).unwrap();
    short.pump_seconds(1.0);
    let top = short.screen(80, 24).lines().next().unwrap().to_string();
    assert!(top.contains("'v1' | simul"), "{top}");
    assert!(top.trim_end().ends_with('~'), "{top}");
}

#[test]
fn an_older_tap_shows_its_own_traces_and_verdict() {
    let dir = temp_dir("tui-scr-older");
    let mut app = demo("tm9-arm-solid", 9.0, &dir);
    let a = app.model.analysis.clone().unwrap();
    assert_eq!(a.hits.len(), 3);
    // Each tap has its own traces (three taps of different strength).
    let t: Vec<_> = a
        .traces
        .iter()
        .map(|t| t.clone().expect("a record"))
        .collect();
    assert_ne!(t[0].response, t[2].response);
    let latest = app.screen(80, 24);
    assert!(latest.contains("Last tap #3 + accepted"), "{latest}");
    app.key(KeyCode::Up);
    app.key(KeyCode::Up);
    app.press('x');
    let a = app.model.analysis.clone().unwrap();
    assert!(!a.hits[0].verdict.is_accepted(), "tap 1 dropped");
    let pf1 = fmt_sig(a.hits[0].peak_force.unwrap());
    let pf3 = fmt_sig(a.hits[2].peak_force.unwrap());
    assert_ne!(pf1, pf3, "the taps differ in force");
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("Tap #1 of 3 x dropped"), "{w}x{h}\n{s}");
        assert!(s.contains(&format!("peak {pf1} N")), "{w}x{h}\n{s}");
        assert!(!s.contains(&format!("peak {pf3} N")), "{w}x{h}\n{s}");
    }
    // The tap panel's traces change with the selection.
    let panel = |s: &str| -> String {
        s.lines()
            .skip_while(|l| !l.contains("Tap #") && !l.contains("Last tap #"))
            .take(8)
            .map(|l| l.chars().take(30).collect::<String>())
            .collect()
    };
    let older = app.screen(80, 24);
    app.key(KeyCode::End);
    assert_ne!(panel(&older), panel(&app.screen(80, 24)));
}

#[test]
fn enter_opens_a_tap_in_full_where_y_or_x_decide() {
    let dir = temp_dir("tui-scr-detail");
    let mut plan = preset("tm9-arm-solid", 2).unwrap();
    plan.hammer.double_hit_chance = 1.0;
    let sim = Simulator::new(plan, Some(4.0), true);
    let roles = RoleChoice::default().resolve(sim.info()).unwrap();
    let launch = Launch {
        source: Box::new(sim),
        roles,
        config: AnalysisConfig::default(),
        out_dir: dir.clone(),
        variant: "bouncy".into(),
        auto_tap_s: None,
        demo: true,
        compare_with: Vec::new(),
        drive: None,
    };
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(4.0);
    let a = app.model.analysis.clone().unwrap();
    let reason = a.hits[0].reason.clone();
    assert!(reason.len() > 60, "a long reason: {reason}");
    // Cut on the board at 80x24, with the way to read it whole.
    let s = app.screen(80, 24);
    assert!(!flat(&s).contains(&reason), "{s}");
    assert!(s.contains("(Enter: all)"), "{s}");
    app.key(KeyCode::Enter);
    assert_eq!(app.model.mode, Mode::TapDetail);
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("Tap #1 of 1 x double hit"), "{w}x{h}\n{s}");
        assert!(flat(&s).contains(&reason), "{w}x{h}: whole reason\n{s}");
        assert!(s.contains("peak force"), "{w}x{h}\n{s}");
    }
    // Keeping it from the detail box is the operator's decision, shown there.
    app.press('y');
    assert_eq!(app.model.mode, Mode::TapDetail);
    let s = app.screen(80, 24);
    assert!(
        s.contains("+ accepted") && s.contains("(your decision)"),
        "{s}"
    );
    app.key(KeyCode::Esc);
    assert_eq!(app.model.mode, Mode::Normal);
}

#[test]
fn a_record_being_taken_shows_recording() {
    let dir = temp_dir("tui-scr-rec");
    let launch = Launch::simulated("tm9-arm-solid", 1, Some(6.0), false, false, dir).unwrap();
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(1.0);
    assert!(!app.screen(80, 24).contains("RECORDING"));
    app.press(' ');
    app.pump_seconds(0.4);
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        let top = s.lines().next().unwrap();
        assert!(top.contains("RECORDING"), "{w}x{h}: {top}");
    }
    let p = app.model.live.as_ref().unwrap().recording.unwrap();
    assert!(p > 0.1 && p < 0.9, "share filled {p}");
    app.pump_seconds(1.5);
    let s = app.screen(80, 24);
    assert!(!s.contains("RECORDING"), "{s}");
    assert!(s.contains("Last tap #1"), "{s}");
}

#[test]
fn a_source_ending_inside_a_record_gives_a_tap_cut_short() {
    let dir = temp_dir("tui-scr-cut");
    let launch = Launch::simulated("tm9-arm-solid", 1, Some(1.4), false, false, dir).unwrap();
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(1.0);
    app.press(' ');
    app.pump_seconds(0.2);
    assert!(app.screen(80, 24).contains("RECORDING"));
    while app.pump(64) > 0 {}
    let a = app.model.analysis.clone().expect("the tap");
    assert_eq!(a.hits.len(), 1);
    assert_eq!(a.hits[0].verdict, tapmodes::hits::Verdict::CutShort);
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        let top = s.lines().next().unwrap();
        assert!(
            top.contains("SOURCE STOPPED") && !top.contains("RECORDING"),
            "{top}"
        );
        assert!(s.contains("x cut short"), "{w}x{h}\n{s}");
    }
}

#[test]
fn transmissibility_view_shows_the_mount_from_the_pipeline() {
    let dir = temp_dir("tui-scr-mount");
    let mut app = demo("tm9-stack-soft", 9.0, &dir);
    app.press('v');
    app.press('v');
    let result = app.engine().unwrap().analysis().result();
    let mount = result
        .mount
        .clone()
        .expect("a mount fitted by the pipeline");
    let freq = format!(
        "mount {:.1} Hz, damping {:.1} %",
        mount.natural_frequency_hz,
        100.0 * mount.damping_ratio
    );
    let onset = format!("isolates above {:.0} Hz", mount.isolation_onset_hz());
    let fit = format!("fit, {:.0} % unexplained", 100.0 * mount.error);
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(
            s.contains("Modes") && s.contains("(transmissibility)"),
            "{w}x{h}\n{s}"
        );
        for part in [&freq, &onset, &fit] {
            assert!(s.contains(part.as_str()), "{w}x{h}: '{part}' missing\n{s}");
        }
        // The cursor read-out keeps the coherence whole (three decimals) in a ratio unit.
        let line = s
            .lines()
            .find(|l| l.contains("cursor "))
            .expect("cursor line");
        let coh: String = line
            .split("coh ")
            .nth(1)
            .expect("coherence on the cursor line")
            .chars()
            .take(5)
            .collect();
        assert!(
            coh.len() == 5 && coh.chars().nth(1) == Some('.'),
            "{w}x{h}: '{coh}' in {line}"
        );
        assert!(line.contains(" ratio)"), "{line}");
    }
}

#[test]
fn the_mount_shows_when_no_peak_passes_the_mode_tests() {
    let dir = temp_dir("tui-scr-mount-no-modes");
    let mut launch =
        Launch::simulated("tm9-stack-soft", 1, Some(9.0), true, false, dir.clone()).unwrap();
    // A search band above every mode of the stack: no mode, the mount is still fitted.
    launch.config.modes.band_hz = (2600.0, 3000.0);
    launch.config.basis = Some(tapmodes::spectra::Basis::Transmissibility);
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(9.0);
    let result = app.engine().unwrap().analysis().result();
    assert!(result.modes().is_empty(), "{:?}", result.modes());
    let mount = result
        .mount
        .clone()
        .expect("a mount fitted by the pipeline");
    let freq = format!("mount {:.1} Hz", mount.natural_frequency_hz);
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(
            s.contains("Modes 0 found (transmissibility)"),
            "{w}x{h}\n{s}"
        );
        assert!(s.contains("no peak passed the mode tests"), "{w}x{h}\n{s}");
        assert!(
            s.contains(&freq) && s.contains("unexplained"),
            "{w}x{h}\n{s}"
        );
    }
}

#[test]
fn help_pages_explain_the_words_and_the_workflow() {
    let dir = temp_dir("tui-scr-help");
    let mut app = demo("tm9-arm-solid", 1.0, &dir);
    app.press('?');
    assert!(app.screen(80, 24).contains("Help 1/5: keys"));
    app.press('?');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("Help 2/5"), "{w}x{h}\n{s}");
        for (term, meaning) in WORDS_CURVE {
            assert!(
                s.contains(term) && s.contains(meaning),
                "{w}x{h}: {term}\n{s}"
            );
        }
        assert!(flat(&s).contains("propellers OFF"), "{w}x{h}\n{s}");
    }
    app.press('?');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        for (term, meaning) in WORDS_BOARD {
            assert!(
                s.contains(term) && s.contains(meaning),
                "{w}x{h}: {term}\n{s}"
            );
        }
    }
    app.press('?');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("Help 4/5"), "{w}x{h}\n{s}");
        for line in WORKFLOW {
            assert!(s.contains(line), "{w}x{h}: '{line}'\n{s}");
        }
        let f = flat(&s);
        for caution in ["propellers OFF", "DISCONNECTED", "SECURED", "local rules"] {
            assert!(f.contains(caution), "{w}x{h}: {caution}\n{s}");
        }
    }
    // The last page: the strip test and the point walk, with the same cautions.
    app.press('?');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(
            s.contains("Help 5/5: strip test and point walk"),
            "{w}x{h}\n{s}"
        );
        for line in tapmodes::tui::keys::TASKS {
            assert!(s.contains(line), "{w}x{h}: '{line}'\n{s}");
        }
        let f = flat(&s);
        for caution in ["propellers OFF", "DISCONNECTED", "SECURED", "local rules"] {
            assert!(f.contains(caution), "{w}x{h}: {caution}\n{s}");
        }
    }
    app.key(KeyCode::Left);
    assert_eq!(app.model.mode, Mode::Help(3));
    app.key(KeyCode::Right);
    app.press('?');
    assert_eq!(app.model.mode, Mode::Normal, "? on the last page closes");
}

fn files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn quitting_without_a_tap_leaves_no_recording() {
    let dir = temp_dir("tui-scr-litter");
    let launch =
        Launch::simulated("tm9-arm-solid", 1, Some(3.0), false, false, dir.clone()).unwrap();
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(2.0);
    assert_eq!(files(&dir), ["tm9-arm-solid.wav"], "recording while open");
    app.press('q');
    assert!(app.model.quit, "nothing to save: quits at once");
    app.shutdown();
    assert!(files(&dir).is_empty(), "{:?}", files(&dir));
    assert!(
        app.model
            .notice
            .as_deref()
            .is_some_and(|n| n.contains("was removed")),
        "the removal is said: {:?}",
        app.model.notice
    );
}

#[test]
fn a_session_with_taps_keeps_its_recording_and_run_file() {
    let dir = temp_dir("tui-scr-kept");
    let mut app = demo("tm9-arm-solid", 2.5, &dir);
    assert_eq!(app.model.counts().1, 1);
    app.shutdown();
    assert_eq!(
        files(&dir),
        [
            "tm9-arm-solid.csv",
            "tm9-arm-solid.json",
            "tm9-arm-solid.wav"
        ]
    );
}

#[test]
fn a_failed_start_leaves_no_empty_recording() {
    let dir = temp_dir("tui-scr-failed");
    let bad = StreamInfo {
        source: "a stream with no channels".into(),
        sample_rate: 8000.0,
        channels: Vec::new(),
    };
    let e = tapmodes::run::recording::RecordingWriter::create_fresh(&dir, "first", &bad)
        .err()
        .expect("no channels: refused");
    assert!(e.to_string().contains("channels"), "{e}");
    assert!(files(&dir).is_empty(), "{:?}", files(&dir));
}
