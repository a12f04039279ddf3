//! The standing bad-input suite, run-file half: a good run file made by the binary, then
//! mutated field by field (schema, setup, roles, settings, verdicts, recording paths and
//! kinds), each run through `analyze` or `compare` with its expected outcome. WAVs are in
//! `hostile_wavs.rs`.

use crate::common::{bin, temp_dir};
use crate::hostile::*;
use std::path::{Path, PathBuf};

/// A good run of the good recording, made by the binary, parsed for mutation.
fn good_run(dir: &Path) -> (PathBuf, serde_json::Value) {
    let (ch, fs) = good_channels();
    let wavp = dir.join("good.wav");
    std::fs::write(&wavp, wav(&pcm(2, fs, 16), &ch, 1000.0)).unwrap();
    let json = dir.join("good.json");
    let out = bin()
        .args([
            "analyze",
            wavp.to_str().unwrap(),
            "--out",
            json.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    (wavp, v)
}

type Edit = Box<dyn Fn(&mut serde_json::Value)>;

fn set(ptr: &'static str, val: serde_json::Value) -> Edit {
    Box::new(move |v: &mut serde_json::Value| {
        let (parent, key) = ptr.rsplit_once('/').unwrap();
        match v.pointer_mut(parent).unwrap() {
            serde_json::Value::Object(m) => {
                m.insert(key.to_string(), val.clone());
            }
            serde_json::Value::Array(a) => a[key.parse::<usize>().unwrap()] = val.clone(),
            other => panic!("{ptr}: {other}"),
        }
    })
}

fn run_cases() -> Vec<(&'static str, Edit, Expect)> {
    use Expect::*;
    use serde_json::json;
    let mut v: Vec<(&'static str, Edit, Expect)> = vec![
        (
            "schema-99",
            set("/schema_version", json!(99)),
            Refuse("schema version"),
        ),
        (
            "channels-empty",
            set("/setup/channels", json!([])),
            Refuse("0 channels"),
        ),
        (
            "response-7",
            set("/setup/roles/response", json!(7)),
            Refuse("response channel"),
        ),
        (
            "force-is-response",
            set("/setup/roles/force", json!(1)),
            Refuse("two roles"),
        ),
        (
            "base-9",
            set("/setup/roles/base", json!(9)),
            Refuse("base channel"),
        ),
        (
            "trigger-5",
            set("/setup/trigger/channel", json!(5)),
            Refuse("trigger channel"),
        ),
        (
            "level-negative",
            set(
                "/setup/trigger/level",
                json!({"kind": "absolute", "value": -1.0}),
            ),
            Refuse("trigger level"),
        ),
        (
            "level-zero",
            set(
                "/setup/trigger/level",
                json!({"kind": "absolute", "value": 0.0}),
            ),
            Refuse("trigger level"),
        ),
        (
            "noise-multiple-zero",
            set(
                "/setup/trigger/level",
                json!({"kind": "noise_multiple", "value": 0.0}),
            ),
            Refuse("noise"),
        ),
        (
            "level-unknown",
            set(
                "/setup/trigger/level",
                json!({"kind": "loud", "value": 1.0}),
            ),
            Refuse("not a tapmodes run file"),
        ),
        (
            "record-1e12",
            set("/setup/trigger/record_s", json!(1e12)),
            Refuse("record length"),
        ),
        (
            "record-zero",
            set("/setup/trigger/record_s", json!(0.0)),
            Refuse("record length"),
        ),
        (
            "record-negative",
            set("/setup/trigger/record_s", json!(-1.0)),
            Refuse("record length"),
        ),
        (
            "record-1000s",
            set("/setup/trigger/record_s", json!(1000.0)),
            Refuse("most is"),
        ),
        (
            "pretrigger-long",
            set("/setup/trigger/pretrigger_s", json!(5.0)),
            Refuse("pre-trigger"),
        ),
        (
            "pretrigger-negative",
            set("/setup/trigger/pretrigger_s", json!(-0.1)),
            Refuse("pre-trigger"),
        ),
        (
            "holdoff-1e9",
            set("/setup/trigger/holdoff_s", json!(1e9)),
            Refuse("hold-off"),
        ),
        (
            "pad-0",
            set("/setup/fft/zero_pad", json!(0)),
            Refuse("zero-padding"),
        ),
        (
            "pad-1000",
            set("/setup/fft/zero_pad", json!(1000)),
            Refuse("zero-padding"),
        ),
        (
            "pad-negative",
            set("/setup/fft/zero_pad", json!(-2)),
            Refuse("not a tapmodes run file"),
        ),
        (
            "rate-0",
            set("/setup/sample_rate_hz", json!(0.0)),
            Refuse("sample rate"),
        ),
        (
            "rate-1e12",
            set("/setup/sample_rate_hz", json!(1e12)),
            Refuse("sample rate"),
        ),
        (
            "rate-1e300",
            set("/setup/sample_rate_hz", json!(1e300)),
            Refuse("sample rate"),
        ),
        (
            "rate-0.3",
            set("/setup/sample_rate_hz", json!(0.3)),
            Refuse("sample rate"),
        ),
        (
            "band-reversed",
            set("/setup/mode_search/band_hz", json!([900.0, 100.0])),
            Refuse("band"),
        ),
        (
            "band-negative",
            set("/setup/mode_search/band_hz", json!([-5.0, 100.0])),
            Refuse("band"),
        ),
        (
            "band-above-nyquist",
            set("/setup/mode_search/band_hz", json!([1e6, 2e6])),
            Refuse("nyquist"),
        ),
        (
            "exp-end-0",
            set("/setup/windows/exponential_end", json!(0.0)),
            Refuse("exponential"),
        ),
        (
            "exp-end-2",
            set("/setup/windows/exponential_end", json!(2.0)),
            Refuse("exponential"),
        ),
        (
            "force-window-0",
            set("/setup/windows/force_s", json!(0.0)),
            Refuse("force window"),
        ),
        (
            "clip-0",
            set("/setup/checks/clip_fraction", json!(0.0)),
            Refuse("clipping"),
        ),
        (
            "residual-negative",
            set("/setup/checks/residual_limit", json!(-1.0)),
            Refuse("residual"),
        ),
        (
            "max-modes-0",
            set("/setup/mode_search/max_modes", json!(0)),
            Refuse("modes"),
        ),
        (
            "scale-0",
            set("/setup/channels/0/scale", json!(0.0)),
            Refuse("scale"),
        ),
        (
            "full-scale-negative",
            set("/setup/channels/1/full_scale", json!(-1.0)),
            Refuse("full scale"),
        ),
        (
            "wav-etc-passwd",
            set("/recording/wav", json!("/etc/passwd")),
            Refuse("absolute"),
        ),
        (
            "wav-dev-stdin",
            set("/recording/wav", json!("/dev/stdin")),
            Refuse("absolute"),
        ),
        (
            "wav-dotdot",
            set("/recording/wav", json!("../good.wav")),
            Refuse("climbs out"),
        ),
        (
            "wav-sub-dotdot",
            set("/recording/wav", json!("sub/../../x.wav")),
            Refuse("climbs out"),
        ),
        (
            "wav-empty",
            set("/recording/wav", json!("")),
            Refuse("not a file name"),
        ),
        (
            "wav-missing",
            set("/recording/wav", json!("nothere.wav")),
            Refuse("no such file"),
        ),
        (
            "wav-fifo",
            set("/recording/wav", json!("fifo.wav")),
            Refuse("not a regular file"),
        ),
        (
            "wav-folder",
            set("/recording/wav", json!("sub")),
            Refuse("not a regular file"),
        ),
        (
            "wav-link-out",
            set("/recording/wav", json!("link-out.wav")),
            Refuse("symbolic link out"),
        ),
        (
            "wav-link-in",
            set("/recording/wav", json!("link-in.wav")),
            Accept,
        ),
        (
            "wav-mono",
            set("/recording/wav", json!("mono.wav")),
            Refuse("channels but the run"),
        ),
        (
            "wav-other-rate",
            set("/recording/wav", json!("slow.wav")),
            Refuse("sampled at"),
        ),
        (
            "wav-short",
            set("/recording/wav", json!("short.wav")),
            Refuse("shorter than its run"),
        ),
        (
            "frames-huge",
            set("/recording/frames", json!(1u64 << 40)),
            Refuse("shorter than its run"),
        ),
        (
            "frames-fewer",
            Box::new(|v| {
                let f = v["recording"]["frames"].as_u64().unwrap();
                v["recording"]["frames"] = json!(f - 100);
            }),
            Accept,
        ),
        (
            "gaps-too-long",
            set("/recording/gaps", json!([[0, 1u64 << 40]])),
            Refuse("lost stretches"),
        ),
        (
            "recording-null",
            set("/recording", json!(null)),
            Refuse("does not name a recording"),
        ),
        (
            "accepted-gt-total",
            set("/hits_accepted", json!(1000)),
            Refuse("accepted"),
        ),
        (
            "mode-frequency-negative",
            set("/modes/0/frequency_hz", json!(-10.0)),
            Refuse("mode 1"),
        ),
        (
            "trigger-missing",
            Box::new(|v| {
                v["setup"].as_object_mut().unwrap().remove("trigger");
            }),
            Refuse("not a tapmodes run file"),
        ),
        (
            "label-escapes",
            set("/variant/label", json!("\u{1b}[2J\u{1b}]0;owned\u{7}arm")),
            Accept,
        ),
        (
            "note-escapes",
            set("/variant/note", json!("x\u{1b}[31mred\u{9b}1mz")),
            Accept,
        ),
        (
            "channel-name-escapes",
            set("/setup/channels/0/name", json!("\u{1b}[5mforce")),
            Accept,
        ),
    ];
    v.push((
        "verdict-on-unknown-hit",
        set("/hits/0/trigger_sample", json!(123_456_789u64)),
        Accept,
    ));
    v
}

#[test]
fn malformed_run_files() {
    let dir = temp_dir("hostile-run");
    let (wavp, base) = good_run(&dir);
    let (ch, fs) = good_channels();
    std::fs::write(dir.join("mono.wav"), wav(&pcm(1, fs, 16), &ch[1..], 1000.0)).unwrap();
    std::fs::write(dir.join("slow.wav"), wav(&pcm(2, fs / 2, 16), &ch, 1000.0)).unwrap();
    let short: Vec<Vec<f64>> = ch.iter().map(|c| c[..c.len() / 2].to_vec()).collect();
    std::fs::write(dir.join("short.wav"), wav(&pcm(2, fs, 16), &short, 1000.0)).unwrap();
    std::fs::create_dir_all(dir.join("sub")).unwrap();
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink("/etc/hostname", dir.join("link-out.wav")).unwrap();
        std::os::unix::fs::symlink(&wavp, dir.join("link-in.wav")).unwrap();
        let c = std::ffi::CString::new(dir.join("fifo.wav").to_str().unwrap()).unwrap();
        // SAFETY: plain libc call on a valid C string.
        assert_eq!(unsafe { libc::mkfifo(c.as_ptr(), 0o600) }, 0);
    }
    let mut failures = Vec::new();
    let cases = run_cases();
    for (name, edit, e) in &cases {
        let mut v = base.clone();
        edit(&mut v);
        let p = dir.join(format!("{name}.json"));
        std::fs::write(&p, serde_json::to_string_pretty(&v).unwrap()).unwrap();
        let out = dir.join(format!("{name}.again.json"));
        let cmd = if name.starts_with("mode-") {
            "compare"
        } else {
            "analyze"
        };
        let args: Vec<&str> = if cmd == "compare" {
            vec!["compare", p.to_str().unwrap(), p.to_str().unwrap()]
        } else {
            vec![
                "analyze",
                p.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
            ]
        };
        if let Some(f) = check(&args, e) {
            failures.push(format!("{name}: {f}"));
        }
        if name.ends_with("escapes")
            && check(&["compare", p.to_str().unwrap(), p.to_str().unwrap()], e).is_some()
        {
            failures.push(format!("{name}: compare printed it raw"));
        }
    }
    // Not JSON run files at all.
    let raw: Vec<(&str, Vec<u8>, &str)> = vec![
        (
            "not-json",
            b"this is not json".to_vec(),
            "not a tapmodes run file",
        ),
        ("empty", vec![], "not a tapmodes run file"),
        ("array", b"[1,2,3]".to_vec(), "not a tapmodes run file"),
        (
            "wrong-object",
            b"{\"modes\": 3}".to_vec(),
            "not a tapmodes run file",
        ),
        (
            "binary",
            vec![0xff, 0xfe, 0, 1, 2],
            "stream did not contain valid utf-8",
        ),
        (
            "deep-nesting",
            "[".repeat(100_000).into_bytes(),
            "not a tapmodes run file",
        ),
    ];
    for (name, bytes, needle) in &raw {
        let p = dir.join(format!("{name}.json"));
        std::fs::write(&p, bytes).unwrap();
        if let Some(f) = check(&["analyze", p.to_str().unwrap()], &Expect::Refuse(needle)) {
            failures.push(format!("{name}: {f}"));
        }
    }
    let big = dir.join("big.json");
    std::fs::File::create(&big)
        .unwrap()
        .set_len(65 << 20)
        .unwrap();
    if let Some(f) = check(
        &["analyze", big.to_str().unwrap()],
        &Expect::Refuse("too large"),
    ) {
        failures.push(format!("big: {f}"));
    }
    let total = cases.len() + raw.len() + 1;
    eprintln!("run-file catalogue: {total} files");
    assert!(total >= 50, "only {total} run-file cases");
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}
