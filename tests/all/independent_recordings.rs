//! The analysis on recordings our simulator did not make: finite-element beams and a TM9 X
//! frame, integrated exactly and passed through realistic chains (16-bit sound card with
//! AC-coupled piezo and mains hum, 12-bit MEMS at 3.2 kHz), made by
//! `tests/independent/make_recordings.py` (numpy 1.26.4, scipy 1.11.4; its FE
//! eigenfrequencies are checked there against Blevins 1979, *Formulas for Natural Frequency
//! and Mode Shape*, Table 8-1, clamped-free, values from memory). The truth is the FE
//! model's, read from each `NAME.truth.json`; the tests read only the committed files.

use tapmodes::hits::Verdict;
use tapmodes::modes::ModeSearch;
use tapmodes::pipeline::{Analysis, AnalysisConfig, analyse_source};
use tapmodes::signal::RoleChoice;
use tapmodes::source::Source;
use tapmodes::source::wav::WavSource;

struct Truth {
    modes: Vec<(f64, f64)>,
    /// The modes the generator counts as findable (10 dB over the noise, 6 dB over their
    /// neighbours).
    targets: Vec<f64>,
    hum: Vec<f64>,
    taps: Vec<(f64, String)>,
}

fn truth(name: &str) -> Truth {
    let path = format!(
        "{}/tests/independent/{name}.truth.json",
        env!("CARGO_MANIFEST_DIR")
    );
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let num = |x: &serde_json::Value| x.as_f64().unwrap();
    Truth {
        modes: v["modes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|m| (num(&m["frequency_hz"]), num(&m["damping_ratio"])))
            .collect(),
        targets: v["target_modes_hz"]
            .as_array()
            .unwrap()
            .iter()
            .map(num)
            .collect(),
        hum: v["hum_hz"].as_array().unwrap().iter().map(num).collect(),
        taps: v["taps"]
            .as_array()
            .unwrap()
            .iter()
            .map(|t| (num(&t["time_s"]), t["kind"].as_str().unwrap().to_string()))
            .collect(),
    }
}

fn analyse(name: &str) -> (Analysis, ModeSearch, f64) {
    let path = format!(
        "{}/tests/independent/{name}.wav",
        env!("CARGO_MANIFEST_DIR")
    );
    let mut src = WavSource::open(std::path::Path::new(&path)).unwrap();
    let fs = src.info().sample_rate;
    let roles = RoleChoice::default().resolve(src.info()).unwrap();
    let a = analyse_source(&mut src, roles, AnalysisConfig::default(), false).unwrap();
    let found = a.result().search.clone();
    (a, found, fs)
}

/// The reported mode nearest `f`, as (frequency, damping).
fn nearest(found: &ModeSearch, f: f64) -> (f64, Option<f64>) {
    let m = found
        .modes
        .iter()
        .min_by(|a, b| {
            (a.frequency_hz - f)
                .abs()
                .total_cmp(&(b.frequency_hz - f).abs())
        })
        .unwrap_or_else(|| panic!("no modes at all"));
    (m.frequency_hz, m.damping_ratio)
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b
}

/// No reported mode sits on a mains line.
fn no_hum_modes(found: &ModeSearch, t: &Truth) {
    for h in &t.hum {
        for m in &found.modes {
            assert!(
                (m.frequency_hz - h).abs() > 1.5,
                "mode {:.2} Hz on the {h} Hz mains line",
                m.frequency_hz
            );
        }
    }
}

/// The verdict of the hit whose trigger is within 5 ms of `time_s`.
fn verdict_at(a: &Analysis, fs: f64, time_s: f64) -> Option<Verdict> {
    a.hits()
        .iter()
        .find(|h| (h.trigger_sample as f64 / fs - time_s).abs() < 0.005)
        .map(|h| h.verdict)
}

#[test]
fn frame_twist_mode_at_48k_with_hum_and_a_force_channel() {
    // The 70-80 Hz twist mode that limits a large craft's tune, through a 16-bit sound
    // card with a piezo and 50 Hz hum, with the default band (once missed in 3 of 3 seeds).
    for name in ["tm9-frame-48k-s1", "tm9-frame-48k-s2"] {
        let t = truth(name);
        let (_, found, _) = analyse(name);
        let twist = t.modes.iter().find(|m| m.0 > 70.0 && m.0 < 80.0).unwrap();
        let (f, z) = nearest(&found, twist.0);
        assert!(rel(f, twist.0) < 5e-4, "{name}: {f} vs {}", twist.0);
        // Its weak neighbour (3-4 dB out of the twist mode's flank) is found too.
        let side = t.modes.iter().find(|m| m.0 > 85.0 && m.0 < 95.0).unwrap();
        assert!(
            rel(nearest(&found, side.0).0, side.0) < 1e-3,
            "{name}: {}",
            side.0
        );
        let z = z.expect("twist damping");
        assert!(rel(z, twist.1) < 0.1, "{name}: damping {z} vs {}", twist.1);
        no_hum_modes(&found, &t);
    }
}

#[test]
fn close_modes_merged_into_two_peaks_are_all_found() {
    // At this measurement point the frame's four modes at 531-649 Hz (2 % damped, 30-40 Hz
    // apart) merge into two broad peaks; the band fit's search for more modes than the
    // peaks show must recover all four (the FE model's values are the truth), and report no
    // mode the FE model does not have.
    let name = "tm9-frame-48k-s1";
    let t = truth(name);
    let (_, found, _) = analyse(name);
    let group: Vec<&(f64, f64)> = (t.modes.iter())
        .filter(|m| m.0 > 500.0 && m.0 < 700.0 && t.targets.contains(&m.0))
        .collect();
    assert_eq!(group.len(), 4);
    for (f_true, z_true) in group {
        let (f, z) = nearest(&found, *f_true);
        assert!(rel(f, *f_true) < 5e-4, "{f} vs {f_true}");
        let z = z.expect("damping");
        assert!(rel(z, *z_true) < 0.05, "{f_true}: damping {z} vs {z_true}");
    }
    for m in &found.modes {
        assert!(
            t.modes.iter().any(|(f, _)| rel(m.frequency_hz, *f) < 0.02),
            "{:.1} Hz matches no FE mode",
            m.frequency_hz
        );
    }
}

#[test]
fn the_default_band_goes_on_while_the_frf_stays_coherent() {
    // The tube's third mode (3964 Hz) lies above where the hammer's force spectrum is 20 dB
    // down (about 3.4 kHz), but the FRF stays coherent there: the default band reaches it.
    let name = "tube-cantilever-48k-stereo";
    let t = truth(name);
    let (_, found, _) = analyse(name);
    let third = t
        .modes
        .iter()
        .find(|m| m.0 > 3500.0 && m.0 < 4500.0)
        .unwrap();
    assert!(t.targets.contains(&third.0));
    assert!(found.band_hz.1 > third.0 * 1.05, "band {:?}", found.band_hz);
    assert!(rel(nearest(&found, third.0).0, third.0) < 5e-4);
    assert!(
        found.notes.iter().any(|n| n.contains("stays coherent")),
        "{:?}",
        found.notes
    );
}

#[test]
fn every_tap_of_the_frame_recording_has_its_verdict() {
    let name = "tm9-frame-48k-s1";
    let t = truth(name);
    let (a, _, fs) = analyse(name);
    for (time, kind) in &t.taps {
        let expected = match kind.as_str() {
            "clean" => Verdict::Accepted,
            "double" => Verdict::DoubleHit,
            "clipped" => Verdict::Overload,
            "cut_by_end" => Verdict::CutShort,
            // 0.5 s after the clipped tap: inside that record, which is judged as a whole.
            "too_soon" => continue,
            other => panic!("unknown tap kind {other}"),
        };
        assert_eq!(
            verdict_at(&a, fs, *time),
            Some(expected),
            "{kind} tap at {time} s"
        );
    }
}

#[test]
fn response_only_piezo_at_48k() {
    // No hammer sensor: no clean tap may be taken for a double hit (the old onset test
    // rejected most), hum is not a mode, and the first two bending modes are found.
    let name = "tube-cantilever-48k-mono";
    let t = truth(name);
    let (a, found, fs) = analyse(name);
    for (i, (time, kind)) in t.taps.iter().enumerate() {
        // A clean tap with another tap inside its 1 s record is rightly a double hit.
        let crowded = t.taps.get(i + 1).is_some_and(|n| n.0 - time < 1.0);
        if kind == "clean" && !crowded {
            assert_eq!(
                verdict_at(&a, fs, *time),
                Some(Verdict::Accepted),
                "at {time}"
            );
        }
    }
    no_hum_modes(&found, &t);
    for truth_mode in &t.modes[..2] {
        let (f, z) = nearest(&found, truth_mode.0);
        assert!(rel(f, truth_mode.0) < 5e-4, "{f} vs {}", truth_mode.0);
        assert!(
            rel(z.unwrap(), truth_mode.1) < 0.05,
            "{z:?} vs {}",
            truth_mode.1
        );
    }
    assert!(
        found
            .notes
            .iter()
            .any(|n| n.contains("50.0") && n.contains("before the taps")),
        "{:?}",
        found.notes
    );
}

#[test]
fn response_only_mems_at_3k2() {
    // 12-bit MEMS with bias drift: clean taps pass, the double tap 13 ms apart is caught,
    // the first bending mode is found.
    let name = "strip-cantilever-mems-3k2";
    let t = truth(name);
    let (a, found, fs) = analyse(name);
    for (time, kind) in &t.taps {
        let v = verdict_at(&a, fs, *time);
        match kind.as_str() {
            "clean" => assert_eq!(v, Some(Verdict::Accepted), "clean at {time}"),
            "double" => assert_eq!(v, Some(Verdict::DoubleHit), "double at {time}"),
            _ => {}
        }
    }
    let (f, _) = nearest(&found, t.modes[0].0);
    assert!(rel(f, t.modes[0].0) < 1e-3, "{f} vs {}", t.modes[0].0);
    // The frame through the same chain: nine modes below 650 Hz, the twist mode found.
    let name = "tm9-frame-mems-3k2";
    let t = truth(name);
    let (a, found, fs) = analyse(name);
    let clean = t.taps.iter().filter(|(_, k)| k == "clean");
    for (time, _) in clean {
        assert_eq!(
            verdict_at(&a, fs, *time),
            Some(Verdict::Accepted),
            "at {time}"
        );
    }
    let twist = t.modes.iter().find(|m| m.0 > 70.0 && m.0 < 80.0).unwrap();
    let (f, _) = nearest(&found, twist.0);
    assert!(rel(f, twist.0) < 5e-3, "{f} vs {}", twist.0);
}

#[test]
fn response_only_modes_come_from_a_parametric_fit() {
    // A Timoshenko strip through a 44.1 kHz sound card with hum, no hammer sensor: a
    // parametric fit (the band fit on the taps' mean complex spectrum, or the fit of the
    // energy spectrum; not half-power on a sloped background) gives the bending modes'
    // frequencies with a median error under 0.2 % (each under 0.3 %) and their damping
    // within 15 % (the response-only targets are on the median), and says which
    // method it used.
    let name = "timoshenko-strip-44k1-mono";
    let t = truth(name);
    let (_, found, _) = analyse(name);
    let mut errors = Vec::new();
    for (f_true, z_true) in t.modes.iter().filter(|m| t.targets.contains(&m.0)) {
        let m = found
            .modes
            .iter()
            .min_by(|a, b| {
                (a.frequency_hz - f_true)
                    .abs()
                    .total_cmp(&(b.frequency_hz - f_true).abs())
            })
            .unwrap();
        assert!(
            rel(m.frequency_hz, *f_true) < 3e-3,
            "{} vs {f_true}",
            m.frequency_hz
        );
        errors.push(rel(m.frequency_hz, *f_true));
        let z = m.damping_ratio.unwrap();
        assert!(
            rel(z, *z_true) < 0.15,
            "{f_true} Hz: damping {z} vs {z_true}"
        );
        assert!(
            m.method == "fit" || m.method == "spectrum_fit",
            "{f_true} Hz: {}",
            m.method
        );
    }
    errors.sort_by(f64::total_cmp);
    assert!(errors[errors.len() / 2] < 2e-3, "{errors:?}");
    no_hum_modes(&found, &t);
}

#[test]
fn response_only_twist_mode_and_its_weak_neighbour_on_a_mems_board() {
    // The TM9 frame through a 12-bit MEMS board at 3.2 kHz, no hammer sensor: the twist
    // mode (74.7 Hz) and the mode beside it (90.4 Hz, under 6 dB out of the twist mode's
    // flank, so no peak of its own) both come out of the band fit on the taps' mean complex
    // spectrum within 0.05 %, with their damping within 15 %.
    let name = "tm9-frame-mems-3k2";
    let t = truth(name);
    let (_, found, _) = analyse(name);
    for (lo, hi) in [(70.0, 80.0), (85.0, 95.0)] {
        let (f_true, z_true) = *t.modes.iter().find(|m| m.0 > lo && m.0 < hi).unwrap();
        let m = (found.modes.iter())
            .find(|m| rel(m.frequency_hz, f_true) < 5e-4)
            .unwrap_or_else(|| panic!("{f_true} Hz not found: {:?}", found.modes));
        let z = m.damping_ratio.unwrap();
        assert!(
            rel(z, z_true) < 0.15,
            "{f_true} Hz: damping {z} vs {z_true}"
        );
        assert_eq!(m.method, "fit");
    }
}

#[test]
fn weak_peaks_the_taps_agree_on_are_modes_without_a_hammer_sensor() {
    // Without a hammer sensor there is no coherence, and a peak under 6 dB of prominence
    // used to be dropped however steady it was from tap to tap. On the MEMS frame recording
    // the 148.3 Hz arm mode stands about 5 dB out of its neighbours (after the weighting to
    // velocity): the taps, each turned to its trigger, agree there (agreement over 0.9, the
    // chance level of 6 taps being 0.75), so it is listed, and with it as a seed the band
    // fit resolves the four merged modes at 531-650 Hz. All nine target modes are found
    // (within half the half-power bandwidth of the FE values) and none is stray.
    let name = "tm9-frame-mems-3k2";
    let t = truth(name);
    let (_, found, _) = analyse(name);
    for &f_true in &t.targets {
        let z_true = t.modes.iter().find(|m| m.0 == f_true).unwrap().1;
        let (f, _) = nearest(&found, f_true);
        assert!(
            rel(f, f_true) < 0.5 * z_true,
            "{f_true} Hz: nearest {f}; {:?}",
            found.modes
        );
    }
    let weak = (found.modes.iter())
        .find(|m| rel(m.frequency_hz, 148.3) < 0.007)
        .unwrap();
    assert!(weak.prominence_db < 6.0, "{weak:?}");
    for m in &found.modes {
        assert!(
            t.modes.iter().any(|(f, _)| rel(m.frequency_hz, *f) < 0.02),
            "stray {m:?}"
        );
    }
    // On the piezo tube the weak peaks in the noise are set aside, and said so.
    let (_, tube, _) = analyse("tube-cantilever-48k-mono");
    assert!(
        tube.notes
            .iter()
            .any(|n| n.contains("weak peaks") && n.contains("do not agree")),
        "{:?}",
        tube.notes
    );
}

#[test]
fn a_stack_on_real_grommets_gets_two_mount_modes_and_a_doubtful_fit() {
    // Viscoelastic grommets (a standard linear solid, loss factor about 0.19) and two
    // mount modes, bounce at 97 Hz and pitch at 176 Hz (the FE model's modes): one mount
    // mode does not explain the transmissibility, two do better and are reported, and
    // the note still says the fit leaves much unexplained (the elastomer's stiffness
    // changes with frequency, which no viscous model follows).
    let name = "tm9-stack-8k-3ch";
    let t = truth(name);
    let path = format!(
        "{}/tests/independent/{name}.wav",
        env!("CARGO_MANIFEST_DIR")
    );
    let mut src = WavSource::open(std::path::Path::new(&path)).unwrap();
    let choice = RoleChoice {
        force: Some(0),
        base: Some(1),
        response: Some(2),
        no_force: false,
    };
    let roles = choice.resolve(src.info()).unwrap();
    let a = analyse_source(&mut src, roles, AnalysisConfig::default(), false).unwrap();
    let r = a.result();
    let mount = r.mount.as_ref().expect("a mount fit");
    let (bounce, pitch) = (t.modes[0].0, t.modes[1].0);
    assert!(rel(mount.natural_frequency_hz, bounce) < 0.03, "{mount:?}");
    let second = mount.second.as_ref().expect("two mount modes");
    assert!(rel(second.natural_frequency_hz, pitch) < 0.03, "{mount:?}");
    assert!(second.one_mode_error > mount.error, "{mount:?}");
    assert!(
        mount.error > tapmodes::modes::softmount::DOUBTFUL_ERROR,
        "{mount:?}"
    );
    assert!(
        r.notes
            .iter()
            .any(|n| n.contains("two viscous modes") && n.contains("unexplained")),
        "{:?}",
        r.notes
    );
}

/// The accuracy table of `bench/independent.md`: every recording with its default roles
/// (the stacks with their base channel), every target mode found or not, frequency and
/// damping errors, modes that match no FE mode, modes on a mains line, clean taps rejected.
/// Regenerate with
/// `cargo test --release --test all accuracy_table -- --ignored --nocapture`.
#[test]
#[ignore]
fn accuracy_table() {
    let files: [(&str, &str, RoleChoice); 9] = [
        (
            "tm9-frame-48k-s1",
            "force, piezo, hum, 48 kHz",
            RoleChoice::default(),
        ),
        (
            "tm9-frame-48k-s2",
            "force, piezo, hum, 48 kHz",
            RoleChoice::default(),
        ),
        (
            "tube-cantilever-48k-stereo",
            "force, piezo, hum, 48 kHz",
            RoleChoice::default(),
        ),
        (
            "tube-cantilever-48k-mono",
            "response only, piezo, hum, 48 kHz",
            RoleChoice::default(),
        ),
        (
            "timoshenko-strip-44k1-mono",
            "response only, piezo, hum, 44.1 kHz",
            RoleChoice::default(),
        ),
        (
            "strip-cantilever-mems-3k2",
            "response only, MEMS 12-bit, 3.2 kHz",
            RoleChoice::default(),
        ),
        (
            "tm9-frame-mems-3k2",
            "response only, MEMS 12-bit, 3.2 kHz",
            RoleChoice::default(),
        ),
        (
            "tm9-stack-8k-3ch",
            "force, base, stack, 8 kHz",
            RoleChoice {
                force: Some(0),
                base: Some(1),
                response: Some(2),
                no_force: false,
            },
        ),
        (
            "tm9-stack-mems-3k2",
            "base, stack, MEMS 3.2 kHz",
            RoleChoice {
                force: None,
                base: Some(0),
                response: Some(1),
                no_force: true,
            },
        ),
    ];
    println!(
        "| recording | chain | target modes found | f error % (each) | damping error % (each) | modes matching no FE mode | on a mains line | clean taps rejected |"
    );
    println!("|---|---|---|---|---|---|---|---|");
    let (mut f_force, mut z_force, mut f_resp, mut z_resp) = (vec![], vec![], vec![], vec![]);
    for (name, chain, choice) in files {
        let t = truth(name);
        let path = format!(
            "{}/tests/independent/{name}.wav",
            env!("CARGO_MANIFEST_DIR")
        );
        let mut src = WavSource::open(std::path::Path::new(&path)).unwrap();
        let fs = src.info().sample_rate;
        let roles = choice.resolve(src.info()).unwrap();
        let a = analyse_source(&mut src, roles, AnalysisConfig::default(), false).unwrap();
        let r = a.result();
        let modes = r.modes();
        // What the tool reports: the mode list, and the mount modes of the soft-mount fit
        // (marked "m"; a stack's bounce and pitch are read on the transmissibility).
        let mut reported: Vec<(f64, Option<f64>, &str)> = (modes.iter())
            .map(|m| (m.frequency_hz, m.damping_ratio, ""))
            .collect();
        if let Some(mount) = r.mount.as_ref() {
            reported.push((mount.natural_frequency_hz, Some(mount.damping_ratio), " m"));
            if let Some(second) = mount.second.as_ref() {
                reported.push((
                    second.natural_frequency_hz,
                    Some(second.damping_ratio),
                    " m",
                ));
            }
        }
        let (mut found, mut fe, mut ze) = (0, vec![], vec![]);
        for (f_true, z_true) in t.modes.iter().filter(|m| t.targets.contains(&m.0)) {
            // Found: a reported mode within half the half-power bandwidth, or 0.5 %.
            let tol = (0.5 * z_true).max(0.005) * f_true;
            let Some(&(f_found, z_found, mark)) = reported
                .iter()
                .filter(|m| (m.0 - f_true).abs() < tol)
                .min_by(|a, b| (a.0 - f_true).abs().total_cmp(&(b.0 - f_true).abs()))
            else {
                continue;
            };
            found += 1;
            let e = 100.0 * (f_found - f_true) / f_true;
            fe.push(format!("{e:+.3}{mark}"));
            let zr = z_found.map(|z| 100.0 * (z - z_true) / z_true);
            ze.push(zr.map_or("-".into(), |v| format!("{v:+.1}{mark}")));
            let (fv, zv) = if roles.force.is_some() {
                (&mut f_force, &mut z_force)
            } else {
                (&mut f_resp, &mut z_resp)
            };
            fv.push(e.abs());
            if let Some(v) = zr {
                zv.push(v.abs());
            }
        }
        let stray = modes
            .iter()
            .filter(|m| {
                !t.modes
                    .iter()
                    .any(|(f, _)| (m.frequency_hz - f).abs() < 0.02 * f)
            })
            .count();
        let hum = modes
            .iter()
            .filter(|m| t.hum.iter().any(|h| (m.frequency_hz - h).abs() < 1.5))
            .count();
        let rejected = t
            .taps
            .iter()
            .enumerate()
            .filter(|(i, (time, kind))| {
                let crowded = t.taps.get(i + 1).is_some_and(|n| n.0 - time < 1.0);
                kind == "clean"
                    && !crowded
                    && verdict_at(&a, fs, *time).is_some_and(|v| v != Verdict::Accepted)
            })
            .count();
        println!(
            "| {name} | {chain} | {found} of {} | {} | {} | {stray} | {hum} | {rejected} |",
            t.targets.len(),
            fe.join(", "),
            ze.join(", ")
        );
    }
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v.get(v.len() / 2).copied().unwrap_or(f64::NAN)
    };
    println!();
    println!(
        "Medians of |error| over the modes found: with a force channel, frequency {:.3} %, damping {:.1} %; response only, frequency {:.3} %, damping {:.1} %.",
        median(&mut f_force),
        median(&mut z_force),
        median(&mut f_resp),
        median(&mut z_resp)
    );
}
