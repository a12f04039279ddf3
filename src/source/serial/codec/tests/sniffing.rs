//! Tests of chunking, sniffing and diagnosis, and a property test over arbitrary bytes.

use super::*;

// --- chunking and sniffing --------------------------------------------------------------------

#[test]
fn any_split_into_pushes_gives_the_same_output() {
    let h = test_header();
    let raw = raw_frames(300, 2, 21);
    let text = text_stream(&h, &raw);
    let (binary, _) = binary_stream(&h, &raw, 24, SampleWidth::I16);
    let mut rng = Rng(22);
    let mut noisy = rng.bytes(100);
    noisy.extend(&binary);
    for (bytes, form) in [
        (text, WireForm::Text),
        (binary, WireForm::Binary),
        (noisy, WireForm::Binary),
    ] {
        for sniff in [true, false] {
            let make = || {
                if sniff {
                    Decoder::new()
                } else {
                    Decoder::with_form(form)
                }
            };
            let mut whole = make();
            let expected = decode(&mut whole, &bytes);
            assert_eq!(whole.form(), Some(form));
            assert_eq!(frames(&expected).len(), 300);
            let (one_by_one, d1) = decode_chunked(make(), &bytes, &mut rng, 1);
            assert_eq!(one_by_one, expected);
            assert_eq!(d1.stats(), whole.stats());
            for max_chunk in [2, 7, 64, 1000] {
                let (got, d) = decode_chunked(make(), &bytes, &mut rng, max_chunk);
                assert_eq!(got, expected);
                assert_eq!(d.stats(), whole.stats());
                assert_eq!(d.frames_lost(), whole.frames_lost());
            }
        }
    }
}

#[test]
fn sniffing_decides_early_and_correctly() {
    let h = test_header();
    let raw = raw_frames(100, 2, 23);

    let text = text_stream(&h, &raw);
    let header_end = text.iter().position(|&b| b == b'\n').unwrap() + 1;
    let mut dec = Decoder::new();
    let out = decode(&mut dec, &text[..header_end]);
    assert_eq!(
        dec.form(),
        Some(WireForm::Text),
        "decided by the header line"
    );
    assert_eq!(headers(&out), vec![h.clone()]);

    // A boot banner is not taken for the text form.
    let mut bytes = b"boot v1.2\r\nsensor ok\r\nready\r\n".to_vec();
    bytes.extend(binary_stream(&h, &raw, 16, SampleWidth::I16).0);
    let mut dec = Decoder::new();
    decode(&mut dec, &bytes);
    assert_eq!(dec.form(), Some(WireForm::Binary));

    let (bin, _) = binary_stream(&h, &raw, 16, SampleWidth::I16);
    let mut dec = Decoder::new();
    let mut out = Vec::new();
    let mut n = 0;
    while dec.form().is_none() {
        dec.push(&bin[n..n + 1], &mut out);
        n += 1;
    }
    assert_eq!(dec.form(), Some(WireForm::Binary));
    assert!(
        n < 100,
        "decided at the end of the header packet ({n} bytes)"
    );
    assert_eq!(headers(&out), vec![h.clone()]);

    // Joined mid-stream: text lines without a header still look like text.
    let mut dec = Decoder::new();
    let out = decode(&mut dec, &text[70..]);
    assert_eq!(dec.form(), Some(WireForm::Text));
    assert!(out.is_empty());
    assert!(dec.stats().junk_lines > 10);

    // Joined mid-stream in binary: no header but intact sample packets.
    let mut dec = Decoder::new();
    decode(&mut dec, &bin[200..]);
    assert_eq!(dec.form(), Some(WireForm::Binary));

    // Undecided: nothing is emitted, only bytes are counted.
    let mut dec = Decoder::new();
    let out = decode(&mut dec, b"12,3");
    assert!(out.is_empty());
    assert_eq!(dec.form(), None);
    assert_eq!(dec.header(), None);
    assert_eq!(
        dec.stats(),
        LinkStats {
            bytes: 4,
            ..LinkStats::default()
        }
    );
}

// --- diagnosis --------------------------------------------------------------------------------

#[test]
fn wrong_baud_like_noise_is_diagnosed() {
    let mut rng = Rng(24);
    let high: Vec<u8> = (0..2000).map(|_| rng.byte() | 0x80).collect();
    let mixed: Vec<u8> = (0..2000)
        .map(|_| match rng.below(4) {
            0 => 0,
            1 => 0xff,
            _ => rng.byte(),
        })
        .collect();
    for noise in [high, mixed] {
        for make in [
            Decoder::new as fn() -> Decoder,
            || Decoder::with_form(WireForm::Text),
            || Decoder::with_form(WireForm::Binary),
        ] {
            let mut dec = make();
            assert_eq!(decode(&mut dec, &noise[..300]), vec![]);
            assert_eq!(dec.diagnosis(), None, "too early to tell");
            decode(&mut dec, &noise[300..]);
            let d = dec.diagnosis().expect("noise must be diagnosed");
            assert!(d.contains("baud"), "{d}");
            assert!(d.ends_with('.') && !d.contains('\n'));
        }
    }
}

#[test]
fn wrong_form_is_diagnosed() {
    let h = test_header();
    let raw = raw_frames(200, 2, 25);
    let text = text_stream(&h, &raw);
    let (bin, _) = binary_stream(&h, &raw, 16, SampleWidth::I16);

    let mut dec = Decoder::with_form(WireForm::Binary);
    decode(&mut dec, &text);
    let d = dec.diagnosis().unwrap();
    assert!(d.contains("text form"), "{d}");

    let mut dec = Decoder::with_form(WireForm::Text);
    decode(&mut dec, &bin);
    let d = dec.diagnosis().unwrap();
    assert!(d.contains("binary form"), "{d}");
}

#[test]
fn missing_header_is_diagnosed() {
    let h = test_header();
    let raw = raw_frames(200, 2, 26);
    let text = text_stream(&h, &raw);
    let first_line = text.iter().position(|&b| b == b'\n').unwrap() + 1;
    let mut dec = Decoder::new();
    decode(&mut dec, &text[first_line..]);
    assert!(dec.diagnosis().unwrap().contains("no header"));

    let (bin, ranges) = binary_stream(&h, &raw, 16, SampleWidth::I16);
    let mut dec = Decoder::new();
    decode(&mut dec, &bin[ranges[0].start..]);
    assert!(dec.diagnosis().unwrap().contains("no header"));
}

#[test]
fn unreliable_link_is_diagnosed() {
    let h = test_header();
    let raw = raw_frames(64 * 8, 2, 27);
    let (mut bin, ranges) = binary_stream(&h, &raw, 8, SampleWidth::I16);
    for r in ranges.iter().skip(1).step_by(3) {
        bin[r.start + 2] ^= 0x5a; // two of every three packets survive
    }
    let mut dec = Decoder::with_form(WireForm::Binary);
    decode(&mut dec, &bin);
    assert_eq!(dec.diagnosis(), None, "a third bad is not over half");
    for r in ranges.iter().skip(2).step_by(3) {
        bin[r.start + 2] ^= 0x5a;
    }
    let mut dec = Decoder::with_form(WireForm::Binary);
    decode(&mut dec, &bin);
    assert!(dec.diagnosis().unwrap().contains("unreliable"));
}

#[test]
fn clean_streams_have_no_diagnosis() {
    let h = three_axis_header();
    let raw = raw_frames(2000, 3, 28);
    let (bin, _) = binary_stream(&h, &raw, 32, SampleWidth::I16);
    for bytes in [text_stream(&h, &raw), bin] {
        let mut dec = Decoder::new();
        decode(&mut dec, &bytes);
        assert_eq!(dec.diagnosis(), None);
    }
}

// --- property test ------------------------------------------------------------------------------

/// Arbitrary input: pure noise, printable noise, or a valid stream with random damage.
fn arbitrary_input(rng: &mut Rng, i: usize) -> Vec<u8> {
    let h = if i.is_multiple_of(2) {
        test_header()
    } else {
        three_axis_header()
    };
    let n_ch = h.channels.len();
    match i % 5 {
        0 => {
            let n = rng.below(3000);
            rng.bytes(n)
        }
        1 => {
            let n = rng.below(2000);
            (0..n)
                .map(|_| b"0123456789,.-#=e \n\r"[rng.below(19)])
                .collect()
        }
        _ => {
            let raw = raw_frames(rng.below(400), n_ch, rng.next());
            let mut s = if i % 5 == 2 {
                text_stream(&h, &raw)
            } else {
                let width = if rng.below(2) == 0 {
                    SampleWidth::I16
                } else {
                    SampleWidth::I32
                };
                binary_stream(&h, &raw, 1 + rng.below(80), width).0
            };
            for _ in 0..rng.below(12) {
                if s.is_empty() {
                    break;
                }
                let at = rng.below(s.len());
                match rng.below(6) {
                    0 => s[at] ^= 1 << rng.below(8),
                    1 => s[at] = rng.byte(),
                    2 => {
                        s.remove(at);
                    }
                    3 => s.insert(at, rng.byte()),
                    4 => {
                        let end = (at + rng.below(64)).min(s.len());
                        let piece = s[at..end].to_vec();
                        let to = rng.below(s.len());
                        s.splice(to..to, piece);
                    }
                    _ => s.truncate(at),
                }
            }
            s
        }
    }
}

#[test]
fn arbitrary_bytes_never_panic_and_keep_stats_sane() {
    let mut rng = Rng(29);
    for i in 0..2000 {
        let bytes = arbitrary_input(&mut rng, i);
        for make in [
            Decoder::new as fn() -> Decoder,
            || Decoder::with_form(WireForm::Text),
            || Decoder::with_form(WireForm::Binary),
        ] {
            let mut whole = make();
            let out = decode(&mut whole, &bytes);
            let (chunked, dec) = decode_chunked(make(), &bytes, &mut rng, 97);
            assert_eq!(chunked, out, "input {i}: chunking changed the output");
            assert_eq!(dec.stats(), whole.stats());

            let s = whole.stats();
            assert_eq!(s.bytes, bytes.len() as u64);
            let mut channels = None;
            let mut n_frames = 0u64;
            let mut n_headers = 0u64;
            let mut n_gap_frames = 0u64;
            for d in &out {
                match d {
                    Decoded::Header(h) => {
                        assert!(h.rate_hz.is_finite() && h.rate_hz > 0.0);
                        assert!(!h.channels.is_empty());
                        assert_eq!(h.units.len(), h.channels.len());
                        assert_eq!(h.scales.len(), h.channels.len());
                        channels = Some(h.channels.len());
                        n_headers += 1;
                    }
                    Decoded::Frame(v) => {
                        assert_eq!(
                            Some(v.len()),
                            channels,
                            "frame before header or wrong width"
                        );
                        assert!(v.iter().all(|x| x.is_finite()));
                        n_frames += 1;
                    }
                    Decoded::Gap(n) => {
                        assert!(*n > 0 && channels.is_some(), "gap {n} before a header");
                        n_gap_frames += n;
                    }
                }
            }
            assert_eq!(s.frames, n_frames);
            assert_eq!(whole.frames_lost(), n_gap_frames);
            assert!(s.resyncs <= s.packets_corrupt);
            match whole.form() {
                Some(WireForm::Text) => {
                    assert_eq!(
                        s.packets_ok + s.packets_corrupt + s.packets_lost + s.resyncs,
                        0
                    );
                    let lines = bytes.iter().filter(|&&b| b == b'\n').count() as u64;
                    assert!(n_headers + s.frames + s.junk_lines <= lines);
                }
                Some(WireForm::Binary) => {
                    assert!(s.packets_ok >= n_headers);
                    let delimiters = bytes.iter().filter(|&&b| b == 0).count() as u64;
                    assert!(s.packets_ok + s.packets_corrupt <= delimiters);
                    assert!(s.junk_lines <= s.packets_ok);
                }
                None => {
                    assert!(out.is_empty());
                    assert!(bytes.len() < SNIFF_LIMIT);
                }
            }
            let _ = whole.diagnosis();
            let _ = whole.take_notes();
        }
    }
}
