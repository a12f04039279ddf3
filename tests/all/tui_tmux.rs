//! End to end in a real terminal: the built binary runs the demo inside tmux, gets taps,
//! saves and quits; the screen, the files and the restored terminal are checked.
//!
//! Skipped (with a notice) when tmux is not installed or the binary has no `tui` command.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

/// Longest wait for something to appear on screen (a deadline, not a timing check).
const PATIENCE: Duration = Duration::from_secs(40);

fn tmux_path() -> Option<PathBuf> {
    let p = PathBuf::from("/usr/bin/tmux");
    if p.exists() {
        return Some(p);
    }
    let ok = Command::new("tmux")
        .arg("-V")
        .output()
        .ok()?
        .status
        .success();
    ok.then(|| PathBuf::from("tmux"))
}

struct Session {
    tmux: PathBuf,
    name: String,
    socket: String,
}

impl Session {
    fn cmd(&self) -> Command {
        let mut c = Command::new(&self.tmux);
        c.args(["-L", &self.socket]);
        c
    }
    fn send(&self, keys: &[&str]) {
        let st = self
            .cmd()
            .args(["send-keys", "-t", &self.name])
            .args(keys)
            .status()
            .unwrap();
        assert!(st.success());
    }
    fn resize(&self, w: u16, h: u16) {
        let st = self
            .cmd()
            .args(["resize-window", "-t", &self.name])
            .args(["-x", &w.to_string(), "-y", &h.to_string()])
            .status()
            .unwrap();
        assert!(st.success(), "tmux could not resize the window");
    }
    fn capture(&self) -> String {
        let out = self
            .cmd()
            .args(["capture-pane", "-p", "-t", &self.name])
            .output()
            .unwrap();
        String::from_utf8_lossy(&out.stdout).into_owned()
    }
    fn display(&self, format: &str) -> String {
        let out = self
            .cmd()
            .args(["display-message", "-p", "-t", &self.name, format])
            .output()
            .unwrap();
        String::from_utf8_lossy(&out.stdout).trim().to_string()
    }
    /// Wait until the pane shows every one of `needles`; returns the pane.
    fn wait_for(&self, needles: &[&str]) -> String {
        let start = Instant::now();
        loop {
            let pane = self.capture();
            if needles.iter().all(|n| pane.contains(n)) {
                return pane;
            }
            if start.elapsed() > PATIENCE {
                panic!("waited for {needles:?}; the pane shows:\n{pane}");
            }
            std::thread::sleep(Duration::from_millis(200));
        }
    }
}

impl Drop for Session {
    fn drop(&mut self) {
        let _ = self.cmd().args(["kill-server"]).status();
    }
}

/// A tmux session running `sh` with the prompt `prompt$ `, or None (with a notice) when
/// tmux or the app is missing.
fn start_session(name: &str) -> Option<Session> {
    let Some(tmux) = tmux_path() else {
        println!("NOTICE: tmux is not installed; the end-to-end terminal test is skipped");
        return None;
    };
    let bin = crate::common::bin_path();
    let wired = Command::new(bin)
        .args(["tui", "--help"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !wired {
        println!(
            "NOTICE: `tapmodes tui` is not wired into the command line yet; \
             the end-to-end terminal test is skipped"
        );
        return None;
    }
    let s = Session {
        tmux,
        name: name.into(),
        socket: format!("tapmodes-{name}-{}", std::process::id()),
    };
    let st = s
        .cmd()
        .args(["new-session", "-d", "-s", &s.name, "-x", "120", "-y", "40"])
        .args(["env", "PS1=prompt$ ", "TERM=xterm-256color", "sh", "--norc"])
        .status()
        .unwrap();
    assert!(st.success(), "tmux could not start a session");
    // Plain sh may not know --norc; either way a prompt appears.
    std::thread::sleep(Duration::from_millis(300));
    let pane = s.capture();
    if !pane.contains("prompt$") {
        let _ = s.cmd().args(["kill-session", "-t", &s.name]).status();
        let st = s
            .cmd()
            .args(["new-session", "-d", "-s", &s.name, "-x", "120", "-y", "40"])
            .args(["env", "PS1=prompt$ ", "TERM=xterm-256color", "sh"])
            .status()
            .unwrap();
        assert!(st.success());
    }
    s.wait_for(&["prompt$"]);
    Some(s)
}

#[test]
fn demo_runs_saves_and_restores_the_terminal() {
    let Some(s) = start_session("e2e") else {
        return;
    };
    let bin = crate::common::bin_path();
    let dir = crate::common::temp_dir("tui-tmux");
    let line = format!(
        "{bin} tui --demo --out '{}' --variant e2e-run; echo EXIT=$?",
        dir.display()
    );
    s.send(&[&line, "Enter"]);
    s.wait_for(&["ARMED", "Signal", "taps 0/0 kept", "nothing to save"]);
    assert_eq!(
        s.display("#{alternate_on}"),
        "1",
        "the app uses the alternate screen"
    );

    // Help with the safety cautions; any key closes it.
    s.send(&["?"]);
    s.wait_for(&["SAFETY", "propellers OFF", "gently"]);
    s.send(&["z"]);

    // Three simulated taps, each recorded for 1 s.
    for n in 1..=3 {
        std::thread::sleep(Duration::from_millis(300));
        s.send(&["Space"]);
        s.wait_for(&[&format!("Last tap #{n}")]);
    }
    let pane = s.wait_for(&["taps 3/3 kept", "+ accepted", "damp %", "Modes"]);
    assert!(pane.contains("all checks passed"), "{pane}");
    let modes_line = pane
        .lines()
        .find(|l| l.contains("Modes") && l.contains("found"))
        .expect("mode panel title");
    assert!(!modes_line.contains("Modes 0 found"), "{pane}");

    // Shrunk to 80x24 in a real terminal: the app redraws to the new size and the footer
    // still offers save, saved runs, quit and help; then back to 120x40.
    s.resize(80, 24);
    let pane = s.wait_for(&["s save  p runs  q quit  ? help", "taps 3/3 kept"]);
    assert!(
        pane.lines().all(|l| l.chars().count() <= 80),
        "drawn for 80 columns:\n{pane}"
    );
    let foot = pane.lines().rfind(|l| !l.trim().is_empty()).unwrap_or("");
    assert!(foot.contains("q quit"), "footer: {foot}\n{pane}");
    s.resize(120, 40);
    s.wait_for(&["Taps 3 kept of 3", "reason"]);

    s.send(&["s"]);
    s.wait_for(&["saved e2e-run.json"]);
    s.send(&["q"]);
    let pane = s.wait_for(&["EXIT=0"]);
    // Back on the main screen with the shell prompt; the app's screen is gone.
    assert_eq!(s.display("#{alternate_on}"), "0", "alternate screen left");
    assert!(!pane.contains("Last tap #"), "{pane}");
    assert!(pane.contains("prompt$"), "{pane}");

    // The files.
    let json = dir.join("e2e-run.json");
    let run = tapmodes::run::RunFile::load(&json).unwrap();
    assert_eq!(run.variant.label, "e2e-run");
    assert_eq!(run.hits_total, 3);
    assert!(!run.modes.is_empty(), "modes in the run file");
    assert!(
        (run.modes[0].frequency_hz - 148.0).abs() < 5.0,
        "{:?}",
        run.modes[0]
    );
    let wav = run.wav_path(&json).unwrap().unwrap();
    let r = hound::WavReader::open(&wav).unwrap();
    assert_eq!(r.spec().channels, 2);
    let rec = run.recording.as_ref().unwrap();
    let lost: u64 = rec.gaps.iter().map(|g| g.1).sum();
    assert!(r.duration() as u64 + lost >= rec.frames);
    assert!(Path::new(&dir.join("e2e-run.csv")).exists());
    let _ = std::fs::remove_dir_all(&dir);
}

/// Whether process `pid` still exists (a zombie counts as gone: it has exited).
fn alive(pid: i32) -> bool {
    std::fs::read_to_string(format!("/proc/{pid}/stat"))
        .is_ok_and(|st| st.rsplit(") ").next().is_some_and(|r| !r.starts_with('Z')))
}

/// The run files after the app was ended from outside: the JSON covers exactly the frames
/// and gaps the WAV holds, every tap is in it, and the WAV is complete (header = data).
fn files_agree(dir: &Path, stem: &str, taps: usize) -> u64 {
    let json = dir.join(format!("{stem}.json"));
    let run = tapmodes::run::RunFile::load(&json).unwrap();
    assert_eq!(run.hits_total, taps, "every tap taken is in the run file");
    let rec = run.recording.as_ref().expect("a recording");
    let wav = run.wav_path(&json).unwrap().unwrap();
    let r = hound::WavReader::open(&wav).unwrap();
    let lost: u64 = rec.gaps.iter().map(|g| g.1).sum();
    assert_eq!(
        r.duration() as u64 + lost,
        rec.frames,
        "WAV frames + gaps = the frames the JSON covers"
    );
    let on_disk = std::fs::metadata(&wav).unwrap().len();
    let spec = r.spec();
    let data =
        u64::from(r.duration()) * u64::from(spec.channels) * u64::from(spec.bits_per_sample / 8);
    assert!(
        on_disk >= data && on_disk - data <= 256,
        "header covers the data: {on_disk} bytes, {data} of samples"
    );
    rec.frames
}

/// SIGTERM, SIGINT and SIGHUP sent to the running app (and a real hang-up: the terminal
/// window closed under it) end it like a save-and-quit: the terminal is restored (exit 0,
/// main screen back), and the run files cover everything taken, including the stream after
/// the last tap's save. Rounds: `TAPMODES_KILL_ROUNDS` (default 1).
#[test]
fn signals_end_the_app_cleanly() {
    let rounds: usize = std::env::var("TAPMODES_KILL_ROUNDS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(1);
    let bin = crate::common::bin_path();
    for round in 0..rounds {
        for (k, (name, sig)) in [
            ("SIGTERM", Some(libc::SIGTERM)),
            ("SIGINT", Some(libc::SIGINT)),
            ("SIGHUP", Some(libc::SIGHUP)),
            ("hang-up", None),
        ]
        .into_iter()
        .enumerate()
        {
            let Some(s) = start_session(&format!("sig{round}-{k}")) else {
                return;
            };
            let dir = crate::common::temp_dir(&format!("tui-sig-{name}-{round}"));
            let pid_file = dir.join("pid");
            let line = format!(
                "sh -c 'echo $$ > {}; exec {bin} tui --demo --out {} --variant sig'; echo EXIT=$?",
                pid_file.display(),
                dir.display()
            );
            s.send(&[&line, "Enter"]);
            s.wait_for(&["ARMED", "taps 0/0 kept"]);
            let pid: i32 = std::fs::read_to_string(&pid_file)
                .unwrap()
                .trim()
                .parse()
                .unwrap();
            for n in 1..=2 {
                std::thread::sleep(Duration::from_millis(300));
                s.send(&["Space"]);
                s.wait_for(&[&format!("Last tap #{n}")]);
            }
            s.wait_for(&["taps 2/2 kept"]);
            // Stream on past the last tap's save: that stretch must reach the files too.
            std::thread::sleep(Duration::from_millis(1500 + 97 * round as u64));
            let t0 = Instant::now();
            match sig {
                // SAFETY: a signal to the app this test started, by its process id.
                Some(sig) => unsafe {
                    libc::kill(pid, sig);
                },
                None => {
                    let _ = s.cmd().args(["kill-window", "-t", &s.name]).status();
                }
            }
            while alive(pid) && t0.elapsed() < PATIENCE {
                std::thread::sleep(Duration::from_millis(2));
            }
            let took = t0.elapsed();
            assert!(
                !alive(pid),
                "{name}: the app is still running after {took:?}"
            );
            let frames = files_agree(&dir, "sig", 2);
            eprintln!("app {name} round {round}: gone after {took:?}, run covers {frames} frames");
            assert!(took < Duration::from_secs(2), "{name}: took {took:?}");
            if sig.is_some() {
                let pane = s.wait_for(&["EXIT=0"]);
                assert_eq!(
                    s.display("#{alternate_on}"),
                    "0",
                    "{name}: alternate screen left"
                );
                assert!(!pane.contains("Last tap #"), "{name}: {pane}");
            }
            let _ = std::fs::remove_dir_all(&dir);
        }
    }
}
