//! Kill tests: SIGINT, SIGTERM and SIGKILL sent to `capture` reading the simulated bench,
//! a WAV replayed in real time and a serial device behind a pseudo-terminal (binary form,
//! with packets dropped on the way), at moments spread from before the first save to well
//! after it. Rounds per source and signal: `TAPMODES_KILL_ROUNDS` (default 2).
//!
//! SIGINT and SIGTERM: exit 0 within 500 ms, the WAV complete (its header covers all its
//! data) and its frames plus the listed gaps equal to the frames the JSON covers.
//! SIGKILL cannot be caught; what must hold is what is on disk: a WAV that opens (read to
//! its end when its header lags, with a note), a JSON (when a hit was accepted before the
//! kill) that covers no more than the WAV holds, and re-analysis of either giving results
//! or one sentence with exit 1, never a panic.
#![cfg(unix)]

use crate::common::{bin, simulate, temp_dir};
use crate::hostile::{pcm, wav};
use std::io::{Read, Write};
use std::os::unix::process::ExitStatusExt;
use std::path::{Path, PathBuf};
use std::process::{Child, Stdio};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};
use tapmodes::run::RunFile;
use tapmodes::source::serial::codec::{BinaryEncoder, SampleWidth};
use tapmodes::source::simulator::presets::preset;
use tapmodes::source::wav::WavSource;

fn rounds() -> usize {
    std::env::var("TAPMODES_KILL_ROUNDS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(2)
        .max(1)
}

/// When round `i` of `n` sends its signal: from 0.6 s (before the first accepted hit, so
/// before any save) to 2.9 s (after it).
fn moment(i: usize, n: usize) -> Duration {
    Duration::from_millis(600 + (i as u64 * 2300) / (n.max(2) as u64 - 1))
}

/// A serial device on the master side of a pty: waits for the host's header request, then
/// streams the binary form in real time (20 ms per write), dropping one packet in 150, until
/// `stop` is set.
fn paced_device(
    mut master: serialport::TTYPort,
    stop: Arc<AtomicBool>,
) -> std::thread::JoinHandle<()> {
    std::thread::spawn(move || {
        let (header, frames) = crate::serial_pty::device_frames(12.0);
        let _ = serialport::SerialPort::set_timeout(&mut master, Duration::from_millis(100));
        let mut b = [0u8; 16];
        for _ in 0..200 {
            match master.read(&mut b) {
                Ok(n) if n > 0 => break,
                _ => std::thread::sleep(Duration::from_millis(25)),
            }
        }
        let mut enc = BinaryEncoder::with_width(SampleWidth::I16);
        if master.write_all(&enc.header(&header)).is_err() {
            return;
        }
        let per_write = (header.rate_hz / 50.0) as usize;
        let t0 = Instant::now();
        for (k, block) in frames.chunks(per_write).enumerate() {
            if stop.load(Ordering::SeqCst) {
                return;
            }
            let pkt = enc.samples(block);
            if k % 150 != 149 && master.write_all(&pkt).is_err() {
                return;
            }
            let due = Duration::from_millis(20 * (k as u64 + 1));
            if let Some(wait) = due.checked_sub(t0.elapsed()) {
                std::thread::sleep(wait);
            }
        }
    })
}

/// The three sources.
#[derive(Clone, Copy, Debug)]
enum Src {
    Demo,
    Replay,
    Serial,
}

/// A running capture, and its device when it has one.
struct Running {
    child: Child,
    device: Option<(Arc<AtomicBool>, std::thread::JoinHandle<()>)>,
}

fn start(src: Src, dir: &Path, replay: &Path) -> Running {
    let mut cmd = bin();
    cmd.args(["capture", "--hits", "1000", "--out", dir.to_str().unwrap()]);
    let mut device = None;
    match src {
        Src::Demo => {
            cmd.arg("--demo");
        }
        Src::Replay => {
            cmd.args(["--replay", replay.to_str().unwrap()]);
        }
        Src::Serial => {
            let (master, port) = crate::serial_pty::pty();
            let stop = Arc::new(AtomicBool::new(false));
            device = Some((stop.clone(), paced_device(master, stop)));
            cmd.args(["--serial", &port]);
        }
    }
    let child = cmd
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    Running { child, device }
}

/// What one round left behind.
#[derive(Debug, Default)]
struct Round {
    code: Option<i32>,
    signal: Option<i32>,
    took: Duration,
    wav_frames: u64,
    past_header: u64,
    json_frames: Option<u64>,
    accepted: Option<usize>,
    analyze_wav: i32,
    analyze_json: Option<i32>,
    /// The sentence of a failed re-analysis of the WAV alone.
    wav_said: String,
}

/// Run the binary; the exit code and the last line of stderr, checked for one sentence and
/// no panic.
fn analyze(args: &[&str]) -> (i32, String) {
    let out = bin().args(args).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!err.contains("panicked"), "{args:?}: {err}");
    let code = out.status.code().unwrap_or(-1);
    if code != 0 {
        assert_eq!(code, 1, "{args:?}: {err}");
        let last = err.lines().last().unwrap_or_default();
        assert!(last.starts_with("tapmodes: "), "{args:?}: {err}");
        assert_eq!(
            err.lines().filter(|l| l.starts_with("tapmodes: ")).count(),
            1,
            "{args:?}: {err}"
        );
        return (code, last.to_string());
    }
    (code, String::new())
}

fn one_round(src: Src, name: &str, sig: i32, after: Duration, dir: &Path, replay: &Path) -> Round {
    let mut run = start(src, dir, replay);
    std::thread::sleep(after);
    // SAFETY: a signal to the child this test started, by its process id.
    unsafe { libc::kill(run.child.id() as i32, sig) };
    let t0 = Instant::now();
    let status = run.child.wait().unwrap();
    let took = t0.elapsed();
    let mut stderr = String::new();
    if let Some(mut e) = run.child.stderr.take() {
        let _ = e.read_to_string(&mut stderr);
    }
    if let Some((stop, t)) = run.device.take() {
        stop.store(true, Ordering::SeqCst);
        let _ = t.join();
    }
    assert!(!stderr.contains("panicked"), "{src:?} {name}: {stderr}");
    let mut r = Round {
        code: status.code(),
        signal: status.signal(),
        took,
        ..Round::default()
    };
    let wav_path = dir.join("variant.wav");
    let json_path = dir.join("variant.json");
    let w = WavSource::open(&wav_path)
        .unwrap_or_else(|e| panic!("{src:?} {name}: the WAV does not open: {e}"));
    r.wav_frames = w.frames();
    r.past_header = w.past_header();
    if json_path.exists() {
        let run = RunFile::load(&json_path)
            .unwrap_or_else(|e| panic!("{src:?} {name}: the JSON does not load: {e}"));
        let rec = run.recording.as_ref().expect("the run names its recording");
        let lost: u64 = rec.gaps.iter().map(|g| g.1).sum();
        assert!(
            r.wav_frames + lost >= rec.frames,
            "{src:?} {name}: the JSON covers {} frames, the WAV holds {} + gaps {lost}",
            rec.frames,
            r.wav_frames
        );
        r.json_frames = Some(rec.frames);
        r.accepted = Some(run.hits_accepted);
        let out = dir.join("again-json.json");
        r.analyze_json = Some(
            analyze(&[
                "analyze",
                json_path.to_str().unwrap(),
                "--out",
                out.to_str().unwrap(),
                "--quiet",
            ])
            .0,
        );
    }
    let out = dir.join("again-wav.json");
    (r.analyze_wav, r.wav_said) = analyze(&[
        "analyze",
        wav_path.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    if sig != libc::SIGKILL {
        assert_eq!(r.code, Some(0), "{src:?} {name}: {stderr}");
        assert!(
            took < Duration::from_millis(500),
            "{src:?} {name}: took {took:?}"
        );
        assert_eq!(
            r.past_header, 0,
            "{src:?} {name}: the WAV header lags its data"
        );
        crate::hostile_outputs::consistent(dir).unwrap_or_else(|e| panic!("{src:?} {name}: {e}"));
        assert!(r.json_frames.is_some(), "{src:?} {name}: no JSON");
    } else {
        assert_eq!(r.signal, Some(libc::SIGKILL));
    }
    // A run with accepted hits re-analyses; one without gives its one sentence (checked
    // in `analyze`).
    if r.accepted.is_some_and(|a| a > 0) {
        assert_eq!(
            r.analyze_json,
            Some(0),
            "{src:?} {name}: re-analysis of the run"
        );
    }
    r
}

#[test]
fn kill_capture_from_demo_replay_and_serial() {
    let n = rounds();
    let base = temp_dir("hostile-kill");
    // The replayed recording: 12 s of the braced arm, 16-bit.
    let plan = preset("tm9-arm-braced", 4).unwrap();
    let fs = plan.sample_rate as u32;
    let (chans, _) = simulate(plan, 12.0);
    let replay: PathBuf = base.join("replayed.wav");
    std::fs::write(&replay, wav(&pcm(2, fs, 16), &chans, 1000.0)).unwrap();
    let mut lines = Vec::new();
    for src in [Src::Demo, Src::Replay, Src::Serial] {
        for (name, sig) in [
            ("SIGINT", libc::SIGINT),
            ("SIGTERM", libc::SIGTERM),
            ("SIGKILL", libc::SIGKILL),
        ] {
            let mut rs = Vec::new();
            for i in 0..n {
                let dir = base.join(format!("{src:?}-{name}-{i}"));
                std::fs::create_dir_all(&dir).unwrap();
                let after = moment(i, n);
                let r = one_round(src, name, sig, after, &dir, &replay);
                eprintln!("{src:?} {name} round {i} at {after:?}: {r:?}");
                rs.push(r);
                let _ = std::fs::remove_dir_all(&dir);
            }
            let took: Vec<f64> = rs.iter().map(|r| r.took.as_secs_f64() * 1e3).collect();
            let max = took.iter().cloned().fold(0.0, f64::max);
            let min = took.iter().cloned().fold(f64::INFINITY, f64::min);
            let codes: Vec<String> = rs
                .iter()
                .map(|r| match (r.code, r.signal) {
                    (Some(c), _) => format!("exit {c}"),
                    (None, Some(s)) => format!("signal {s}"),
                    _ => "?".into(),
                })
                .collect();
            let with_json = rs.iter().filter(|r| r.json_frames.is_some()).count();
            let lagging = rs.iter().filter(|r| r.past_header > 0).count();
            let recovered: u64 = rs.iter().map(|r| r.past_header).sum();
            let wav_ok = rs.iter().filter(|r| r.analyze_wav == 0).count();
            let mut said: Vec<&str> = rs
                .iter()
                .map(|r| r.wav_said.as_str())
                .filter(|s| !s.is_empty())
                .collect();
            said.sort_unstable();
            said.dedup();
            let json_ok = rs.iter().filter(|r| r.analyze_json == Some(0)).count();
            let json_max = rs.iter().filter_map(|r| r.json_frames).max().unwrap_or(0);
            lines.push(format!(
                "{src:?} {name}: {n} rounds, {}; exit after {min:.1}-{max:.1} ms; JSON in {with_json} (up to {json_max} frames), re-analysed with exit 0 in {json_ok}; WAV header behind its data in {lagging} ({recovered} frames read past headers); analyze WAV exit 0 in {wav_ok}, else {said:?}",
                summarise(&codes)
            ));
        }
    }
    eprintln!("kill test summary:\n{}", lines.join("\n"));
    let _ = std::fs::remove_dir_all(&base);
}

/// "exit 0 x10" style counts of the outcomes.
fn summarise(codes: &[String]) -> String {
    let mut seen: Vec<(String, usize)> = Vec::new();
    for c in codes {
        match seen.iter_mut().find(|(s, _)| s == c) {
            Some((_, n)) => *n += 1,
            None => seen.push((c.clone(), 1)),
        }
    }
    seen.iter()
        .map(|(s, n)| format!("{s} x{n}"))
        .collect::<Vec<_>>()
        .join(", ")
}
