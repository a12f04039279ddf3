//! Seeded mutation fuzzers, one per parser: WAV reader, run-file reader, serial decoder.
//! Each starts from valid inputs, applies random mutations (`hostile::mutate`) and asserts
//! that parsing never panics and every error is one sentence. A short run is part of
//! `cargo test`; the long one is ignored by default:
//!
//! `TAPMODES_FUZZ_SECS=200 cargo test --release --test all hostile_fuzz::fuzz_long -- --ignored --nocapture`
//!
//! runs each target for that many seconds (three targets: 10 minutes at 200).

use crate::hostile::{Rng, mutate, pcm, wav};
use std::time::{Duration, Instant};
use tapmodes::run::RunFile;
use tapmodes::source::Source;
use tapmodes::source::serial::codec::{BinaryEncoder, Decoder, StreamHeader, encode_text_header};
use tapmodes::source::wav::WavSource;

fn one_sentence(e: &str) {
    assert!(
        !e.is_empty() && !e.contains('\n'),
        "not one sentence: {e:?}"
    );
}

fn wav_seeds() -> Vec<Vec<u8>> {
    let ch: Vec<Vec<f64>> = (0..2)
        .map(|c| {
            (0..600)
                .map(|k| ((k * (c + 3)) % 97) as f64 - 48.0)
                .collect()
        })
        .collect();
    let mut f = pcm(2, 8000, 16);
    let mut seeds = vec![wav(&f, &ch, 100.0)];
    for bits in [8, 24, 32] {
        f = pcm(2, 8000, bits);
        seeds.push(wav(&f, &ch, 100.0));
    }
    f = pcm(2, 8000, 32);
    f.tag = 3;
    seeds.push(wav(&f, &ch, 100.0));
    f.tag = 0xFFFE;
    f.ext = Some((24, 1));
    seeds.push(wav(&f, &ch, 100.0));
    seeds
}

fn fuzz_wav_once(bytes: Vec<u8>) {
    match WavSource::from_bytes("fuzz.wav", bytes) {
        Err(e) => one_sentence(e.message()),
        Ok(mut s) => {
            for _ in 0..10_000 {
                match s.next_block() {
                    Ok(Some(b)) => assert!(b.channels.iter().flatten().all(|v| v.is_finite())),
                    Ok(None) => break,
                    Err(e) => {
                        one_sentence(e.message());
                        break;
                    }
                }
            }
        }
    }
}

fn run_seed() -> String {
    // A small valid run file written by the library itself would need an analysis; the
    // committed demo run is the seed instead.
    std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/recordings/arm-solid.json"
    ))
    .unwrap()
}

fn fuzz_run_once(text: &[u8]) {
    let text = String::from_utf8_lossy(text);
    if let Err(e) = RunFile::from_json(&text, "fuzz.json") {
        one_sentence(e.message());
    }
}

fn serial_seeds() -> Vec<Vec<u8>> {
    let h = StreamHeader::new(1000.0, &["force", "accel"]);
    let mut text = encode_text_header(&h);
    for k in 0..40 {
        text.extend(format!("{k},{}\n", k * 3).bytes());
    }
    let mut e = BinaryEncoder::new();
    let mut bin = e.header(&h);
    let frames: Vec<Vec<i32>> = (0..300).map(|k| vec![k, -k]).collect();
    bin.extend(e.samples(&frames));
    e.skip_frames(17);
    bin.extend(e.samples(&frames));
    bin.extend(e.note("boot"));
    vec![text, bin]
}

fn fuzz_serial_once(bytes: &[u8], rng: &mut Rng) {
    let mut out = Vec::new();
    let mut whole = Decoder::new();
    whole.push(bytes, &mut out);
    // Chunking must not change the result.
    let mut out2 = Vec::new();
    let mut split = Decoder::new();
    let mut rest = bytes;
    while !rest.is_empty() {
        let n = (rng.below(64) + 1).min(rest.len());
        split.push(&rest[..n], &mut out2);
        rest = &rest[n..];
    }
    assert_eq!(out, out2, "chunking changed the decoded stream");
    assert_eq!(whole.stats(), split.stats());
    for d in &out {
        if let tapmodes::source::serial::codec::Decoded::Frame(f) = d {
            assert!(
                f.iter().all(|v| v.is_finite()),
                "a value that is not finite"
            );
        }
    }
}

/// Mutate seeds for `secs` seconds per target; returns (inputs, elapsed) per target.
fn fuzz(secs: f64, seed: u64) -> Vec<(&'static str, u64, f64)> {
    let mut report = Vec::new();
    let budget = Duration::from_secs_f64(secs);
    let mut rng = Rng(seed | 1);
    let targets: [&'static str; 3] = ["wav", "run file", "serial"];
    let run = run_seed().into_bytes();
    for t in targets {
        let seeds = match t {
            "wav" => wav_seeds(),
            "run file" => vec![run.clone()],
            _ => serial_seeds(),
        };
        let t0 = Instant::now();
        let mut n = 0u64;
        while t0.elapsed() < budget {
            let mut b = seeds[rng.below(seeds.len())].clone();
            for _ in 0..=rng.below(8) {
                mutate(&mut rng, &mut b);
            }
            match t {
                "wav" => fuzz_wav_once(b),
                "run file" => fuzz_run_once(&b),
                _ => fuzz_serial_once(&b, &mut rng),
            }
            n += 1;
        }
        report.push((t, n, t0.elapsed().as_secs_f64()));
    }
    report
}

#[test]
fn fuzz_briefly() {
    for (t, n, s) in fuzz(1.0, 7) {
        eprintln!("{t}: {n} inputs in {s:.1} s, no panic");
        assert!(n > 10);
    }
}

#[test]
#[ignore = "long fuzzing run; see the module documentation for the command"]
fn fuzz_long() {
    let secs: f64 = std::env::var("TAPMODES_FUZZ_SECS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(200.0);
    let seed = std::env::var("TAPMODES_FUZZ_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(0x5eed);
    for (t, n, s) in fuzz(secs, seed) {
        println!(
            "{t}: {n} inputs in {s:.0} s ({:.0}/s), no panic",
            n as f64 / s
        );
    }
}
