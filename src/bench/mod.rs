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
    /// `analyze` time against `cat` and the FFT-work floor, phases and peak memory on
    /// generated 1-, 10- and 60-minute 48 kHz stereo WAVs (`--quick`: 15 s and 1 min).
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

/// Stream a simulated 48 kHz stereo recording straight to a WAV (flat memory): 16-bit
/// converter codes, or 32-bit float channel values.
fn make_wav(path: &std::path::Path, seconds: f64, float: bool) -> Result<()> {
    let mut plan = preset("tm9-arm-solid", 3).ok_or_else(|| Error::new("preset missing"))?;
    plan.sample_rate = 48_000.0;
    plan.hammer.tip = tapmodes::source::simulator::Tip::Hard;
    let lsb: Vec<f64> = plan.sensors.iter().map(|s| s.lsb()).collect();
    // Float samples as a fraction of each sensor's full scale, as a sound card gives them.
    let full: Vec<f64> = plan.sensors.iter().map(|s| s.full_scale).collect();
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 48_000,
        bits_per_sample: if float { 32 } else { 16 },
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let enc = |e: hound::Error| Error::new(e.to_string());
    let mut w = hound::WavWriter::create(path, spec).map_err(enc)?;
    let mut sim = Simulator::new(plan, Some(seconds), true).with_block_len(48_000);
    while let Some(b) = sim.next_block()? {
        for k in 0..b.len() {
            for ((ch, step), full) in b.channels.iter().zip(&lsb).zip(&full) {
                if float {
                    w.write_sample((ch[k] / full) as f32).map_err(enc)?;
                } else {
                    w.write_sample((ch[k] / step).round() as i16).map_err(enc)?;
                }
            }
        }
    }
    w.finalize().map_err(enc)
}

/// Median of a few timings (seconds).
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v.get(v.len() / 2).copied().unwrap_or(f64::NAN)
}

/// Wall time of `cat FILE > /dev/null`; without a `cat`, of reading the file in 1 MiB
/// pieces here (said in the output).
fn cat_time(path: &std::path::Path) -> Result<(f64, &'static str)> {
    let t0 = Instant::now();
    let ran = std::process::Command::new("cat")
        .arg(path)
        .stdout(std::process::Stdio::null())
        .status();
    if ran.is_ok_and(|s| s.success()) {
        return Ok((t0.elapsed().as_secs_f64(), "cat"));
    }
    let t0 = Instant::now();
    let mut f = std::fs::File::open(path)?;
    let mut buf = vec![0u8; 1 << 20];
    while std::io::Read::read(&mut f, &mut buf)? > 0 {}
    Ok((t0.elapsed().as_secs_f64(), "read loop"))
}

/// Wall time of the whole `tapmodes analyze FILE` command (this executable, a child
/// process: reading, analysis, printing, run files).
fn command_time(path: &std::path::Path, out: &std::path::Path) -> Result<f64> {
    let exe = std::env::current_exe()?;
    let _ = std::fs::remove_file(out);
    let _ = std::fs::remove_file(out.with_extension("csv"));
    let t0 = Instant::now();
    let status = std::process::Command::new(exe)
        .arg("analyze")
        .arg(path)
        .arg("--out")
        .arg(out)
        .arg("--quiet")
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .output()?;
    let t = t0.elapsed().as_secs_f64();
    if !status.status.success() {
        tapmodes::fail!(
            "the benchmark's analyze run failed on '{}': {}",
            path.display(),
            String::from_utf8_lossy(&status.stderr).trim()
        );
    }
    Ok(t)
}

/// The FFT work of an analysis alone: `count` real FFTs of `n_fft` points (windowed
/// records of `record_len` samples, zero-padded as the analysis pads them), in a tight
/// loop on all cores.
fn fft_floor(count: usize, record_len: usize, n_fft: usize) -> f64 {
    use realfft::num_complex::Complex64;
    use tapmodes::spectra::averager::Transformer;
    let mut rng = tapmodes::rng::Rng::new(5);
    let record: Vec<f64> = (0..record_len)
        .map(|_| (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64 - 0.5)
        .collect();
    let window = vec![1.0; record_len];
    let jobs: Vec<usize> = (0..count).collect();
    let plan = Transformer::new(n_fft, 48_000.0);
    let t0 = Instant::now();
    let sums = tapmodes::parallel::map_with(
        &jobs,
        || (plan.fresh(), vec![Complex64::new(0.0, 0.0); n_fft / 2 + 1]),
        |(fft, out), _| {
            fft.transform(&record, &window, out);
            out[1].re
        },
    );
    let t = t0.elapsed().as_secs_f64();
    // Use the results so the loop cannot be optimised away.
    if sums.iter().any(|v| v.is_nan()) {
        return f64::NAN;
    }
    t
}

/// Where the time of one file goes (seconds, in this process): reading alone, reading and
/// hit detection, the whole drain (with the FFTs and averaging), and the mode search with
/// the per-hit uncertainty.
struct Phases {
    read: f64,
    detect: f64,
    drain: f64,
    modes: f64,
    hits: usize,
    accepted: usize,
    ffts: usize,
    record_len: usize,
    n_fft: usize,
    rss_kib: u64,
}

fn phases(path: &std::path::Path) -> Result<Phases> {
    let t0 = Instant::now();
    let mut src = WavSource::open(path)?;
    while src.next_block()?.is_some() {}
    let read = t0.elapsed().as_secs_f64();
    let t0 = Instant::now();
    let mut src = WavSource::open(path)?;
    let roles = RoleChoice::default().resolve(src.info())?;
    let mut det = tapmodes::hits::HitDetector::new(
        src.info(),
        roles,
        tapmodes::hits::TriggerConfig {
            channel: roles.force.unwrap_or(roles.response),
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
        let _ = det.take_idle();
        hits.clear();
    }
    let detect = t0.elapsed().as_secs_f64();
    let before = peak_rss_kib(true).unwrap_or(0);
    let t0 = Instant::now();
    let mut src = WavSource::open(path)?;
    let roles = RoleChoice::default().resolve(src.info())?;
    let a = analyse_source(&mut src, roles, AnalysisConfig::default(), false)?;
    let drain = t0.elapsed().as_secs_f64();
    let t0 = Instant::now();
    let r = a.result();
    let s = &r.spectra;
    let modes = t0.elapsed().as_secs_f64();
    let rss_kib = peak_rss_kib(false).unwrap_or(0).max(before);
    let n_fft = 2 * (s.freqs.len() - 1);
    let per_hit = 1 + usize::from(roles.force.is_some()) + usize::from(roles.base.is_some());
    Ok(Phases {
        read,
        detect,
        drain,
        modes,
        hits: a.hits().len(),
        accepted: a.accepted(),
        ffts: a.accepted() * per_hit + s.background_records,
        record_len: a.detector().record_len(),
        n_fft,
        rss_kib,
    })
}

/// The generated recordings go in a scratch folder and are removed afterwards; with
/// `TAPMODES_BENCH_KEEP=DIR` they are written to DIR and kept (for profiling one of them).
fn speed(quick: bool) -> Result<String> {
    if let Some(keep) = std::env::var_os("TAPMODES_BENCH_KEEP") {
        let dir = std::path::PathBuf::from(keep);
        std::fs::create_dir_all(&dir)?;
        return speed_in(&dir, quick, true);
    }
    let dir = std::env::temp_dir().join(format!("tapmodes-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir)?;
    let done = speed_in(&dir, quick, false);
    let _ = std::fs::remove_dir_all(&dir);
    done
}

fn speed_in(dir: &std::path::Path, quick: bool, keep: bool) -> Result<String> {
    // (minutes, float): 48 kHz stereo, about 40 taps a minute.
    let files: &[(f64, bool)] = if quick {
        &[(0.25, true), (1.0, true)]
    } else {
        &[(1.0, true), (10.0, true), (10.0, false), (60.0, true)]
    };
    let repeats = if quick { 3 } else { 5 };
    let mut out = format!(
        "Medians of {repeats} runs; `analyze` is the whole command (a child process), `cat` is `cat FILE > /dev/null`, the FFT floor is the same number and length of FFTs in a tight loop on {} core(s).\n\n",
        tapmodes::parallel::threads()
    );
    out += "| file | taps (accepted) | cat | analyze | analyze / cat | FFT floor | analyze / floor | peak RSS |\n|---|---|---|---|---|---|---|---|\n";
    let mut breakdown = String::from(
        "\nPhases (in process, medians): reading; hit detection (reading and detection less reading); spectra (FFTs and averaging: the whole drain less reading and detection); modes (mode search, fits and per-hit uncertainty).\n\n| file | reading | hit detection | spectra | modes | FFTs (length) |\n|---|---|---|---|---|---|\n",
    );
    for &(minutes, float) in files {
        let path = dir.join(format!("bench-{minutes}-{float}.wav"));
        make_wav(&path, minutes * 60.0, float)?;
        let size_mb = std::fs::metadata(&path).map_or(0.0, |m| m.len() as f64 / 1e6);
        let name = format!(
            "{} min, {} ({:.0} MB)",
            minutes,
            if float { "32-bit float" } else { "16-bit" },
            size_mb
        );
        let json = dir.join("bench-out.json");
        let mut cat = Vec::new();
        let mut cmd = Vec::new();
        let mut ph = Vec::new();
        let mut cat_how = "cat";
        // Interleaved, so a change in machine load touches every measure alike.
        for _ in 0..repeats {
            let (t, how) = cat_time(&path)?;
            cat.push(t);
            cat_how = how;
            cmd.push(command_time(&path, &json)?);
            ph.push(phases(&path)?);
        }
        let last = ph.last().ok_or_else(|| Error::new("no benchmark run"))?;
        let floor = median(
            (0..repeats)
                .map(|_| fft_floor(last.ffts, last.record_len, last.n_fft))
                .collect(),
        );
        let (cat, cmd) = (median(cat), median(cmd));
        let rss = ph.iter().map(|p| p.rss_kib).max().unwrap_or(0);
        let med = |f: fn(&Phases) -> f64| median(ph.iter().map(f).collect());
        let (read, detect, drain, modes) = (
            med(|p| p.read),
            med(|p| p.detect),
            med(|p| p.drain),
            med(|p| p.modes),
        );
        out += &format!(
            "| {name} | {} ({}) | {cat:.3} s{} | {cmd:.3} s | {:.1}x | {floor:.3} s | {:.1}x | {:.0} MiB |\n",
            last.hits,
            last.accepted,
            if cat_how == "cat" { "" } else { " (read loop)" },
            cmd / cat,
            cmd / floor,
            rss as f64 / 1024.0
        );
        breakdown += &format!(
            "| {name} | {read:.3} s | {:.3} s | {:.3} s | {modes:.3} s | {} ({}) |\n",
            (detect - read).max(0.0),
            (drain - detect).max(0.0),
            last.ffts,
            last.n_fft
        );
        if !keep {
            let _ = std::fs::remove_file(&path);
        }
        let _ = std::fs::remove_file(&json);
        let _ = std::fs::remove_file(json.with_extension("csv"));
    }
    Ok(out + &breakdown)
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
