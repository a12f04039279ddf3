//! Measurements of the app's responsiveness (no assertions; see `bench_report`).
//!
//! (a) tap-to-screen latency through the real worker thread and loop, (b) frame drawing
//! time at 160x48 while a 48 kHz stereo source streams in real time, (c) process CPU
//! while listening to the real-time demo bench with nothing happening, (d) process CPU per
//! second of a real-time 48 kHz stereo bench with taps, and its overrun.

use ratatui::Terminal;
use ratatui::backend::TestBackend;
use std::path::PathBuf;
use std::sync::mpsc::{self, Receiver, Sender};
use std::time::{Duration, Instant};
use tapmodes::error::Result;
use tapmodes::pipeline::{Analysis, AnalysisConfig};
use tapmodes::signal::{Block, RoleChoice, StreamInfo};
use tapmodes::source::Source;
use tapmodes::source::simulator::presets::preset;
use tapmodes::source::simulator::{BenchPlan, Simulator};
use tapmodes::tui::Launch;
use tapmodes::tui::app::{App, buffer_text, drive};
use tapmodes::tui::engine::Inbox;

/// A source fed by hand through a channel (ends when the sender is dropped).
pub struct ChannelSource {
    info: StreamInfo,
    rx: Receiver<Block>,
}

impl ChannelSource {
    pub fn new(info: StreamInfo) -> (Self, Sender<Block>) {
        let (tx, rx) = mpsc::channel();
        (ChannelSource { info, rx }, tx)
    }
}

impl Source for ChannelSource {
    fn info(&self) -> &StreamInfo {
        &self.info
    }
    fn next_block(&mut self) -> Result<Option<Block>> {
        Ok(self.rx.recv().ok())
    }
}

fn scratch_dir(what: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("tapmodes-bench-{}-{what}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    d
}

fn launch_for(source: Box<dyn Source>, out_dir: PathBuf, demo: bool) -> Result<Launch> {
    let roles = RoleChoice::default().resolve(source.info())?;
    Ok(Launch {
        source,
        roles,
        config: AnalysisConfig::default(),
        out_dir,
        variant: "bench".into(),
        auto_tap_s: None,
        demo,
        compare_with: Vec::new(),
        drive: None,
    })
}

/// Process CPU time (user + system) in seconds, from /proc/self/stat (Linux only).
pub fn process_cpu_s() -> Option<f64> {
    let s = std::fs::read_to_string("/proc/self/stat").ok()?;
    // Fields after the command name (which is in parentheses and may hold spaces).
    let rest = &s[s.rfind(')')? + 2..];
    let f: Vec<&str> = rest.split_whitespace().collect();
    // utime and stime are fields 14 and 15 of the whole line: 11 and 12 after the name
    // and state. Their unit is USER_HZ, 100 per second on Linux.
    let ticks = f.get(11)?.parse::<f64>().ok()? + f.get(12)?.parse::<f64>().ok()?;
    Some(ticks / 100.0)
}

fn stats(v: &mut [f64]) -> (f64, f64, f64, f64) {
    v.sort_by(f64::total_cmp);
    let n = v.len().max(1);
    let mean = v.iter().sum::<f64>() / n as f64;
    (
        v.first().copied().unwrap_or(0.0),
        v[v.len() / 2],
        v.last().copied().unwrap_or(0.0),
        mean,
    )
}

/// (a) Push the block that completes each hit into the worker and time until a drawn
/// frame shows that hit.
fn latency() -> Result<String> {
    let plan = preset("tm9-arm-solid", 7).expect("preset");
    let mut sim = Simulator::new(plan, Some(14.0), true);
    let info = sim.info().clone();
    let mut blocks = Vec::new();
    while let Some(b) = sim.next_block()? {
        blocks.push(b);
    }
    // Which blocks complete a hit (the same analysis the engine runs).
    let roles = RoleChoice::default().resolve(&info)?;
    let mut probe = Analysis::new(&info, roles, AnalysisConfig::default(), false)?;
    let completes: Vec<bool> = blocks.iter().map(|b| probe.push(b) > 0).collect();

    let dir = scratch_dir("latency");
    let (source, feed) = ChannelSource::new(info);
    let (tx, rx) = mpsc::channel::<Inbox>();
    let mut app = App::threaded(launch_for(Box::new(source), dir.clone(), false)?, tx)?;
    let mut term = Terminal::new(TestBackend::new(160, 48)).expect("test backend");
    let mut samples_ms = Vec::new();
    let mut shown_ok = 0;
    for (b, done) in blocks.into_iter().zip(completes) {
        if done {
            // Let the worker catch up first, so only this block's work is timed.
            let start = b.start;
            drive(&mut app, &mut term, &rx, |a, _| {
                a.model.live.as_ref().is_some_and(|l| l.position >= start)
            })?;
            let want = app.model.counts().1 + 1;
            let t0 = Instant::now();
            let _ = feed.send(b);
            drive(&mut app, &mut term, &rx, |a, drew| {
                drew && a.model.counts().1 >= want
            })?;
            samples_ms.push(t0.elapsed().as_secs_f64() * 1000.0);
            let text = buffer_text(term.backend().buffer());
            if text.contains(&format!("Last tap #{want}")) {
                shown_ok += 1;
            }
        } else {
            let _ = feed.send(b);
        }
    }
    drop(feed);
    app.shutdown();
    app.wait_for_files();
    let _ = std::fs::remove_dir_all(&dir);
    let n = samples_ms.len();
    let (min, med, max, _) = stats(&mut samples_ms);
    Ok(format!(
        "(a) tap-to-screen latency (block completing a hit -> first drawn 160x48 frame showing it, \
         through the acquisition thread, the analysis worker (averaging, modes) and the UI loop): \
         {n} hits, min {min:.1} ms, median {med:.1} ms, max {max:.1} ms; frames showed the hit: {shown_ok}/{n}"
    ))
}

fn plan_48k() -> BenchPlan {
    let mut p = preset("tm9-arm-solid", 3).expect("preset");
    p.sample_rate = 48_000.0;
    p.hammer.gap_s = 1.6;
    p
}

/// (b) Frame drawing time at 160x48 while a 48 kHz two-channel source streams in real time.
fn render_rate() -> Result<String> {
    let dir = scratch_dir("render");
    let sim = Simulator::new(plan_48k(), None, true).real_time();
    let (tx, rx) = mpsc::channel::<Inbox>();
    let mut app = App::threaded(launch_for(Box::new(sim), dir.clone(), true)?, tx)?;
    let mut term = Terminal::new(TestBackend::new(160, 48)).expect("test backend");
    // Wait for two hits so every panel has something to draw.
    let t_start = Instant::now();
    drive(&mut app, &mut term, &rx, |a, _| {
        a.model.counts().1 >= 2 || t_start.elapsed() > Duration::from_secs(20)
    })?;
    let mut draw_ms = Vec::new();
    let t0 = Instant::now();
    while t0.elapsed() < Duration::from_secs(3) {
        while let Ok(m) = rx.try_recv() {
            app.inbox_msg(m);
        }
        let t = Instant::now();
        term.draw(|f| tapmodes::tui::view::view(&app.model, f))
            .map_err(|e| tapmodes::error::Error::new(e.to_string()))?;
        draw_ms.push(t.elapsed().as_secs_f64() * 1000.0);
    }
    let overrun = app.model.live.as_ref().map_or(0, |l| l.overrun_frames);
    let hits = app.model.counts().1;
    app.shutdown();
    app.wait_for_files();
    let _ = std::fs::remove_dir_all(&dir);
    let n = draw_ms.len();
    let (min, med, max, mean) = stats(&mut draw_ms);
    Ok(format!(
        "(b) drawing a 160x48 frame while 48 kHz x 2 ch streams in real time: {n} frames in 3 s \
         back to back, per frame min {min:.2} ms, median {med:.2} ms, max {max:.2} ms, \
         mean {mean:.2} ms = {:.0} frames/s achievable; {hits} hits analysed, {overrun} frames overrun",
        1000.0 / mean.max(1e-6)
    ))
}

/// (c) CPU of the whole process while the real-time demo bench streams and nothing happens.
fn idle_cpu() -> Result<String> {
    let dir = scratch_dir("idle");
    let plan = preset("tm9-arm-solid", 5).expect("preset");
    let sim = Simulator::new(plan, None, false).real_time();
    let (tx, rx) = mpsc::channel::<Inbox>();
    let mut app = App::threaded(launch_for(Box::new(sim), dir.clone(), true)?, tx)?;
    let mut term = Terminal::new(TestBackend::new(160, 48)).expect("test backend");
    // Settle (noise floor measured) before measuring.
    let t = Instant::now();
    drive(&mut app, &mut term, &rx, |_, _| {
        t.elapsed() > Duration::from_secs(1)
    })?;
    let (c0, w0) = (process_cpu_s(), Instant::now());
    drive(&mut app, &mut term, &rx, |_, _| {
        w0.elapsed() > Duration::from_secs(4)
    })?;
    let (c1, wall) = (process_cpu_s(), w0.elapsed().as_secs_f64());
    app.shutdown();
    app.wait_for_files();
    let _ = std::fs::remove_dir_all(&dir);
    Ok(match (c0, c1) {
        (Some(a), Some(b)) => format!(
            "(c) idle CPU while listening (8 kHz x 2 ch real-time simulated bench, worker, \
             loop drawing into a 160x48 test backend): {:.2} s CPU over {wall:.1} s = {:.1} % \
             of one core (whole process, simulator thread included)",
            b - a,
            100.0 * (b - a) / wall
        ),
        _ => "(c) idle CPU: /proc/self/stat is not available on this system".into(),
    })
}

/// (d) Keeping up: the real-time 48 kHz two-channel bench with a tap every 1.6 s, the app
/// as it runs (worker analysing and saving, the loop drawing at its own pace): process CPU
/// per second of signal, hits analysed, frames overrun.
fn keep_up_48k() -> Result<String> {
    let dir = scratch_dir("keepup");
    let sim = Simulator::new(plan_48k(), None, true).real_time();
    let (tx, rx) = mpsc::channel::<Inbox>();
    let mut app = App::threaded(launch_for(Box::new(sim), dir.clone(), true)?, tx)?;
    let mut term = Terminal::new(TestBackend::new(160, 48)).expect("test backend");
    let (c0, w0) = (process_cpu_s(), Instant::now());
    drive(&mut app, &mut term, &rx, |_, _| {
        w0.elapsed() > Duration::from_secs(10)
    })?;
    let (c1, wall) = (process_cpu_s(), w0.elapsed().as_secs_f64());
    let overrun = app.model.live.as_ref().map_or(0, |l| l.overrun_frames);
    let hits = app.model.counts().1;
    app.shutdown();
    app.wait_for_files();
    let _ = std::fs::remove_dir_all(&dir);
    Ok(match (c0, c1) {
        (Some(a), Some(b)) => format!(
            "(d) keeping up with 48 kHz x 2 ch in real time, a tap every 1.6 s: {:.2} s CPU over {wall:.1} s of signal = {:.1} % of one core (whole process); {hits} hits analysed, {overrun} frames overrun",
            b - a,
            100.0 * (b - a) / wall
        ),
        _ => "(d) keeping up: /proc/self/stat is not available on this system".into(),
    })
}

/// Run the measurements and describe them, one line each.
pub fn bench_report() -> String {
    let mut out = vec![format!(
        "tapmodes terminal app bench ({} logical CPUs)",
        std::thread::available_parallelism().map_or(0, |n| n.get())
    )];
    for r in [latency(), render_rate(), idle_cpu(), keep_up_48k()] {
        out.push(r.unwrap_or_else(|e| format!("bench failed: {e}")));
    }
    out.join("\n")
}
