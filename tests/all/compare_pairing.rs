//! The comparison of variants: pairing that follows the physics, repeatability floor,
//! mounts and mass-corrected stiffness (library level, no recording is analysed).

use std::path::Path;
use tapmodes::modes::Mode;
use tapmodes::modes::uncertainty::{Interval, Uncertainty};
use tapmodes::run::RunFile;
use tapmodes::run::compare::matching::How;
use tapmodes::run::compare::{CompareOptions, Comparison, Verdict, compare_with, stiffness_ratio};

fn demo(name: &str) -> RunFile {
    let p = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("recordings")
        .join(name);
    RunFile::load(&p).unwrap()
}

/// A run with the demo's setup and these modes: (frequency, residue sign or 0 for none).
fn run_with(label: &str, modes: &[(f64, i8)]) -> RunFile {
    let mut r = demo("arm-holed.json");
    let template = r.modes[0].clone();
    r.variant.label = label.into();
    r.modes = modes
        .iter()
        .map(|&(f, sign)| {
            let mut m: Mode = template.clone();
            m.frequency_hz = f;
            m.uncertainty = None;
            m.phase_deg = None;
            m.fit = template.fit.clone().filter(|_| sign != 0).map(|mut fit| {
                fit.frequency_hz = f;
                fit.modal_constant = [f64::from(sign) * 0.5, 0.0];
                fit
            });
            m
        })
        .collect();
    r
}

fn run_compare(a: RunFile, b: RunFile) -> Comparison {
    compare_with(
        &[("a.json".into(), a), ("b.json".into(), b)],
        &CompareOptions::default(),
    )
    .unwrap()
}

fn pairs(c: &Comparison) -> Vec<(usize, usize)> {
    c.variants[0]
        .matched
        .iter()
        .map(|m| (m.baseline_mode, m.variant_mode))
        .collect()
}

fn all_in_order(n: usize) -> Vec<(usize, usize)> {
    (1..=n).map(|i| (i, i)).collect()
}

#[test]
fn common_shifts_up_to_40_percent_pair_in_order() {
    // Well separated (the TM9 arm's spacing) and close pairs (2 % and 4 % apart).
    let lists: [&[f64]; 2] = [
        &[139.0, 214.0, 575.0, 1092.0],
        &[150.0, 300.0, 306.0, 520.0, 540.0, 900.0],
    ];
    for base in lists {
        for shift in [-0.4, -0.3, -0.2, -0.1, 0.1, 0.2, 0.3, 0.4] {
            let a: Vec<(f64, i8)> = base.iter().map(|&f| (f, 0)).collect();
            let b: Vec<(f64, i8)> = base.iter().map(|&f| (f * (1.0 + shift), 0)).collect();
            let c = run_compare(run_with("a", &a), run_with("b", &b));
            assert_eq!(
                pairs(&c),
                all_in_order(base.len()),
                "shift {shift} on {base:?}"
            );
            let v = &c.variants[0];
            assert!(v.only_in_baseline.is_empty() && v.only_in_variant.is_empty());
            for m in &v.matched {
                assert!((m.frequency_change_pct - 100.0 * shift).abs() < 1e-6);
                assert!(m.confidence > 0.9, "shift {shift}: {m:?}");
            }
        }
    }
}

#[test]
fn close_modes_that_rise_together_are_not_cross_paired() {
    // The greedy matcher paired 300 -> 336.6 and 306 -> 330 (closest first).
    let c = run_compare(
        run_with("a", &[(300.0, 0), (306.0, 0)]),
        run_with("b", &[(330.0, 0), (336.6, 0)]),
    );
    assert_eq!(pairs(&c), vec![(1, 1), (2, 2)]);
}

#[test]
fn the_brace_shifts_of_the_demo_pair_mode_by_mode() {
    // arm-holed -> arm-braced moves every mode 14-23 % up (simulator truth 139/214/575/1092
    // -> 171/262/655/1262 Hz, recordings/arm-*.truth.json).
    let c = run_compare(demo("arm-holed.json"), demo("arm-braced.json"));
    assert_eq!(pairs(&c), all_in_order(4));
    let truth = [
        (139.0, 171.0),
        (214.0, 262.0),
        (575.0, 655.0),
        (1092.0, 1262.0),
    ];
    for (m, (fa, fb)) in c.variants[0].matched.iter().zip(truth) {
        assert!(
            (m.frequency_change_pct - 100.0 * (fb / fa - 1.0)).abs() < 0.2,
            "{m:?}"
        );
        assert!(m.stiffness_ratio > 1.2, "the brace stiffens: {m:?}");
        assert_eq!(m.frequency_verdict, Verdict::Real);
    }
}

#[test]
fn a_reordered_pair_needs_residue_evidence() {
    // Mode 1 (+) rises 11.7 % past mode 2 (-), which drops 3 %.
    let a = [(300.0, 1), (320.0, -1), (800.0, 1)];
    let b = [(310.0, -1), (335.0, 1), (800.0, 1)];
    let unsigned = |l: &[(f64, i8)]| l.iter().map(|&(f, _)| (f, 0)).collect::<Vec<_>>();
    // Without residues the order stands.
    let c = run_compare(run_with("a", &unsigned(&a)), run_with("b", &unsigned(&b)));
    assert_eq!(pairs(&c), vec![(1, 1), (2, 2), (3, 3)]);
    // With residue signs at a transfer point, the two cross.
    let c = run_compare(run_with("a", &a), run_with("b", &b));
    assert_eq!(pairs(&c), vec![(1, 2), (2, 1), (3, 3)]);
    let m = &c.variants[0].matched;
    assert_eq!(m[0].pairing, How::Crossed);
    assert_eq!(m[0].residue_sign_agrees, Some(true));
    // Same signs on both (a driving point) are no evidence: the order stands.
    let same: Vec<(f64, i8)> = a.iter().map(|&(f, _)| (f, 1)).collect();
    let same_b: Vec<(f64, i8)> = b.iter().map(|&(f, _)| (f, 1)).collect();
    let c = run_compare(run_with("a", &same), run_with("b", &same_b));
    assert_eq!(pairs(&c), vec![(1, 1), (2, 2), (3, 3)]);
}

#[test]
fn residue_sign_from_the_phase_when_there_is_no_fit() {
    // Accelerance at resonance: phase +90 deg for a positive modal constant, -90 for a
    // negative one (receptance A / (wn^2 - w^2 + 2j z wn w) times -w^2; Ewins 2000,
    // *Modal Testing*, sec. 2.2, from memory).
    let phase = |l: &[(f64, f64)]| {
        let mut r = run_with("x", &l.iter().map(|&(f, _)| (f, 0)).collect::<Vec<_>>());
        for (m, &(_, ph)) in r.modes.iter_mut().zip(l) {
            m.phase_deg = Some(ph);
        }
        r
    };
    let c = run_compare(
        phase(&[(300.0, 88.0), (320.0, -91.0), (800.0, 85.0)]),
        phase(&[(310.0, -87.0), (335.0, 92.0), (800.0, 86.0)]),
    );
    assert_eq!(pairs(&c), vec![(1, 2), (2, 1), (3, 3)]);
}

fn with_spread(mut r: RunFile, std_hz: f64) -> RunFile {
    for m in &mut r.modes {
        let f = m.frequency_hz;
        m.uncertainty = Some(Uncertainty {
            hits: 5,
            method: "fit".into(),
            frequency_hz: Interval {
                mean: f,
                std_dev: std_hz,
                low: f - 2.8 * std_hz,
                high: f + 2.8 * std_hz,
            },
            damping_ratio: None,
        });
    }
    r
}

#[test]
fn two_repeats_of_one_part_show_no_real_change() {
    // A remounted repeat: every mode within a few tenths of a percent, hit-to-hit spread
    // tiny, so the Welch test alone calls most changes significant.
    let base = [139.0, 214.0, 575.0, 1092.0];
    let drift = [0.003, -0.002, 0.004, -0.001];
    let a: Vec<(f64, i8)> = base.iter().map(|&f| (f, 0)).collect();
    let b: Vec<(f64, i8)> = base
        .iter()
        .zip(drift)
        .map(|(&f, d)| (f * (1.0 + d), 0))
        .collect();
    let runs = [
        (
            "a.json".to_string(),
            with_spread(run_with("first", &a), 0.01),
        ),
        (
            "b.json".to_string(),
            with_spread(run_with("again", &b), 0.01),
        ),
    ];
    let o = CompareOptions {
        repeats: true,
        ..CompareOptions::default()
    };
    let c = compare_with(&runs, &o).unwrap();
    let v = &c.variants[0];
    assert!(
        v.matched
            .iter()
            .all(|m| m.frequency_change_significant == Some(true))
    );
    assert!(
        v.matched
            .iter()
            .all(|m| m.frequency_verdict == Verdict::WithinFloor)
    );
    assert!(
        v.summary.starts_with("no real frequency change"),
        "{}",
        v.summary
    );
    let r = c.repeatability.as_ref().unwrap();
    assert!((r.largest_frequency_change_pct - 0.4).abs() < 1e-6);
    assert!(r.implied_floor_frequency_pct >= 0.4 && r.implied_floor_frequency_pct <= 0.6);
    // A floor tighter than the repeats would call them real: the floor is what decides.
    let tight = CompareOptions {
        floor_frequency_pct: 0.1,
        ..CompareOptions::default()
    };
    let c = compare_with(&runs, &tight).unwrap();
    assert!(
        c.variants[0]
            .matched
            .iter()
            .any(|m| m.frequency_verdict == Verdict::Real)
    );
}

#[test]
fn soft_and_firm_stack_report_the_mount_shift() {
    // Simulator truth: mount 88 Hz on soft grommets, 152 Hz on firm ones
    // (src/source/simulator/presets.rs); the stack's own modes do not move.
    let c = run_compare(demo("stack-soft.json"), demo("stack-firm.json"));
    let v = &c.variants[0];
    let mount = v.mount.as_ref().expect("both runs carry a mount fit");
    let df = mount.frequency_change_pct.unwrap();
    assert!((df - 100.0 * (152.0 / 88.0 - 1.0)).abs() < 10.0, "{df}");
    assert!(v.summary.contains("mount +"), "{}", v.summary);
    assert!(
        v.matched.iter().all(|m| !m.frequency_verdict.is_real()),
        "{v:?}"
    );
    // A band of interest adds the isolation from both mount models.
    let o = CompareOptions {
        isolation_band: Some((200.0, 400.0)),
        ..CompareOptions::default()
    };
    let runs = [
        ("s".to_string(), demo("stack-soft.json")),
        ("f".to_string(), demo("stack-firm.json")),
    ];
    let c = compare_with(&runs, &o).unwrap();
    let iso = c.variants[0]
        .mount
        .as_ref()
        .unwrap()
        .isolation
        .clone()
        .unwrap();
    assert!(
        iso.model_change_db > 0.0,
        "the firmer mount isolates less: {iso:?}"
    );
}

#[test]
fn mass_corrected_stiffness_worked_example() {
    // k = m wn^2, wn = 2 pi f (Rao, *Mechanical Vibrations*, ch. 2, natural frequency of an
    // undamped single-degree-of-freedom system; from memory). A 40 g arm at 150 Hz has
    // k = 0.040 (2 pi 150)^2 = 35 530.6 N/m; a 44 g arm at 160 Hz has 44 468.5 N/m.
    let k = |m_kg: f64, f: f64| m_kg * (2.0 * std::f64::consts::PI * f).powi(2);
    assert!((k(0.040, 150.0) - 35_530.6).abs() < 0.1);
    assert!((k(0.044, 160.0) - 44_468.5).abs() < 0.1);
    let expected = k(0.044, 160.0) / k(0.040, 150.0);
    assert!((stiffness_ratio(40.0, 150.0, 44.0, 160.0) - expected).abs() < 1e-12);
    // Through the comparison: the equal-mass ratio stays beside the corrected one.
    let mut a = run_with("light", &[(150.0, 0)]);
    let mut b = run_with("heavy", &[(160.0, 0)]);
    a.variant.mass_g = Some(40.0);
    b.variant.mass_g = Some(44.0);
    let c = run_compare(a, b);
    let m = &c.variants[0].matched[0];
    assert!((m.stiffness_ratio_mass_corrected.unwrap() - expected).abs() < 1e-9);
    assert!((m.stiffness_ratio - (160.0f64 / 150.0).powi(2)).abs() < 1e-12);
}

#[test]
fn unpaired_modes_are_said() {
    let c = run_compare(
        run_with("a", &[(139.0, 0), (214.0, 0)]),
        run_with("b", &[(139.5, 0), (214.5, 0), (400.0, 0)]),
    );
    let v = &c.variants[0];
    assert_eq!(v.only_in_variant, vec![400.0]);
    assert_eq!(v.unpaired_variant[0].mode, 3);
    assert!(
        v.unpaired_variant[0].reason.contains("no mode of 'a'"),
        "{v:?}"
    );
    let table = tapmodes::run::compare::render::render_table(&c);
    assert!(table.contains("only in b: mode 3 at 400.0 Hz"), "{table}");
    for line in table.lines() {
        assert!(line.chars().count() <= 80, "too wide: {line}");
    }
}

#[test]
fn a_poor_mount_fit_makes_the_mount_verdicts_doubtful() {
    // The firm stack's mount fit leaves 49 % unexplained (above softmount::DOUBTFUL_ERROR,
    // 20 %): its damping even moves the wrong way against the simulator's truth. Neither
    // change may be called real.
    let (soft, firm) = (demo("stack-soft.json"), demo("stack-firm.json"));
    let limit = tapmodes::modes::softmount::DOUBTFUL_ERROR;
    assert!(firm.mount.as_ref().unwrap().error > limit);
    assert!(soft.mount.as_ref().unwrap().error <= limit);
    let c = run_compare(soft.clone(), firm.clone());
    let mount = c.variants[0].mount.as_ref().unwrap();
    assert_eq!(mount.frequency_verdict, Some(Verdict::Doubtful));
    assert_eq!(mount.damping_verdict, Some(Verdict::Doubtful));
    let why = mount.doubt.as_deref().expect("the reason is given");
    assert!(why.contains("'stack-firm' leaves 49 %"), "{why}");
    assert!(!why.contains("stack-soft"), "{why}");
    let json = serde_json::to_value(&c).unwrap();
    assert_eq!(
        json["variants"][0]["mount"]["frequency_verdict"],
        "doubtful"
    );
    assert!(json["variants"][0]["mount"]["doubt"].is_string());
    let table = tapmodes::run::compare::render::render_table(&c);
    assert!(
        table.contains("mount doubt: the mount fit of 'stack-firm'"),
        "{table}"
    );
    let row = table.lines().find(|l| l.starts_with("  mount ")).unwrap();
    assert!(row.ends_with("doubt  doubt"), "{table}");
    assert!(table.contains("mount +69.8 % (doubt)"), "{table}");
    // The same runs with a good fit on both sides: the floor alone decides (no spread).
    let mut good = firm;
    good.mount.as_mut().unwrap().error = 0.1;
    let c = run_compare(soft, good);
    let mount = c.variants[0].mount.as_ref().unwrap();
    assert_eq!(mount.frequency_verdict, Some(Verdict::RealUntested));
    assert_eq!(mount.doubt, None);
}

#[test]
fn a_pin_beyond_the_window_is_kept_with_a_warning() {
    // 139 Hz pinned to 655 Hz is +371 %, far beyond the 50 % window.
    let runs = [
        ("a.json".to_string(), demo("arm-holed.json")),
        ("b.json".to_string(), demo("arm-braced.json")),
    ];
    let rule = |a, b| tapmodes::run::compare::PairRule {
        run: None,
        baseline_mode: a,
        variant_mode: b,
    };
    let o = CompareOptions {
        pins: vec![rule(1, 3), rule(2, 1)],
        ..CompareOptions::default()
    };
    let c = compare_with(&runs, &o).unwrap();
    let v = &c.variants[0];
    assert!(
        v.matched
            .iter()
            .any(|m| (m.baseline_mode, m.variant_mode) == (1, 3) && m.pairing == How::Pinned)
    );
    let w: Vec<&String> = v.warnings.iter().filter(|w| w.contains("--pin")).collect();
    assert_eq!(
        w.len(),
        1,
        "only 1=3 is beyond the window (2=1 is -20 %): {w:?}"
    );
    assert!(
        w[0].contains("--pin 1=3") && w[0].contains("+371 %") && w[0].contains("--max-shift 50 %"),
        "{w:?}"
    );
    let json = serde_json::to_value(&c).unwrap();
    assert!(
        json["variants"][0]["warnings"]
            .to_string()
            .contains("+371 %")
    );
    let table = tapmodes::run::compare::render::render_table(&c);
    assert!(table.contains("warning: --pin 1=3"), "{table}");
}

#[test]
fn a_forbid_is_named_as_the_reason_a_mode_is_unpaired() {
    let runs = [
        (
            "a.json".to_string(),
            run_with("a", &[(100.0, 0), (200.0, 0)]),
        ),
        (
            "b.json".to_string(),
            run_with("b", &[(110.0, 0), (220.0, 0)]),
        ),
    ];
    let o = CompareOptions {
        forbids: vec![tapmodes::run::compare::PairRule {
            run: None,
            baseline_mode: 1,
            variant_mode: 1,
        }],
        ..CompareOptions::default()
    };
    let c = compare_with(&runs, &o).unwrap();
    let v = &c.variants[0];
    assert_eq!(pairs(&c), vec![(2, 2)]);
    for u in v.unpaired_baseline.iter().chain(&v.unpaired_variant) {
        assert!(u.reason.starts_with("forbidden by --forbid 1=1"), "{u:?}");
    }
    let csv = tapmodes::run::compare::render::render_csv(&c).unwrap();
    assert!(csv.contains("b,forbidden,1,1,"), "{csv}");
    assert!(csv.contains("--forbid 1=1 set by the user"), "{csv}");
    // Without the forbid nothing is unpaired, and a forbid never shows up uninvited.
    let c = run_compare(runs[0].1.clone(), runs[1].1.clone());
    assert_eq!(pairs(&c), all_in_order(2));
    let csv = tapmodes::run::compare::render::render_csv(&c).unwrap();
    assert!(!csv.contains("forbidden"), "{csv}");
}

#[test]
fn a_variant_without_modes_is_said_to_have_none() {
    let c = run_compare(
        run_with("a", &[(139.0, 0), (214.0, 0)]),
        run_with("empty", &[]),
    );
    let v = &c.variants[0];
    assert!(v.matched.is_empty());
    assert_eq!(v.unpaired_baseline.len(), 2);
    for u in &v.unpaired_baseline {
        assert_eq!(u.reason, "'empty' has no modes", "{u:?}");
    }
}
