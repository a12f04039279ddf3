//! The app's threads around the engine. The pump takes every block off the acquisition
//! thread as it comes and queues it, unbounded, for the engine thread, so a slow mode search
//! or a slow disk never makes the acquisition drop samples; the saver (see `saver`) writes
//! the files on a third thread. Commands travel with the blocks, in order.

use super::core::Engine;
use super::messages::{Cmd, Inbox, LIVE_EVERY, Update};
use crate::source::LinkCounters;
use crate::source::live::{Feed, LiveFeed, Request};
use std::sync::mpsc::{Receiver, RecvTimeoutError, Sender, TryRecvError};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// How long the pump waits for a block before looking at commands again.
const PUMP_WAIT: Duration = Duration::from_millis(10);

/// What the pump hands the engine thread, in stream order.
enum Work {
    Feed(Feed),
    Cmd(u64, Cmd),
    Health(u64, Option<LinkCounters>),
}

/// The running threads of the app's analysis.
pub struct Worker {
    pump: Option<JoinHandle<()>>,
    engine: Option<JoinHandle<()>>,
}

impl Worker {
    /// Both threads are running.
    pub fn alive(&self) -> bool {
        [&self.pump, &self.engine]
            .iter()
            .all(|t| t.as_ref().is_some_and(|t| !t.is_finished()))
    }

    /// Wait for the pump (it stops as soon as it has passed on `Cmd::Shutdown` or
    /// `Cmd::SaveAndShutdown`).
    pub fn stop_pump(&mut self) {
        if let Some(t) = self.pump.take() {
            let _ = t.join();
        }
    }

    /// True while the engine or its saver still has queued work to finish.
    pub fn finishing(&self) -> bool {
        self.engine.as_ref().is_some_and(|t| !t.is_finished())
    }

    /// Wait until every queued block is analysed and every file written and closed.
    pub fn wait(&mut self) {
        self.stop_pump();
        if let Some(t) = self.engine.take() {
            let _ = t.join();
        }
    }
}

/// Run the engine on its own thread, fed by `feed` through a pump thread; commands come in
/// on `cmds` (with their sequence numbers) and updates go out on `out`. Ends on
/// `Cmd::Shutdown` or `Cmd::SaveAndShutdown` (after everything queued before it is analysed
/// and saved and the recording is closed) or when the command channel closes.
pub fn spawn_worker(
    mut engine: Engine,
    feed: LiveFeed,
    cmds: Receiver<(u64, Cmd)>,
    out: Sender<Inbox>,
) -> Worker {
    engine.detach_saver(out.clone());
    let (work_tx, work_rx) = std::sync::mpsc::channel::<Work>();
    let pump = std::thread::spawn(move || pump(feed, cmds, work_tx));
    let engine = std::thread::spawn(move || analyse(engine, work_rx, out));
    Worker {
        pump: Some(pump),
        engine: Some(engine),
    }
}

/// Move blocks and commands to the engine thread; never waits on it.
fn pump(feed: LiveFeed, cmds: Receiver<(u64, Cmd)>, work: Sender<Work>) {
    let mut ended = false;
    loop {
        loop {
            match cmds.try_recv() {
                Ok((seq, cmd)) => {
                    if cmd == Cmd::Tap {
                        feed.request(Request::Tap);
                    }
                    let stop = cmd.ends();
                    if work.send(Work::Cmd(seq, cmd)).is_err() || stop {
                        return;
                    }
                }
                Err(TryRecvError::Empty) => break,
                // The app is gone: closing `work` makes the engine close the files.
                Err(TryRecvError::Disconnected) => return,
            }
        }
        if ended {
            // Nothing more to read: wait for commands only.
            match cmds.recv_timeout(Duration::from_millis(100)) {
                Ok((seq, cmd)) => {
                    let stop = cmd.ends();
                    if work.send(Work::Cmd(seq, cmd)).is_err() || stop {
                        return;
                    }
                }
                Err(RecvTimeoutError::Timeout) => {}
                Err(RecvTimeoutError::Disconnected) => return,
            }
        } else if let Some(first) = feed.recv_timeout(PUMP_WAIT) {
            for f in std::iter::once(first).chain(feed.drain()) {
                ended |= matches!(f, Feed::Ended(_));
                if work.send(Work::Feed(f)).is_err() {
                    return;
                }
            }
        }
        let health = Work::Health(feed.overrun_frames(), feed.link());
        if work.send(health).is_err() {
            return;
        }
    }
}

/// The engine thread: analyse, send snapshots, hand saves to the saver.
fn analyse(mut engine: Engine, work: Receiver<Work>, out: Sender<Inbox>) {
    let send = |u: Update| out.send(Inbox::Update(u)).is_ok();
    let mut last_live = Instant::now() - LIVE_EVERY;
    loop {
        let mut fed = false;
        match work.recv_timeout(LIVE_EVERY) {
            Ok(Work::Feed(Feed::Block(b))) => {
                for u in engine.push(&b) {
                    send(u);
                }
                for u in engine.autosave() {
                    send(u);
                }
                fed = true;
            }
            Ok(Work::Feed(Feed::Ended(e))) => {
                for u in engine.end_of_stream() {
                    send(u);
                }
                send(Update::Ended(e.map(|e| e.to_string())));
            }
            Ok(Work::Cmd(seq, cmd)) => {
                let stop = cmd.ends();
                for u in engine.command(seq, cmd) {
                    send(u);
                }
                fed = true;
                if stop {
                    send(Update::Live(Box::new(engine.live())));
                    return;
                }
            }
            Ok(Work::Health(overruns, link)) => engine.set_health(overruns, link),
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => {
                engine.finish();
                return;
            }
        }
        if fed && last_live.elapsed() >= LIVE_EVERY || last_live.elapsed() >= LIVE_EVERY * 10 {
            last_live = Instant::now();
            if !send(Update::Live(Box::new(engine.live()))) {
                engine.finish();
                return;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pipeline::AnalysisConfig;
    use crate::run::RunFile;
    use crate::signal::RoleChoice;
    use crate::source::Source;
    use crate::source::simulator::{Simulator, presets::preset};
    use crate::tui::engine::EngineSetup;

    /// Seconds each run-file write takes here (a slow disk).
    const SLOW: Duration = Duration::from_millis(1500);

    /// A real-time simulated arm tapped at 0.8 s and every ~2.5 s after, saved through a
    /// saver whose writes take `SLOW`: the live view keeps moving while a save is under way
    /// (the acquisition is not waiting on it), quitting is answered at once, and the files
    /// written after quitting hold every tap taken.
    #[test]
    fn a_slow_save_neither_stalls_the_stream_nor_delays_quitting() {
        let dir = std::env::temp_dir().join(format!("tapmodes-slow-save-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let sim = Simulator::new(preset("tm9-arm-solid", 1).unwrap(), Some(8.0), true).real_time();
        let info = sim.info().clone();
        let roles = RoleChoice::default().resolve(&info).unwrap();
        let mut engine = Engine::new(EngineSetup {
            info,
            roles,
            config: AnalysisConfig::default(),
            out_dir: dir.clone(),
            label: "slow".into(),
            drive: None,
            strip: None,
        })
        .unwrap();
        engine.slow_saves(SLOW);
        let (cmd_tx, cmd_rx) = std::sync::mpsc::channel();
        let (out_tx, out_rx) = std::sync::mpsc::channel();
        let mut worker = spawn_worker(engine, LiveFeed::start(Box::new(sim)), cmd_rx, out_tx);

        // Until the first save lands: note when the first hit arrived and every live view.
        let t0 = Instant::now();
        let (mut first_hit, mut lives) = (None, Vec::new());
        loop {
            let m = out_rx
                .recv_timeout(Duration::from_secs(10))
                .expect("updates");
            match m {
                Inbox::Update(Update::Analysis(_)) if first_hit.is_none() => {
                    first_hit = Some(t0.elapsed())
                }
                Inbox::Update(Update::Live(l)) => lives.push((t0.elapsed(), l.position)),
                Inbox::Update(Update::Saved { .. }) => break,
                Inbox::Update(Update::Problem(p)) => panic!("{p}"),
                _ => {}
            }
        }
        let (hit, saved) = (first_hit.expect("a hit before its save"), t0.elapsed());
        assert!(saved - hit >= SLOW, "the save took {:?}", saved - hit);
        let during: Vec<_> = lives.iter().filter(|l| l.0 > hit && l.0 < saved).collect();
        assert!(
            during.len() >= 10,
            "only {} live views during a {SLOW:?} save",
            during.len()
        );
        assert!(
            during
                .windows(2)
                .all(|w| w[1].1 > w[0].1 && w[1].0 - w[0].0 < Duration::from_millis(500)),
            "the live view stalled during the save: {during:?}"
        );

        // The second tap (about 3.3 s): quit as soon as it is seen, while its save runs.
        loop {
            if let Inbox::Update(Update::Analysis(a)) = out_rx
                .recv_timeout(Duration::from_secs(10))
                .expect("updates")
                && a.hits.len() == 2
            {
                break;
            }
        }
        let asked = Instant::now();
        cmd_tx.send((1, Cmd::Shutdown)).unwrap();
        worker.stop_pump();
        assert!(
            asked.elapsed() < Duration::from_millis(500),
            "quitting took {:?}",
            asked.elapsed()
        );
        assert!(worker.finishing(), "the save should still be running");
        worker.wait();
        let run = RunFile::load(&dir.join("slow.json")).unwrap();
        assert_eq!(run.hits_total, 2, "every tap taken is saved");
        let wav = hound::WavReader::open(dir.join("slow.wav")).expect("a closed, valid WAV");
        // The recording holds at least what the run file describes (blocks that arrived
        // after the last save are kept too; re-analysis stops where the run does).
        assert!(u64::from(wav.duration()) >= run.recording.unwrap().frames);
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
