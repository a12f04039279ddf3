//! The standing bad-input suite, WAV half: malformed WAV headers and data, generated here
//! from one good simulated recording (see `hostile.rs`), each run through the real binary
//! with its expected outcome: one clear sentence and exit 1, or a documented acceptance.
//! Nothing may panic, hang or allocate without bound. Run files are in `hostile_runs.rs`,
//! serial streams in `hostile_serial.rs`.

use crate::common::temp_dir;
use crate::hostile::*;
use std::path::PathBuf;

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
