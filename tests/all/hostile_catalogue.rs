//! The standing bad-input suite: malformed WAVs and run files, generated here from one good
//! simulated recording (see `hostile.rs`), each run through the real binary with its
//! expected outcome: one clear sentence and exit 1, or a documented acceptance. Nothing may
//! panic, hang or allocate without bound. Serial streams are in `hostile_serial.rs`.

use crate::common::{simulate, temp_dir};
use crate::hostile::*;
use std::path::{Path, PathBuf};
use std::process::Command;
use tapmodes::source::simulator::presets::preset;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tapmodes"))
}

/// Run the binary; check the outcome against `e`. Returns a description of a mismatch.
fn check(args: &[&str], e: &Expect) -> Option<String> {
    let out = bin().args(args).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    let stdout = String::from_utf8_lossy(&out.stdout);
    if err.contains("panicked") || stdout.contains('\u{1b}') || err.contains('\u{1b}') {
        return Some(format!("{args:?}: panic or raw escape: {err}"));
    }
    match e {
        Expect::Accept => (out.status.code() != Some(0)).then(|| {
            format!(
                "{args:?}: expected success, got {:?}: {err}",
                out.status.code()
            )
        }),
        Expect::Refuse(needle) => {
            let lines: Vec<&str> = err
                .lines()
                .filter(|l| l.starts_with("tapmodes: "))
                .collect();
            if out.status.code() != Some(1) || lines.len() != 1 {
                return Some(format!(
                    "{args:?}: expected exit 1 and one sentence, got {:?}: {err}",
                    out.status.code()
                ));
            }
            (!lines[0].to_lowercase().contains(needle))
                .then(|| format!("{args:?}: '{}' lacks '{needle}'", lines[0]))
        }
    }
}

fn good_channels() -> (Vec<Vec<f64>>, u32) {
    let plan = preset("tm9-arm-braced", 4).unwrap();
    let fs = plan.sample_rate as u32;
    let (chans, _) = simulate(plan, 3.0);
    (chans, fs)
}

/// The WAV catalogue: (name, bytes, expected outcome).
fn wav_cases(ch: &[Vec<f64>], fs: u32) -> Vec<(String, Vec<u8>, Expect)> {
    use Expect::*;
    let g = 1000.0;
    let good = wav(&pcm(2, fs, 16), ch, g);
    let data16 = i16s(ch, g);
    let mut v: Vec<(String, Vec<u8>, Expect)> = Vec::new();
    let mut add = |n: &str, b: Vec<u8>, e: Expect| v.push((n.to_string(), b, e));
    add("empty", vec![], Refuse("not a wav"));
    add("riff-only", b"RIFF".to_vec(), Refuse("not a wav"));
    add(
        "avi-form",
        [b"RIFF".as_slice(), &[4, 0, 0, 0], b"AVI "].concat(),
        Refuse("not a wav"),
    );
    add("rifx", [b"RIFX", &good[4..]].concat(), Refuse("not a wav"));
    add(
        "text",
        b"frequency,level\n1,2\n".to_vec(),
        Refuse("not a wav"),
    );
    let noise: Vec<u8> = (0..1000u32)
        .map(|i| (i.wrapping_mul(2_654_435_761) >> 24) as u8)
        .collect();
    add("noise", noise, Refuse("not a wav"));
    add(
        "no-fmt",
        riff(&[data_chunk(&data16, None)]),
        Refuse("before the format"),
    );
    add(
        "no-data",
        riff(&[fmt_chunk(&pcm(2, fs, 16))]),
        Refuse("no data chunk"),
    );
    add("header-only", riff(&[]), Refuse("no format chunk"));
    let mut f = fmt_chunk(&pcm(2, fs, 16));
    f[4..8].copy_from_slice(&10u32.to_le_bytes());
    add(
        "fmt-10-bytes",
        riff(&[f[..18].to_vec(), data_chunk(&data16, None)]),
        Refuse("format chunk"),
    );
    let mut f = fmt_chunk(&pcm(2, fs, 16));
    f[4..8].copy_from_slice(&2000u32.to_le_bytes());
    add(
        "fmt-2000-bytes",
        riff(&[f, data_chunk(&data16, None)]),
        Refuse("format chunk"),
    );
    let mut f = fmt_chunk(&pcm(2, fs, 16));
    f[4..8].copy_from_slice(&1000u32.to_le_bytes());
    add("fmt-past-end", riff(&[f]), Refuse("format chunk"));
    for (n, c) in [("ch-0", 0u16), ("ch-33", 33), ("ch-65535", 65535)] {
        let mut f = pcm(c, fs, 16);
        f.align = Some(c.wrapping_mul(2));
        add(
            n,
            riff(&[fmt_chunk(&f), data_chunk(&data16, None)]),
            Refuse("channels"),
        );
    }
    for (n, r) in [
        ("rate-0", 0u32),
        ("rate-400mhz", 400_000_000),
        ("rate-max", u32::MAX),
        ("rate-2mhz", 2_000_000),
    ] {
        add(
            n,
            riff(&[fmt_chunk(&pcm(2, r, 16)), data_chunk(&data16, None)]),
            Refuse("sample rate"),
        );
    }
    add(
        "rate-1hz",
        riff(&[fmt_chunk(&pcm(2, 1, 16)), data_chunk(&data16, None)]),
        Refuse("at least 16"),
    );
    for (n, bits) in [
        ("bits-0", 0u16),
        ("bits-7", 7),
        ("bits-12", 12),
        ("bits-40", 40),
        ("bits-64-int", 64),
    ] {
        let mut f = pcm(2, fs, bits);
        f.align = Some(4);
        add(
            n,
            riff(&[fmt_chunk(&f), data_chunk(&data16, None)]),
            Refuse("wav"),
        );
    }
    let mut f = pcm(2, fs, 16);
    f.tag = 3;
    add(
        "float-16",
        riff(&[fmt_chunk(&f), data_chunk(&data16, None)]),
        Refuse("does not read"),
    );
    for (n, tag) in [("adpcm", 2u16), ("mp3", 0x55), ("alaw", 6), ("tag-0", 0)] {
        let mut f = pcm(2, fs, 16);
        f.tag = tag;
        add(
            n,
            riff(&[fmt_chunk(&f), data_chunk(&data16, None)]),
            Refuse("does not read"),
        );
    }
    let mut f = pcm(2, fs, 16);
    f.tag = 0xFFFE;
    add(
        "ext-short",
        riff(&[fmt_chunk(&f), data_chunk(&data16, None)]),
        Refuse("too short"),
    );
    let ext = |valid: u16, bits: u16, sub: u16| Fmt {
        tag: 0xFFFE,
        channels: 2,
        rate: fs,
        align: None,
        bits,
        ext: Some((valid, sub)),
    };
    add("ext-16", wav(&ext(16, 16, 1), ch, g), Accept);
    add("ext-valid-0", wav(&ext(0, 16, 1), ch, g), Accept);
    add("ext-24-in-32", wav(&ext(24, 32, 1), ch, g), Accept);
    add("ext-float", wav(&ext(32, 32, 3), ch, g), Accept);
    add(
        "ext-33-in-32",
        wav(&ext(33, 32, 1), ch, g),
        Refuse("valid bits"),
    );
    add(
        "ext-sub-unknown",
        wav(&ext(16, 16, 0x1234), ch, g),
        Refuse("does not read"),
    );
    let mut f = pcm(2, fs, 16);
    f.align = Some(3);
    add(
        "align-3",
        riff(&[fmt_chunk(&f), data_chunk(&data16, None)]),
        Refuse("frames are said"),
    );
    let mut f = pcm(2, fs, 16);
    f.align = Some(2);
    add(
        "align-mono",
        riff(&[fmt_chunk(&f), data_chunk(&data16, None)]),
        Refuse("frames are said"),
    );
    let mut b = good.clone();
    b[28..32].copy_from_slice(&7u32.to_le_bytes());
    add("byte-rate-wrong", b, Accept);
    let mut b = good.clone();
    b[4..8].copy_from_slice(&u32::MAX.to_le_bytes());
    add("riff-size-huge", b, Accept);
    add(
        "data-claims-more",
        riff(&[
            fmt_chunk(&pcm(2, fs, 16)),
            data_chunk(&data16, Some(data16.len() as u32 * 2)),
        ]),
        Refuse("truncated"),
    );
    add(
        "data-claims-4gib",
        riff(&[
            fmt_chunk(&pcm(2, fs, 16)),
            data_chunk(&data16, Some(u32::MAX)),
        ]),
        Refuse("truncated"),
    );
    add(
        "cut-in-half",
        good[..good.len() / 2].to_vec(),
        Refuse("truncated"),
    );
    add(
        "data-empty",
        riff(&[fmt_chunk(&pcm(2, fs, 16)), data_chunk(&[], None)]),
        Refuse("no hit"),
    );
    add(
        "one-frame",
        riff(&[fmt_chunk(&pcm(2, fs, 16)), data_chunk(&data16[..4], None)]),
        Refuse("no hit"),
    );
    let mut odd = data16.clone();
    odd.push(0);
    add(
        "data-odd-byte",
        riff(&[fmt_chunk(&pcm(2, fs, 16)), data_chunk(&odd, None)]),
        Accept,
    );
    let mut junk = b"junk".to_vec();
    junk.extend(u32::MAX.to_le_bytes());
    add(
        "chunk-past-end",
        riff(&[fmt_chunk(&pcm(2, fs, 16)), junk, data_chunk(&data16, None)]),
        Refuse("past the end"),
    );
    let many: Vec<Vec<u8>> = (0..5000)
        .map(|_| [b"junk".as_slice(), &[0, 0, 0, 0]].concat())
        .collect();
    add(
        "5000-chunks",
        riff(
            &[
                vec![fmt_chunk(&pcm(2, fs, 16))],
                many,
                vec![data_chunk(&data16, None)],
            ]
            .concat(),
        ),
        Refuse("chunks"),
    );
    let list = [b"LIST".as_slice(), &3u32.to_le_bytes(), b"abc", &[0]].concat();
    add(
        "list-odd-padded",
        riff(&[fmt_chunk(&pcm(2, fs, 16)), list, data_chunk(&data16, None)]),
        Accept,
    );
    let list = [b"LIST".as_slice(), &3u32.to_le_bytes(), b"abc"].concat();
    add(
        "list-odd-unpadded",
        riff(&[fmt_chunk(&pcm(2, fs, 16)), list, data_chunk(&data16, None)]),
        Refuse("wav"),
    );
    let rf64 = |ds: Option<u64>, claimed: u32| {
        let mut b = b"RF64".to_vec();
        b.extend(u32::MAX.to_le_bytes());
        b.extend(b"WAVE");
        if let Some(d) = ds {
            b.extend(b"ds64");
            b.extend(28u32.to_le_bytes());
            b.extend(0u64.to_le_bytes());
            b.extend(d.to_le_bytes());
            b.extend(0u64.to_le_bytes());
            b.extend(0u32.to_le_bytes());
        }
        b.extend(fmt_chunk(&pcm(2, fs, 16)));
        b.extend(data_chunk(&data16, Some(claimed)));
        b
    };
    add("rf64", rf64(Some(data16.len() as u64), u32::MAX), Accept);
    add("rf64-no-ds64", rf64(None, u32::MAX), Refuse("ds64"));
    add(
        "rf64-ds64-huge",
        rf64(Some(1 << 60), u32::MAX),
        Refuse("truncated"),
    );
    let mut short = rf64(Some(8), u32::MAX);
    short[16..20].copy_from_slice(&8u32.to_le_bytes());
    add("rf64-ds64-short", short, Refuse("ds64"));
    let mut nan = ch.to_vec();
    nan[1][5000] = f64::NAN;
    add(
        "float-nan",
        wav(&pcm_float(fs), &nan, g),
        Refuse("not a finite"),
    );
    let mut inf = ch.to_vec();
    inf[0][100] = f64::INFINITY;
    add(
        "float-inf",
        wav(&pcm_float(fs), &inf, g),
        Refuse("not a finite"),
    );
    add("float-32", wav(&pcm_float(fs), ch, g), Accept);
    let mut f64f = pcm(2, fs, 64);
    f64f.tag = 3;
    add("float-64", wav(&f64f, ch, g), Accept);
    let quiet = vec![vec![0.0; 20_000], vec![0.0; 20_000]];
    add(
        "silence",
        wav(&pcm(2, fs, 16), &quiet, 1.0),
        Refuse("no hit"),
    );
    add(
        "silence-u8",
        wav(&pcm(2, fs, 8), &quiet, 1.0),
        Refuse("no hit"),
    );
    add("pcm-24", wav(&pcm(2, fs, 24), ch, g), Accept);
    add("pcm-32", wav(&pcm(2, fs, 32), ch, g), Accept);
    add("mono-16", wav(&pcm(1, fs, 16), &ch[1..], g), Accept);
    let four = vec![ch[0].clone(), ch[1].clone(), ch[1].clone(), ch[0].clone()];
    add("four-channels", wav(&pcm(4, fs, 16), &four, g), Accept);
    add("good", good, Accept);
    v
}

fn pcm_float(fs: u32) -> Fmt {
    let mut f = pcm(2, fs, 32);
    f.tag = 3;
    f
}

#[test]
fn malformed_wavs() {
    let dir = temp_dir("hostile-wav");
    let (ch, fs) = good_channels();
    let cases = wav_cases(&ch, fs);
    let mut failures = Vec::new();
    for (name, bytes, e) in &cases {
        let p = dir.join(format!("{name}.wav"));
        std::fs::write(&p, bytes).unwrap();
        let out = dir.join(format!("{name}.out.json"));
        if let Some(f) = check(
            &[
                "analyze",
                p.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
            ],
            e,
        ) {
            failures.push(format!("{name}: {f}"));
        }
    }
    // Things that are not files at all.
    let mut extra = 0;
    for (name, path) in [
        ("folder", dir.clone()),
        ("device", PathBuf::from("/dev/null")),
    ] {
        extra += 1;
        if let Some(f) = check(
            &["analyze", path.to_str().unwrap()],
            &Expect::Refuse("not a regular file"),
        ) {
            failures.push(format!("{name}: {f}"));
        }
    }
    #[cfg(unix)]
    {
        let fifo = dir.join("fifo.wav");
        let c = std::ffi::CString::new(fifo.to_str().unwrap()).unwrap();
        // SAFETY: plain libc call on a valid C string.
        assert_eq!(unsafe { libc::mkfifo(c.as_ptr(), 0o600) }, 0);
        extra += 1;
        if let Some(f) = check(
            &["analyze", fifo.to_str().unwrap()],
            &Expect::Refuse("not a regular file"),
        ) {
            failures.push(format!("fifo: {f}"));
        }
    }
    eprintln!("WAV catalogue: {} files + {extra} non-files", cases.len());
    assert!(
        cases.len() + extra >= 60,
        "only {} WAV cases",
        cases.len() + extra
    );
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

/// 24 bits left-justified in 32 read the same as packed 24-bit and as 16-bit: no false overload.
#[test]
fn extensible_24_in_32_reads_like_packed_24() {
    let dir = temp_dir("hostile-24in32");
    let (ch, fs) = good_channels();
    let a = dir.join("packed.wav");
    let b = dir.join("left.wav");
    std::fs::write(&a, wav(&pcm(2, fs, 24), &ch, 1000.0)).unwrap();
    let f = Fmt {
        tag: 0xFFFE,
        channels: 2,
        rate: fs,
        align: None,
        bits: 32,
        ext: Some((24, 1)),
    };
    std::fs::write(&b, wav(&f, &ch, 1000.0)).unwrap();
    let mut x = tapmodes::source::wav::WavSource::open(&a).unwrap();
    let mut y = tapmodes::source::wav::WavSource::open(&b).unwrap();
    use tapmodes::source::Source;
    assert_eq!(
        x.info().channels[0].full_scale,
        y.info().channels[0].full_scale
    );
    while let (Some(p), Some(q)) = (x.next_block().unwrap(), y.next_block().unwrap()) {
        assert_eq!(p, q);
    }
}

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
