//! Tests of the serial codec: round trips, chunking, corruption, loss, resync, sniffing,
//! diagnosis, and a property test over arbitrary bytes.

use super::*;

/// splitmix64: a tiny deterministic generator so the tests need no extra crate.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in `0..n` (n > 0).
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }

    fn byte(&mut self) -> u8 {
        self.next() as u8
    }

    fn bytes(&mut self, n: usize) -> Vec<u8> {
        (0..n).map(|_| self.byte()).collect()
    }
}

fn decode(dec: &mut Decoder, bytes: &[u8]) -> Vec<Decoded> {
    let mut out = Vec::new();
    dec.push(bytes, &mut out);
    out
}

fn decode_chunked(
    mut dec: Decoder,
    bytes: &[u8],
    rng: &mut Rng,
    max_chunk: usize,
) -> (Vec<Decoded>, Decoder) {
    let mut out = Vec::new();
    let mut rest = bytes;
    while !rest.is_empty() {
        let n = (1 + rng.below(max_chunk)).min(rest.len());
        dec.push(&rest[..n], &mut out);
        rest = &rest[n..];
    }
    (out, dec)
}

fn frames(out: &[Decoded]) -> Vec<Vec<f64>> {
    out.iter()
        .filter_map(|d| match d {
            Decoded::Frame(v) => Some(v.clone()),
            Decoded::Header(_) | Decoded::Gap(_) => None,
        })
        .collect()
}

fn headers(out: &[Decoded]) -> Vec<StreamHeader> {
    out.iter()
        .filter_map(|d| match d {
            Decoded::Header(h) => Some(h.clone()),
            Decoded::Frame(_) | Decoded::Gap(_) => None,
        })
        .collect()
}

fn test_header() -> StreamHeader {
    StreamHeader {
        rate_hz: 3200.0,
        channels: vec!["force".into(), "accel_z".into()],
        units: vec!["N".into(), "g".into()],
        scales: vec![0.01, 0.000122],
    }
}

fn three_axis_header() -> StreamHeader {
    StreamHeader {
        rate_hz: 3200.0,
        channels: vec!["accel_x".into(), "accel_y".into(), "accel_z".into()],
        units: vec!["g".into(); 3],
        scales: vec![0.000122; 3],
    }
}

/// Deterministic raw frames of `channels` values, spanning most of the i16 range.
fn raw_frames(n: usize, channels: usize, seed: u64) -> Vec<Vec<i32>> {
    let mut rng = Rng(seed);
    (0..n)
        .map(|_| {
            (0..channels)
                .map(|_| i32::from(rng.next() as i16))
                .collect()
        })
        .collect()
}

fn scaled(raw: &[Vec<i32>], h: &StreamHeader) -> Vec<Vec<f64>> {
    raw.iter()
        .map(|f| {
            f.iter()
                .enumerate()
                .map(|(i, &v)| f64::from(v) * h.scale(i))
                .collect()
        })
        .collect()
}

fn text_stream(h: &StreamHeader, raw: &[Vec<i32>]) -> Vec<u8> {
    let mut s = encode_text_header(h);
    for f in raw {
        let v: Vec<f64> = f.iter().map(|&x| f64::from(x)).collect();
        s.extend(encode_text_frame(&v));
    }
    s
}

/// A header packet then sample packets of `per_packet` frames each; returns the stream and
/// the byte range of every packet (including its delimiter) after the header.
fn binary_stream(
    h: &StreamHeader,
    raw: &[Vec<i32>],
    per_packet: usize,
    width: SampleWidth,
) -> (Vec<u8>, Vec<std::ops::Range<usize>>) {
    let mut enc = BinaryEncoder::with_width(width);
    let mut s = enc.header(h);
    let mut ranges = Vec::new();
    for block in raw.chunks(per_packet) {
        let start = s.len();
        s.extend(enc.samples(block));
        ranges.push(start..s.len());
    }
    (s, ranges)
}

// --- building blocks -------------------------------------------------------------------------

#[test]
fn crc_is_the_catalogue_ibm_3740() {
    // The catalogue check value of CRC-16/IBM-3740 for "123456789".
    assert_eq!(CRC16.checksum(b"123456789"), 0x29b1);
}

/// COBS written out from the paper's description, to check that the crate frames the way
/// `protocol.md` says (and the reference firmware does). With `close_full_block`, a message
/// that ends on a full 254-byte block gets one more (empty) block, code 0x01, as a literal
/// reading of the algorithm gives; without it the encoding stops after the 0xFF block. Both
/// decode to the same message.
fn cobs_reference(data: &[u8], close_full_block: bool) -> Vec<u8> {
    let mut out = vec![0];
    let mut code_at = 0;
    let mut code = 1u8;
    for (i, &b) in data.iter().enumerate() {
        if b == 0 {
            out[code_at] = code;
            code_at = out.len();
            out.push(0);
            code = 1;
        } else {
            out.push(b);
            code += 1;
            if code == 0xff && (close_full_block || i + 1 < data.len()) {
                out[code_at] = code;
                code_at = out.len();
                out.push(0);
                code = 1;
            }
        }
    }
    out[code_at] = code;
    out
}

#[test]
fn cobs_crate_matches_the_reference_and_round_trips() {
    let mut rng = Rng(7);
    let mut cases: Vec<Vec<u8>> = vec![
        vec![0],
        vec![0, 0],
        vec![1],
        vec![0x11, 0x22, 0x00, 0x33],
        vec![1; 253],
        vec![1; 254],
        vec![1; 255],
        vec![1; 508],
        [vec![1; 254], vec![0]].concat(),
        [vec![0], vec![1; 254]].concat(),
    ];
    for _ in 0..300 {
        let n = 1 + rng.below(1000);
        let zero_odds = 1 + rng.below(300);
        cases.push(
            (0..n)
                .map(|_| {
                    if rng.below(zero_odds) == 0 {
                        0
                    } else {
                        rng.byte() | 1
                    }
                })
                .collect(),
        );
    }
    for data in cases {
        let mut enc = vec![0; cobs::max_encoding_length(data.len())];
        let n = cobs::encode(&data, &mut enc);
        enc.truncate(n);
        assert!(!enc.contains(&0));
        assert_eq!(enc, cobs_reference(&data, false), "len {}", data.len());
        for close in [false, true] {
            let mut e = cobs_reference(&data, close);
            let len = cobs::decode_in_place(&mut e).unwrap();
            assert_eq!(&e[..len], &data[..]);
        }
    }
}

// --- text form -------------------------------------------------------------------------------

#[test]
fn text_round_trip() {
    let h = test_header();
    let raw = raw_frames(50, 2, 1);
    let bytes = text_stream(&h, &raw);
    let mut dec = Decoder::with_form(WireForm::Text);
    let out = decode(&mut dec, &bytes);
    assert_eq!(out[0], Decoded::Header(h.clone()));
    assert_eq!(frames(&out), scaled(&raw, &h));
    let s = dec.stats();
    assert_eq!(s.frames, 50);
    assert_eq!(s.junk_lines, 0);
    assert_eq!(s.bytes, bytes.len() as u64);
    assert_eq!(dec.header(), Some(&h));
    assert_eq!(dec.diagnosis(), None);
}

#[test]
fn text_header_defaults_units_and_scales() {
    let mut dec = Decoder::with_form(WireForm::Text);
    let out = decode(&mut dec, b"# rate_hz=1000.5 channels=a,b\n3,-4.5\n");
    let h = StreamHeader {
        rate_hz: 1000.5,
        channels: vec!["a".into(), "b".into()],
        units: vec!["counts".into(), "counts".into()],
        scales: vec![1.0, 1.0],
    };
    assert_eq!(
        out,
        vec![Decoded::Header(h), Decoded::Frame(vec![3.0, -4.5])]
    );
}

#[test]
fn text_accepts_crlf_blank_lines_comments_and_spaces() {
    let mut dec = Decoder::with_form(WireForm::Text);
    let input = b"# booting, sensor ok\r\n\r\n# rate_hz=200 channels=x units=g scale=0.5 fw=3\r\n 2 \r\n\n+4.0\r\n1e1\n";
    let out = decode(&mut dec, input);
    assert_eq!(
        frames(&out),
        vec![vec![1.0], vec![2.0], vec![5.0]],
        "values are scaled by 0.5"
    );
    assert_eq!(dec.stats().junk_lines, 0);
    assert_eq!(dec.take_notes(), vec!["booting, sensor ok".to_string()]);
    assert!(dec.take_notes().is_empty());
}

#[test]
fn text_junk_lines_are_counted_and_skipped() {
    let mut dec = Decoder::with_form(WireForm::Text);
    let mut input = Vec::new();
    input.extend(b"1,2\n"); // before any header
    input.extend(b"# rate_hz=100 channels=a,b units=g\n"); // units count mismatch
    input.extend(b"# rate_hz=-1 channels=a,b\n"); // bad rate
    input.extend(b"# rate_hz=100 channels=a,b\n");
    input.extend(b"1\n"); // too few
    input.extend(b"1,2,3\n"); // too many
    input.extend(b"1,x\n"); // unparsable
    input.extend(b"nan,1\n"); // not finite
    input.extend(b"1,\n"); // empty field
    input.extend(b"\xff\xfe,1\n"); // not UTF-8
    input.extend(vec![b'7'; MAX_LINE_LEN + 10]); // overlong
    input.extend(b"\n");
    input.extend(b"5,6\n");
    let out = decode(&mut dec, &input);
    assert_eq!(frames(&out), vec![vec![5.0, 6.0]]);
    assert_eq!(headers(&out).len(), 1);
    let s = dec.stats();
    assert_eq!(s.junk_lines, 10);
    assert_eq!(s.frames, 1);
}

#[test]
fn text_repeated_header_is_emitted_again() {
    let mut dec = Decoder::with_form(WireForm::Text);
    let h1 = test_header();
    let h2 = three_axis_header();
    let mut input = text_stream(&h1, &raw_frames(3, 2, 2));
    input.extend(text_stream(&h1, &raw_frames(2, 2, 3)));
    input.extend(text_stream(&h2, &raw_frames(4, 3, 4)));
    let out = decode(&mut dec, &input);
    assert_eq!(headers(&out), vec![h1.clone(), h1, h2.clone()]);
    let f = frames(&out);
    assert_eq!(f.len(), 9);
    assert!(f[5..].iter().all(|v| v.len() == 3));
    assert_eq!(dec.header(), Some(&h2));
}

#[test]
fn text_header_encoder_sanitises_labels() {
    let h = StreamHeader {
        rate_hz: 3200.0,
        channels: vec!["tip force".into(), "a,b".into(), String::new()],
        units: vec!["N".into()],
        scales: vec![0.25],
    };
    let line = String::from_utf8(encode_text_header(&h)).unwrap();
    assert_eq!(
        line,
        "# rate_hz=3200 channels=tip_force,a_b,ch2 units=N,counts,counts scale=0.25,1,1\n"
    );
    let mut dec = Decoder::with_form(WireForm::Text);
    let out = decode(&mut dec, line.as_bytes());
    assert_eq!(headers(&out)[0].channels, vec!["tip_force", "a_b", "ch2"]);
}

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
