//! Strip test: the ASTM E1876 formulas on a worked example, the beam theory behind them, and
//! recovery of E and G from recordings of a simulated free-free bar of known E and G.

use crate::common::{tapmodes, temp_dir};
use tapmodes::strip::bar::{self, Bar, FREE_FREE_LAMBDA, TapPlan};
use tapmodes::strip::formulas::{self, Strip};

fn close(got: f64, want: f64, rel: f64) -> bool {
    (got - want).abs() <= rel * want.abs()
}

/// Worked example (numbers chosen for this test; the formulas are ASTM E1876-15, section 9,
/// Eq. 1, 2, 10 and 11, all recalled from memory).
/// Strip L = 180 mm, b = 20 mm, t = 2 mm, m = 13.50 g; ff = 180.0 Hz, ft = 620.0 Hz, mu = 0.30.
#[test]
fn worked_example_e1876_rectangular_bar() {
    let s = Strip::from_mm_g(180.0, 20.0, 2.0, 13.5);
    // Eq. 2 (from memory): t/L = 2/180 = 0.0111111, (t/L)^2 = 1.234568e-4, (t/L)^4 = 1.524158e-8
    //   6.585 (1 + 0.0752*0.3 + 0.8109*0.09) (t/L)^2 = 6.585 * 1.095541 * 1.234568e-4 = 8.906309e-4
    //   0.868 (t/L)^4 = 1.322969e-8
    //   8.340 (1 + 0.2023*0.3 + 2.173*0.09)(t/L)^4 = 8.340 * 1.256260 * 1.524158e-8 = 1.596915e-7
    //   over 1 + 6.338 (1 + 0.1408*0.3 + 1.536*0.09)(t/L)^2 = 1 + 6.338*1.180480*1.234568e-4 = 1.000924
    //   T1 = 1 + 8.906309e-4 - 1.322969e-8 - 1.595440e-7 = 1.00089046
    let t1 = formulas::t1(&s, 0.30);
    assert!((t1 - 1.000_890_46).abs() < 5e-9, "T1 = {t1}");
    // Eq. 1 (from memory): 0.9465 * (0.0135 * 180^2 / 0.020) * (0.18^3 / 0.002^3)
    //   = 0.9465 * 21870 * 729000 = 1.5090267e10 Pa; times T1 = 1.51037e10 Pa = 15.104 GPa
    let e = formulas::youngs_modulus(&s, 180.0, 0.30);
    assert!(close(e, 15.1037e9, 1e-5), "E = {e}");
    // Eq. 11 (from memory), n = 1: b/t = 10, t/b = 0.1, e^(10 pi) + 1 = 4.4e13 (1.991/that ~ 0)
    //   denominator 4 - 2.521 * 0.1 * (1 - 4.5e-14) = 3.7479
    //   first bracket (1 + 100) / 3.7479 = 26.948424
    //   second bracket 1 + 0.00851 * (20/180)^2 = 1.000105062
    //   minus 0.060 * (20/180)^1.5 * (10 - 1)^2 = 0.060 * 0.0370370 * 81 = 0.180000
    //   R = 26.948424 * 1.000105062 - 0.18 = 26.771256
    let r = formulas::r_factor(&s);
    assert!((r - 26.771_256).abs() < 5e-6, "R = {r}");
    // Eq. 10 (from memory): 4 * 0.18 * 0.0135 * 620^2 / (0.020 * 0.002) = 9.34092e7 Pa; times R
    //   = 2.500682e9 Pa = 2.5007 GPa
    let g = formulas::shear_modulus(&s, 620.0);
    assert!(close(g, 2.500_682e9, 1e-6), "G = {g}");
    // Eq. 13 (from memory): E/(2G) - 1 = 15.1037 / 5.001364 - 1 = 2.0199: not isotropic.
    let mu = formulas::poisson_from(e, g);
    assert!((mu - 2.0199).abs() < 1e-4, "mu = {mu}");
    assert!(!formulas::plausible_poisson(mu));
}

/// The 0.9465 of E1876 Eq. 1 is 48 pi^2 / lambda_1^4 with lambda_1 = 4.7300 (Blevins 1979,
/// *Formulas for Natural Frequency and Mode Shape*, Table 8-1; from memory): a thin bar's E
/// from its Euler-Bernoulli frequency comes back to the T1 correction.
#[test]
fn flexural_constant_is_the_free_free_eigenvalue() {
    let lam = FREE_FREE_LAMBDA[0];
    let c = 48.0 * std::f64::consts::PI.powi(2) / lam.powi(4);
    assert!((c - 0.9465).abs() < 2e-4, "48 pi^2 / lambda^4 = {c}");
}

/// Torsion constant of a rectangle: for a square K = 0.1406 a^4, for b/t = 10 the ratio
/// K / (b t^3) = 0.312 (Timoshenko & Goodier, *Theory of Elasticity*, 3rd ed., sec. 109,
/// table of k1; values from memory).
#[test]
fn torsion_constant_matches_the_table() {
    let bar = |b: f64, t: f64| Bar {
        length_m: 1.0,
        width_m: b,
        thickness_m: t,
        density: 1.0,
        youngs_pa: 1.0,
        shear_pa: 1.0,
    };
    let k = bar(1.0, 1.0).torsion_constant();
    assert!((k - 0.1406).abs() < 2e-4, "square: {k}");
    let k = bar(10.0, 1.0).torsion_constant() / 10.0;
    assert!((k - 0.312).abs() < 1e-3, "b/t = 10: {k}");
}

fn run_strip(dir: &std::path::Path, name: &str, b: &Bar, extra: &[&str]) -> serde_json::Value {
    let half = b.width_m / 2.0;
    let modes = b.modes_for((1.0, half), (0.0, half));
    let plan = TapPlan {
        noise: 3e-4,
        ..TapPlan::default()
    };
    let (f, a) = bar::synthesise(&modes, &plan);
    let wav = dir.join(format!("{name}.wav"));
    let out = dir.join(format!("{name}.json"));
    bar::write_wav(&wav, plan.sample_rate, &f, &a).unwrap();
    let dims = [
        format!("{}", b.length_m * 1e3),
        format!("{}", b.width_m * 1e3),
        format!("{}", b.thickness_m * 1e3),
        format!("{}", b.mass_kg() * 1e3),
    ];
    let mut args = vec![
        "strip",
        wav.to_str().unwrap(),
        "--length-mm",
        &dims[0],
        "--width-mm",
        &dims[1],
        "--thickness-mm",
        &dims[2],
        "--mass-g",
        &dims[3],
        "--out",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let (code, stdout, stderr) = tapmodes(&args);
    assert_eq!(code, 0, "{stdout}\n{stderr}");
    serde_json::from_str(&std::fs::read_to_string(&out).unwrap()).unwrap()
}

/// Independent check: a free-free bar of known E and G, its frequencies from beam theory
/// (Euler-Bernoulli with lambda_1 = 4.7300, Blevins 1979 Table 8-1, from memory; Saint-Venant
/// torsion of a rectangle, Timoshenko & Goodier sec. 109, from memory), tapped in a simulated
/// recording with noise; `tapmodes strip` must give E within 1 % and G within 1.5 % (E1876's
/// R carries a finite-length term that plain Saint-Venant torsion does not have).
#[test]
fn simulated_laminate_bar_gives_back_e_and_g() {
    let dir = temp_dir("strip-laminate");
    let b = Bar {
        length_m: 0.180,
        width_m: 0.020,
        thickness_m: 0.002,
        density: 1550.0,
        youngs_pa: 45e9,
        shear_pa: 3.5e9,
    };
    let v = run_strip(&dir, "lam", &b, &[]);
    let e = v["youngs_modulus_pa"].as_f64().unwrap();
    let g = v["shear_modulus_pa"].as_f64().unwrap();
    eprintln!("laminate: E {e:.4e} (true 4.5e10), G {g:.4e} (true 3.5e9)");
    assert!(close(e, 45e9, 0.01), "E = {e}");
    assert!(close(g, 3.5e9, 0.015), "G = {g}");
    let ue = v["youngs_modulus_uncertainty_pa"].as_f64().unwrap();
    assert!(ue > 0.0 && ue < 0.1 * e, "U(E) = {ue}");
    assert!(
        v["poisson_ratio"].is_null(),
        "a laminate has no Poisson's ratio"
    );
    assert!(
        v["poisson_ratio_reason"]
            .as_str()
            .unwrap()
            .contains("not declared isotropic"),
        "{}",
        v["poisson_ratio_reason"]
    );
    assert_eq!(v["result"]["poisson_in_t1_from"], "default");
    // T1 over Poisson's ratio 0..0.5 on a 2 mm x 180 mm strip: below 0.1 % (E1876 Eq. 2, from
    // memory), and the note says by how much.
    let effect = v["result"]["poisson_effect_on_e"].as_f64().unwrap();
    assert!(effect > 0.0 && effect < 1e-3, "{effect}");
    assert!(v["notes"].to_string().contains("would move E by 0.020 %"));
    assert_eq!(v["mode_roles"][0], "first flexural (E)");
    assert!(v["modes"].as_array().unwrap().len() >= 4);
}

/// An isotropic bar (aluminium-like E = 70 GPa, G = 26.3 GPa: Poisson's ratio 0.331 by
/// E = 2G(1 + mu), common practice, no source): declared isotropic, E within 1 % and
/// Poisson's ratio within 0.02; not declared, no ratio (ASTM E1876's E/(2G) - 1 holds for
/// isotropic materials only) and T1 takes the default 0.3.
#[test]
fn simulated_isotropic_bar_gives_poissons_ratio_only_when_declared() {
    let dir = temp_dir("strip-iso");
    let b = Bar {
        length_m: 0.200,
        width_m: 0.025,
        thickness_m: 0.003,
        density: 2700.0,
        youngs_pa: 70e9,
        shear_pa: 26.3e9,
    };
    let v = run_strip(&dir, "iso", &b, &["--isotropic"]);
    let e = v["youngs_modulus_pa"].as_f64().unwrap();
    eprintln!("isotropic: E {e:.4e} (true 7.0e10), {}", v["poisson_ratio"]);
    assert!(close(e, 70e9, 0.01), "E = {e}");
    let mu = v["poisson_ratio"]
        .as_f64()
        .expect("isotropic: a Poisson's ratio");
    assert!((mu - (70.0 / (2.0 * 26.3) - 1.0)).abs() < 0.02, "mu = {mu}");
    assert!(v["poisson_ratio_reason"].is_null());
    assert_eq!(v["result"]["poisson_in_t1_from"], "E/(2G) - 1");
    assert!((v["result"]["poisson_in_t1"].as_f64().unwrap() - mu).abs() < 1e-9);
    let v = run_strip(&dir, "iso-undeclared", &b, &[]);
    assert!(v["poisson_ratio"].is_null(), "{}", v["poisson_ratio"]);
    assert_eq!(v["result"]["poisson_in_t1"], 0.3);
    let v = run_strip(&dir, "iso-given", &b, &["--poisson", "0.25"]);
    assert_eq!(v["result"]["poisson_in_t1"], 0.25);
    assert_eq!(v["result"]["poisson_in_t1_from"], "--poisson");
}

/// The +-45 layup of the audit (E 18 GPa, G 9 GPa: E/(2G) - 1 = 0.0 lies in 0..0.5 by
/// accident): no Poisson's ratio unless declared isotropic; declared, the implausible ratio
/// of a strip that is not isotropic (E/(2G) - 1 = 5.4, the 0/90 strip) is refused with a
/// warning.
#[test]
fn laminate_strips_get_no_poissons_ratio() {
    let dir = temp_dir("strip-pm45");
    let mk = |e: f64, g: f64| Bar {
        length_m: 0.180,
        width_m: 0.020,
        thickness_m: 0.002,
        density: 1550.0,
        youngs_pa: e,
        shear_pa: g,
    };
    let v = run_strip(&dir, "pm45", &mk(18e9, 9e9), &[]);
    assert!(v["poisson_ratio"].is_null());
    assert!((v["result"]["e_over_g"].as_f64().unwrap() - 2.0).abs() < 0.05);
    let v = run_strip(&dir, "lay090", &mk(45e9, 3.5e9), &["--isotropic"]);
    assert!(v["poisson_ratio"].is_null());
    let why = v["poisson_ratio_reason"].as_str().unwrap();
    assert!(why.contains("outside 0..0.5"), "{why}");
    assert!(
        v["notes"]
            .to_string()
            .contains("warning: declared isotropic")
    );
}

/// Two corners: flexural modes keep the residue sign, torsional ones flip it (free-free
/// beam and torsion mode shapes: common practice, no source).
#[test]
fn corner_taps_tell_torsion_from_flexure() {
    let dir = temp_dir("strip-corners");
    let b = Bar {
        length_m: 0.180,
        width_m: 0.020,
        thickness_m: 0.002,
        density: 1550.0,
        youngs_pa: 18e9,
        shear_pa: 9e9,
    };
    let half = b.width_m / 2.0;
    let plan = TapPlan::default();
    let other = dir.join("other.wav");
    let (f, a) = bar::synthesise(&b.modes_for((1.0, -half), (0.0, half)), &plan);
    bar::write_wav(&other, plan.sample_rate, &f, &a).unwrap();
    let v = run_strip(&dir, "c1", &b, &["--other-corner", other.to_str().unwrap()]);
    let roles: Vec<String> = v["mode_roles"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r.as_str().unwrap().to_string())
        .collect();
    let modes = v["modes"].as_array().unwrap();
    let t = roles
        .iter()
        .position(|r| r == "first torsional (G)")
        .unwrap();
    let ft = modes[t]["frequency_hz"].as_f64().unwrap();
    assert!(
        close(ft, b.torsional_hz(1), 0.005),
        "{ft} vs {}",
        b.torsional_hz(1)
    );
    let notes = v["notes"].to_string();
    assert!(notes.contains("flips between the two corners"), "{notes}");
}

#[test]
fn bad_strip_input_is_one_sentence_and_an_error() {
    let dir = temp_dir("strip-bad");
    let b = Bar {
        length_m: 0.180,
        width_m: 0.020,
        thickness_m: 0.002,
        density: 1550.0,
        youngs_pa: 45e9,
        shear_pa: 3.5e9,
    };
    // Only the flexural family: sensor and tap on the centre line (y = 0) see no torsion.
    let plan = TapPlan::default();
    let (f, a) = bar::synthesise(&b.modes_for((1.0, 0.0), (0.0, 0.0)), &plan);
    let wav = dir.join("flex.wav");
    bar::write_wav(&wav, plan.sample_rate, &f, &a).unwrap();
    let w = wav.to_str().unwrap();
    let base = ["strip", w, "--width-mm", "20", "--mass-g", "11.16"];
    let cases: [(&[&str], &str); 9] = [
        (
            &["--length-mm", "-180", "--thickness-mm", "2"],
            "--length-mm must be a positive number (got -180)",
        ),
        (
            &["--length-mm", "1e300", "--thickness-mm", "2"],
            "give no finite density or modulus",
        ),
        (
            &[
                "--length-mm",
                "180",
                "--thickness-mm",
                "2",
                "--mass-tol-g",
                "-0.5",
            ],
            "the mass tolerance must be zero or a positive number (got -0.5 g)",
        ),
        (
            &["--length-mm", "0", "--thickness-mm", "2"],
            "--length-mm must be a positive number",
        ),
        (
            &["--length-mm=-5", "--thickness-mm", "2"],
            "--length-mm must be a positive number",
        ),
        (
            &["--length-mm", "180", "--thickness-mm", "30"],
            "larger than the width",
        ),
        (
            &["--length-mm", "180", "--thickness-mm", "2"],
            "no torsional mode found",
        ),
        (
            &[
                "--length-mm",
                "180",
                "--thickness-mm",
                "2",
                "--torsional-hz",
                "5000",
            ],
            "no mode lies within 10 %",
        ),
        (
            &[
                "--length-mm",
                "180",
                "--thickness-mm",
                "2",
                "--length-tol-mm=-1",
            ],
            "the length tolerance must be zero or a positive number (got -1 mm)",
        ),
    ];
    for (extra, want) in cases {
        let mut args: Vec<&str> = base.to_vec();
        args.extend_from_slice(extra);
        let (code, out, err) = tapmodes(&args);
        assert_ne!(code, 0, "{args:?}: {out}");
        assert!(err.contains(want), "{args:?}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(!err.contains("panicked"), "{err}");
    }
    let (code, _, err) = tapmodes(&[
        "strip",
        "missing.wav",
        "--length-mm",
        "1",
        "--width-mm",
        "1",
        "--thickness-mm",
        "1",
        "--mass-g",
        "1",
    ]);
    assert_ne!(code, 0);
    assert!(err.starts_with("tapmodes: "), "{err}");
}

#[test]
fn strips_compare_side_by_side() {
    let dir = temp_dir("strip-compare");
    let mk = |name: &str, e: f64, g: f64| {
        let b = Bar {
            length_m: 0.180,
            width_m: 0.020,
            thickness_m: 0.002,
            density: 1550.0,
            youngs_pa: e,
            shear_pa: g,
        };
        run_strip(&dir, name, &b, &["--label", name]);
        dir.join(format!("{name}.json"))
    };
    let a = mk("lay-0-90", 45e9, 3.5e9);
    let b = mk("lay-45", 18e9, 9e9);
    let (code, out, err) = tapmodes(&["strip-compare", a.to_str().unwrap(), b.to_str().unwrap()]);
    assert_eq!(code, 0, "{err}");
    let row = out.lines().find(|l| l.contains("lay-45")).unwrap();
    // G of the +-45 strip is 9 / 3.5 = 2.57 x the baseline's, far outside the uncertainty.
    assert!(row.contains("2.57*"), "{out}");
    assert!(out.lines().all(|l| l.chars().count() <= 80), "{out}");
    let (code, _, err) = tapmodes(&[
        "strip-compare",
        a.to_str().unwrap(),
        dir.join("lay-45.wav").to_str().unwrap(),
    ]);
    assert_ne!(code, 0);
    assert!(
        err.contains("not JSON") || err.contains("not a strip file"),
        "{err}"
    );
    let missing = dir.join("nope.json");
    let (code, _, err) = tapmodes(&[
        "strip-compare",
        a.to_str().unwrap(),
        missing.to_str().unwrap(),
    ]);
    assert_ne!(code, 0);
    assert!(err.contains("nope.json': no such file"), "{err}");
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(out.contains("1550 kg/m^3, nu n/a"), "{out}");
    // A thickness typed in the wrong unit: a density of 3.1e7 kg/m^3 and E of 1e14 GPa are
    // warned about on screen and in the file.
    let odd = dir.join("odd.json");
    let (code, stdout, err) = tapmodes(&[
        "strip",
        dir.join("lay-45.wav").to_str().unwrap(),
        "--length-mm",
        "180",
        "--width-mm",
        "20",
        "--thickness-mm",
        "0.0001",
        "--mass-g",
        "11.16",
        "--out",
        odd.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    for want in [
        "warning: the density 3.1000e7 kg/m^3",
        "warning: the Young's modulus E",
        "warning: the shear modulus G",
    ] {
        assert!(stdout.contains(want), "{want}: {stdout}");
        assert!(
            std::fs::read_to_string(&odd).unwrap().contains(want),
            "{want}"
        );
    }
}
