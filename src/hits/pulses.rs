//! Double-hit tests: a second impact anywhere in a record, before or after the strongest.
//!
//! With a force channel the pulses are seen directly. Without one, the response is
//! whitened by a linear predictor fitted to the record itself (Burg's method, Burg 1975,
//! *Maximum entropy spectral analysis*, PhD thesis, Stanford; as in Kay 1988, *Modern
//! Spectral Estimation*, sec. 7.4): a free decay of a linear structure, hum and drift are
//! all predictable from the recent past, so the prediction error stays at the noise level
//! through the structure's own decay however slow it is; an impact is not predictable and
//! leaves a burst in the error whose size scales with the impact's force. The test is
//! therefore the same ratio test as on a force channel, insensitive to low-frequency decays,
//! beating of close modes and mains hum.

/// Order of the whitening predictor: enough for several modes, hum and the chain's
/// filters at rates from 3.2 to 48 kHz (chosen on the independent recordings in
/// `tests/independent/`, where orders from 12 to 24 passed every clean tap).
const PREDICTOR_ORDER: usize = 12;

/// The blind zone after the strongest burst, s. The burst of one impact lasts as long as
/// the impact plus the chain's filters (anti-alias, AC coupling, the sensor's own low-pass),
/// and its prediction error carries tails of 10-15 % for 2-4 ms on the independent
/// recordings; a second impact inside this time is not told apart from them. With a force
/// channel there is no such zone.
pub const BLIND_S: f64 = 0.004;

/// A pulse found besides the strongest one.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SecondPulse {
    /// Signed distance from the strongest pulse, samples (negative: before it).
    pub offset: i64,
    /// Its size over the strongest pulse's (fraction).
    pub ratio: f64,
}

impl SecondPulse {
    pub fn describe(&self, fs: f64, what: &str) -> String {
        let ms = 1000.0 * self.offset.unsigned_abs() as f64 / fs;
        let when = if self.offset < 0 { "before" } else { "after" };
        format!(
            "a second impact {ms:.1} ms {when} the strongest, at {:.0} % of its {what}",
            100.0 * self.ratio
        )
    }
}

/// The largest value above zero (0 when none is), NaN left out. Eight running maxima
/// side by side (the compiler makes them vector lanes) give exactly the one-by-one result:
/// a maximum is exact whatever the order.
fn max_above_zero(v: &[f64]) -> f64 {
    let mut lanes = [0.0f64; 8];
    let mut chunks = v.chunks_exact(8);
    for c in &mut chunks {
        for (l, &x) in lanes.iter_mut().zip(c) {
            *l = if x > *l { x } else { *l };
        }
    }
    (lanes.iter().chain(chunks.remainder())).fold(0.0f64, |m, &x| if x > m { x } else { m })
}

/// The largest `|x - base|` over `v` (0 for none; NaN left out), in vector lanes as
/// `max_above_zero`: exactly `v.iter().fold(0.0, |m, x| m.max((x - base).abs()))`.
pub(super) fn peak_deviation(v: &[f64], base: f64) -> f64 {
    let mut lanes = [0.0f64; 8];
    let mut chunks = v.chunks_exact(8);
    for c in &mut chunks {
        for (l, &x) in lanes.iter_mut().zip(c) {
            let d = (x - base).abs();
            *l = if d > *l { d } else { *l };
        }
    }
    let rest = chunks.remainder().iter().map(|x| (x - base).abs());
    (lanes.into_iter().chain(rest)).fold(0.0f64, |m, x| if x > m { x } else { m })
}

/// The first index of the largest value above zero and that value; (0, 0) when none is.
/// The largest value is found first, then its first index: the same as keeping the index
/// along in one pass, faster.
fn argmax(v: &[f64]) -> (usize, f64) {
    let m = max_above_zero(v);
    if m > 0.0 {
        (v.iter().position(|&x| x == m).unwrap_or(0), m)
    } else {
        (0, 0.0)
    }
}

/// The strongest pulse of `level` (a non-negative envelope) and the largest value outside
/// its region. The region ends where the level falls under `edge` of the peak, or at a
/// valley under half the peak after which it rises again (a second pulse arriving before
/// the first has died away); `guard` values after it are excluded too.
fn other_pulse(level: &[f64], edge: f64, guard: usize, floor: f64) -> Option<SecondPulse> {
    let (p, peak) = argmax(level);
    if peak <= 0.0 {
        return None;
    }
    let ends = |i: usize, next: Option<&f64>| {
        level[i] < edge * peak || (level[i] < 0.5 * peak && next.is_some_and(|&n| n > level[i]))
    };
    let a = (0..p)
        .rev()
        .find(|&i| ends(i, i.checked_sub(1).map(|k| &level[k])))
        .map_or(0, |i| i + 1);
    let b = (p + 1..level.len())
        .find(|&i| ends(i, level.get(i + 1)))
        .unwrap_or(level.len())
        + guard;
    // The largest value outside the region: before it, then after it (the first of
    // equal values wins, as in one pass over both).
    let before = argmax(&level[..a]);
    let after = argmax(&level[b.min(level.len())..]);
    let (q, qv) = if after.1 > before.1 {
        (after.0 + b, after.1)
    } else {
        before
    };
    (qv > floor).then_some(SecondPulse {
        offset: q as i64 - p as i64,
        ratio: qv / peak,
    })
}

/// A second force pulse above `fraction` of the strongest (and above `noise_limit`),
/// before or after it.
pub fn second_force_pulse(force: &[f64], fraction: f64, noise_limit: f64) -> Option<SecondPulse> {
    let level: Vec<f64> = force.iter().map(|v| v.abs()).collect();
    let peak = max_above_zero(&level);
    other_pulse(&level, 0.05, 0, (fraction * peak).max(noise_limit))
}

/// Burg's method: prediction-error filter `a` (a[0] = 1) of order `p` for `x`.
pub fn burg(x: &[f64], p: usize) -> Vec<f64> {
    let n = x.len();
    let mut a = vec![1.0];
    if n <= p + 1 {
        return a;
    }
    let mut f = x.to_vec();
    let mut b = x.to_vec();
    for m in 0..p {
        let (mut num, mut den) = (0.0, 0.0);
        for i in m + 1..n {
            num += f[i] * b[i - 1];
            den += f[i] * f[i] + b[i - 1] * b[i - 1];
        }
        if den <= 0.0 {
            break;
        }
        let k = -2.0 * num / den;
        for i in (m + 1..n).rev() {
            let fi = f[i];
            f[i] = fi + k * b[i - 1];
            b[i] = b[i - 1] + k * fi;
        }
        let prev = a.clone();
        a.push(0.0);
        for i in 1..=m + 1 {
            a[i] = prev.get(i).copied().unwrap_or(0.0) + k * prev[m + 1 - i];
        }
    }
    a
}

/// Prediction error of `x` through the filter `a`, as RMS per window of `win` samples.
fn error_envelope(x: &[f64], a: &[f64], win: usize) -> (usize, Vec<f64>) {
    let p = a.len() - 1;
    let err: Vec<f64> = (p..x.len())
        .map(|n| (0..=p).map(|i| a[i] * x[n - i]).sum::<f64>())
        .collect();
    let energy: Vec<f64> = err
        .chunks(win)
        .map(|c| c.iter().map(|v| v * v).sum::<f64>() / c.len() as f64)
        .collect();
    // A burst's energy is summed over three windows, so an impact that falls between
    // samples or across a window edge is measured whole.
    let env = (0..energy.len())
        .map(|i| {
            let lo = i.saturating_sub(1);
            let hi = (i + 2).min(energy.len());
            energy[lo..hi].iter().sum::<f64>().sqrt()
        })
        .collect();
    (p, env)
}

/// Without a force channel: bursts of the response's prediction error (see the module
/// notes). `win` samples per envelope window (about 0.5 ms); a second burst counts when it
/// stands above `fraction` of the strongest and well above the error's median level (the
/// noise). `fs` in Hz.
pub fn second_response_pulse(
    resp: &[f64],
    fraction: f64,
    win: usize,
    fs: f64,
) -> Option<SecondPulse> {
    let win = win.max(1);
    let order = PREDICTOR_ORDER;
    if resp.len() < order + 4 * win {
        return None;
    }
    // First pass: where is the strongest burst? Then the predictor is fitted to the free
    // decay after it (a sum of damped sinusoids and noise, which a predictor models well),
    // so the decay leaves little error of its own that could pass for a burst. A burst
    // found inside that stretch would bias the fit, so the fit is then redone after it.
    let (_, env) = error_envelope(resp, &burg(resp, order), win);
    let mut fit_from = (argmax(&env).0 + 1) * win + order + (0.004 * fs) as usize;
    let mut found = None;
    for _ in 0..2 {
        let a = if resp.len() > fit_from + 20 * order {
            burg(&resp[fit_from..], order)
        } else {
            burg(resp, order)
        };
        let (p, env) = error_envelope(resp, &a, win);
        let mut sorted = env.clone();
        sorted.sort_by(f64::total_cmp);
        let noise = sorted[sorted.len() / 2];
        let peak = sorted[sorted.len() - 1];
        // A second burst must stand 8 times over the median error (the noise) as well as
        // over the fraction of the strongest.
        let guard = order
            .div_ceil(2 * win)
            .max((BLIND_S * fs / win as f64).ceil() as usize);
        found = other_pulse(&env, 0.2, guard, (fraction * peak).max(8.0 * noise)).map(|f| (f, p));
        let Some((f, _)) = found else { break };
        let at = ((argmax(&env).0 as i64 + f.offset).max(0) as usize) * win + p;
        if at < fit_from {
            break;
        }
        fit_from = at + win + order + (0.004 * fs) as usize;
    }
    found.map(|(f, _)| SecondPulse {
        offset: f.offset * win as i64,
        ratio: f.ratio,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Decaying modes sampled at `fs`, struck at the given times with the given forces:
    /// an accelerometer's impulse response (each mode starts at its full amplitude, as an
    /// acceleration does under an impact), exact at the samples.
    fn decay(fs: f64, modes: &[(f64, f64)], taps: &[(f64, f64)], seconds: f64) -> Vec<f64> {
        let n = (seconds * fs) as usize;
        (0..n)
            .map(|i| {
                let t = i as f64 / fs;
                taps.iter()
                    .filter(|(t0, _)| t >= *t0)
                    .map(|(t0, a)| {
                        let dt = t - t0;
                        modes
                            .iter()
                            .map(|(f, z)| {
                                let w = 2.0 * std::f64::consts::PI * f;
                                a * (-z * w * dt).exp() * (w * dt).cos()
                            })
                            .sum::<f64>()
                    })
                    .sum::<f64>()
            })
            .collect()
    }

    /// The lane-wise maxima give what the plain one-pass folds give, bit for bit, on
    /// lengths around the lane count, with ties, signed zeros, NaN and infinities.
    #[test]
    fn lane_maxima_equal_plain_folds() {
        let mut rng = crate::rng::Rng::new(7);
        let specials = [0.0, -0.0, f64::NAN, f64::INFINITY, -3.0, 2.5];
        for len in 0..40 {
            for round in 0..20 {
                let v: Vec<f64> = (0..len)
                    .map(|_| {
                        let r = rng.next_u64();
                        match (round % 3, r % 4) {
                            (0, _) => rng.normal(),
                            (1, 0) => specials[(r >> 8) as usize % specials.len()],
                            (1, _) => ((r >> 8) % 3) as f64,
                            _ => -rng.uniform(),
                        }
                    })
                    .collect();
                let plain =
                    v.iter().enumerate().fold(
                        (0, 0.0f64),
                        |(i, m), (j, &x)| {
                            if x > m { (j, x) } else { (i, m) }
                        },
                    );
                let got = argmax(&v);
                assert_eq!((got.0, got.1.to_bits()), (plain.0, plain.1.to_bits()));
                for base in [0.0, 0.5, -1.0] {
                    let plain = v.iter().fold(0.0f64, |m, x| m.max((x - base).abs()));
                    let got = peak_deviation(&v, base);
                    assert_eq!(got.to_bits(), plain.to_bits(), "{v:?} base {base}");
                }
            }
        }
    }

    #[test]
    fn burg_recovers_a_known_ar2_process() {
        // x[n] = 1.6 x[n-1] - 0.8 x[n-2] + e[n]: the filter is [1, -1.6, 0.8] (the
        // defining equation of an AR(2) process; Kay 1988, sec. 5.3).
        let mut rng = crate::rng::Rng::new(3);
        let mut x = vec![0.0f64; 20_000];
        for n in 2..x.len() {
            x[n] = 1.6 * x[n - 1] - 0.8 * x[n - 2] + rng.normal();
        }
        let a = burg(&x, 2);
        assert!(
            (a[1] + 1.6).abs() < 0.02 && (a[2] - 0.8).abs() < 0.02,
            "{a:?}"
        );
    }

    #[test]
    fn slow_decays_are_single_and_second_taps_are_found() {
        // Clean taps of a 70-150 Hz structure at 3.2, 8 and 48 kHz must pass (the old
        // onset test tripped on the decay itself); taps 5-15 ms later at 20-60 % are found,
        // one inside the blind zone is not.
        for fs in [3200.0, 8000.0, 48000.0] {
            let modes = [(72.0, 0.01), (148.0, 0.012), (612.0, 0.02)];
            let mut rng = crate::rng::Rng::new(fs as u64);
            let noisy = |mut x: Vec<f64>, rng: &mut crate::rng::Rng| {
                for v in &mut x {
                    *v += 1e-3 * rng.normal() + 0.02 * (2.0 * std::f64::consts::PI * 50.0).sin();
                }
                x
            };
            let clean = noisy(decay(fs, &modes, &[(0.01, 1.0)], 1.0), &mut rng);
            assert_eq!(
                second_response_pulse(&clean, 0.1, (fs * 0.0005) as usize, fs),
                None,
                "clean tap at {fs} Hz"
            );
            let early = noisy(
                decay(fs, &modes, &[(0.01, 1.0), (0.01 + 0.5 * BLIND_S, 0.3)], 1.0),
                &mut rng,
            );
            assert_eq!(
                second_response_pulse(&early, 0.1, (fs * 0.0005) as usize, fs),
                None,
                "inside the blind zone at {fs} Hz"
            );
            for (gap, size) in [(0.0065, 0.3), (0.008, 0.2), (0.015, 0.6)] {
                let twice = noisy(
                    decay(fs, &modes, &[(0.01, 1.0), (0.01 + gap, size)], 1.0),
                    &mut rng,
                );
                let found = second_response_pulse(&twice, 0.1, (fs * 0.0005) as usize, fs);
                let found = found.unwrap_or_else(|| panic!("{fs} Hz, {gap} s, {size}"));
                assert!(
                    (found.ratio - size).abs() < 0.05,
                    "{fs} Hz: {found:?} for {size}"
                );
            }
        }
    }

    #[test]
    fn a_stronger_second_force_pulse_is_found_before_the_peak() {
        let mut f = vec![0.0; 2000];
        for (i, v) in f.iter_mut().enumerate().skip(100).take(20) {
            *v = 3.0 * (std::f64::consts::PI * (i - 100) as f64 / 20.0).sin();
        }
        for (i, v) in f.iter_mut().enumerate().skip(400).take(20) {
            *v = 10.0 * (std::f64::consts::PI * (i - 400) as f64 / 20.0).sin();
        }
        let p = second_force_pulse(&f, 0.1, 0.0).expect("the weaker first tap");
        assert!(p.offset < 0 && (p.ratio - 0.3).abs() < 0.02, "{p:?}");
        f[100..120].iter_mut().for_each(|v| *v = 0.0);
        assert_eq!(second_force_pulse(&f, 0.1, 0.0), None);
    }
}
