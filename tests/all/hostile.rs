//! Generator of the bad-input catalogue: malformed WAVs and run files, built at test time
//! from one good recording, each with its expected outcome. Used by `hostile_wavs.rs` and
//! `hostile_runs.rs` (`check` runs one case through the binary), and as seeds by
//! `hostile_fuzz.rs`.
#![allow(dead_code)]

use crate::common::{bin, simulate};
use tapmodes::source::simulator::presets::preset;

/// What a case must give.
#[derive(Debug, Clone)]
pub enum Expect {
    /// Exit 1 with one line on stderr, `tapmodes: ...`, containing this text (lower case).
    Refuse(&'static str),
    /// Exit 0: the input is legal and analysed (a documented result).
    Accept,
}

/// A WAV: `tag` (1 PCM, 3 float, 0xFFFE extensible with `ext` = (valid bits, sub-tag)).
pub struct Fmt {
    pub tag: u16,
    pub channels: u16,
    pub rate: u32,
    pub align: Option<u16>,
    pub bits: u16,
    pub ext: Option<(u16, u16)>,
}

pub fn fmt_chunk(f: &Fmt) -> Vec<u8> {
    let align = f
        .align
        .unwrap_or(f.channels.wrapping_mul(f.bits.div_ceil(8)));
    let mut b = Vec::new();
    b.extend(b"fmt ");
    b.extend((if f.ext.is_some() { 40u32 } else { 16 }).to_le_bytes());
    b.extend(f.tag.to_le_bytes());
    b.extend(f.channels.to_le_bytes());
    b.extend(f.rate.to_le_bytes());
    b.extend((f.rate.wrapping_mul(u32::from(align))).to_le_bytes());
    b.extend(align.to_le_bytes());
    b.extend(f.bits.to_le_bytes());
    if let Some((valid, sub)) = f.ext {
        b.extend(22u16.to_le_bytes());
        b.extend(valid.to_le_bytes());
        b.extend(3u32.to_le_bytes());
        b.extend(sub.to_le_bytes());
        // The rest of the KSDATAFORMAT GUID (from memory).
        b.extend([
            0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
        ]);
    }
    b
}

/// RIFF/WAVE around `chunks`.
pub fn riff(chunks: &[Vec<u8>]) -> Vec<u8> {
    let body: Vec<u8> = chunks.concat();
    let mut b = Vec::new();
    b.extend(b"RIFF");
    b.extend((4 + body.len() as u32).to_le_bytes());
    b.extend(b"WAVE");
    b.extend(body);
    b
}

pub fn data_chunk(data: &[u8], claimed: Option<u32>) -> Vec<u8> {
    let mut b = Vec::new();
    b.extend(b"data");
    b.extend(claimed.unwrap_or(data.len() as u32).to_le_bytes());
    b.extend(data);
    b
}

/// Interleave channel values with `enc` per sample.
pub fn interleave(chans: &[Vec<f64>], enc: impl Fn(f64) -> Vec<u8>) -> Vec<u8> {
    let n = chans[0].len();
    let mut out = Vec::new();
    for k in 0..n {
        for c in chans {
            out.extend(enc(c[k]));
        }
    }
    out
}

pub fn i16s(chans: &[Vec<f64>], gain: f64) -> Vec<u8> {
    interleave(chans, |v| {
        ((v * gain).round().clamp(-32768.0, 32767.0) as i16)
            .to_le_bytes()
            .to_vec()
    })
}

/// A whole WAV from a format and 16-bit-range values.
pub fn wav(f: &Fmt, chans: &[Vec<f64>], gain: f64) -> Vec<u8> {
    let data = match (f.tag, f.bits, f.ext) {
        (3, 32, _) | (0xFFFE, 32, Some((_, 3))) => interleave(chans, |v| {
            ((v * gain / 32768.0) as f32).to_le_bytes().to_vec()
        }),
        (3, 64, _) => interleave(chans, |v| (v * gain / 32768.0).to_le_bytes().to_vec()),
        (_, 8, _) => interleave(chans, |v| {
            vec![((v * gain / 256.0).round().clamp(-128.0, 127.0) + 128.0) as u8]
        }),
        (_, 24, _) => interleave(chans, |v| {
            let x = ((v * gain * 256.0).round() as i32).to_le_bytes();
            x[..3].to_vec()
        }),
        (_, 32, Some((24, 1))) => interleave(chans, |v| {
            (((v * gain * 256.0).round() as i32) << 8)
                .to_le_bytes()
                .to_vec()
        }),
        (_, 32, _) => interleave(chans, |v| {
            ((v * gain * 65536.0).round() as i32).to_le_bytes().to_vec()
        }),
        _ => i16s(chans, gain),
    };
    riff(&[fmt_chunk(f), data_chunk(&data, None)])
}

pub fn pcm(channels: u16, rate: u32, bits: u16) -> Fmt {
    Fmt {
        tag: 1,
        channels,
        rate,
        align: None,
        bits,
        ext: None,
    }
}

/// Little seeded generator (xorshift64*), for the fuzzers.
pub struct Rng(pub u64);

impl Rng {
    pub fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    pub fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

/// One mutation of `b`: flip, set to an edge value, insert, delete, duplicate a span,
/// or overwrite 4 bytes with an edge integer.
pub fn mutate(rng: &mut Rng, b: &mut Vec<u8>) {
    let edges: [u32; 8] = [0, 1, 0x7f, 0x80, 0xff, 0xffff, 0x7fff_ffff, 0xffff_ffff];
    if b.is_empty() {
        b.push(rng.next() as u8);
        return;
    }
    let i = rng.below(b.len());
    match rng.below(7) {
        0 => b[i] ^= 1 << rng.below(8),
        1 => b[i] = rng.next() as u8,
        2 => b.insert(i, rng.next() as u8),
        3 => {
            b.remove(i);
        }
        4 => {
            let n = rng.below(64).min(b.len() - i);
            let span = b[i..i + n].to_vec();
            let j = rng.below(b.len());
            b.splice(j..j, span);
        }
        5 => {
            let v = edges[rng.below(edges.len())].to_le_bytes();
            for (k, x) in v.iter().enumerate() {
                if let Some(t) = b.get_mut(i + k) {
                    *t = *x;
                }
            }
        }
        _ => b.truncate(i),
    }
}

/// Run the binary; check the outcome against `e`. Returns a description of a mismatch.
pub fn check(args: &[&str], e: &Expect) -> Option<String> {
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

/// The good recording every case is made from: 3 s of the braced arm, and its rate.
pub fn good_channels() -> (Vec<Vec<f64>>, u32) {
    let plan = preset("tm9-arm-braced", 4).unwrap();
    let fs = plan.sample_rate as u32;
    let (chans, _) = simulate(plan, 3.0);
    (chans, fs)
}
