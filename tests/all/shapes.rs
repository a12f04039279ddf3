//! Mode shapes: the shared-pole fit on an analytic multi-point model, and the modal
//! assurance criterion (Allemang & Brown 1982, "A correlation coefficient for modal vector
//! analysis", IMAC 1: MAC = |a^H b|^2 / ((a^H a)(b^H b))).

use realfft::num_complex::Complex64;
use tapmodes::modes::fit::Seed;
use tapmodes::rng::Rng;
use tapmodes::shapes::{self, mac, points};

#[test]
fn mac_by_hand() {
    // [1, 0] against [1, 1]: (1)^2 / (1 * 2) = 0.5 (Allemang & Brown 1982's definition).
    assert!((mac(&[1.0, 0.0], &[1.0, 1.0]).unwrap() - 0.5).abs() < 1e-12);
    // Scale and sign do not matter.
    let a = [0.3, -1.0, 0.7, 0.1];
    let b: Vec<f64> = a.iter().map(|v| -2.5 * v).collect();
    assert!((mac(&a, &b).unwrap() - 1.0).abs() < 1e-12);
    // [1, 2, 3] against [3, 2, 1]: 10^2 / (14 * 14) = 0.5102
    assert!((mac(&[1.0, 2.0, 3.0], &[3.0, 2.0, 1.0]).unwrap() - 100.0 / 196.0).abs() < 1e-12);
    assert!(mac(&[0.0, 0.0], &[1.0, 1.0]).is_none());
    assert!(mac(&[1.0], &[1.0, 1.0]).is_none());
}

/// Free-free beam mode shapes (Blevins 1979, *Formulas for Natural Frequency and Mode
/// Shape*, Table 8-1, free-free: `phi = cosh + cos - sigma (sinh + sin)` with lambda 4.7300,
/// 7.8532 and sigma 0.9825, 1.0008; from memory) sampled at 8 points: the symmetric first and
/// antisymmetric second shapes are unrelated, MAC below 0.1.
fn beam_shape(lambda: f64, sigma: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| {
            let x = lambda * (i as f64 + 0.5) / n as f64;
            x.cosh() + x.cos() - sigma * (x.sinh() + x.sin())
        })
        .collect()
}

#[test]
fn unrelated_shapes_have_a_small_mac() {
    let a = beam_shape(4.7300, 0.9825, 8);
    let b = beam_shape(7.8532, 1.0008, 8);
    let m = mac(&a, &b).unwrap();
    assert!(m < 0.1, "MAC = {m}");
    assert!(mac(&a, &a).unwrap() > 0.999_999);
}

/// Accelerance of point p: `sum_r -w^2 phi_pr phi_ref,r / (w_r^2 - w^2 + 2j z_r w_r w)`
/// (Ewins 2000, *Modal Testing*, 2nd ed., sec. 2.6; mass-normalised shapes).
fn model(
    freqs: &[f64],
    modes: &[(f64, f64, Vec<f64>)],
    reference: usize,
    noise: f64,
    seed: u64,
) -> Vec<Vec<Complex64>> {
    let n_points = modes[0].2.len();
    let mut rng = Rng::new(seed);
    (0..n_points)
        .map(|p| {
            let h: Vec<Complex64> = freqs
                .iter()
                .map(|&f| {
                    let w = 2.0 * std::f64::consts::PI * f;
                    modes
                        .iter()
                        .map(|(fr, z, phi)| {
                            let wr = 2.0 * std::f64::consts::PI * fr;
                            -w * w * phi[p] * phi[reference]
                                / Complex64::new(wr * wr - w * w, 2.0 * z * wr * w)
                        })
                        .sum()
                })
                .collect();
            let peak = h.iter().map(|v| v.norm()).fold(0.0, f64::max);
            h.iter()
                .map(|v| v + Complex64::new(rng.normal(), rng.normal()) * noise * peak)
                .collect()
        })
        .collect()
}

#[test]
fn shared_pole_fit_recovers_two_close_modes_at_eight_points() {
    // Two modes 2.5 Hz apart at 70 Hz with 1.5 % damping: their half-power bands (2.1 Hz)
    // overlap. Shapes: the arms bending together, and twisting (signs alternate by side).
    let phi1 = vec![1.0, 0.8, 0.55, 0.3, -0.25, -0.5, -0.85, -0.95];
    let phi2 = vec![0.6, -0.9, 1.0, -0.4, 0.5, -1.0, 0.2, 0.7];
    let modes = vec![(70.0, 0.015, phi1.clone()), (72.5, 0.015, phi2.clone())];
    let freqs: Vec<f64> = (0..800).map(|k| k as f64 * 0.25).collect();
    let frfs = model(&freqs, &modes, 0, 0.005, 7);
    let seeds = [
        Seed {
            frequency_hz: 70.3,
            damping_ratio: 0.02,
        },
        Seed {
            frequency_hz: 72.2,
            damping_ratio: 0.02,
        },
    ];
    let fit = shapes::fit_shared(&freqs, &frfs, (60.0, 83.0), &seeds).expect("fit");
    let found = shapes::shapes(&fit);
    assert_eq!(found.len(), 2);
    for (s, (f, z, phi)) in found.iter().zip(&modes) {
        let m = mac(&s.amplitudes, phi).unwrap();
        eprintln!(
            "mode {:.3} Hz (true {f}), damping {:.4} (true {z}), MAC {m:.5}, realness {:.4}",
            s.frequency_hz, s.damping_ratio, s.realness
        );
        assert!(m > 0.99, "MAC {m}");
        assert!(
            (s.frequency_hz - f).abs() < 0.05,
            "{} vs {f}",
            s.frequency_hz
        );
        assert!((s.damping_ratio - z).abs() < 0.1 * z);
        // Relative signs match the true shape's (after one common sign: a shape's overall
        // sign is a convention, here its largest entry is positive).
        let common: f64 = s
            .amplitudes
            .iter()
            .zip(phi)
            .map(|(a, t)| a * t)
            .sum::<f64>()
            .signum();
        for (a, t) in s.amplitudes.iter().zip(phi) {
            if t.abs() > 0.2 {
                assert_eq!(
                    (a * common).signum(),
                    t.signum(),
                    "{:?} vs {phi:?}",
                    s.amplitudes
                );
            }
        }
        let top = s.amplitudes.iter().copied().fold(f64::MIN, f64::max);
        assert!(
            (top - 1.0).abs() < 1e-9,
            "largest entry is +1: {:?}",
            s.amplitudes
        );
    }
    // The two recovered shapes are told apart.
    assert!(mac(&found[0].amplitudes, &found[1].amplitudes).unwrap() < 0.5);
}

#[test]
fn seeds_cluster_the_points_modes_and_one_point_peaks_are_set_aside() {
    let per_point = vec![
        vec![(70.1, 0.02), (150.0, 0.01)],
        vec![(70.4, 0.03), (300.0, 0.01)],
        vec![(72.6, 0.02)],
        vec![(72.4, 0.02), (150.5, 0.01)],
    ];
    let names: Vec<String> = ["a", "b", "c", "d"].iter().map(|s| s.to_string()).collect();
    let (s, aside) = points::seeds_from(&per_point, &names);
    assert_eq!(s.len(), 3, "{s:?}");
    assert!((s[0].frequency_hz - 70.25).abs() < 1e-9);
    assert!((s[1].frequency_hz - 72.5).abs() < 1e-9);
    assert_eq!(aside.len(), 1, "{aside:?}");
    assert_eq!(aside[0].points, vec![1]);
    assert!(
        aside[0].reason.contains("1 of 4 points only (point 2 'b')"),
        "{}",
        aside[0].reason
    );
    let g = points::group(&s, 0.15);
    assert_eq!(g.len(), 2);
    assert_eq!(g[0].len(), 2);
}

/// A shape is set aside only when it is both far from real and sits at one point.
#[test]
fn one_point_shapes_far_from_real_are_set_aside() {
    let shape = |residues: Vec<[f64; 2]>, realness: f64| shapes::Shape {
        frequency_hz: 422.8,
        damping_ratio: 0.006,
        amplitudes: vec![0.0; residues.len()],
        residues,
        realness,
    };
    let names: Vec<String> = (1..=4).map(|i| format!("p{i}")).collect();
    let one_point = vec![[1.0, 0.4], [0.05, 0.0], [0.0, 0.1], [0.1, 0.05]];
    let spread = vec![[1.0, 0.4], [0.8, 0.0], [-0.7, 0.1], [0.6, 0.05]];
    let aside = points::doubtful_shape(&shape(one_point.clone(), 0.87), &names).unwrap();
    assert_eq!(aside.points, vec![0]);
    assert!(
        aside.reason.contains("at point 1 'p1' alone"),
        "{}",
        aside.reason
    );
    assert!(points::doubtful_shape(&shape(spread, 0.87), &names).is_none());
    assert!(points::doubtful_shape(&shape(one_point, 0.99), &names).is_none());
}

/// End to end: the TM9 multi-point demo (one recording per point, through the pipeline) gives
/// back its two close modes' shapes with MAC above 0.99 against the shapes it was made from,
/// and `shapes-compare` pairs the braced variant's swapped modes by shape.
#[test]
fn tm9_points_shapes_and_a_swap_paired_by_shape() {
    use tapmodes::cli::shapes::{TM9_FLAP, TM9_TWIST};
    let dir = crate::common::temp_dir("shapes-tm9");
    let s = |p: &std::path::Path| p.to_str().unwrap().to_string();
    let (base, braced) = (dir.join("base"), dir.join("braced"));
    assert_eq!(crate::common::tapmodes(&["shapes-demo", &s(&base)]).0, 0);
    assert_eq!(
        crate::common::tapmodes(&["shapes-demo", &s(&braced), "--braced"]).0,
        0
    );
    let (ja, jb) = (dir.join("a.json"), dir.join("b.json"));
    let pics = dir.join("pics");
    for (plan, out) in [(&base, &ja), (&braced, &jb)] {
        let (code, o, e) = crate::common::tapmodes(&[
            "shapes",
            &s(&plan.join("plan.txt")),
            "--out",
            &s(out),
            "--svg",
            &s(&pics),
        ]);
        assert_eq!(code, 0, "{o}{e}");
    }
    let file: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&ja).unwrap()).unwrap();
    let modes = file["modes"].as_array().unwrap();
    let amps = |i: usize| -> Vec<f64> {
        modes[i]["amplitudes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect()
    };
    // Two modes: the 413 Hz peak one point showed is set aside, not fitted (a third, one-point
    // shape of realness 0.87 before).
    assert_eq!(modes.len(), 2, "{}", file["modes"]);
    let aside = file["set_aside"].as_array().unwrap();
    assert!(
        aside
            .iter()
            .all(|a| a["reason"].as_str().unwrap().contains("set aside")
                || a["reason"].as_str().unwrap().contains("points only")),
        "{aside:?}"
    );
    assert!(
        aside
            .iter()
            .all(|a| a["frequency_hz"].as_f64().unwrap() > 100.0),
        "{aside:?}"
    );
    // Unbraced: twist 68 Hz below flap 71 Hz.
    let (m_twist, m_flap) = (
        mac(&amps(0), &TM9_TWIST).unwrap(),
        mac(&amps(1), &TM9_FLAP).unwrap(),
    );
    eprintln!("TM9 demo: MAC twist {m_twist:.5}, flap {m_flap:.5}");
    assert!(m_twist > 0.99 && m_flap > 0.99);
    let (code, out, err) = crate::common::tapmodes(&["shapes-compare", &s(&ja), &s(&jb)]);
    assert_eq!(code, 0, "{err}");
    let rows: Vec<&str> = out
        .lines()
        .filter(|l| {
            l.trim_start().starts_with(|c: char| c.is_ascii_digit()) && l.contains(" crossed ")
        })
        .collect();
    assert_eq!(rows.len(), 2, "{out}");
    assert!(
        rows[0].trim_start().starts_with("1-2") && rows[1].trim_start().starts_with("2-1"),
        "{out}"
    );
    let (code, _, err) =
        crate::common::tapmodes(&["shapes-compare", &s(&ja), &s(&dir.join("nope.json"))]);
    assert_ne!(code, 0);
    assert!(err.contains("nope.json': no such file"), "{err}");
    let (code, _, err) =
        crate::common::tapmodes(&["shapes-compare", &s(&ja), &s(&jb), "--max-shift-pct", "-5"]);
    assert_ne!(code, 0);
    assert!(err.contains("must be a positive number (got -5)"), "{err}");

    // The point FRFs come back from the file: the shared-pole fit on them alone gives the
    // file's shapes again (no recording needed).
    let back = points::ShapeFile::load(&ja).unwrap();
    let frf = back.frf.as_ref().expect("point FRFs in the file");
    assert_eq!(frf.points.len(), 8);
    assert!(frf.frequency_hz.len() > 100);
    let coherence = &frf.points[0].coherence;
    let k68 = frf
        .frequency_hz
        .iter()
        .position(|f| (*f - 68.0).abs() < 0.3)
        .unwrap();
    assert!(
        coherence[k68] > 0.9,
        "coherence at 68 Hz {}",
        coherence[k68]
    );
    let frfs: Vec<Vec<Complex64>> = (0..8).map(|p| frf.complex(p)).collect();
    let seeds: Vec<Seed> = back
        .modes
        .iter()
        .map(|m| Seed {
            frequency_hz: m.shape.frequency_hz,
            damping_ratio: m.shape.damping_ratio,
        })
        .collect();
    let fit = shapes::fit_shared(&frf.frequency_hz, &frfs, (60.0, 80.0), &seeds).unwrap();
    for (again, kept) in shapes::shapes(&fit).iter().zip(&back.modes) {
        let m = mac(&again.amplitudes, &kept.shape.amplitudes).unwrap();
        assert!(m > 0.999, "MAC {m}");
        assert!((again.frequency_hz - kept.shape.frequency_hz).abs() < 0.05);
    }
    // The pictures (the braced run's, written last): they parse as XML and hold every
    // point at rest (hollow) and moved (filled), placed as the oblique view of the plan's
    // coordinates under one scale and offset.
    let back_b = points::ShapeFile::load(&jb).unwrap();
    for (i, m) in back_b.modes.iter().enumerate() {
        let text = std::fs::read_to_string(pics.join(format!("mode-{}.svg", i + 1))).unwrap();
        let doc = roxmltree::Document::parse(&text).expect("the picture is XML");
        let circles: Vec<(bool, f64, f64)> = doc
            .descendants()
            .filter(|n| n.has_tag_name("circle"))
            .map(|n| {
                let num = |a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
                (n.attribute("fill") == Some("none"), num("cx"), num("cy"))
            })
            .collect();
        let rest: Vec<(f64, f64)> = circles.iter().filter(|c| c.0).map(|c| (c.1, c.2)).collect();
        let moved: Vec<(f64, f64)> = circles
            .iter()
            .filter(|c| !c.0)
            .map(|c| (c.1, c.2))
            .collect();
        assert_eq!((rest.len(), moved.len()), (8, 8), "{text}");
        let want = shapes::picture::placed(&back_b.points, &m.shape).unwrap();
        let scale = (rest[2].0 - rest[0].0) / (want[2].0.0 - want[0].0.0);
        assert!(scale > 0.0);
        for (got, w) in [(&rest, 0), (&moved, 1)] {
            for p in 0..8 {
                let (u, v) = if w == 0 { want[p].0 } else { want[p].1 };
                let (u0, v0) = want[0].0;
                let x = rest[0].0 + scale * (u - u0);
                let y = rest[0].1 - scale * (v - v0);
                assert!(
                    (got[p].0 - x).abs() < 1.5 && (got[p].1 - y).abs() < 1.5,
                    "point {} ({w}): {:?} vs ({x}, {y})",
                    p + 1,
                    got[p]
                );
            }
        }
    }
    let size = std::fs::metadata(&ja).unwrap().len();
    eprintln!("shape file with point FRFs: {size} bytes");
    assert!(size < 1_000_000, "{size} bytes");
}

#[test]
fn bad_plans_are_one_sentence_and_an_error() {
    let dir = crate::common::temp_dir("shapes-bad");
    let cases = [
        (
            "one.txt",
            "only point | z | p1.wav\n",
            "a shape needs at least two",
        ),
        (
            "fields.txt",
            "a | z\nb | z | p2.wav\n",
            "must be 'name | direction | recording.wav'",
        ),
        (
            "twice.txt",
            "a | z | p1.wav\nb | z | ./p1.wav\n",
            "lines 1 and 2 of the plan",
        ),
        (
            "same-point.txt",
            "a | z | p1.wav\na | z | p2.wav\n",
            "name the same point 'a | z'",
        ),
        ("binary.txt", "RIFF\0\0\0\0WAVEfmt ", "is not a text plan"),
        (
            "mixed.txt",
            "a | z | p1.wav | 0, 0, 0\nb | z | p2.wav\n",
            "give them for every point or none",
        ),
        (
            "coords.txt",
            "a | z | p1.wav | 0, 0\nb | z | p2.wav | 1, 2, 3\n",
            "the coordinates must be three numbers in mm",
        ),
        (
            "missing.txt",
            "a | z | nope1.wav\nb | z | nope2.wav\n",
            "point 'a'",
        ),
    ];
    for (name, text, want) in cases {
        let plan = dir.join(name);
        std::fs::write(&plan, text).unwrap();
        let (code, out, err) = crate::common::tapmodes(&["shapes", plan.to_str().unwrap()]);
        assert_ne!(code, 0, "{name}: {out}");
        assert!(err.contains(want), "{name}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
    }
    let plan = dir.join("nowhere.txt");
    std::fs::write(&plan, "a | z | p1.wav\nb | radial | p2.wav\n").unwrap();
    let (code, _, err) =
        crate::common::tapmodes(&["shapes", plan.to_str().unwrap(), "--svg", "pics"]);
    assert_ne!(code, 0);
    assert!(err.contains("--svg: point 'a' has no coordinates"), "{err}");
    let (code, _, err) =
        crate::common::tapmodes(&["shapes", dir.join("absent.txt").to_str().unwrap()]);
    assert_ne!(code, 0);
    assert!(err.contains("absent.txt': no such file"), "{err}");
}
