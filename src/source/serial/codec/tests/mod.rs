//! Tests of the serial codec: shared helpers, building blocks and the text form; the binary
//! form in `binary.rs`; chunking, sniffing, diagnosis and a property test in `sniffing.rs`.

mod binary;
mod sniffing;

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
