//! Outputs and stopping: no output replaces an input, a file of another kind or a
//! non-file; run names are taken exclusively; a re-analysis over its own run keeps the
//! operator's verdicts, label and note; SIGINT, SIGTERM and SIGHUP end a capture quickly
//! with the WAV and the JSON consistent.

use crate::common::{bin, simulate, temp_dir};
use crate::hostile::{pcm, wav};
use std::path::Path;
use std::time::{Duration, Instant};
use tapmodes::source::simulator::presets::preset;

fn run(args: &[&str]) -> (i32, String) {
    let out = bin().args(args).output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr).into_owned();
    assert!(!err.contains("panicked"), "{args:?}: {err}");
    (out.status.code().unwrap_or(-1), err)
}

fn good_wav(dir: &Path) -> std::path::PathBuf {
    let plan = preset("tm9-arm-braced", 4).unwrap();
    let fs = plan.sample_rate as u32;
    let (chans, _) = simulate(plan, 3.0);
    let p = dir.join("solid.wav");
    std::fs::write(&p, wav(&pcm(2, fs, 16), &chans, 1000.0)).unwrap();
    p
}

#[test]
fn outputs_never_replace_inputs_or_other_kinds() {
    let dir = temp_dir("hostile-out");
    let w = good_wav(&dir);
    let ws = w.to_str().unwrap();
    let before = std::fs::read(&w).unwrap();
    let p = |n: &str| dir.join(n).to_str().unwrap().to_string();
    let refuse = |args: &[&str], needle: &str| {
        let (code, err) = run(args);
        assert_eq!(code, 1, "{args:?}: {err}");
        assert!(err.to_lowercase().contains(needle), "{args:?}: {err}");
    };
    refuse(&["analyze", ws, "--out", ws], ".json");
    refuse(&["analyze", ws, "--out", &p("x.csv")], ".json");
    std::fs::copy(&w, dir.join("fake.json")).unwrap();
    refuse(&["analyze", ws, "--out", &p("fake.json")], "holds a wav");
    std::fs::write(dir.join("table.json"), "frequency_hz,magnitude\n1,2\n").unwrap();
    refuse(&["analyze", ws, "--out", &p("table.json")], "holds a csv");
    std::fs::create_dir_all(dir.join("folder.json")).unwrap();
    refuse(
        &["analyze", ws, "--out", &p("folder.json")],
        "not a regular file",
    );
    // The CSV beside the JSON may not be the input either.
    std::fs::copy(&w, dir.join("clash.csv")).unwrap();
    refuse(&["analyze", ws, "--out", &p("clash.json")], "holds a wav");
    assert_eq!(std::fs::read(&w).unwrap(), before, "the recording changed");

    // A run of the recording, then operator edits, then a re-analysis over it.
    let r = p("solid.json");
    assert_eq!(run(&["analyze", ws, "--out", &r]).0, 0);
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&r).unwrap()).unwrap();
    v["variant"]["label"] = "kept label".into();
    v["variant"]["note"] = "kept note".into();
    v["hits"][0]["verdict"] = "dropped".into();
    v["hits"][0]["reason"] = "operator: bad tap".into();
    v["hits"][0]["by_operator"] = true.into();
    std::fs::write(&r, serde_json::to_string(&v).unwrap()).unwrap();
    // With the only hit dropped, the analysis ends with "none of the hits passed" (exit 1)
    // after writing the run files.
    let (code, err) = run(&["analyze", ws, "--out", &r]);
    assert!(code == 0 || err.contains("none of the"), "{err}");
    assert!(err.contains("kept"), "{err}");
    let again: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&r).unwrap()).unwrap();
    assert_eq!(again["variant"]["label"], "kept label");
    assert_eq!(again["variant"]["note"], "kept note");
    assert_eq!(again["hits"][0]["verdict"], "dropped");
    assert_eq!(again["hits"][0]["by_operator"], true);
    // A run of another recording is not replaced.
    std::fs::copy(&w, dir.join("other.wav")).unwrap();
    refuse(
        &["analyze", &p("other.wav"), "--out", &r],
        "another recording",
    );
    // NAME.again.json is never overwritten: a second re-analysis takes the next name.
    run(&["analyze", &r]);
    run(&["analyze", &r]);
    assert!(dir.join("solid.again.json").exists());
    assert!(dir.join("solid.again-2.json").exists());
    // Re-analysing a run over itself as an input is refused.
    refuse(&["analyze", &r, "--out", &r], "over the input");
}

#[test]
fn two_captures_never_share_a_name() {
    let dir = temp_dir("hostile-race");
    let d = dir.to_str().unwrap();
    for _ in 0..3 {
        let start = || {
            bin()
                .args([
                    "capture",
                    "--demo",
                    "--fast",
                    "--hits",
                    "1",
                    "--out",
                    d,
                    "--variant",
                    "v",
                ])
                .stdout(std::process::Stdio::null())
                .stderr(std::process::Stdio::null())
                .spawn()
                .unwrap()
        };
        let (mut a, mut b) = (start(), start());
        assert!(a.wait().unwrap().success());
        assert!(b.wait().unwrap().success());
    }
    let mut wavs = 0;
    for e in std::fs::read_dir(&dir).unwrap() {
        let p = e.unwrap().path();
        if p.extension().is_some_and(|x| x == "json") {
            let v: serde_json::Value =
                serde_json::from_str(&std::fs::read_to_string(&p).unwrap()).unwrap();
            let w = v["recording"]["wav"].as_str().unwrap();
            assert_eq!(Path::new(w).file_stem(), p.file_stem(), "{p:?} names {w}");
        }
        if p.extension().is_some_and(|x| x == "wav") {
            wavs += 1;
        }
    }
    assert_eq!(wavs, 6);
}

/// Start a real-time capture on the simulated bench, send `sig` after `after`, and return
/// how long it took to exit and its code; the run files must agree afterwards.
pub fn capture_then_signal(dir: &Path, sig: i32, after: Duration) -> (Duration, Option<i32>) {
    let mut child = bin()
        .args([
            "capture",
            "--demo",
            "--hits",
            "1000",
            "--out",
            dir.to_str().unwrap(),
        ])
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    std::thread::sleep(after);
    // SAFETY: sending a signal to our own child process by its id.
    unsafe { libc::kill(child.id() as i32, sig) };
    let t0 = Instant::now();
    let status = child.wait().unwrap();
    (t0.elapsed(), status.code())
}

/// After a stop, the JSON's recording must be the WAV on disk: same channels, and WAV frames
/// plus gaps equal to the frames the run covers; re-analysis must reproduce the hit count.
pub fn consistent(dir: &Path) -> Result<(), String> {
    let json = dir.join("variant.json");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&json).map_err(|e| format!("no JSON: {e}"))?)
            .map_err(|e| e.to_string())?;
    let frames = v["recording"]["frames"].as_u64().ok_or("no frames")?;
    let gaps: u64 = v["recording"]["gaps"]
        .as_array()
        .map_or(0, |g| g.iter().map(|x| x[1].as_u64().unwrap_or(0)).sum());
    let w = tapmodes::source::wav::WavSource::open(&dir.join("variant.wav"))
        .map_err(|e| e.to_string())?;
    if w.frames() + gaps != frames {
        return Err(format!("WAV {} + gaps {gaps} != run {frames}", w.frames()));
    }
    Ok(())
}

#[test]
fn signals_end_a_capture_cleanly() {
    let rounds: usize = std::env::var("TAPMODES_KILL_ROUNDS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(1);
    for (name, sig) in [
        ("SIGINT", libc::SIGINT),
        ("SIGTERM", libc::SIGTERM),
        ("SIGHUP", libc::SIGHUP),
    ] {
        for i in 0..rounds {
            let dir = temp_dir(&format!("hostile-sig-{sig}-{i}"));
            let (took, code) =
                capture_then_signal(&dir, sig, Duration::from_millis(1500 + 97 * i as u64));
            eprintln!("{name} round {i}: exit {code:?} after {took:?}");
            assert_eq!(code, Some(0), "{name}: exit code");
            assert!(took < Duration::from_millis(500), "{name}: took {took:?}");
            consistent(&dir).unwrap_or_else(|e| panic!("{name}: {e}"));
        }
    }
}
