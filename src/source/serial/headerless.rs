//! Streams that send no header: a sketch printing bare numbers, one line per sample, with or
//! without a timestamp column. The columns are named on the command line; with a timestamp
//! the rate is measured and each sample is placed by its time (missing samples become a gap,
//! as lost packets do); without one the given rate is trusted.

use crate::error::{Error, Result};

/// The columns of a headerless stream, as given by `--columns` (e.g. `t@us,force,accel_z`).
#[derive(Debug, Clone, PartialEq)]
pub struct Columns {
    /// Every column in line order, the timestamp included.
    pub names: Vec<String>,
    /// The timestamp column and its tick in seconds (`@us`: 1e-6, `@ms`: 1e-3).
    pub time: Option<(usize, f64)>,
}

impl Columns {
    pub fn parse(spec: &str) -> Result<Self> {
        let mut names = Vec::new();
        let mut time = None;
        for (i, raw) in spec.split(',').enumerate() {
            let raw = raw.trim();
            let (name, tick) = match raw.split_once('@') {
                Some((n, "us")) => (n, Some(1e-6)),
                Some((n, "ms")) => (n, Some(1e-3)),
                Some((_, other)) => {
                    return Err(Error::new(format!(
                        "'{raw}' in --columns marks a timestamp in '{other}'; write NAME@us or NAME@ms"
                    )));
                }
                None => (raw, None),
            };
            let valid = !name.is_empty()
                && name.len() <= 32
                && name
                    .chars()
                    .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-');
            if !valid {
                return Err(Error::new(format!(
                    "'{raw}' in --columns is not a column name (letters, digits, _ and - only, at most 32)"
                )));
            }
            if let Some(t) = tick {
                if time.is_some() {
                    crate::fail!("--columns marks more than one timestamp column");
                }
                time = Some((i, t));
            }
            names.push(name.to_string());
        }
        let data = names.len() - usize::from(time.is_some());
        if data == 0 {
            crate::fail!("--columns names no data column besides the timestamp");
        }
        Ok(Columns { names, time })
    }

    /// The data columns' names (the timestamp left out).
    pub fn data_names(&self) -> Vec<String> {
        self.names
            .iter()
            .enumerate()
            .filter(|(i, _)| self.time.is_none_or(|(t, _)| t != *i))
            .map(|(_, n)| n.clone())
            .collect()
    }
}

/// Where a timestamped sample goes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Placed {
    /// The next sample, after `missing` samples that never came.
    Next { missing: u64 },
    /// Not after the previous sample (repeated or backwards time): dropped.
    Stale,
}

/// Places timestamped samples on the stream's grid and keeps the rate statistics.
#[derive(Debug, Clone)]
pub struct Timing {
    pub tick_s: f64,
    /// The grid's sample period, s.
    pub period_s: f64,
    first: Option<f64>,
    last_raw: f64,
    wraps: f64,
    last_k: i64,
    /// Samples placed, missing samples, and the sum of squared step deviations (periods).
    pub placed: u64,
    pub missing: u64,
    pub dropped: u64,
    sum_sq: f64,
    last_t: f64,
}

/// Timestamps from `micros()` on small boards wrap at 2^32 ticks.
const WRAP: f64 = 4_294_967_296.0;

impl Timing {
    pub fn new(tick_s: f64, period_s: f64) -> Self {
        Timing {
            tick_s,
            period_s,
            first: None,
            last_raw: 0.0,
            wraps: 0.0,
            last_k: -1,
            placed: 0,
            missing: 0,
            dropped: 0,
            sum_sq: 0.0,
            last_t: 0.0,
        }
    }

    /// The time of a raw timestamp in seconds from the first, unwrapped.
    fn seconds(&mut self, raw: f64) -> f64 {
        if self.first.is_some() && raw < self.last_raw - WRAP / 2.0 {
            self.wraps += WRAP;
        }
        self.last_raw = raw;
        let t = (raw + self.wraps) * self.tick_s;
        let first = *self.first.get_or_insert(t);
        t - first
    }

    /// Place the next sample. Each is placed from the one before it (a whole number of
    /// periods later), so a small error in the period does not build up into false gaps
    /// over a long run; a step of 1.5 periods or more means samples went missing.
    pub fn place(&mut self, raw: f64) -> Placed {
        let t = self.seconds(raw);
        if self.placed == 0 {
            self.placed = 1;
            self.last_k = 0;
            self.last_t = t;
            return Placed::Next { missing: 0 };
        }
        let step = (t - self.last_t) / self.period_s;
        if step < 0.5 {
            self.dropped += 1;
            return Placed::Stale;
        }
        let n = step.round();
        let missing = n as u64 - 1;
        self.last_k += n as i64;
        self.last_t = t;
        self.placed += 1;
        self.missing += missing;
        self.sum_sq += (step - n) * (step - n);
        Placed::Next { missing }
    }

    /// Mean rate over the samples so far (from their timestamps), Hz.
    pub fn mean_rate_hz(&self) -> Option<f64> {
        (self.placed > 1 && self.last_t > 0.0).then(|| self.last_k as f64 / self.last_t)
    }

    /// RMS deviation of the steps between samples from whole periods, as a fraction of
    /// the period.
    pub fn jitter(&self) -> f64 {
        if self.placed < 2 {
            return 0.0;
        }
        (self.sum_sq / (self.placed - 1) as f64).sqrt()
    }

    pub fn describe(&self) -> String {
        format!(
            "rate {} from the timestamps, jitter {:.1} % of a period, {} samples missing, {} out of order",
            self.mean_rate_hz()
                .map_or("unknown".to_string(), |r| format!("{r:.2} Hz")),
            100.0 * self.jitter(),
            self.missing,
            self.dropped
        )
    }
}

/// The sample period from a run of raw timestamps, s: the span over the number of whole
/// periods in it, counted with the median step (so a missing sample in the run does not
/// bias it, and timestamps rounded to whole ticks average out).
pub fn measure_period(raw: &[f64], tick_s: f64) -> Option<f64> {
    let steps: Vec<f64> = raw
        .windows(2)
        .map(|w| {
            let d = w[1] - w[0];
            if d < -WRAP / 2.0 { d + WRAP } else { d }
        })
        .collect();
    let mut positive: Vec<f64> = steps.iter().copied().filter(|d| *d > 0.0).collect();
    if positive.len() < 8 {
        return None;
    }
    positive.sort_by(f64::total_cmp);
    let median = positive[positive.len() / 2];
    let span: f64 = positive.iter().sum();
    let periods: f64 = positive.iter().map(|d| (d / median).round().max(1.0)).sum();
    Some(span / periods * tick_s)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_and_timestamps_are_read() {
        let c = Columns::parse("t@us, force ,accel_z").unwrap();
        assert_eq!(c.time, Some((0, 1e-6)));
        assert_eq!(c.data_names(), ["force", "accel_z"]);
        for bad in ["t@s,a", "t@us,u@ms,a", "t@us", "a,,b", "a b"] {
            assert!(Columns::parse(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn samples_are_placed_by_time_across_a_wrap_with_gaps() {
        // 1 kHz from micros() starting 3 ms before the 32-bit wrap, samples 5 to 7 lost,
        // one repeated.
        let start = WRAP - 3000.0;
        let mut raw: Vec<f64> = (0..20)
            .filter(|k| !(5..8).contains(k))
            .map(|k| (start + 1000.0 * k as f64 + if k % 2 == 0 { 20.0 } else { -20.0 }) % WRAP)
            .collect();
        raw.insert(10, raw[9]);
        let period = measure_period(&raw, 1e-6).unwrap();
        assert!((period - 1e-3).abs() < 5e-5, "{period}");
        let mut t = Timing::new(1e-6, 1e-3);
        let placed: Vec<Placed> = raw.iter().map(|&r| t.place(r)).collect();
        assert_eq!(placed[5], Placed::Next { missing: 3 });
        assert_eq!(placed[10], Placed::Stale);
        assert_eq!((t.missing, t.dropped, t.placed), (3, 1, 17));
        assert!((t.mean_rate_hz().unwrap() - 1000.0).abs() < 5.0);
        // Steps alternate 960 and 1040 us (+-20 us on each stamp): 4 % of a period.
        assert!((t.jitter() - 0.04).abs() < 0.004, "{}", t.jitter());
    }
}
