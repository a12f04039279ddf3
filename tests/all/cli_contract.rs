//! The command-line contract: `analyze` on WAVs of any common layout, and one clear
//! sentence with a non-zero exit for every kind of bad input.

use crate::common::*;
use tapmodes::source::simulator::presets::preset;

fn sim_counts(seconds: f64) -> (Vec<Vec<f64>>, u32) {
    let plan = preset("tm9-arm-braced", 4).unwrap();
    let fs = plan.sample_rate as u32;
    let (chans, _) = simulate(plan, seconds);
    (chans, fs)
}

fn json_modes(path: &std::path::Path) -> Vec<(f64, f64)> {
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    v["modes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| {
            (
                m["frequency_hz"].as_f64().unwrap(),
                m["damping_ratio"].as_f64().unwrap_or(-1.0),
            )
        })
        .collect()
}

#[test]
fn analyze_reads_every_common_layout() {
    let dir = temp_dir("layouts");
    let (chans, fs) = sim_counts(9.0);
    // (bits, float, gain, mono)
    let cases = [
        (16u16, false, 1000.0, false),
        (24, false, 100_000.0, false),
        (32, false, 1e7, false),
        (32, true, 0.02, false),
        (16, false, 1000.0, true),
    ];
    for (i, &(bits, float, gain, mono)) in cases.iter().enumerate() {
        let wav = dir.join(format!("case{i}.wav"));
        let out = dir.join(format!("case{i}.json"));
        let data: Vec<Vec<f64>> = if mono {
            vec![chans[1].clone()]
        } else {
            chans.clone()
        };
        write_wav(&wav, fs, &data, bits, float, gain);
        let (code, stdout, stderr) = tapmodes(&[
            "analyze",
            wav.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
        ]);
        assert_eq!(code, 0, "case {i}: {stderr}");
        assert!(stdout.contains("accepted"), "{stdout}");
        let modes = json_modes(&out);
        // The braced arm's first mode is 171 Hz (simulator truth).
        assert!(
            modes
                .iter()
                .any(|(f, z)| (f / 171.0 - 1.0).abs() < 0.005 && *z > 0.0),
            "case {i}: {modes:?}"
        );
    }
}

fn expect_clear_failure(args: &[&str], needle: &str) {
    let (code, stdout, stderr) = tapmodes(args);
    assert_ne!(code, 0, "{args:?} should fail; stdout {stdout}");
    assert!(!stderr.contains("panicked"), "{args:?} panicked: {stderr}");
    let lines: Vec<&str> = stderr.lines().filter(|l| !l.trim().is_empty()).collect();
    assert_eq!(lines.len(), 1, "{args:?}: want one line, got {stderr}");
    assert!(lines[0].starts_with("tapmodes: "), "{stderr}");
    assert!(
        lines[0].to_lowercase().contains(needle),
        "{args:?}: '{}' lacks '{needle}'",
        lines[0]
    );
}

#[test]
fn bad_input_gives_one_sentence_and_nonzero_exit() {
    let dir = temp_dir("bad");
    let p = |n: &str| dir.join(n).to_str().unwrap().to_string();
    expect_clear_failure(&["analyze", &p("missing.wav")], "no such file");
    std::fs::write(dir.join("text.wav"), "this is not audio\n").unwrap();
    expect_clear_failure(&["analyze", &p("text.wav")], "not a wav");
    // Truncated: a valid file cut in the middle of its data.
    let (chans, fs) = sim_counts(4.0);
    write_wav(&dir.join("full.wav"), fs, &chans, 16, false, 1000.0);
    let bytes = std::fs::read(dir.join("full.wav")).unwrap();
    std::fs::write(dir.join("cut.wav"), &bytes[..bytes.len() / 2]).unwrap();
    expect_clear_failure(&["analyze", &p("cut.wav")], "truncated");
    // Zero channels: a hand-made header (RIFF/WAVE, fmt with 0 channels).
    let mut zero = Vec::new();
    zero.extend(b"RIFF");
    zero.extend(36u32.to_le_bytes());
    zero.extend(b"WAVEfmt ");
    zero.extend(16u32.to_le_bytes());
    zero.extend(1u16.to_le_bytes());
    zero.extend(0u16.to_le_bytes());
    zero.extend(8000u32.to_le_bytes());
    zero.extend(0u32.to_le_bytes());
    zero.extend(0u16.to_le_bytes());
    zero.extend(16u16.to_le_bytes());
    zero.extend(b"data");
    zero.extend(0u32.to_le_bytes());
    std::fs::write(dir.join("zero.wav"), zero).unwrap();
    expect_clear_failure(&["analyze", &p("zero.wav")], "channel");
    // NaN samples in a float file.
    let mut nan = chans.clone();
    nan[1][5000] = f64::NAN;
    write_wav(&dir.join("nan.wav"), fs, &nan, 32, true, 0.01);
    expect_clear_failure(&["analyze", &p("nan.wav")], "not a finite number");
    // Silence: no hit.
    let quiet = vec![vec![0.0; 20_000], vec![0.0; 20_000]];
    write_wav(&dir.join("quiet.wav"), fs, &quiet, 16, false, 1.0);
    expect_clear_failure(&["analyze", &p("quiet.wav")], "no hit");
    // Channel out of range.
    expect_clear_failure(
        &["analyze", &p("full.wav"), "--response-channel", "5"],
        "does not exist",
    );
    // A run file that is not one.
    std::fs::write(dir.join("junk.json"), "{\"modes\": 3}").unwrap();
    expect_clear_failure(
        &["compare", &p("junk.json"), &p("junk.json")],
        "not a tapmodes run file",
    );
}

#[test]
fn simulate_analyze_compare_round_trip() {
    let dir = temp_dir("roundtrip");
    let p = |n: &str| dir.join(n).to_str().unwrap().to_string();
    for (preset, name) in [("tm9-arm-solid", "solid"), ("tm9-arm-holed", "holed")] {
        let (code, _, err) = tapmodes(&[
            "simulate",
            "--preset",
            preset,
            "--out",
            &p(&format!("{name}.wav")),
        ]);
        assert_eq!(code, 0, "{err}");
        let (code, _, err) = tapmodes(&[
            "analyze",
            &p(&format!("{name}.wav")),
            "--out",
            &p(&format!("{name}.json")),
            "--variant",
            name,
        ]);
        assert_eq!(code, 0, "{err}");
    }
    let (code, table, err) = tapmodes(&["compare", &p("solid.json"), &p("holed.json")]);
    assert_eq!(code, 0, "{err}");
    assert!(table.contains("solid -> holed"), "{table}");
    // 148 -> 139 Hz in the simulator truth: about -6.1 %, stiffness ratio about 0.88.
    assert!(
        table.contains("-6.0") || table.contains("-6.1") || table.contains("-6.2"),
        "{table}"
    );
    let (code, json, _) = tapmodes(&["compare", "--json", &p("solid.json"), &p("holed.json")]);
    assert_eq!(code, 0);
    let v: serde_json::Value = serde_json::from_str(&json).unwrap();
    let first = &v["variants"][0]["matched"][0];
    assert!((first["stiffness_ratio"].as_f64().unwrap() - (139.0f64 / 148.0).powi(2)).abs() < 0.01);
    // Re-analysis from the run file reproduces the modes.
    let (code, _, err) = tapmodes(&["analyze", &p("solid.json"), "--out", &p("again.json")]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(
        json_modes(&dir.join("solid.json")),
        json_modes(&dir.join("again.json"))
    );
}

/// `capture` refuses, as argument errors naming the option, what it would otherwise turn
/// into an empty run or ignore: no hits wanted, zero rates, options of another source,
/// prominences below 0 or beyond any converter's range. Nothing is written.
#[test]
fn capture_refuses_empty_runs_and_options_of_another_source() {
    let dir = temp_dir("capture-args");
    let out = dir.join("runs");
    let o = out.to_str().unwrap();
    for (args, needle) in [
        (&["--hits", "0"][..], "--hits"),
        (&["--baud", "0"], "--baud"),
        (&["--baud", "9600"], "--baud"),
        (&["--audio-rate", "0"], "--audio-rate"),
        (&["--audio-rate", "44100"], "--audio-rate"),
        (&["--min-prominence-db=-5"], "--min-prominence-db"),
        (&["--min-prominence-db=1e9"], "--min-prominence-db"),
    ] {
        let mut all = vec!["capture", "--demo", "--fast", "--out", o];
        all.extend(args);
        let (code, stdout, stderr) = tapmodes(&all);
        assert_eq!(code, 2, "{all:?}: {stdout}{stderr}");
        assert!(stderr.starts_with("error:"), "{all:?}: {stderr}");
        assert!(stderr.contains(needle), "{all:?}: {stderr}");
        assert!(!stderr.contains("panicked"), "{all:?}: {stderr}");
        assert!(!out.exists(), "{all:?} created {}", out.display());
    }
    for args in [
        &["--serial", "/dev/null", "--seed", "2"][..],
        &["--serial", "/dev/null", "--fast"],
    ] {
        let mut all = vec!["capture", "--out", o];
        all.extend(args);
        let (code, _, stderr) = tapmodes(&all);
        assert_eq!(code, 2, "{all:?}: {stderr}");
        assert!(stderr.contains("cannot be used with"), "{all:?}: {stderr}");
        assert!(!out.exists(), "{all:?} created {}", out.display());
    }
    // One hit is enough, and the defaults of the other sources' options do not count as given.
    let (code, stdout, stderr) = tapmodes(&[
        "capture", "--demo", "--fast", "--hits", "1", "--seed", "2", "--out", o,
    ]);
    assert_eq!(code, 0, "{stdout}{stderr}");
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("variant.json")).unwrap()).unwrap();
    assert_eq!(run["hits_accepted"], 1, "{stdout}");
}

/// Live equals offline: capturing from `--replay` gives the same modes as `analyze` on
/// the same WAV (same pipeline, blocks of a different size).
#[test]
fn replay_capture_equals_analyze() {
    let dir = temp_dir("replay");
    let p = |n: &str| dir.join(n).to_str().unwrap().to_string();
    let (code, _, err) = tapmodes(&[
        "simulate",
        "--preset",
        "tm9-arm-braced",
        "--taps",
        "6",
        "--out",
        &p("b.wav"),
    ]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = tapmodes(&["analyze", &p("b.wav"), "--out", &p("offline.json")]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = tapmodes(&[
        "capture",
        "--replay",
        &p("b.wav"),
        "--fast",
        "--hits",
        "6",
        "--out",
        &p("live"),
        "--variant",
        "b",
    ]);
    assert_eq!(code, 0, "{err}");
    let offline = json_modes(&dir.join("offline.json"));
    let live = json_modes(&dir.join("live").join("b.json"));
    assert!(!offline.is_empty());
    assert_eq!(offline, live);
}

/// Every field the published schema (schema/run.schema.json) requires is in a real run file.
#[test]
fn run_file_has_the_schema_fields() {
    let schema: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("schema/run.schema.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let dir = temp_dir("schema");
    let p = |n: &str| dir.join(n).to_str().unwrap().to_string();
    assert_eq!(
        tapmodes(&["simulate", "--taps", "3", "--out", &p("s.wav")]).0,
        0
    );
    assert_eq!(
        tapmodes(&["analyze", &p("s.wav"), "--out", &p("s.json")]).0,
        0
    );
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("s.json")).unwrap()).unwrap();
    fn check(schema: &serde_json::Value, value: &serde_json::Value, at: &str) {
        if let Some(req) = schema["required"].as_array() {
            for k in req {
                let k = k.as_str().unwrap();
                assert!(value.get(k).is_some(), "{at}: missing required field '{k}'");
            }
        }
        if let (Some(props), Some(obj)) = (schema["properties"].as_object(), value.as_object()) {
            for (k, sub) in props {
                if let Some(v) = obj.get(k) {
                    check(sub, v, &format!("{at}.{k}"));
                }
            }
        }
        if let (Some(items), Some(arr)) = (schema.get("items"), value.as_array()) {
            for (i, v) in arr.iter().enumerate() {
                check(items, v, &format!("{at}[{i}]"));
            }
        }
    }
    check(&schema, &run, "run");
    // The recording and the CSV are named relative to the JSON and exist.
    assert_eq!(run["recording"]["wav"], "s.wav");
    assert!(dir.join(run["frf_csv"].as_str().unwrap()).exists());
    assert!(
        run.get("drive").is_none(),
        "no drive given, no drive section"
    );

    // With a drive: the drive section and every mode's band verdict follow the schema, and
    // the schema declares every field they hold.
    let drive = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("recordings/tm9.drive");
    let (code, _, err) = tapmodes(&[
        "analyze",
        &p("s.wav"),
        "--out",
        &p("d.json"),
        "--drive",
        drive.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("d.json")).unwrap()).unwrap();
    check(&schema, &run, "run");
    fn declared(schema: &serde_json::Value, value: &serde_json::Value, at: &str) {
        let props = schema["properties"].as_object().unwrap();
        for k in value.as_object().unwrap().keys() {
            assert!(
                props.contains_key(k),
                "{at}: field '{k}' is not in the schema"
            );
        }
    }
    let d_schema = &schema["properties"]["drive"];
    declared(d_schema, &run["drive"], "drive");
    declared(
        &d_schema["properties"]["description"],
        &run["drive"]["description"],
        "drive.description",
    );
    let bands = run["drive"]["bands"].as_array().unwrap();
    assert_eq!(bands.len(), 4, "{bands:?}");
    for b in bands {
        let hz = b["hz"].as_array().unwrap();
        assert_eq!(hz.len(), 2, "{b}");
        let (lo, hi) = (hz[0].as_f64().unwrap(), hz[1].as_f64().unwrap());
        assert!(lo > 0.0 && lo <= hi, "{b}");
        assert!(b["name"].is_string(), "{b}");
    }
    assert_eq!(
        run["drive"]["sagged_rotation_hz"].as_array().map(Vec::len),
        Some(2)
    );
    let modes = run["modes"].as_array().unwrap();
    assert!(!modes.is_empty());
    let b_schema = &schema["properties"]["modes"]["items"]["properties"]["band"];
    let verdicts = b_schema["properties"]["verdict"]["enum"]
        .as_array()
        .unwrap();
    for (i, m) in modes.iter().enumerate() {
        let band = &m["band"];
        declared(b_schema, band, &format!("modes[{i}].band"));
        assert!(verdicts.contains(&band["verdict"]), "{band}");
        assert!(band["margin_pct"].is_f64(), "{band}");
        assert!(
            bands.iter().any(|b| b["name"] == band["name"]),
            "modes[{i}].band names a band of the drive: {band}"
        );
    }
}

/// The bench cautions close the help of the commands that touch a craft.
#[test]
fn safety_text_closes_the_help_of_analyze_capture_and_tui() {
    for cmd in ["analyze", "capture", "tui"] {
        let (code, out, err) = tapmodes(&[cmd, "--help"]);
        assert_eq!(code, 0, "{cmd}: {err}");
        // The help is wrapped to the terminal: compare words, not lines.
        let words: Vec<&str> = out.split_whitespace().collect();
        let tail = words[words.len().saturating_sub(70)..].join(" ");
        assert!(
            tail.contains("take the propellers off")
                && tail.contains("disconnect the flight battery")
                && tail.contains("secure the")
                && tail.contains("careful first hover"),
            "{cmd} --help does not end with the cautions:\n{tail}"
        );
    }
}

/// Re-analysing a run writes a run of the same recording described the same way: the
/// capture's encoding and its lost stretches carry over (they used to become "counts" and
/// nothing, so a second re-analysis would not have skipped the lost stretch).
#[test]
fn reanalysis_keeps_the_recordings_encoding_and_lost_stretches() {
    let dir = temp_dir("reencode");
    let p = |n: &str| dir.join(n).to_str().unwrap().to_string();
    let (code, _, err) = tapmodes(&[
        "capture",
        "--demo",
        "--fast",
        "--hits",
        "3",
        "--out",
        &p("live"),
        "--variant",
        "a",
    ]);
    assert_eq!(code, 0, "{err}");
    let json = dir.join("live").join("a.json");
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let encoding = v["recording"]["encoding"].clone();
    assert!(
        encoding.as_str().is_some_and(|e| e != "counts"),
        "{encoding}"
    );
    // Say a stretch of 480 frames was lost before the recording (as a serial link can).
    let frames = v["recording"]["frames"].as_u64().unwrap();
    v["recording"]["frames"] = serde_json::json!(frames + 480);
    v["recording"]["gaps"] = serde_json::json!([[1000, 480]]);
    std::fs::write(&json, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    let again = dir.join("live").join("again.json");
    let (code, _, err) = tapmodes(&[
        "analyze",
        &p("live/a.json"),
        "--out",
        again.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let w: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&again).unwrap()).unwrap();
    assert_eq!(w["recording"]["encoding"], encoding);
    assert_eq!(w["recording"]["gaps"], serde_json::json!([[1000, 480]]));
    assert_eq!(w["recording"]["frames"], serde_json::json!(frames + 480));
    // The stream jumps at file frame 1000: every tap after it lies 480 samples later than
    // in the file (the frames before the jump were all read, none after it skipped).
    let triggers = |r: &serde_json::Value| -> Vec<u64> {
        (r["hits"].as_array().unwrap().iter())
            .map(|h| h["trigger_sample"].as_u64().unwrap())
            .collect()
    };
    let (before, after) = (triggers(&v), triggers(&w));
    assert!(
        !before.is_empty() && before.iter().all(|&t| t > 1000),
        "{before:?}"
    );
    assert_eq!(
        after,
        before.iter().map(|t| t + 480).collect::<Vec<_>>(),
        "taps after the lost stretch move by its length"
    );
    // And once more from the re-analysed run: the same again.
    let third = dir.join("live").join("third.json");
    let (code, _, err) = tapmodes(&[
        "analyze",
        again.to_str().unwrap(),
        "--out",
        third.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    let t: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&third).unwrap()).unwrap();
    assert_eq!(t["recording"], w["recording"]);
    assert_eq!(t["modes"], w["modes"]);
}
