//! The app's screens rendered into a test backend at 80x24 and 160x48, fed synchronously
//! from the simulated bench: what the operator must see is on screen.

use crate::common::temp_dir;
use ratatui::crossterm::event::KeyCode;
use tapmodes::hits::Verdict;
use tapmodes::pipeline::AnalysisConfig;
use tapmodes::signal::RoleChoice;
use tapmodes::source::Source;
use tapmodes::source::simulator::presets::preset;
use tapmodes::source::simulator::{BenchPlan, Simulator};
use tapmodes::tui::view::fmt_hz;
use tapmodes::tui::{App, Launch};

const SIZES: [(u16, u16); 2] = [(80, 24), (160, 48)];

fn demo(preset_name: &str, seconds: f64, dir: &std::path::Path) -> App {
    crate::common::demo_app(preset_name, seconds, seconds, dir)
}

fn from_plan(plan: BenchPlan, seconds: f64, dir: &std::path::Path, label: &str) -> App {
    let sim = Simulator::new(plan, Some(seconds), true);
    let roles = RoleChoice::default().resolve(sim.info()).unwrap();
    let launch = Launch {
        source: Box::new(sim),
        roles,
        config: AnalysisConfig::default(),
        out_dir: dir.to_path_buf(),
        variant: label.into(),
        auto_tap_s: None,
        demo: true,
        compare_with: Vec::new(),
        drive: None,
    };
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(seconds);
    app
}

#[test]
fn main_screen_shows_signal_last_tap_curve_taps_modes_and_status() {
    let dir = temp_dir("tui-view-main");
    let app = demo("tm9-arm-solid", 9.0, &dir);
    let a = app
        .model
        .analysis
        .clone()
        .expect("an analysis after three taps");
    assert_eq!(
        a.hits.len(),
        3,
        "taps at 0.8, 3.3 and 5.8 s complete by 9 s"
    );
    let first_mode = a.modes.first().expect("modes found").frequency_hz;
    assert!((first_mode - 148.0).abs() < 3.0, "first mode {first_mode}");
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        // Status line: armed, counts, saved state, sample rate.
        assert!(s.contains("ARMED"), "{w}x{h}:\n{s}");
        assert!(s.contains("taps 3/3 kept"), "{w}x{h}:\n{s}");
        assert!(s.contains("saved"), "{w}x{h}:\n{s}");
        // Live signal with the trigger level.
        assert!(s.contains("Signal"), "{w}x{h}:\n{s}");
        assert!(s.contains("trig +-"), "{w}x{h}:\n{s}");
        // Last tap with its verdict and reason.
        assert!(s.contains("Last tap #3 + accepted"), "{w}x{h}:\n{s}");
        assert!(s.contains("all checks passed"), "{w}x{h}:\n{s}");
        // Averaged FRF, coherence, cursor read-out.
        assert!(s.contains("FRF H1"), "{w}x{h}:\n{s}");
        assert!(s.contains("dB re 1 g/N, 3 taps averaged"), "{w}x{h}:\n{s}");
        assert!(s.contains("coh"), "{w}x{h}:\n{s}");
        assert!(
            s.contains(&format!("cursor {} Hz", fmt_hz(first_mode))),
            "{w}x{h}:\n{s}"
        );
        // Tap list and mode table with the first mode's frequency and damping in percent.
        assert!(s.contains("Taps 3 kept of 3"), "{w}x{h}:\n{s}");
        assert!(s.contains("damp %"), "{w}x{h}:\n{s}");
        assert!(s.contains(&fmt_hz(first_mode)), "{w}x{h}:\n{s}");
        let z = a.modes[0].damping_ratio.unwrap();
        assert!(s.contains(&format!("{:.2}", 100.0 * z)), "{w}x{h}:\n{s}");
    }
    // The large screen has room for the reasons in the list and the comparison panel.
    let big = app.screen(160, 48);
    assert!(big.contains("reason"), "{big}");
    assert!(big.contains("Compare: now vs saved"), "{big}");
    assert!(big.contains("hammer N"), "{big}");
    assert!(big.contains("accel_z g"), "{big}");
    // The small one keeps the key hints.
    let small = app.screen(80, 24);
    assert!(small.lines().filter(|l| l.contains("Modes")).count() == 1);
}

#[test]
fn a_rejected_tap_shows_its_verdict_and_reason() {
    let dir = temp_dir("tui-view-double");
    let mut plan = preset("tm9-arm-solid", 2).unwrap();
    plan.hammer.double_hit_chance = 1.0;
    let app = from_plan(plan, 4.0, &dir, "bouncy");
    let a = app.model.analysis.clone().expect("a hit");
    let last = a.hits.last().unwrap();
    assert_eq!(last.verdict, Verdict::DoubleHit);
    assert!(!last.reason.is_empty());
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("x double hit"), "{w}x{h}:\n{s}");
        // The reason is on screen (at least its start on the narrow layout).
        let head: String = last.reason.chars().take(20).collect();
        assert!(s.contains(&head), "{w}x{h}: '{head}' missing\n{s}");
        assert!(s.contains("taps 0/1 kept"), "{w}x{h}:\n{s}");
        assert!(s.contains("no tap kept yet"), "{w}x{h}:\n{s}");
    }
}

#[test]
fn before_any_tap_the_panels_say_what_to_do() {
    let dir = temp_dir("tui-view-empty");
    let launch = Launch::simulated("tm9-arm-solid", 1, Some(0.5), false, false, dir).unwrap();
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(0.5);
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("press Space for"), "{w}x{h}:\n{s}");
        assert!(s.contains("nothing to save"), "{w}x{h}:\n{s}");
        assert!(s.contains("no taps yet"), "{w}x{h}:\n{s}");
        assert!(s.contains("taps 0/0 kept"), "{w}x{h}:\n{s}");
    }
}

#[test]
fn help_overlay_lists_every_key_and_the_safety_cautions() {
    let dir = temp_dir("tui-view-help");
    let mut app = demo("tm9-arm-solid", 1.0, &dir);
    app.press('?');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        for (keys, _, what) in tapmodes::tui::model::KEYS {
            assert!(s.contains(keys), "key '{keys}' missing at {w}x{h}:\n{s}");
            assert!(s.contains(what), "'{what}' missing at {w}x{h}:\n{s}");
        }
        let flat = s.replace(['\n', '│'], " ");
        let flat = flat.split_whitespace().collect::<Vec<_>>().join(" ");
        for caution in [
            "propellers OFF",
            "flight battery DISCONNECTED",
            "craft SECURED",
            "Tap gently",
            "manufacturer's guidance",
            "local rules",
            "careful first hover",
        ] {
            assert!(
                flat.contains(caution),
                "'{caution}' missing at {w}x{h}:\n{s}"
            );
        }
    }
    // Any key closes it.
    app.press('z');
    assert!(!app.screen(80, 24).contains("SAFETY"));
}

#[test]
fn views_switch_between_the_available_curves() {
    let dir = temp_dir("tui-view-views");
    let mut app = demo("tm9-stack-soft", 4.0, &dir);
    assert!(app.screen(80, 24).contains("FRF H1"));
    app.press('v');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("response spectrum"), "{w}x{h}:\n{s}");
        assert!(s.contains("dB re 1 g/Hz"), "{w}x{h}:\n{s}");
    }
    app.press('v');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("transmissibility"), "{w}x{h}:\n{s}");
        assert!(s.contains("dB re 1 ratio"), "{w}x{h}:\n{s}");
    }
    app.press('v');
    assert!(app.screen(160, 48).contains("FRF H1"));
    // Without a base channel there is no transmissibility to switch to.
    let dir = temp_dir("tui-view-views-arm");
    let mut arm = demo("tm9-arm-solid", 4.0, &dir);
    arm.press('v');
    arm.press('v');
    let s = arm.screen(160, 48);
    assert!(s.contains("FRF H1"), "{s}");
    assert!(!s.contains("transmissibility"), "{s}");
}

#[test]
fn saved_runs_overlay_and_compare_against_the_current_run() {
    let dir = temp_dir("tui-view-compare");
    {
        let mut base = demo("tm9-arm-solid", 9.0, &dir);
        base.press('s');
        base.press('q');
        assert!(base.model.quit);
    }
    let saved = dir.join("tm9-arm-solid.json");
    assert!(saved.exists());
    let mut plan_launch =
        Launch::simulated("tm9-arm-holed", 1, Some(9.0), true, false, dir.clone()).unwrap();
    plan_launch.compare_with = vec![saved.clone()];
    let mut app = App::headless(plan_launch).unwrap();
    app.pump_seconds(9.0);
    assert_eq!(app.model.overlays.len(), 1);
    assert!(
        app.model.overlays[0].curve.is_some(),
        "the CSV was read back"
    );
    let c = app.model.comparisons.first().expect("a comparison");
    let first = c.matched.first().expect("matched modes");
    // 148 Hz (solid) -> 139 Hz (holed): about -6 %.
    assert!(
        (first.frequency_change_pct + 6.1).abs() < 2.0,
        "{}",
        first.frequency_change_pct
    );
    let df = format!("{:+.1}", first.frequency_change_pct);
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("vs tm9-arm-solid"), "{w}x{h}:\n{s}");
        assert!(s.contains(&df), "{w}x{h}: {df} missing\n{s}");
        assert!(s.contains("k ratio"), "{w}x{h}:\n{s}");
    }
    assert!(
        app.screen(160, 48).contains("~ tm9-arm-solid"),
        "overlay legend"
    );
    // On the small screen the panel switches back to the mode table.
    app.press('c');
    let s = app.screen(80, 24);
    assert!(
        s.contains("damp %") && !s.contains("vs tm9-arm-solid"),
        "{s}"
    );
}

#[test]
fn picker_lists_the_runs_in_the_output_folder() {
    let dir = temp_dir("tui-view-picker");
    {
        let mut base = demo("tm9-arm-braced", 5.0, &dir);
        base.press('s');
    }
    let launch = Launch::simulated("tm9-arm-solid", 1, Some(5.0), true, false, dir).unwrap();
    let mut app = App::headless(launch).unwrap();
    app.pump_seconds(5.0);
    app.press('p');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("Saved runs to overlay"), "{w}x{h}:\n{s}");
        assert!(s.contains("[ ] tm9-arm-braced.json"), "{w}x{h}:\n{s}");
        assert!(
            !s.contains("tm9-arm-solid.json"),
            "own run is not listed:\n{s}"
        );
    }
    app.press(' ');
    assert!(app.screen(80, 24).contains("[x] tm9-arm-braced.json"));
    app.key(KeyCode::Enter);
    assert_eq!(app.model.overlays.len(), 1);
    assert!(app.screen(160, 48).contains("vs tm9-arm-braced"));
}

#[test]
fn entry_and_confirm_popups_render() {
    let dir = temp_dir("tui-view-popups");
    let mut app = demo("tm9-arm-solid", 4.0, &dir);
    app.press('l');
    for c in "-B".chars() {
        app.press(c);
    }
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("Variant label"), "{w}x{h}:\n{s}");
        assert!(s.contains("> tm9-arm-solid-B_"), "{w}x{h}:\n{s}");
    }
    app.key(KeyCode::Enter);
    app.press('x');
    assert!(app.screen(80, 24).contains("UNSAVED"));
    app.press('q');
    for (w, h) in SIZES {
        let s = app.screen(w, h);
        assert!(s.contains("Quit?"), "{w}x{h}:\n{s}");
        assert!(s.contains("save, then quit"), "{w}x{h}:\n{s}");
    }
}

#[test]
fn a_too_small_terminal_says_so() {
    let dir = temp_dir("tui-view-small");
    let app = demo("tm9-arm-solid", 1.0, &dir);
    let s = app.screen(50, 12);
    assert!(s.contains("needs at least 60x16"), "{s}");
}
