//! The motors' excitation bands: the worked example with its arithmetic, verdicts, the drive
//! file and the command line (bad input is one sentence and a non-zero exit), and the
//! verdicts on the demo recordings.
//!
//! f = KV x V x throttle / 60 (common practice, no source); 3.7 V per cell nominal (common
//! practice, no source).

use crate::common::{bin, temp_dir};
use std::path::Path;
use tapmodes::drive::{Drive, Verdict, judge};

fn close(a: f64, b: f64) -> bool {
    // Band edges to 0.1 %.
    (a - b).abs() <= 1e-3 * b.abs()
}

/// 1300 rpm/V on 6 cells at 3.7 V nominal, hover at 35 % to full throttle, 3 blades.
///
/// pack     V = 6 x 3.7            = 22.2 V
/// full     n = 1300 x 22.2 x 1.00 = 28 860 rpm -> 28 860 / 60 = 481.0 Hz
/// hover    n = 1300 x 22.2 x 0.35 = 10 101 rpm -> 10 101 / 60 = 168.35 Hz
/// rotation      168.35 - 481.0 Hz
/// 2x rotation   336.7  - 962.0 Hz
/// 3x rotation   505.05 - 1443.0 Hz
/// blade pass    3 x rotation = 505.05 - 1443.0 Hz
#[test]
fn worked_example() {
    let d = Drive::nameplate(1300.0, 6, None, (35.0, 100.0), 3).unwrap();
    assert!(close(d.pack_volts().unwrap(), 22.2));
    let (lo, hi) = d.rpm_range();
    assert!(close(lo, 10_101.0) && close(hi, 28_860.0), "{lo} {hi}");
    let b = d.bands();
    let want = [
        ("rotation", 168.35, 481.0),
        ("2x rotation", 336.7, 962.0),
        ("3x rotation", 505.05, 1443.0),
        ("blade pass", 505.05, 1443.0),
    ];
    assert_eq!(b.bands.len(), want.len());
    for (band, (name, lo, hi)) in b.bands.iter().zip(want) {
        assert_eq!(band.name, name);
        assert!(close(band.hz.0, lo) && close(band.hz.1, hi), "{band:?}");
    }
    // Verdicts (near margin 10 % of the nearest edge):
    // 150 Hz: (168.35 - 150) / 168.35 = 10.90 % below rotation -> clear
    let v = judge(&b, 150.0).unwrap();
    assert_eq!((v.verdict, v.name.as_str()), (Verdict::Clear, "rotation"));
    assert!((v.margin_pct - 10.90).abs() < 0.01, "{v:?}");
    // 160 Hz: (168.35 - 160) / 168.35 = 4.96 % below rotation -> near
    let v = judge(&b, 160.0).unwrap();
    assert_eq!(v.verdict, Verdict::Near);
    assert!((v.margin_pct - 4.96).abs() < 0.01, "{v:?}");
    // 200 Hz: inside rotation, 31.65 Hz above its lower edge: -31.65 / 168.35 = -18.80 %
    let v = judge(&b, 200.0).unwrap();
    assert_eq!((v.verdict, v.name.as_str()), (Verdict::Inside, "rotation"));
    assert!((v.margin_pct + 18.80).abs() < 0.01, "{v:?}");
    // Depth inside a band is min((f - lo) / lo, (hi - f) / hi), the edge nearer in percent.
    // 612 Hz in 2x rotation (336.7-962.0 Hz): (612 - 336.7) / 336.7 = 81.77 % from the lower
    // edge, (962 - 612) / 962 = 36.38 % from the upper one -> -36.38 % (it was -81.8 % when
    // the edge was chosen in Hz: 275.3 Hz < 350 Hz). In 3x rotation and blade pass
    // (505.05-1443.0 Hz): (612 - 505.05) / 505.05 = 21.18 %. The band named is the one it
    // sits deepest in: 2x rotation, -36.38 %.
    let v = judge(&b, 612.0).unwrap();
    assert_eq!(
        (v.verdict, v.name.as_str()),
        (Verdict::Inside, "2x rotation")
    );
    assert!((v.margin_pct + 36.38).abs() < 0.01, "{v:?}");
    assert_eq!(v.inside.len(), 3, "{v:?}");
    // 2000 Hz: (2000 - 1443) / 1443 = 38.60 % above 3x rotation and blade pass -> clear
    let v = judge(&b, 2000.0).unwrap();
    assert_eq!(v.verdict, Verdict::Clear);
    assert!((v.margin_pct - 38.60).abs() < 0.01, "{v:?}");
    // A sagged pack, 3.5 V per cell: every edge 3.5 / 3.7 = 0.946 of the nominal one.
    let s = Drive::nameplate(1300.0, 6, Some(3.5), (35.0, 100.0), 3).unwrap();
    assert!(close(s.bands().bands[0].hz.1, 481.0 * 3.5 / 3.7));
    // An rpm range gives the same bands as the nameplate values that imply it.
    let r = Drive::from_rpm((10_101.0, 28_860.0), 3).unwrap();
    for (x, y) in r.bands().bands.iter().zip(&b.bands) {
        assert!(close(x.hz.0, y.hz.0) && close(x.hz.1, y.hz.1));
    }
}

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn run(args: &[&str]) -> (i32, String, String) {
    let o = bin().args(args).output().unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn bad_drive_input_is_one_sentence_and_a_nonzero_exit() {
    let dir = temp_dir("drive-bands-bad");
    let wav = root().join("recordings/arm-solid.wav");
    let out = dir.join("x.json");
    let bad_file = dir.join("bad.drive");
    std::fs::write(&bad_file, "motor_kv = 1300\ncells = 6\nthrottle = 35:100\n").unwrap();
    let w = wav.to_str().unwrap();
    let o = out.to_str().unwrap();
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec![
                "--motor-kv",
                "1300",
                "--cells",
                "0",
                "--throttle",
                "35:100",
                "--blades",
                "3",
            ],
            "cells must be",
        ),
        (
            vec![
                "--motor-kv",
                "1300",
                "--cells",
                "6",
                "--throttle",
                "35:120",
                "--blades",
                "3",
            ],
            "0-100 %",
        ),
        (
            vec![
                "--motor-kv",
                "1300",
                "--cells",
                "6",
                "--throttle=-5:100",
                "--blades",
                "3",
            ],
            "0-100 %",
        ),
        (
            vec!["--motor-kv", "1300", "--cells", "6", "--throttle", "35:100"],
            "--blades",
        ),
        (vec!["--rpm", "9000:3000", "--blades", "2"], "rpm range"),
        (
            vec!["--drive", bad_file.to_str().unwrap()],
            "does not give 'blades'",
        ),
        (
            vec!["--drive", "no-such.drive"],
            "cannot read the drive file",
        ),
        (
            vec![
                "--motor-kv",
                "1300",
                "--cells",
                "6",
                "--throttle",
                "0.2:0.9",
                "--blades",
                "3",
            ],
            "throttle is in percent; did you mean 20:90?",
        ),
        (
            vec![
                "--motor-kv",
                "1300",
                "--volts",
                "900",
                "--throttle",
                "35:100",
                "--blades",
                "3",
            ],
            "pack voltage must be",
        ),
        (vec!["--rpm", "1e308:1e308", "--blades", "2"], "1e308"),
    ];
    for (extra, want) in cases {
        let mut args = vec!["analyze", w, "--out", o];
        args.extend(&extra);
        let (code, _, err) = run(&args);
        assert_ne!(code, 0, "{extra:?}");
        assert!(!err.contains("panicked"), "{extra:?}: {err}");
        assert!(err.contains(want), "{extra:?}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{extra:?}: {err}");
        assert!(err.len() < 300, "{extra:?}: a short sentence: {err}");
        assert!(!out.exists(), "{extra:?}: wrote a run despite bad input");
    }
    // clap's own checks: --motor-kv without --cells, --rpm with --motor-kv.
    for extra in [
        vec!["--motor-kv", "1300", "--blades", "3"],
        vec![
            "--rpm",
            "1:2",
            "--motor-kv",
            "1300",
            "--cells",
            "6",
            "--throttle",
            "35:100",
            "--blades",
            "2",
        ],
        // --volts stands instead of --cells and --cell-volts, never with them.
        vec![
            "--motor-kv",
            "1300",
            "--cells",
            "6",
            "--volts",
            "22.2",
            "--throttle",
            "35:100",
            "--blades",
            "3",
        ],
    ] {
        let mut args = vec!["analyze", w, "--out", o];
        args.extend(&extra);
        let (code, _, err) = run(&args);
        assert_eq!(code, 2, "{extra:?}: {err}");
    }
}

fn modes_of(json: &Path) -> (Vec<f64>, Vec<serde_json::Value>, serde_json::Value) {
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(json).unwrap()).unwrap();
    let modes = v["modes"].as_array().unwrap();
    (
        modes
            .iter()
            .map(|m| m["frequency_hz"].as_f64().unwrap())
            .collect(),
        modes.iter().map(|m| m["band"].clone()).collect(),
        v["drive"].clone(),
    )
}

/// The demo recordings against the TM9 drive file: every mode's verdict agrees with the
/// band edges worked out above, and the brace moves the first arm mode into the rotation
/// band while the lightening holes keep it clear.
#[test]
fn demo_recordings_verdicts_and_compare() {
    let dir = temp_dir("drive-bands-demo");
    let drive = root().join("recordings/tm9.drive");
    let edges = [
        (168.35, 481.0),
        (336.7, 962.0),
        (505.05, 1443.0),
        (505.05, 1443.0),
    ];
    let mut first = Vec::new();
    for name in ["arm-solid", "arm-holed", "arm-braced", "stack-soft"] {
        std::fs::copy(
            root().join(format!("recordings/{name}.wav")),
            dir.join(format!("{name}.wav")),
        )
        .unwrap();
        let json = dir.join(format!("{name}.json"));
        let mut args = vec![
            "analyze".to_string(),
            dir.join(format!("{name}.wav")).display().to_string(),
            "--out".into(),
            json.display().to_string(),
            "--drive".into(),
            drive.display().to_string(),
        ];
        if name.starts_with("stack") {
            args.extend(["--response-channel", "2", "--base-channel", "1"].map(String::from));
        }
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let (code, out, err) = run(&args);
        assert_eq!(code, 0, "{name}: {err}");
        assert!(out.contains("drive: KV 1300, 6 x 3.7 V = 22.2 V"), "{out}");
        let (freqs, bands, section) = modes_of(&json);
        assert_eq!(section["bands"].as_array().unwrap().len(), 4);
        for (f, b) in freqs.iter().zip(&bands) {
            let inside = edges.iter().any(|(lo, hi)| f >= lo && f <= hi);
            let nearest = edges
                .iter()
                .map(|(lo, hi)| if f < lo { (lo - f) / lo } else { (f - hi) / hi })
                .fold(f64::INFINITY, f64::min);
            let want = if inside {
                "inside"
            } else if nearest < 0.10 {
                "near"
            } else {
                "clear"
            };
            assert_eq!(b["verdict"], want, "{name} {f} Hz: {b}");
        }
        first.push((
            name,
            freqs[0],
            bands[0]["verdict"].as_str().unwrap().to_string(),
        ));
        if name == "stack-soft" {
            let iso = section["isolation"].as_array().unwrap();
            assert_eq!(iso.len(), 2, "rotation and blade pass: {section}");
            assert!(iso[0]["model_db"].as_f64().unwrap() < 0.0, "{section}");
            assert!(out.contains("mount over rotation"), "{out}");
        }
    }
    assert_eq!(first[0].2, "clear", "{first:?}");
    assert_eq!(first[1].2, "clear", "{first:?}");
    assert_eq!(first[2].2, "inside", "{first:?}");
    let (code, out, err) = run(&[
        "compare",
        dir.join("arm-solid.json").to_str().unwrap(),
        dir.join("arm-braced.json").to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("into rotation"), "{out}");
    let (code, out, _) = run(&[
        "compare",
        "--json",
        dir.join("arm-solid.json").to_str().unwrap(),
        dir.join("arm-braced.json").to_str().unwrap(),
    ]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let ch = &v["bands"]["variants"][0]["changes"][0];
    assert_eq!(ch["movement"], "moved_in");
    let m = ch["margin_change_pct"].as_f64().unwrap();
    let want = ch["variant"]["margin_pct"].as_f64().unwrap()
        - ch["baseline"]["margin_pct"].as_f64().unwrap();
    assert!((m - want).abs() < 1e-9 && m < 0.0, "{ch}");
    // The CSV carries the same, with units in the headers; damping columns name their unit.
    let (code, out, err) = run(&[
        "compare",
        "--csv",
        dir.join("arm-solid.json").to_str().unwrap(),
        dir.join("arm-braced.json").to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let mut r = csv::Reader::from_reader(out.as_bytes());
    let head: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    let col = |name: &str| {
        head.iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("no column {name}: {head:?}"))
    };
    assert!(!head.iter().any(|h| h == "baseline_damping"), "{head:?}");
    let (zb, zv) = (col("baseline_damping_ratio"), col("variant_damping_ratio"));
    let (vb, vv) = (col("baseline_band_verdict"), col("variant_band_verdict"));
    let (mv, mb, mvv, mc) = (
        col("band_movement"),
        col("baseline_band_margin_pct"),
        col("variant_band_margin_pct"),
        col("band_margin_change_pct_points"),
    );
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    let first = rows.iter().find(|x| &x[1] == "mode").unwrap();
    assert_eq!((&first[vb], &first[vv]), ("clear", "inside"), "{first:?}");
    assert_eq!(&first[mv], "moved_in");
    let num = |i: usize| first[i].parse::<f64>().unwrap();
    assert!((num(mc) - (num(mvv) - num(mb))).abs() < 2e-4, "{first:?}");
    assert!((num(mc) - m).abs() < 1e-4, "{first:?} vs {m}");
    assert!(
        num(zb) > 0.0 && num(zb) < 0.2 && num(zv) > 0.0,
        "ratios, not percent"
    );
    for row in rows.iter().filter(|x| &x[1] == "mode") {
        assert!(
            !row[vv].is_empty(),
            "every pair has its band verdict: {row:?}"
        );
    }
}

/// `--volts` (the pack voltage) gives the same bands as the cells that make it, and the
/// rotation band at 3.5 V per cell under load is printed under the bands and stored.
#[test]
fn pack_voltage_and_the_sagged_band() {
    let dir = temp_dir("drive-bands-volts");
    let wav = root().join("recordings/arm-solid.wav");
    let w = wav.to_str().unwrap();
    let a = dir.join("a.json");
    let b = dir.join("b.json");
    let common = [
        "--throttle",
        "35:100",
        "--blades",
        "3",
        "--motor-kv",
        "1300",
    ];
    let mut args = vec!["analyze", w, "--out", a.to_str().unwrap(), "--cells", "6"];
    args.extend(common);
    let (code, out, err) = run(&args);
    assert_eq!(code, 0, "{err}");
    // 1300 x 6 x 3.5 / 60 = 455.0 Hz at full throttle, x 0.35 = 159.25 Hz at hover.
    assert!(
        out.contains("at 3.5 V/cell under load: rotation 159.2-455.0 Hz"),
        "{out}"
    );
    let mut args = vec![
        "analyze",
        w,
        "--out",
        b.to_str().unwrap(),
        "--volts",
        "22.2",
    ];
    args.extend(common);
    let (code, out, err) = run(&args);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("pack 22.2 V"), "{out}");
    assert!(
        out.contains("the pack voltage was given, not the cells"),
        "{out}"
    );
    let (fa, va, da) = modes_of(&a);
    let (fb, vb, db) = modes_of(&b);
    assert_eq!(fa, fb);
    for (x, y) in va.iter().zip(&vb) {
        assert_eq!(x["verdict"], y["verdict"]);
        assert!(
            (x["margin_pct"].as_f64().unwrap() - y["margin_pct"].as_f64().unwrap()).abs() < 1e-9
        );
    }
    let s = da["sagged_rotation_hz"].as_array().unwrap();
    assert!((s[0].as_f64().unwrap() - 159.25).abs() < 1e-9, "{da}");
    assert!((s[1].as_f64().unwrap() - 455.0).abs() < 1e-9, "{da}");
    assert!(db.get("sagged_rotation_hz").is_none(), "{db}");
    assert_eq!(db["description"]["pack_volts"].as_f64(), Some(22.2));
    // The drive file's `volts` key.
    let f = dir.join("v.drive");
    std::fs::write(
        &f,
        "motor_kv = 1300\nvolts = 22.2\nthrottle = 35:100\nblades = 3\n",
    )
    .unwrap();
    let c = dir.join("c.json");
    let (code, _, err) = run(&[
        "analyze",
        w,
        "--out",
        c.to_str().unwrap(),
        "--drive",
        f.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(modes_of(&c).2["bands"], db["bands"]);
}
