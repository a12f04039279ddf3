//! Malformed serial streams (text and binary forms of our protocol), each with its expected
//! outcome: refused with one sentence when the stream cannot be used, otherwise a documented
//! count of what the decoder dropped. Fed through the real `SerialSource` over a scripted
//! byte link, so header validation and mid-run header changes are covered too.

use std::collections::VecDeque;
use tapmodes::rng::Rng;
use tapmodes::source::Source;
use tapmodes::source::serial::codec::{
    BinaryEncoder, SampleWidth, StreamHeader, encode_text_header,
};
use tapmodes::source::serial::{ByteLink, SerialSource};

/// Hands out `chunks` one read at a time, then reports the device gone.
struct Script(VecDeque<Vec<u8>>);

impl ByteLink for Script {
    fn read_some(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let Some(c) = self.0.pop_front() else {
            return Err(std::io::Error::new(std::io::ErrorKind::BrokenPipe, "gone"));
        };
        let n = c.len().min(buf.len());
        buf[..n].copy_from_slice(&c[..n]);
        if n < c.len() {
            self.0.push_front(c[n..].to_vec());
        }
        Ok(n)
    }
    fn send(&mut self, _: &[u8]) -> std::io::Result<()> {
        Ok(())
    }
}

/// What a stream gave: the opening error or the final error, frames, starts, link counters.
#[derive(Debug, Default)]
struct Outcome {
    error: Option<String>,
    frames: usize,
    starts: Vec<u64>,
    junk: u64,
    corrupt: u64,
    names: Vec<String>,
}

fn feed(chunks: Vec<Vec<u8>>) -> Outcome {
    let mut o = Outcome::default();
    let mut src = match SerialSource::from_link("test", Box::new(Script(chunks.into()))) {
        Ok(s) => s,
        Err(e) => {
            o.error = Some(e.to_string());
            return o;
        }
    };
    o.names = src
        .info()
        .channels
        .iter()
        .map(|c| format!("{} {}", c.name, c.unit))
        .collect();
    loop {
        match src.next_block() {
            Ok(Some(b)) => {
                for c in &b.channels {
                    assert!(
                        c.iter().all(|v| v.is_finite()),
                        "a value that is not finite"
                    );
                }
                if !b.is_empty() {
                    o.starts.push(b.start);
                }
                o.frames += b.len();
            }
            Ok(None) => break,
            Err(e) => {
                o.error = Some(e.to_string());
                break;
            }
        }
    }
    let l = src.link_counters().unwrap();
    o.junk = l.junk_lines;
    o.corrupt = l.packets_corrupt;
    o
}

fn text(header: &str, lines: &[&str]) -> Vec<Vec<u8>> {
    let mut v = vec![format!("{header}\n").into_bytes()];
    v.extend(lines.iter().map(|l| format!("{l}\n").into_bytes()));
    v
}

fn frames(n: usize, ch: usize) -> Vec<Vec<i32>> {
    (0..n)
        .map(|k| (0..ch).map(|c| (k * 7 + c) as i32 % 300).collect())
        .collect()
}

type Check = Box<dyn Fn(&Outcome) -> bool>;

fn refused(needle: &'static str) -> Check {
    Box::new(move |o| {
        o.error
            .as_deref()
            .is_some_and(|e| e.contains(needle) && !e.contains('\n'))
    })
}

/// The stream ran to the end of the script (the device "unplugged").
fn ended(pred: impl Fn(&Outcome) -> bool + 'static) -> Check {
    Box::new(move |o| o.error.as_deref().is_some_and(|e| e.contains("stopped")) && pred(o))
}

fn cases() -> Vec<(&'static str, Vec<Vec<u8>>, Check)> {
    let ok_lines: Vec<String> = (0..50).map(|k| format!("{k},{}", k * 2)).collect();
    let ok: Vec<&str> = ok_lines.iter().map(String::as_str).collect();
    let hdr = "# rate_hz=1000 channels=force,accel units=N,g scale=0.01,0.001";
    let bin_stream = |h: StreamHeader, n: usize, mid: &dyn Fn(&mut BinaryEncoder) -> Vec<u8>| {
        let mut e = BinaryEncoder::new();
        let mut v = vec![e.header(&h)];
        v.push(e.samples(&frames(n, h.channels.len())));
        v.push(mid(&mut e));
        v.push(e.samples(&frames(n, h.channels.len())));
        v
    };
    let none = |_: &mut BinaryEncoder| Vec::new();
    let two = || StreamHeader::new(1000.0, &["force", "accel"]);
    let long_names: Vec<String> = (0..12)
        .map(|i| format!("channel_with_a_long_name_{i:02}"))
        .collect();
    let long_hdr = format!(
        "# rate_hz=1000 channels={} units={} scale={}",
        long_names.join(","),
        ["g"; 12].join(","),
        ["1"; 12].join(",")
    );
    let long_line = ["1"; 12].join(",");
    let mut v: Vec<(&'static str, Vec<Vec<u8>>, Check)> = vec![
        (
            "text-rate-1e12",
            text("# rate_hz=1e12 channels=a", &ok),
            refused("sample rate"),
        ),
        (
            "text-rate-1e300",
            text("# rate_hz=1e300 channels=a", &ok),
            refused("sample rate"),
        ),
        (
            "text-rate-0.3",
            text("# rate_hz=0.3 channels=a", &ok),
            refused("sample rate"),
        ),
        (
            "text-40-channels",
            text(
                &format!(
                    "# rate_hz=100 channels={}",
                    (0..40)
                        .map(|i| format!("c{i}"))
                        .collect::<Vec<_>>()
                        .join(",")
                ),
                &ok,
            ),
            refused("channels"),
        ),
        (
            "text-good",
            text(hdr, &ok),
            ended(|o| o.frames == 50 && o.junk == 0),
        ),
        (
            "text-long-header-300-bytes",
            text(&long_hdr, &[&long_line, &long_line]),
            ended(|o| o.frames == 2 && o.names.len() == 12),
        ),
        (
            "text-scaled-overflow",
            text("# rate_hz=1000 channels=a scale=1e300", &["1e10", "1", "2"]),
            ended(|o| o.frames == 2 && o.junk == 1),
        ),
        (
            "text-nan",
            text(hdr, &["nan,1", "1,2"]),
            ended(|o| o.frames == 1 && o.junk == 1),
        ),
        (
            "text-inf",
            text(hdr, &["inf,1", "1,-inf", "1,2"]),
            ended(|o| o.frames == 1 && o.junk == 2),
        ),
        (
            "text-field-count",
            text(hdr, &["1", "1,2,3", "1,2"]),
            ended(|o| o.frames == 1 && o.junk == 2),
        ),
        (
            "text-overlong-line",
            text(hdr, &[&"9".repeat(5000), "1,2"]),
            ended(|o| o.frames == 1 && o.junk == 1),
        ),
        (
            "text-binary-junk",
            [
                text(hdr, &["1,2"]),
                vec![vec![0xff, 0xfe, b'\n'], b"3,4\n".to_vec()],
            ]
            .concat(),
            ended(|o| o.frames == 2 && o.junk == 1),
        ),
        (
            "text-new-scale",
            text(
                hdr,
                &[
                    "1,2",
                    "# rate_hz=1000 channels=force,accel units=N,g scale=0.1,0.001",
                    "3,4",
                ],
            ),
            refused("other scales"),
        ),
        (
            "text-same-header-again",
            text(hdr, &["1,2", hdr, "3,4"]),
            ended(|o| o.frames == 2),
        ),
        (
            "text-new-rate",
            text(
                hdr,
                &[
                    "1,2",
                    "# rate_hz=2000 channels=force,accel units=N,g scale=0.01,0.001",
                    "3,4",
                ],
            ),
            refused("different stream"),
        ),
        (
            "text-escape-names",
            text(
                "# rate_hz=1000 channels=\u{1b}[31mforce,accel units=\u{1b}]0;x\u{7}N,g",
                &["1,2"],
            ),
            ended(|o| o.names.iter().all(|n| !n.contains('\u{1b}')) && o.names[0] == "force N"),
        ),
        (
            "text-scale-nan",
            text("# rate_hz=1000 channels=a scale=nan", &["1"]),
            refused("cannot read"),
        ),
        (
            "bin-rate-1e12",
            bin_stream(StreamHeader::new(1e12, &["a"]), 10, &none),
            refused("sample rate"),
        ),
        (
            "bin-rate-tiny",
            bin_stream(StreamHeader::new(1e-3, &["a"]), 10, &none),
            refused("sample rate"),
        ),
        (
            "bin-good",
            bin_stream(two(), 100, &none),
            ended(|o| o.frames == 200 && o.starts[0] == 0),
        ),
        (
            "bin-small-gap",
            bin_stream(two(), 100, &|e| {
                e.skip_frames(50);
                Vec::new()
            }),
            ended(|o| o.frames == 200 && o.starts.contains(&150)),
        ),
        (
            "bin-counter-jump-2^30",
            bin_stream(two(), 100, &|e| {
                e.skip_frames(1 << 30);
                Vec::new()
            }),
            ended(|o| o.frames == 200 && o.starts.iter().all(|&s| s < 1000)),
        ),
        (
            "bin-scale-overflow",
            bin_stream(
                StreamHeader {
                    rate_hz: 1000.0,
                    channels: vec!["a".into()],
                    units: vec!["g".into()],
                    scales: vec![1e300],
                },
                20,
                &none,
            ),
            ended(|o| o.frames == 0 && o.corrupt >= 2),
        ),
        (
            "bin-new-scale",
            bin_stream(two(), 10, &|e| {
                e.header(&StreamHeader {
                    scales: vec![10.0, 1.0],
                    ..two()
                })
            }),
            refused("other scales"),
        ),
        (
            "bin-new-unit",
            bin_stream(two(), 10, &|e| {
                e.header(&StreamHeader {
                    units: vec!["N".into(), "m/s^2".into()],
                    ..two()
                })
            }),
            refused("other scales"),
        ),
        (
            "bin-crc-flip",
            bin_stream(two(), 10, &|e| {
                let mut p = e.samples(&frames(10, 2));
                p[5] ^= 0x40;
                p
            }),
            ended(|o| o.frames == 20 && o.corrupt == 1),
        ),
        (
            "bin-truncated-packet",
            bin_stream(two(), 10, &|e| {
                let p = e.samples(&frames(10, 2));
                [&p[..p.len() / 2], &[0u8][..]].concat()
            }),
            ended(|o| o.frames == 20 && o.corrupt == 1),
        ),
        (
            "bin-oversize-frame",
            bin_stream(two(), 10, &|_| {
                let mut p = vec![7u8; 3000];
                p.push(0);
                p
            }),
            ended(|o| o.frames == 20 && o.corrupt == 1),
        ),
        (
            "bin-zeros",
            bin_stream(two(), 10, &|_| vec![0u8; 5000]),
            ended(|o| o.frames == 20 && o.corrupt == 0),
        ),
        (
            "bin-unknown-type-and-note",
            bin_stream(two(), 10, &|e| e.note("\u{1b}[2Jboot ok")),
            ended(|o| o.frames == 20),
        ),
        (
            "bin-escape-names",
            bin_stream(
                StreamHeader::new(1000.0, &["\u{1b}[5mforce", "accel"]),
                10,
                &none,
            ),
            ended(|o| o.names.iter().all(|n| !n.contains('\u{1b}'))),
        ),
    ];
    // Split every byte of one binary stream into its own read: same result.
    let one_by_one: Vec<Vec<u8>> = bin_stream(two(), 30, &|e| {
        e.skip_frames(5);
        Vec::new()
    })
    .concat()
    .into_iter()
    .map(|b| vec![b])
    .collect();
    v.push(("bin-byte-by-byte", one_by_one, ended(|o| o.frames == 60)));
    v
}

#[test]
fn malformed_serial_streams() {
    let cases = cases();
    let mut failures = Vec::new();
    for (name, chunks, check) in cases.iter().map(|(n, c, k)| (n, c.clone(), k)) {
        let o = feed(chunks);
        if !check(&o) {
            failures.push(format!("{name}: {o:?}"));
        }
    }
    eprintln!("serial catalogue: {} streams", cases.len());
    assert!(cases.len() >= 30, "only {} serial cases", cases.len());
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

/// The text header line itself, encoded by the reference encoder, is longer than the
/// sniffing window and still read as text.
#[test]
fn long_encoded_header_is_text() {
    let names: Vec<String> = (0..16)
        .map(|i| format!("accelerometer_axis_{i:02}"))
        .collect();
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let line = encode_text_header(&StreamHeader::new(1000.0, &refs));
    assert!(line.len() > 255);
    let o = feed(vec![
        line,
        [["1"; 16].join(","), "\n".into()].concat().into_bytes(),
    ]);
    assert_eq!(o.names.len(), 16, "{o:?}");
    assert_eq!(o.frames, 1);
}

/// A binary stream whose every frame carries its own device frame number (channel 0 = n,
/// channel 1 = -n), with frames lost in every way the firmware and the link lose them: the
/// firmware skipping frames (buffer overflow), whole packets dropped on the wire, a packet
/// corrupted on the wire, a gap in the very first packets (read with the header) and two
/// gaps close together. Packets hold 1 to 40 frames, so gaps fall inside reads.
fn stream_with_gaps() -> (Vec<u8>, u64) {
    let h = StreamHeader::new(1000.0, &["force", "accel"]);
    let mut e = BinaryEncoder::with_width(SampleWidth::I32);
    let mut bytes = e.header(&h);
    let mut rng = Rng::new(0x9a95);
    let mut n = 0u32;
    let packet = |e: &mut BinaryEncoder, n: &mut u32, len: u32| {
        let f: Vec<Vec<i32>> = (*n..*n + len)
            .map(|k| vec![k as i32, -(k as i32)])
            .collect();
        *n += len;
        e.samples(&f)
    };
    for k in 0..160 {
        let len = 1 + (rng.next_u64() % 40) as u32;
        match k {
            // Lost by the firmware: the counter moves on, nothing is sent.
            2 | 40 | 41 | 97 => {
                let skip = 1 + (rng.next_u64() % 300) as u32;
                e.skip_frames(skip);
                n += skip;
            }
            // Lost on the wire: the packet is made (sequence and counter advance), not sent.
            60 | 61 | 62 | 130 => {
                packet(&mut e, &mut n, len);
                continue;
            }
            // Corrupted on the wire: one bit flipped inside the packet.
            110 => {
                let mut p = packet(&mut e, &mut n, len);
                let mid = p.len() / 2;
                p[mid] ^= 0x10;
                if p[mid] == 0 {
                    p[mid] = 0x55;
                }
                bytes.extend(p);
                continue;
            }
            _ => {}
        }
        bytes.extend(packet(&mut e, &mut n, len));
    }
    (bytes, u64::from(n))
}

/// Frames as (stream position, device frame number) and gaps as (position, length).
type Placement = (Vec<(u64, f64)>, Vec<(u64, u64)>);

/// What a source delivered, flattened to stream positions: every frame with its position,
/// and the stretches the blocks' `start`s leave uncovered (the gaps).
fn placed(chunks: Vec<Vec<u8>>) -> (Placement, Option<String>) {
    let mut src = SerialSource::from_link("test", Box::new(Script(chunks.into()))).unwrap();
    let mut frames = Vec::new();
    let mut gaps = Vec::new();
    let mut next = 0u64;
    let error = loop {
        match src.next_block() {
            Ok(Some(b)) => {
                if b.is_empty() {
                    continue;
                }
                assert!(b.start >= next, "block at {} overlaps {next}", b.start);
                if b.start > next {
                    gaps.push((next, b.start - next));
                }
                for (i, v) in b.channels[0].iter().enumerate() {
                    assert_eq!(b.channels[1][i], -v);
                    frames.push((b.start + i as u64, *v));
                }
                next = b.start + b.len() as u64;
            }
            Ok(None) => break None,
            Err(e) => break Some(e.to_string()),
        }
    };
    ((frames, gaps), error)
}

/// Where a gap lands depends on the frame counter only, never on how the bytes were split
/// into reads: the same stream in reads of 1, 7, 64 and 4097 bytes and in random splits
/// places every frame at its own frame number and leaves the same gaps.
#[test]
fn gaps_placed_by_frame_counter_whatever_the_reads() {
    let (bytes, total) = stream_with_gaps();
    let mut splits: Vec<(String, Vec<Vec<u8>>)> = [1usize, 7, 64, 4097]
        .iter()
        .map(|&n| {
            (
                format!("reads of {n}"),
                bytes.chunks(n).map(<[u8]>::to_vec).collect(),
            )
        })
        .collect();
    let mut rng = Rng::new(7);
    for round in 0..8 {
        let mut v = Vec::new();
        let mut rest = &bytes[..];
        while !rest.is_empty() {
            let n = (1 + (rng.next_u64() % [3, 50, 700, 9000][round % 4]) as usize).min(rest.len());
            v.push(rest[..n].to_vec());
            rest = &rest[n..];
        }
        splits.push((format!("random split {round}"), v));
    }
    splits.push(("all at once".into(), vec![bytes.clone()]));
    let mut first: Option<Placement> = None;
    for (name, chunks) in splits {
        let ((frames, gaps), error) = placed(chunks);
        assert!(
            error.as_deref().is_some_and(|e| e.contains("stopped")),
            "{name}: {error:?}"
        );
        for &(pos, v) in &frames {
            assert_eq!(pos as f64, v, "{name}: frame {v} placed at {pos}");
        }
        let covered = frames.len() as u64 + gaps.iter().map(|g| g.1).sum::<u64>();
        assert_eq!(covered, total, "{name}: frames plus gaps");
        match &first {
            None => {
                eprintln!(
                    "serial gaps: {} frames of {total}, gaps {gaps:?}",
                    frames.len()
                );
                assert_eq!(gaps.len(), 7, "{gaps:?}");
                first = Some((frames, gaps));
            }
            Some((f0, g0)) => {
                assert_eq!(&gaps, g0, "{name}: gaps differ");
                assert_eq!(&frames, f0, "{name}: frames differ");
            }
        }
    }
}
