//! Tests of the binary form: round trips, limits, corruption, loss, resync, notes.

use super::*;

// --- binary form -----------------------------------------------------------------------------

#[test]
fn binary_round_trip_i32_and_i16() {
    for width in [SampleWidth::I32, SampleWidth::I16] {
        let h = test_header();
        let raw = raw_frames(200, 2, 5);
        let (bytes, ranges) = binary_stream(&h, &raw, 32, width);
        let mut dec = Decoder::with_form(WireForm::Binary);
        let out = decode(&mut dec, &bytes);
        assert_eq!(out[0], Decoded::Header(h.clone()));
        assert_eq!(frames(&out), scaled(&raw, &h));
        let s = dec.stats();
        assert_eq!(s.packets_ok, 1 + ranges.len() as u64);
        assert_eq!(
            (s.packets_lost, s.packets_corrupt, s.resyncs, s.junk_lines),
            (0, 0, 0, 0)
        );
        assert_eq!(s.frames, 200);
        assert_eq!(dec.frames_lost(), 0);
        assert_eq!(dec.diagnosis(), None);
    }
}

#[test]
fn binary_full_i32_range_and_i16_saturation() {
    let h = StreamHeader::new(1000.0, &["a", "b"]);
    let raw = vec![vec![i32::MIN, i32::MAX], vec![-40_000, 40_000], vec![0, -1]];
    let mut dec = Decoder::with_form(WireForm::Binary);
    let mut enc = BinaryEncoder::new();
    let mut bytes = enc.header(&h);
    bytes.extend(enc.samples(&raw));
    assert_eq!(frames(&decode(&mut dec, &bytes)), scaled(&raw, &h));

    let mut dec = Decoder::with_form(WireForm::Binary);
    let mut enc = BinaryEncoder::with_width(SampleWidth::I16);
    let mut bytes = enc.header(&h);
    bytes.extend(enc.samples(&raw));
    let got = frames(&decode(&mut dec, &bytes));
    assert_eq!(
        got,
        vec![
            vec![-32768.0, 32767.0],
            vec![-32768.0, 32767.0],
            vec![0.0, -1.0]
        ]
    );
}

#[test]
fn binary_large_blocks_are_split_into_packets() {
    let h = three_axis_header();
    let raw = raw_frames(1000, 3, 6);
    let mut enc = BinaryEncoder::new();
    let per = enc.frames_per_packet(3);
    assert_eq!(per, (MAX_PACKET_LEN - 9) / 12);
    let mut bytes = enc.header(&h);
    bytes.extend(enc.samples(&raw));
    let mut dec = Decoder::with_form(WireForm::Binary);
    let out = decode(&mut dec, &bytes);
    assert_eq!(frames(&out), scaled(&raw, &h));
    assert_eq!(dec.stats().packets_ok, 1 + 1000u64.div_ceil(per as u64));
    assert_eq!(enc.sequence() as u64, dec.stats().packets_ok);
}

#[test]
fn binary_header_limits_and_frame_padding() {
    let names: Vec<String> = (0..20)
        .map(|i| format!("channel_with_a_long_name_{i}"))
        .collect();
    let h = StreamHeader {
        rate_hz: 1.0,
        channels: names,
        units: vec!["ü".repeat(20)],
        scales: vec![],
    };
    let mut enc = BinaryEncoder::with_width(SampleWidth::I16);
    let mut bytes = enc.header(&h);
    bytes.extend(enc.samples(&[vec![1, 2], vec![]]));
    let mut dec = Decoder::with_form(WireForm::Binary);
    let out = decode(&mut dec, &bytes);
    let got = &headers(&out)[0];
    assert_eq!(got.channels.len(), MAX_CHANNELS);
    assert!(got.channels.iter().all(|c| c.len() <= MAX_LABEL_LEN));
    assert_eq!(got.units[0], "ü".repeat(12), "cut at a character boundary");
    assert_eq!(got.units[1], "counts");
    let f = frames(&out);
    assert_eq!(f.len(), 2);
    assert_eq!(&f[0][..3], &[1.0, 2.0, 0.0]);
    assert!(f[1].iter().all(|&v| v == 0.0));
}

#[test]
fn binary_repeated_header_and_restart() {
    let h1 = test_header();
    let h2 = three_axis_header();
    let mut enc = BinaryEncoder::new();
    let mut bytes = enc.header(&h1);
    bytes.extend(enc.samples(&raw_frames(10, 2, 7)));
    bytes.extend(enc.header(&h1)); // asked for again ('h'): sequence goes on
    bytes.extend(enc.samples(&raw_frames(10, 2, 8)));
    let mut enc = BinaryEncoder::new(); // device reset: sequence and frame counter restart
    bytes.extend(enc.header(&h2));
    bytes.extend(enc.samples(&raw_frames(10, 3, 9)));
    let mut dec = Decoder::with_form(WireForm::Binary);
    let out = decode(&mut dec, &bytes);
    assert_eq!(headers(&out), vec![h1.clone(), h1, h2.clone()]);
    assert_eq!(frames(&out).len(), 30);
    let s = dec.stats();
    assert_eq!((s.packets_lost, s.packets_corrupt, s.resyncs), (0, 0, 0));
    assert_eq!(dec.frames_lost(), 0);
    assert_eq!(dec.header(), Some(&h2));
}

#[test]
fn binary_corrupt_packet_is_counted_and_the_rest_decodes() {
    let h = test_header();
    let raw = raw_frames(320, 2, 10);
    let (clean, ranges) = binary_stream(&h, &raw, 32, SampleWidth::I16);
    let mut rng = Rng(11);
    for (k, r) in ranges.iter().enumerate().take(ranges.len() - 1) {
        for _ in 0..4 {
            let mut bytes = clean.clone();
            let at = r.start + rng.below(r.len() - 1); // not the delimiter
            let mut mask = 1 + rng.below(255) as u8;
            if bytes[at] ^ mask == 0 {
                mask = mask.rotate_left(1);
            }
            bytes[at] ^= mask;
            let mut dec = Decoder::with_form(WireForm::Binary);
            let out = decode(&mut dec, &bytes);
            let mut expected = scaled(&raw, &h);
            expected.drain(k * 32..(k + 1) * 32);
            assert_eq!(frames(&out), expected, "packet {k} byte {at}");
            let s = dec.stats();
            assert_eq!(s.packets_corrupt, 1);
            assert_eq!(s.resyncs, 1);
            assert_eq!(s.packets_lost, 1);
            assert_eq!(s.packets_ok, ranges.len() as u64);
            assert_eq!(dec.frames_lost(), 32);
        }
    }
}

#[test]
fn binary_byte_turned_into_a_delimiter_costs_one_packet() {
    let h = test_header();
    let raw = raw_frames(96, 2, 12);
    let (clean, ranges) = binary_stream(&h, &raw, 32, SampleWidth::I32);
    for at in ranges[1].start..ranges[1].end - 1 {
        let mut bytes = clean.clone();
        bytes[at] = 0;
        let mut dec = Decoder::with_form(WireForm::Binary);
        let out = decode(&mut dec, &bytes);
        let mut expected = scaled(&raw, &h);
        expected.drain(32..64);
        assert_eq!(frames(&out), expected);
        let s = dec.stats();
        assert!((1..=2).contains(&s.packets_corrupt), "{s:?}");
        assert_eq!(s.resyncs, 1);
        assert_eq!(s.packets_lost, 1);
    }
}

#[test]
fn binary_dropped_packets_are_counted_exactly() {
    let h = three_axis_header();
    let raw = raw_frames(50 * 20, 3, 13);
    let (clean, ranges) = binary_stream(&h, &raw, 20, SampleWidth::I16);
    let drop = [0usize, 3, 4, 5, 17, 30, 31, 49];
    let mut bytes = clean[..ranges[0].start].to_vec();
    let mut expected = Vec::new();
    let all = scaled(&raw, &h);
    for (k, r) in ranges.iter().enumerate() {
        if !drop.contains(&k) {
            bytes.extend(&clean[r.clone()]);
            expected.extend_from_slice(&all[k * 20..(k + 1) * 20]);
        }
    }
    let mut dec = Decoder::with_form(WireForm::Binary);
    let out = decode(&mut dec, &bytes);
    assert_eq!(frames(&out), expected);
    let s = dec.stats();
    // The last packet (49) is dropped: no later packet reveals that gap.
    assert_eq!(s.packets_lost, drop.len() as u64 - 1);
    assert_eq!(dec.frames_lost(), (drop.len() as u64 - 1) * 20);
    assert_eq!((s.packets_corrupt, s.resyncs), (0, 0));
}

#[test]
fn binary_sequence_wraps_without_loss_and_counts_loss_across_the_wrap() {
    let h = test_header();
    let mut enc = BinaryEncoder::new();
    let mut bytes = enc.header(&h);
    enc.set_sequence(65_530);
    let mut packets = Vec::new();
    for i in 0..12u64 {
        packets.push(enc.samples(&raw_frames(4, 2, 100 + i)));
    }
    assert_eq!(enc.sequence(), 6);
    let mut whole = bytes.clone();
    for p in &packets {
        whole.extend(p);
    }
    let mut dec = Decoder::with_form(WireForm::Binary);
    decode(&mut dec, &whole);
    // The jump from the header's seq 0 to 65530 is "backwards" and not loss.
    assert_eq!(dec.stats().packets_lost, 0);
    assert_eq!(dec.stats().frames, 48);

    for (k, p) in packets.iter().enumerate() {
        if k != 5 && k != 6 && k != 7 {
            bytes.extend(p); // drops seq 65535, 0 and 1
        }
    }
    let mut dec = Decoder::with_form(WireForm::Binary);
    decode(&mut dec, &bytes);
    assert_eq!(dec.stats().packets_lost, 3);
    assert_eq!(dec.frames_lost(), 12);
}

#[test]
fn binary_frame_counter_reveals_device_side_overruns() {
    let h = test_header();
    let mut enc = BinaryEncoder::new();
    let mut bytes = enc.header(&h);
    bytes.extend(enc.samples(&raw_frames(10, 2, 14)));
    enc.skip_frames(25);
    bytes.extend(enc.samples(&raw_frames(10, 2, 15)));
    let mut dec = Decoder::with_form(WireForm::Binary);
    let out = decode(&mut dec, &bytes);
    assert_eq!(dec.stats().packets_lost, 0);
    assert_eq!(dec.frames_lost(), 25);
    // The gap is an item of its own, just before the first frame after it.
    assert_eq!(out[11], Decoded::Gap(25));
    assert!(matches!(out[10], Decoded::Frame(_)) && matches!(out[12], Decoded::Frame(_)));
    assert_eq!(out.len(), 22);
}

#[test]
fn binary_garbage_prefix_resyncs_within_one_frame() {
    let h = test_header();
    let raw = raw_frames(256, 2, 16);
    let (clean, _) = binary_stream(&h, &raw, 32, SampleWidth::I16);
    let mut rng = Rng(17);
    let garbage_kinds: Vec<Vec<u8>> = vec![
        rng.bytes(300),                                // with some zeros
        (0..300).map(|_| rng.byte() | 0x80).collect(), // no zeros at all
        b"boot v1.2\r\nsensor ok\r\n".to_vec(),        // a boot banner
        vec![0; 40],                                   // only delimiters
        vec![0xff; 5000],                              // longer than any packet
    ];
    for g in garbage_kinds {
        for sniff in [false, true] {
            let mut bytes = g.clone();
            bytes.extend(&clean);
            let mut dec = if sniff {
                Decoder::new()
            } else {
                Decoder::with_form(WireForm::Binary)
            };
            let out = decode(&mut dec, &bytes);
            assert_eq!(dec.form(), Some(WireForm::Binary));
            assert_eq!(frames(&out), scaled(&raw, &h), "garbage {:?}", &g[..4]);
            let s = dec.stats();
            let expect_resync = u64::from(g.iter().any(|&b| b != 0));
            assert_eq!(s.resyncs, expect_resync);
            assert!(s.packets_corrupt >= expect_resync);
            assert_eq!(s.packets_lost, 0);
        }
    }
}

#[test]
fn binary_stream_joined_mid_packet_waits_for_the_header() {
    let h = test_header();
    let mut enc = BinaryEncoder::new();
    let _ = enc.header(&h); // the host missed it
    let mut bytes = enc.samples(&raw_frames(32, 2, 18));
    bytes.extend(enc.samples(&raw_frames(64, 2, 19)));
    bytes.extend(enc.samples(&raw_frames(8, 2, 30)));
    let bytes = bytes[7..].to_vec(); // port opened in the middle of the first packet
    let mut dec = Decoder::with_form(WireForm::Binary);
    let out = decode(&mut dec, &bytes);
    assert!(out.is_empty());
    let s = dec.stats();
    assert_eq!((s.resyncs, s.packets_corrupt), (1, 1));
    assert_eq!(s.junk_lines, 2, "headerless sample packets are counted");

    let mut more = enc.header(&h); // after the host sent 'h'
    let raw = raw_frames(5, 2, 20);
    more.extend(enc.samples(&raw));
    let out = decode(&mut dec, &more);
    assert_eq!(headers(&out), vec![h.clone()]);
    assert_eq!(frames(&out), scaled(&raw, &h));
}

#[test]
fn binary_notes_reach_the_host() {
    let mut enc = BinaryEncoder::new();
    let mut bytes = enc.note("sensor id mismatch: 0x00");
    bytes.extend(enc.header(&test_header()));
    let mut dec = Decoder::new();
    decode(&mut dec, &bytes);
    assert_eq!(dec.form(), Some(WireForm::Binary));
    assert_eq!(
        dec.take_notes(),
        vec!["sensor id mismatch: 0x00".to_string()]
    );
}

#[test]
fn binary_rejects_bad_contents_with_a_good_crc() {
    // Build packets by hand: a header of version 9, a zero-channel header, a sample packet
    // with a partial frame, and a packet shorter than the minimum.
    fn raw_packet(kind: u8, seq: u16, payload: &[u8]) -> Vec<u8> {
        let mut raw = vec![kind];
        raw.extend(seq.to_le_bytes());
        raw.extend(payload);
        let crc = CRC16.checksum(&raw);
        raw.extend(crc.to_le_bytes());
        let mut out = vec![0; cobs::max_encoding_length(raw.len())];
        let n = cobs::encode(&raw, &mut out);
        out.truncate(n);
        out.push(0);
        out
    }
    let mut enc = BinaryEncoder::with_width(SampleWidth::I16);
    let good = enc.header(&test_header());
    let mut bad_version = good.clone();
    let mut bytes = Vec::new();
    {
        let mut v = bad_version.split_off(1);
        v.pop();
        let n = cobs::decode_in_place(&mut v).unwrap();
        v.truncate(n - 2);
        v[3] = 9;
        bytes.extend(raw_packet(PACKET_HEADER, 1, &v[3..]));
    }
    bytes.extend(raw_packet(
        PACKET_HEADER,
        2,
        &[1, 2, 0, 0, 0, 0, 0, 0, 0, 0, 0x59, 0x40],
    ));
    bytes.extend(&good); // seq 0: restart
    bytes.extend(raw_packet(PACKET_SAMPLES, 1, &[0, 0, 0, 0, 1, 2, 3]));
    bytes.extend(cobs_reference(&[1, 2], false));
    bytes.push(0);
    bytes.extend(raw_packet(PACKET_SAMPLES, 2, &[4, 0, 0, 0, 1, 0, 2, 0]));
    bytes.extend(raw_packet(0x7f, 3, b"future"));
    let mut dec = Decoder::with_form(WireForm::Binary);
    let out = decode(&mut dec, &bytes);
    assert_eq!(headers(&out).len(), 1);
    assert_eq!(frames(&out), vec![vec![0.01, 0.000244]]);
    let s = dec.stats();
    assert_eq!(s.packets_corrupt, 4);
    assert_eq!(s.packets_ok, 3);
    assert_eq!(s.resyncs, 2);
    assert_eq!(
        dec.frames_lost(),
        4,
        "frames 0..4 went with the rejected packet"
    );
}
