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

fn scratch() -> PathBuf {
    crate::common::temp_dir("tui-tmux")
}

#[test]
fn demo_runs_saves_and_restores_the_terminal() {
    let Some(tmux) = tmux_path() else {
        println!("NOTICE: tmux is not installed; the end-to-end terminal test is skipped");
        return;
    };
    let bin = env!("CARGO_BIN_EXE_tapmodes");
    let wired = Command::new(bin)
        .args(["tui", "--help"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !wired {
        println!(
            "NOTICE: `tapmodes tui` is not wired into the command line yet; \
             the end-to-end terminal test is skipped"
        );
        return;
    }
    let dir = scratch();
    let s = Session {
        tmux,
        name: "e2e".into(),
        socket: format!("tapmodes-e2e-{}", std::process::id()),
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
