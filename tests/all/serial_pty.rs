//! End to end over pseudo-terminal pairs: a fake device on the master side speaks our
//! serial protocol (firmware-notes/protocol.md) and `tapmodes capture` reads the slave.
#![cfg(unix)]

use crate::common::*;
use std::io::{Read, Write};
use std::time::Duration;
use tapmodes::rng::Rng;
use tapmodes::source::Source;
use tapmodes::source::serial::codec::{
    BinaryEncoder, SampleWidth, StreamHeader, encode_text_frame, encode_text_header,
};
use tapmodes::source::simulator::Simulator;
use tapmodes::source::simulator::presets::preset;

/// Converter codes of a simulated run, frame by frame, and the header describing them.
pub fn device_frames(seconds: f64) -> (StreamHeader, Vec<Vec<i32>>) {
    let plan = preset("tm9-arm-solid", 9).unwrap();
    let header = StreamHeader {
        rate_hz: plan.sample_rate,
        channels: plan.sensors.iter().map(|s| s.name.clone()).collect(),
        units: plan.sensors.iter().map(|s| s.unit.clone()).collect(),
        scales: plan.sensors.iter().map(|s| s.lsb()).collect(),
    };
    let lsb = header.scales.clone();
    let mut sim = Simulator::new(plan, Some(seconds), true);
    let mut frames = Vec::new();
    while let Some(b) = sim.next_block().unwrap() {
        for k in 0..b.len() {
            frames.push(
                (0..lsb.len())
                    .map(|c| (b.channels[c][k] / lsb[c]).round() as i32)
                    .collect(),
            );
        }
    }
    (header, frames)
}

/// Open a pty pair; returns the master and the slave's path (the slave handle is closed
/// so that the capture can open it exclusively).
pub fn pty() -> (serialport::TTYPort, String) {
    let (master, slave) = serialport::TTYPort::pair().expect("pty pair");
    let name = serialport::SerialPort::name(&slave).expect("slave name");
    drop(slave);
    (master, name)
}

/// Wait for the host's header request ('h'), then write all `chunks`; stop writing after
/// `cut_after` chunks if given (a disconnect: the master is dropped).
fn device(
    mut master: serialport::TTYPort,
    chunks: Vec<Vec<u8>>,
    cut_after: Option<usize>,
) -> std::thread::JoinHandle<()> {
    std::thread::spawn(move || {
        let _ = serialport::SerialPort::set_timeout(&mut master, Duration::from_millis(100));
        // Until the host opens the slave, reads fail at once (no peer): poll gently.
        let mut b = [0u8; 16];
        for _ in 0..200 {
            match master.read(&mut b) {
                Ok(n) if n > 0 => break,
                _ => std::thread::sleep(Duration::from_millis(50)),
            }
        }
        for (i, c) in chunks.iter().enumerate() {
            if cut_after == Some(i) {
                return;
            }
            if master.write_all(c).is_err() {
                return;
            }
        }
        // Keep the line open (idle) until the host has gone.
        std::thread::sleep(Duration::from_secs(8));
    })
}

fn capture(port: &str, dir: &std::path::Path, extra: &[&str]) -> (i32, String, String) {
    let mut args = vec![
        "capture",
        "--serial",
        port,
        "--hits",
        "5",
        "--out",
        dir.to_str().unwrap(),
        "--variant",
        "bench",
    ];
    args.extend_from_slice(extra);
    tapmodes(&args)
}

fn accepted_modes(dir: &std::path::Path) -> (u64, Vec<f64>) {
    let v: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.join("bench.json")).expect("run file written"),
    )
    .unwrap();
    let modes = v["modes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m["frequency_hz"].as_f64().unwrap())
        .collect();
    (v["hits_accepted"].as_u64().unwrap(), modes)
}

#[test]
fn text_form_clean_stream() {
    let (header, frames) = device_frames(14.0);
    let mut chunks = vec![encode_text_header(&header)];
    chunks.extend(frames.chunks(64).map(|fs| {
        fs.iter()
            .flat_map(|f| encode_text_frame(&f.iter().map(|&v| v as f64).collect::<Vec<_>>()))
            .collect()
    }));
    let (master, port) = pty();
    let _dev = device(master, chunks, None);
    let dir = temp_dir("pty-text");
    let (code, stdout, stderr) = capture(&port, &dir, &[]);
    assert_eq!(code, 0, "{stderr}");
    assert!(dir.join("bench.wav").exists());
    let (accepted, modes) = accepted_modes(&dir);
    assert_eq!(accepted, 5, "{stderr}");
    assert!(
        modes.iter().any(|f| (f / 148.0 - 1.0).abs() < 0.005),
        "{modes:?}\n{stdout}"
    );
    // The run re-analysed from its recording: the serial values are calibrated (g, N), so
    // the recording must carry its own scale and full scale; read as a plain float WAV
    // every hit would be an overload.
    let again = dir.join("again.json");
    let (code, _, stderr) = tapmodes(&[
        "analyze",
        dir.join("bench.json").to_str().unwrap(),
        "--out",
        again.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{stderr}");
    let v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&again).unwrap()).unwrap();
    assert_eq!(v["hits_accepted"].as_u64(), Some(5), "{v}");
    let first = accepted_modes(&dir).1;
    let redone: Vec<f64> = v["modes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| m["frequency_hz"].as_f64().unwrap())
        .collect();
    // The recording keeps 32-bit floats of the calibrated values (a serial header gives no
    // converter width), so the re-analysis agrees to float precision, not bit for bit.
    assert_eq!(first.len(), redone.len(), "{first:?} vs {redone:?}");
    for (a, b) in first.iter().zip(&redone) {
        assert!((a - b).abs() < 1e-5 * a, "{first:?} vs {redone:?}");
    }
}

#[test]
fn binary_form_with_corrupt_and_dropped_packets() {
    let (header, frames) = device_frames(40.0);
    let mut enc = BinaryEncoder::with_width(SampleWidth::I16);
    let mut chunks = vec![enc.header(&header)];
    let mut rng = Rng::new(77);
    let (mut dropped, mut corrupted) = (0, 0);
    for block in frames.chunks(100) {
        let mut pkt = enc.samples(block);
        let r = rng.uniform();
        if r < 0.0025 {
            dropped += 1;
            continue;
        } else if r < 0.005 {
            let i = 3 + (rng.next_u64() as usize) % (pkt.len() - 4);
            pkt[i] ^= 0x5a;
            corrupted += 1;
        }
        chunks.push(pkt);
    }
    assert!(dropped > 0 && corrupted > 0);
    let (master, port) = pty();
    let _dev = device(master, chunks, None);
    let dir = temp_dir("pty-binary");
    let (code, _, stderr) = capture(&port, &dir, &[]);
    eprintln!("injected: {dropped} packets dropped, {corrupted} corrupted\n{stderr}");
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("lost") && stderr.contains("corrupt"),
        "loss not reported: {stderr}"
    );
    let (accepted, modes) = accepted_modes(&dir);
    assert_eq!(accepted, 5);
    assert!(
        modes.iter().any(|f| (f / 231.0 - 1.0).abs() < 0.005),
        "{modes:?}"
    );
}

#[test]
fn disconnect_keeps_accepted_hits() {
    let (header, frames) = device_frames(14.0);
    let mut enc = BinaryEncoder::with_width(SampleWidth::I16);
    let mut chunks = vec![enc.header(&header)];
    chunks.extend(frames.chunks(100).map(|b| enc.samples(b)));
    // About 6.3 s of signal: taps at 0.8 s and about 3.3 s are complete.
    let cut = (6.3 * header.rate_hz / 100.0) as usize;
    let (master, port) = pty();
    let _dev = device(master, chunks, Some(cut));
    let dir = temp_dir("pty-unplug");
    let (code, _, stderr) = capture(&port, &dir, &[]);
    eprintln!("{stderr}");
    assert_ne!(code, 0, "{stderr}");
    assert!(stderr.contains("saved"), "{stderr}");
    let (accepted, _) = accepted_modes(&dir);
    assert!(accepted >= 1, "{stderr}");
    let wav = hound::WavReader::open(dir.join("bench.wav")).expect("a valid WAV survives");
    assert!(wav.duration() > 4 * header.rate_hz as u32);
}

#[test]
fn garbage_or_wrong_baud_is_diagnosed() {
    let mut rng = Rng::new(5);
    let noise: Vec<Vec<u8>> = (0..40)
        .map(|_| (0..256).map(|_| 0x80 | (rng.next_u64() as u8)).collect())
        .collect();
    let (master, port) = pty();
    let _dev = device(master, noise, None);
    let dir = temp_dir("pty-garbage");
    let (code, _, stderr) = capture(&port, &dir, &[]);
    eprintln!("{stderr}");
    assert_ne!(code, 0);
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(stderr.contains("baud"), "{stderr}");
}

/// Lines of bare numbers as a simple sketch prints them: an optional timestamp from a
/// microsecond clock that starts at `t0_us` and ticks at `true_rate` (with +-`jitter_us`
/// of scheduling noise), then the converter codes, separated by `sep`.
fn sketch_lines(frames: &[Vec<i32>], stamps: Option<(f64, f64, f64)>, sep: &str) -> Vec<Vec<u8>> {
    let mut rng = Rng::new(41);
    frames
        .chunks(64)
        .enumerate()
        .map(|(c, chunk)| {
            let mut out = String::new();
            for (j, f) in chunk.iter().enumerate() {
                let k = (c * 64 + j) as f64;
                if let Some((t0, rate, jitter)) = stamps {
                    let t = t0 + 1e6 * k / rate + jitter * rng.range(-1.0, 1.0);
                    out += &format!("{}{sep}", (t.round() as u64) % (1u64 << 32));
                }
                let vals: Vec<String> = f.iter().map(|v| v.to_string()).collect();
                out += &vals.join(sep);
                out += "\n";
            }
            out.into_bytes()
        })
        .collect()
}

#[test]
fn headerless_sketches_with_and_without_timestamps() {
    // A sketch that sends no header: bare numbers. (1) With a microsecond timestamp column
    // whose clock runs 2 % fast against the nominal 8000 Hz, wrapping its 32-bit counter
    // mid-run: the rate is measured from the stamps, so the 148 Hz mode reads 2 % high, as
    // the device's own time says it is. (2) Without timestamps, spaces between fields and
    // --rate trusted as given: the mode reads where the given rate puts it.
    let (_, frames) = device_frames(14.0);
    let true_rate = 8000.0 * 1.02;
    /// Name, what the device writes, the capture's options, the 148 Hz mode's expected place.
    type Case<'a> = (&'a str, Vec<Vec<u8>>, Vec<&'a str>, f64);
    let cases: [Case; 2] = [
        (
            "stamped",
            sketch_lines(&frames, Some((4_294_967_296.0 - 3e6, true_rate, 15.0)), ","),
            vec!["--columns", "t@us,hammer,accel"],
            148.0 * 1.02,
        ),
        (
            "bare",
            sketch_lines(&frames, None, " "),
            vec!["--columns", "hammer,accel", "--rate", "8000"],
            148.0,
        ),
    ];
    for (name, chunks, extra, expected) in cases {
        let (master, port) = pty();
        let _dev = device(master, chunks, None);
        let dir = temp_dir(&format!("pty-sketch-{name}"));
        let (code, stdout, stderr) = capture(&port, &dir, &extra);
        assert_eq!(code, 0, "{name}: {stderr}");
        let (accepted, modes) = accepted_modes(&dir);
        assert_eq!(accepted, 5, "{name}: {stderr}");
        assert!(
            modes.iter().any(|f| (f / expected - 1.0).abs() < 0.003),
            "{name}: {modes:?} (expected {expected})\n{stdout}\n{stderr}"
        );
        if name == "stamped" {
            assert!(stderr.contains("measured"), "{stderr}");
        }
    }
    // Without a timestamp column and without --rate there is nothing to go by.
    let (master, port) = pty();
    let _dev = device(master, sketch_lines(&frames[..100], None, ","), None);
    let dir = temp_dir("pty-sketch-norate");
    let (code, _, stderr) = capture(&port, &dir, &["--columns", "hammer,accel"]);
    assert_eq!(code, 1, "{stderr}");
    assert!(stderr.contains("--rate"), "{stderr}");
}
