//! Peak picking: local maxima by topographic prominence above an estimated noise floor.

use super::ModeConfig;

/// A candidate peak on the curve.
#[derive(Debug, Clone, PartialEq)]
pub struct Peak {
    pub index: usize,
    pub prominence_db: f64,
    pub above_floor_db: f64,
}

/// Lines inside the band, as an index range.
pub fn band_range(freqs: &[f64], band: (f64, f64)) -> std::ops::Range<usize> {
    let lo = freqs.partition_point(|&f| f < band.0);
    let hi = freqs.partition_point(|&f| f <= band.1);
    lo..hi.max(lo)
}

/// Noise floor estimate in dB per line: the 25th percentile of the curve over a window of
/// +-1/2 octave, evaluated on a coarse log grid and interpolated (peaks occupy little of
/// such a window, so they barely lift the floor): common practice, no source.
pub fn noise_floor(freqs: &[f64], db: &[f64], range: std::ops::Range<usize>) -> Vec<f64> {
    let mut floor = vec![f64::NAN; db.len()];
    if range.is_empty() {
        return floor;
    }
    let f_lo = freqs[range.start].max(freqs.get(1).copied().unwrap_or(1.0));
    let f_hi = freqs[range.end - 1].max(f_lo * 1.001);
    let points = 48;
    let grid: Vec<(f64, f64)> = (0..points)
        .map(|i| {
            let f = f_lo * (f_hi / f_lo).powf(i as f64 / (points - 1) as f64);
            let w = band_range(freqs, (f / 2f64.sqrt(), f * 2f64.sqrt()));
            let w = w.start.max(range.start)..w.end.min(range.end);
            let mut vals: Vec<f64> = db[w].to_vec();
            // The value a sort would put at the quarter, without sorting the rest.
            let k = vals.len() / 4;
            let q = if k < vals.len() {
                *vals.select_nth_unstable_by(k, f64::total_cmp).1
            } else {
                f64::NAN
            };
            (f.ln(), q)
        })
        .collect();
    for i in range {
        let lf = freqs[i].max(f_lo).ln();
        let j = grid.partition_point(|g| g.0 < lf).clamp(1, points - 1);
        let (a, b) = (grid[j - 1], grid[j]);
        let t = ((lf - a.0) / (b.0 - a.0)).clamp(0.0, 1.0);
        floor[i] = a.1 + t * (b.1 - a.1);
    }
    floor
}

/// Topographic prominence of every line of `range` taken as a maximum: its height over
/// the higher of the lowest points between it and the nearest strictly higher ground on
/// either side (or the range's end when there is none). Made in one pass each way with a
/// stack of the lines still waiting for higher ground, each holding the lowest point of
/// the stretch it stands for, so a long falling curve with many small maxima costs no
/// more than a short one; exactly the minima a walk out from each line finds.
fn prominences(db: &[f64], range: &std::ops::Range<usize>) -> Vec<f64> {
    let n = range.len();
    let x = &db[range.clone()];
    // Lowest point from the line back to (not including) the nearest higher line.
    let lowest_back = |order: &mut dyn Iterator<Item = usize>| {
        let mut low = vec![0.0; n];
        let mut stack: Vec<(usize, f64)> = Vec::new();
        for i in order {
            let mut m = x[i];
            while let Some(&(t, tm)) = stack.last() {
                if x[t] > x[i] {
                    break;
                }
                m = m.min(tm);
                stack.pop();
            }
            low[i] = m;
            stack.push((i, m));
        }
        low
    };
    let left = lowest_back(&mut (0..n));
    let right = lowest_back(&mut (0..n).rev());
    (0..n).map(|i| x[i] - left[i].max(right[i])).collect()
}

/// Every peak in the configured band that stands `min_prominence_db` over its surroundings
/// and `min_above_floor_db` over the noise floor, in frequency order (no limit on the
/// count here: the mode finder applies it after its own tests).
pub fn pick(freqs: &[f64], db: &[f64], cfg: &ModeConfig) -> Vec<Peak> {
    let range = band_range(freqs, cfg.band_hz);
    if range.len() < 3 {
        return Vec::new();
    }
    let floor = noise_floor(freqs, db, range.clone());
    let prominence = prominences(db, &range);
    let peaks: Vec<Peak> = (range.start + 1..range.end - 1)
        .filter(|&i| db[i] > db[i - 1] && db[i] >= db[i + 1])
        .filter_map(|i| {
            let prominence_db = prominence[i - range.start];
            let above_floor_db = db[i] - floor[i];
            (prominence_db >= cfg.min_prominence_db && above_floor_db >= cfg.min_above_floor_db)
                .then_some(Peak {
                    index: i,
                    prominence_db,
                    above_floor_db,
                })
        })
        .collect();
    peaks
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The walk out from one line that `prominences` replaces, as the definition reads.
    fn walked(db: &[f64], i: usize, range: &std::ops::Range<usize>) -> f64 {
        let h = db[i];
        let mut left_min = h;
        let mut j = i;
        while j > range.start {
            j -= 1;
            if db[j] > h {
                break;
            }
            left_min = left_min.min(db[j]);
        }
        let mut right_min = h;
        let mut j = i + 1;
        while j < range.end {
            if db[j] > h {
                break;
            }
            right_min = right_min.min(db[j]);
            j += 1;
        }
        h - left_min.max(right_min)
    }

    /// Equal, bit for bit, to the walk on rough curves with plateaus and ties, over
    /// sub-ranges, and a known case by hand.
    #[test]
    fn one_pass_prominence_equals_the_walk() {
        let mut state = 0x9e37_79b9_7f4a_7c15_u64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        for case in 0..40 {
            let n = 5 + (next() % 400) as usize;
            // Coarse levels make ties and plateaus common; a slope makes long walks.
            let db: Vec<f64> = (0..n)
                .map(|i| (next() % 7) as f64 - 0.05 * i as f64 * (case % 3) as f64)
                .collect();
            let a = (next() % 3) as usize;
            let b = n - (next() % 3) as usize;
            let range = a..b.max(a);
            let fast = prominences(&db, &range);
            for i in range.clone() {
                assert_eq!(fast[i - a], walked(&db, i, &range), "case {case} line {i}");
            }
        }
        // By hand: 0 3 1 5 2 4 0: the 3 stands 2 over its saddle (1), the 4 stands 2 over
        // the 2, the 5 over the higher of its ends' lowest points (0 and 0): 5.
        let db = [0.0, 3.0, 1.0, 5.0, 2.0, 4.0, 0.0];
        let p = prominences(&db, &(0..7));
        assert_eq!((p[1], p[3], p[5]), (2.0, 5.0, 2.0));
    }
}
