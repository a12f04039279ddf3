//! Unit tests of the verdicts: signed margins, depth without a jump, pack voltage and
//! throttle checks.

use super::*;

#[test]
fn margins_are_signed_and_relative_to_the_edge() {
    let b = Bands {
        bands: vec![Band {
            name: "rotation".into(),
            hz: (100.0, 200.0),
        }],
        near_pct: 10.0,
    };
    let v = judge(&b, 95.0).unwrap();
    assert_eq!(v.verdict, Verdict::Near);
    assert!((v.margin_pct - 5.0).abs() < 1e-12);
    let v = judge(&b, 230.0).unwrap();
    assert_eq!(v.verdict, Verdict::Clear);
    assert!((v.margin_pct - 15.0).abs() < 1e-12);
    let v = judge(&b, 110.0).unwrap();
    assert_eq!(v.verdict, Verdict::Inside);
    assert!((v.margin_pct + 10.0).abs() < 1e-12);
    let v = judge(&b, 190.0).unwrap();
    assert!((v.margin_pct + 5.0).abs() < 1e-12);
    // 140 Hz: 40 Hz from the lower edge (40 %), 60 Hz from the upper one (30 %): the
    // upper edge is nearer in percent although farther in Hz.
    let v = judge(&b, 140.0).unwrap();
    assert!((v.margin_pct + 30.0).abs() < 1e-12, "{v:?}");
}

#[test]
fn depth_has_no_jump_across_the_band() {
    let b = Bands {
        bands: vec![Band {
            name: "rotation".into(),
            hz: (100.0, 300.0),
        }],
        near_pct: 10.0,
    };
    let depths: Vec<f64> = (0..=2000)
        .map(|k| judge(&b, 100.0 + 0.1 * f64::from(k)).unwrap().margin_pct)
        .collect();
    // Neighbouring lines 0.1 Hz apart: depth changes by at most 0.1 % of the lower edge.
    for w in depths.windows(2) {
        assert!((w[0] - w[1]).abs() <= 0.1 + 1e-9, "{w:?}");
    }
    // Deepest where the two percentages meet: (f - 100)/100 = (300 - f)/300 -> f = 150.
    let deepest = judge(&b, 150.0).unwrap().margin_pct;
    assert!((deepest + 50.0).abs() < 1e-9, "{deepest}");
}

#[test]
fn pack_volts_and_throttle_in_percent() {
    let d = Drive::nameplate_volts(1300.0, 22.2, (35.0, 100.0), 3).unwrap();
    let n = Drive::nameplate(1300.0, 6, None, (35.0, 100.0), 3).unwrap();
    assert!((d.rpm_range().1 - n.rpm_range().1).abs() < 1e-9);
    assert_eq!(d.sagged_rotation_hz(), None);
    let e = Drive::nameplate(1300.0, 6, None, (0.2, 0.9), 3)
        .unwrap_err()
        .to_string();
    assert!(e.contains("did you mean 20:90?"), "{e}");
    let e = Drive::from_rpm((1e308, 1e308), 2).unwrap_err().to_string();
    assert!(e.contains("1e308") && e.len() < 200, "{e}");
    let mut both = n.clone();
    both.pack_volts = Some(22.2);
    assert!(both.check().unwrap_err().to_string().contains("not both"));
}
