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

    /// Wait for the pump (it stops as soon as it has passed on `Cmd::Shutdown`).
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
/// `Cmd::Shutdown` (after everything queued before it is analysed and saved and the
/// recording is closed) or when the command channel closes.
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
                    let stop = cmd == Cmd::Shutdown;
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
                    let stop = cmd == Cmd::Shutdown;
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
                let mut sink = Vec::new();
                engine.flush_recording(&mut sink);
                for u in sink {
                    send(u);
                }
                send(Update::Ended(e.map(|e| e.to_string())));
            }
            Ok(Work::Cmd(seq, cmd)) => {
                let stop = cmd == Cmd::Shutdown;
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
