//! `tapmodes bench`: speed, memory and decoder throughput, accuracy against simulated
//! truth, app latency (figures for the README). Compiled into the binary only: the
//! library does not ship them; they drive its public API like any other user.
//!
//! Benchmarks, not tests: run them on a quiet machine with a release build.

pub mod accuracy;
pub mod app;

use clap::{Args, ValueEnum};
use std::time::Instant;
use tapmodes::error::{Error, Result};
use tapmodes::pipeline::{AnalysisConfig, analyse_source};
use tapmodes::signal::RoleChoice;
use tapmodes::source::Source;
use tapmodes::source::serial::codec::{
    BinaryEncoder, Decoder, SampleWidth, StreamHeader, encode_text_frame, encode_text_header,
};
use tapmodes::source::simulator::Simulator;
use tapmodes::source::simulator::presets::preset;
use tapmodes::source::wav::WavSource;

#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum BenchKind {
    /// `analyze` time and peak memory on generated 1- and 10-minute 48 kHz stereo WAVs.
    Speed,
    /// Serial decoder throughput, binary and text forms.
    Decoder,
    /// Method accuracy against simulator truth, beside the Cramer-Rao bound.
    Accuracy,
    /// Terminal app latency, frame rate and idle CPU.
    Tui,
}

#[derive(Debug, Args)]
pub struct BenchArgs {
    #[arg(value_enum)]
    pub kind: BenchKind,
    /// Smaller, quicker runs (for a smoke check).
    #[arg(long)]
    pub quick: bool,
}

pub fn run(a: &BenchArgs) -> Result<()> {
    match a.kind {
        BenchKind::Speed => print!("{}", speed(a.quick)?),
        BenchKind::Decoder => print!("{}", decoder(a.quick)),
        BenchKind::Accuracy => print!("{}", accuracy::accuracy_report(a.quick)),
        BenchKind::Tui => print!("{}", app::bench_report()),
    }
    Ok(())
}

/// Peak resident memory of this process in KiB, reset first if `reset` (Linux only).
fn peak_rss_kib(reset: bool) -> Option<u64> {
    if reset {
        let _ = std::fs::write("/proc/self/clear_refs", "5");
    }
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = s.lines().find(|l| l.starts_with("VmHWM:"))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

/// Stream a simulated 48 kHz stereo recording straight to a WAV (flat memory).
fn make_wav(path: &std::path::Path, seconds: f64) -> Result<()> {
    let mut plan = preset("tm9-arm-solid", 3).ok_or_else(|| Error::new("preset missing"))?;
    plan.sample_rate = 48_000.0;
    plan.hammer.tip = tapmodes::source::simulator::Tip::Hard;
    let lsb: Vec<f64> = plan.sensors.iter().map(|s| s.lsb()).collect();
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 48_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(path, spec).map_err(|e| Error::new(e.to_string()))?;
    let mut sim = Simulator::new(plan, Some(seconds), true).with_block_len(48_000);
    while let Some(b) = sim.next_block()? {
        for k in 0..b.len() {
            for (ch, step) in b.channels.iter().zip(&lsb) {
                w.write_sample((ch[k] / step).round() as i16)
                    .map_err(|e| Error::new(e.to_string()))?;
            }
        }
    }
    w.finalize().map_err(|e| Error::new(e.to_string()))
}

fn speed(quick: bool) -> Result<String> {
    let dir = std::env::temp_dir().join(format!("tapmodes-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    let mut out = String::from(
        "| file | hits | accepted | analyze time | peak RSS during analyze |\n|---|---|---|---|---|\n",
    );
    let mut breakdown = String::new();
    let lengths: &[f64] = if quick { &[10.0, 60.0] } else { &[60.0, 600.0] };
    for &secs in lengths {
        let path = dir.join(format!("bench-{secs}.wav"));
        make_wav(&path, secs)?;
        let mut best = f64::INFINITY;
        let mut rss = 0;
        let mut counts = (0, 0);
        let mut mode_count = 0;
        for _ in 0..3 {
            let before = peak_rss_kib(true).unwrap_or(0);
            let t0 = Instant::now();
            let mut src = WavSource::open(&path)?;
            let roles = RoleChoice::default().resolve(src.info())?;
            let a = analyse_source(&mut src, roles, AnalysisConfig::default(), false)?;
            let s = a.spectra();
            let modes = a.modes(&s);
            best = best.min(t0.elapsed().as_secs_f64());
            rss = rss.max(peak_rss_kib(false).unwrap_or(0).max(before));
            counts = (a.hits().len(), a.accepted());
            mode_count = modes.len();
        }
        // Where the time goes: reading alone, reading plus hit detection.
        let t0 = Instant::now();
        let mut src = WavSource::open(&path)?;
        while src.next_block()?.is_some() {}
        let read_s = t0.elapsed().as_secs_f64();
        let t0 = Instant::now();
        let mut src = WavSource::open(&path)?;
        let roles = RoleChoice::default().resolve(src.info())?;
        let mut det = tapmodes::hits::HitDetector::new(
            src.info(),
            roles,
            tapmodes::hits::TriggerConfig {
                channel: 0,
                level: tapmodes::hits::TriggerLevel::NoiseMultiple(10.0),
                pretrigger_s: 0.01,
                record_s: 1.0,
                holdoff_s: 0.2,
            },
            tapmodes::hits::CheckConfig::default(),
        );
        let mut hits = Vec::new();
        while let Some(b) = src.next_block()? {
            det.push(&b, &mut hits);
            hits.clear();
        }
        let detect_s = t0.elapsed().as_secs_f64();
        breakdown += &format!(
            "- {:.0} min: reading {:.3} s, reading + hit detection {:.3} s, whole analysis {:.3} s ({} modes)\n",
            secs / 60.0,
            read_s,
            detect_s,
            best,
            mode_count
        );
        out += &format!(
            "| {:.0} min, 2 ch, 48 kHz, 16-bit ({:.1} MB) | {} | {} | {:.3} s (best of 3) | {:.1} MiB |\n",
            secs / 60.0,
            std::fs::metadata(&path).map_or(0.0, |m| m.len() as f64 / 1e6),
            counts.0,
            counts.1,
            best,
            rss as f64 / 1024.0
        );
        let _ = std::fs::remove_file(&path);
    }
    let _ = std::fs::remove_dir(&dir);
    Ok(out + "\n" + &breakdown)
}

fn decoder(quick: bool) -> String {
    let secs = if quick { 2.0 } else { 20.0 };
    let mut out = String::from(
        "| form | stream | bytes | decode time | times real time |\n|---|---|---|---|---|\n",
    );
    // Binary: 6 channels x 32 kHz, 16-bit.
    let (ch, rate) = (6usize, 32_000.0);
    let names: Vec<String> = (0..ch).map(|i| format!("c{i}")).collect();
    let header = StreamHeader {
        rate_hz: rate,
        channels: names.clone(),
        units: vec!["g".into(); ch],
        scales: vec![0.001; ch],
    };
    let mut enc = BinaryEncoder::with_width(SampleWidth::I16);
    let mut bytes = enc.header(&header);
    let frames = (secs * rate) as usize;
    let mut rng = tapmodes::rng::Rng::new(1);
    let block: Vec<Vec<i32>> = (0..frames.min(4096))
        .map(|_| {
            (0..ch)
                .map(|_| (rng.next_u64() % 60_000) as i32 - 30_000)
                .collect()
        })
        .collect();
    let mut done = 0;
    while done < frames {
        let n = block.len().min(frames - done);
        bytes.extend(enc.samples(&block[..n]));
        done += n;
    }
    out += &time_decode(
        "binary",
        &format!("{ch} ch x {} kHz", rate / 1000.0),
        &bytes,
        secs,
        frames,
    );
    // Text: 3 channels x 3.2 kHz.
    let (ch, rate) = (3usize, 3200.0);
    let header = StreamHeader {
        rate_hz: rate,
        channels: (0..ch).map(|i| format!("c{i}")).collect(),
        units: vec!["g".into(); ch],
        scales: vec![0.001; ch],
    };
    let mut bytes = encode_text_header(&header);
    let frames = (secs * rate) as usize;
    for i in 0..frames {
        let v: Vec<f64> = (0..ch)
            .map(|c| ((i * 7 + c * 13) % 4000) as f64 - 2000.0)
            .collect();
        bytes.extend(encode_text_frame(&v));
    }
    out += &time_decode(
        "text",
        &format!("{ch} ch x {} kHz", rate / 1000.0),
        &bytes,
        secs,
        frames,
    );
    out
}

fn time_decode(form: &str, what: &str, bytes: &[u8], secs: f64, frames: usize) -> String {
    let mut best = f64::INFINITY;
    for _ in 0..3 {
        let mut d = Decoder::new();
        let mut sink = Vec::new();
        let t0 = Instant::now();
        let mut got = 0;
        for chunk in bytes.chunks(4096) {
            d.push(chunk, &mut sink);
            got += sink.len();
            sink.clear();
        }
        best = best.min(t0.elapsed().as_secs_f64());
        if got < frames {
            return format!("| {form} | {what} | decoder lost frames: {got} of {frames} | | |\n");
        }
    }
    format!(
        "| {form} | {what} | {:.1} MB | {:.3} s for {secs:.0} s | {:.0}x |\n",
        bytes.len() as f64 / 1e6,
        best,
        secs / best
    )
}
