//! A channel's idle statistics for the trigger: the median over the last `CHUNK_HISTORY`
//! chunks of `CHUNK` samples of each chunk's mean (the baseline) and RMS (the noise floor).
//!
//! The chunk values are also kept sorted, one insertion and one removal per chunk, so a
//! median is read off instead of selected anew from the history every chunk; it is the
//! same value a selection gives (`median_of`, the reference the tests hold it to).

use std::collections::VecDeque;

pub const CHUNK: usize = 256;
const CHUNK_HISTORY: usize = 32;

/// The last `CHUNK_HISTORY` values in arrival order and in `f64::total_cmp` order.
#[derive(Debug, Clone, Default)]
struct Window {
    fifo: VecDeque<f64>,
    sorted: Vec<f64>,
}

impl Window {
    fn push(&mut self, v: f64) {
        if self.fifo.len() == CHUNK_HISTORY
            && let Some(old) = self.fifo.pop_front()
            && let Ok(i) = self.sorted.binary_search_by(|x| x.total_cmp(&old))
        {
            // total_cmp is equal only for identical bits: any match is the one to remove.
            self.sorted.remove(i);
        }
        self.fifo.push_back(v);
        let at = self.sorted.partition_point(|x| x.total_cmp(&v).is_lt());
        self.sorted.insert(at, v);
    }

    /// The median: the middle value, or the mean of the two middle values (the lower one
    /// taken as the largest of the lower half by `f64::max`, as `median_of` does).
    fn median(&self) -> f64 {
        let v = &self.sorted;
        if v.is_empty() {
            return 0.0;
        }
        let m = v.len() / 2;
        if v.len() % 2 == 1 {
            v[m]
        } else {
            let lower = v[..m].iter().copied().fold(f64::NEG_INFINITY, f64::max);
            0.5 * (lower + v[m])
        }
    }
}

/// Running idle statistics of one channel: median of per-chunk mean and RMS.
#[derive(Debug, Clone, Default)]
pub struct Floor {
    sum: f64,
    sum_sq: f64,
    /// Samples in the chunk being filled.
    pub count: usize,
    means: Window,
    rmss: Window,
    /// Medians, recomputed once per completed chunk (not per sample).
    base: f64,
    noise: f64,
}

impl Floor {
    /// Add a sample; true when it completed a chunk (the medians changed).
    pub fn add(&mut self, x: f64) -> bool {
        self.sum += x;
        self.sum_sq += x * x;
        self.count += 1;
        if self.count == CHUNK {
            let mean = self.sum / CHUNK as f64;
            let var = (self.sum_sq / CHUNK as f64 - mean * mean).max(0.0);
            if self.sum_sq == 0.0 {
                // Digital silence (exact zeros: a muted input, a padded gap) says nothing
                // about the noise the next tap will sit on: left out of the history.
                self.discard_chunk();
                return false;
            }
            self.means.push(mean);
            self.rmss.push(var.sqrt());
            self.base = self.means.median();
            self.noise = self.rmss.median();
            self.discard_chunk();
            return true;
        }
        false
    }

    /// Add samples in order, exactly as `add` one by one would.
    pub fn add_all(&mut self, x: &[f64]) {
        let mut rest = x;
        while !rest.is_empty() {
            let take = (CHUNK - 1 - self.count).min(rest.len());
            let (run, tail) = rest.split_at(take);
            for &v in run {
                self.sum += v;
                self.sum_sq += v * v;
            }
            self.count += take;
            // The sample that completes a chunk (if any) goes through `add`.
            if let Some((&v, tail)) = tail.split_first() {
                self.add(v);
                rest = tail;
            } else {
                rest = tail;
            }
        }
    }

    /// `add_all` on two channels' floors at once (their sums are independent chains of
    /// additions, so side by side they run in each other's wait): exactly two `add_all`.
    pub fn add_all_pair(a: &mut Floor, b: &mut Floor, xa: &[f64], xb: &[f64]) {
        if a.count != b.count || xa.len() != xb.len() {
            a.add_all(xa);
            b.add_all(xb);
            return;
        }
        let (mut ra, mut rb) = (xa, xb);
        while !ra.is_empty() {
            let take = (CHUNK - 1 - a.count).min(ra.len());
            let ((run_a, tail_a), (run_b, tail_b)) = (ra.split_at(take), rb.split_at(take));
            for (&u, &v) in run_a.iter().zip(run_b) {
                a.sum += u;
                a.sum_sq += u * u;
                b.sum += v;
                b.sum_sq += v * v;
            }
            a.count += take;
            b.count += take;
            // The samples that complete a chunk (if any) go through `add`.
            match (tail_a.split_first(), tail_b.split_first()) {
                (Some((&u, ta)), Some((&v, tb))) => {
                    a.add(u);
                    b.add(v);
                    (ra, rb) = (ta, tb);
                }
                _ => (ra, rb) = (tail_a, tail_b),
            }
        }
    }

    pub fn discard_chunk(&mut self) {
        self.sum = 0.0;
        self.sum_sq = 0.0;
        self.count = 0;
    }

    pub fn ready(&self) -> bool {
        !self.means.fifo.is_empty()
    }

    pub fn baseline(&self) -> f64 {
        self.base
    }

    pub fn noise(&self) -> f64 {
        self.noise
    }
}

/// The median of `values` by selection (no sorted history): the reference for `Window`.
#[cfg(test)]
fn median_of(values: impl Iterator<Item = f64>) -> f64 {
    let mut v: Vec<f64> = values.collect();
    if v.is_empty() {
        return 0.0;
    }
    let m = v.len() / 2;
    let odd = v.len() % 2 == 1;
    let (low, mid, _) = v.select_nth_unstable_by(m, f64::total_cmp);
    let upper = *mid;
    if odd {
        upper
    } else {
        let lower = low.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lower + upper)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The sorted window gives bit for bit the median a selection over the same history
    /// gives, for every length from 1 to full and on, with repeats, signed zeros,
    /// infinities and NaNs among the values.
    #[test]
    fn window_median_equals_selection() {
        let mut rng = crate::rng::Rng::new(11);
        let specials = [0.0, -0.0, f64::INFINITY, f64::NEG_INFINITY, f64::NAN, 1.5];
        for round in 0..40 {
            let mut w = Window::default();
            let mut history: VecDeque<f64> = VecDeque::new();
            for step in 0..200 {
                let r = rng.next_u64();
                let v = match (round % 4, r % 10) {
                    (0, _) => rng.normal(),
                    (1, 0..=3) => specials[(r >> 8) as usize % specials.len()],
                    (2, _) => ((r >> 8) % 5) as f64 - 2.0,
                    _ => rng.normal() * 1e-3 + 0.25,
                };
                w.push(v);
                history.push_back(v);
                if history.len() > CHUNK_HISTORY {
                    history.pop_front();
                }
                let want = median_of(history.iter().copied());
                let got = w.median();
                assert_eq!(
                    got.to_bits(),
                    want.to_bits(),
                    "round {round} step {step}: {got} against {want}"
                );
                assert_eq!(w.sorted.len(), history.len());
            }
        }
    }

    /// Two floors fed side by side end exactly as fed one after the other, whatever the
    /// piece lengths and with a chunk of digital silence on one channel.
    #[test]
    fn paired_feeding_equals_single() {
        let mut rng = crate::rng::Rng::new(5);
        let mut xa: Vec<f64> = (0..CHUNK * 50).map(|_| 0.1 + rng.normal()).collect();
        let xb: Vec<f64> = (0..CHUNK * 50).map(|_| 0.01 * rng.normal()).collect();
        xa[CHUNK * 3..CHUNK * 5].iter_mut().for_each(|v| *v = 0.0);
        let (mut a1, mut b1, mut a2, mut b2) = Default::default();
        let mut at = 0;
        while at < xa.len() {
            let n = (1 + (rng.next_u64() % 700) as usize).min(xa.len() - at);
            let (pa, pb) = (&xa[at..at + n], &xb[at..at + n]);
            Floor::add_all_pair(&mut a1, &mut b1, pa, pb);
            Floor::add_all(&mut a2, pa);
            Floor::add_all(&mut b2, pb);
            for (p, s) in [(&a1, &a2), (&b1, &b2)] {
                let (p, s): (&Floor, &Floor) = (p, s);
                assert_eq!(p.count, s.count);
                assert_eq!(p.sum.to_bits(), s.sum.to_bits());
                assert_eq!(p.sum_sq.to_bits(), s.sum_sq.to_bits());
                assert_eq!(p.baseline().to_bits(), s.baseline().to_bits());
                assert_eq!(p.noise().to_bits(), s.noise().to_bits());
            }
            at += n;
        }
        assert!(a1.ready() && b1.ready());
    }

    /// A whole floor: the baseline and noise of a steady signal are its mean and RMS.
    #[test]
    fn floor_reads_mean_and_noise() {
        let mut rng = crate::rng::Rng::new(3);
        let x: Vec<f64> = (0..CHUNK * 40).map(|_| 0.5 + 0.01 * rng.normal()).collect();
        let mut f = Floor::default();
        f.add_all(&x);
        assert!(f.ready());
        assert!((f.baseline() - 0.5).abs() < 0.002, "{}", f.baseline());
        assert!((f.noise() - 0.01).abs() < 0.001, "{}", f.noise());
    }
}
