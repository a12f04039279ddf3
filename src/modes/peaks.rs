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
            vals.sort_by(f64::total_cmp);
            let q = vals.get(vals.len() / 4).copied().unwrap_or(f64::NAN);
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

/// Topographic prominence of the maximum at `i` within `range`: its height over the higher
/// of the lowest points between it and the nearest higher ground on either side.
fn prominence(db: &[f64], i: usize, range: &std::ops::Range<usize>) -> f64 {
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

/// Every peak in the configured band that stands `min_prominence_db` over its surroundings
/// and `min_above_floor_db` over the noise floor, in frequency order (no limit on the
/// count here: the mode finder applies it after its own tests).
pub fn pick(freqs: &[f64], db: &[f64], cfg: &ModeConfig) -> Vec<Peak> {
    let range = band_range(freqs, cfg.band_hz);
    if range.len() < 3 {
        return Vec::new();
    }
    let floor = noise_floor(freqs, db, range.clone());
    let peaks: Vec<Peak> = (range.start + 1..range.end - 1)
        .filter(|&i| db[i] > db[i - 1] && db[i] >= db[i + 1])
        .filter_map(|i| {
            let prominence_db = prominence(db, i, &range);
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
