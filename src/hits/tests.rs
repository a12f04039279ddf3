//! Tests of the hit detector: verdicts on simulated taps, every trigger judged, recovery.

use super::*;
use crate::signal::RoleChoice;
use crate::source::Source;
use crate::source::simulator::Simulator;
use crate::source::simulator::presets::preset;

/// The default trigger settings on `channel`.
fn trigger_on(channel: usize) -> TriggerConfig {
    TriggerConfig {
        channel,
        level: TriggerLevel::NoiseMultiple(10.0),
        pretrigger_s: 0.01,
        record_s: 1.0,
        holdoff_s: 0.2,
    }
}

/// All hits of a simulated run with the default trigger on the force (or response).
fn detect(plan: crate::source::simulator::BenchPlan, seconds: f64) -> Vec<Hit> {
    let mut sim = Simulator::new(plan, Some(seconds), true);
    let info = sim.info().clone();
    let roles = RoleChoice::default().resolve(&info).unwrap();
    let trig = trigger_on(roles.force.unwrap_or(roles.response));
    let mut d = HitDetector::new(&info, roles, trig, CheckConfig::default());
    let mut hits = Vec::new();
    while let Some(b) = sim.next_block().unwrap() {
        d.push(&b, &mut hits);
    }
    hits
}

fn verdicts(no_force: bool, double_chance: f64) -> Vec<Verdict> {
    let mut plan = preset("tm9-arm-solid", 8).unwrap();
    plan.hammer.double_hit_chance = double_chance;
    if no_force {
        plan.sensors.remove(0);
    }
    detect(plan, 14.0).iter().map(|h| h.verdict).collect()
}

#[test]
fn clean_taps_are_accepted_with_and_without_force() {
    for no_force in [false, true] {
        let v = verdicts(no_force, 0.0);
        assert!(v.len() >= 5, "{v:?}");
        assert!(
            v.iter().all(|v| *v == Verdict::Accepted),
            "no_force={no_force}: {v:?}"
        );
    }
}

#[test]
fn bounced_taps_are_double_hits_with_and_without_force() {
    for no_force in [false, true] {
        let v = verdicts(no_force, 1.0);
        let doubles = v.iter().filter(|v| **v == Verdict::DoubleHit).count();
        // The simulator's bounces come 3.5-12.5 ms after the first impact; without a
        // force channel those inside the blind zone (`pulses::BLIND_S` plus the burst
        // itself, about 6 ms) are not told apart, so about half are found.
        let share = if no_force { 4 } else { 8 };
        assert!(
            doubles * 10 >= v.len() * share,
            "no_force={no_force}: {v:?}"
        );
    }
}

#[test]
fn clipping_is_overload() {
    let mut plan = preset("tm9-arm-solid", 8).unwrap();
    plan.hammer.peak_n = 60.0;
    let hits = detect(plan, 5.0);
    assert!(!hits.is_empty());
    assert!(
        hits.iter().all(|h| h.verdict == Verdict::Overload),
        "{:?}",
        hits.iter().map(|h| &h.reason).collect::<Vec<_>>()
    );
    assert!(hits[0].reason.contains("full scale"));
}

/// A response-only stream at 3.2 kHz: taps (time s, size) on a 72 Hz and a 148 Hz mode,
/// noise, and optionally exact zeros over a stretch (digital silence).
fn stream(taps: &[(f64, f64)], seconds: f64, silence: Option<(f64, f64)>) -> Vec<Hit> {
    let fs = 3200.0;
    let mut rng = crate::rng::Rng::new(11);
    let n = (seconds * fs) as usize;
    let x: Vec<f64> = (0..n)
        .map(|i| {
            let t = i as f64 / fs;
            if silence.is_some_and(|(a, b)| t >= a && t < b) {
                return 0.0;
            }
            let ring: f64 = taps
                .iter()
                .filter(|(t0, _)| t >= *t0)
                .map(|(t0, a)| {
                    let dt = t - t0;
                    [(72.0f64, 0.01f64), (148.0, 0.012)]
                        .iter()
                        .map(|(f, z)| {
                            let w = 2.0 * std::f64::consts::PI * f;
                            a * (-z * w * dt).exp() * (w * dt).cos()
                        })
                        .sum::<f64>()
                })
                .sum();
            ring + 1e-3 * rng.normal()
        })
        .collect();
    let info = StreamInfo {
        source: "test".into(),
        sample_rate: fs,
        channels: vec![crate::signal::ChannelInfo {
            name: "a".into(),
            role: crate::signal::Role::Response,
            unit: "g".into(),
            scale: 1.0,
            full_scale: Some(16.0),
        }],
    };
    let roles = Roles {
        force: None,
        response: 0,
        base: None,
    };
    let trig = trigger_on(0);
    let mut d = HitDetector::new(&info, roles, trig, CheckConfig::default());
    let mut hits = Vec::new();
    // Odd block sizes: the outcome must not depend on them.
    for (i, chunk) in x.chunks(997).enumerate() {
        let block = Block {
            start: (i * 997) as u64,
            channels: vec![chunk.to_vec()],
        };
        d.push(&block, &mut hits);
    }
    d.finish(&mut hits);
    hits
}

#[test]
fn every_tap_gets_a_verdict() {
    // 1.1 s after a tap is inside the dead time after its record: "too soon" (inside
    // the record it would be a double hit); a tap 0.4 s before the end
    // is cut short; the others are accepted.
    let hits = stream(&[(1.0, 1.0), (2.1, 1.0), (4.0, 1.0), (6.6, 1.0)], 7.0, None);
    let v: Vec<Verdict> = hits.iter().map(|h| h.verdict).collect();
    assert_eq!(
        v,
        [
            Verdict::Accepted,
            Verdict::TooSoon,
            Verdict::Accepted,
            Verdict::CutShort
        ],
        "{:?}",
        hits.iter().map(|h| &h.reason).collect::<Vec<_>>()
    );
    assert!(
        hits[1].reason.contains("1.10 s after"),
        "{}",
        hits[1].reason
    );
    assert!(hits[3].record[0].is_empty() && !hits[3].verdict.has_record());
}

#[test]
fn the_trigger_recovers_after_digital_silence() {
    // Two seconds of exact zeros make the measured floor zero; without a lower bound
    // the noise after them would fire the trigger as if it were a tap.
    let hits = stream(&[(5.0, 1.0)], 7.0, Some((0.5, 2.5)));
    assert_eq!(
        hits.len(),
        1,
        "{:?}",
        hits.iter()
            .map(|h| (h.trigger, &h.reason))
            .collect::<Vec<_>>()
    );
    assert_eq!(hits[0].verdict, Verdict::Accepted, "{}", hits[0].reason);
}
