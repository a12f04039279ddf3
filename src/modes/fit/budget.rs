//! A hard budget on the band fits: least-squares work and wall-clock time.

/// Least-squares work allowed to the band fits of one mode search (or of one hit's
/// refits), in units of rows x columns^2 of the solves (about 1 ns each here): about a
/// second, whatever the input.
pub const FIT_WORK: u64 = 1_200_000_000;

/// Work allowed to one band fit: about 0.4 s, room for the largest fit of the demo and
/// independent recordings (a band of 7 close modes over 660 lines, 0.37 G units). The
/// trials of one more mode in a band may together use what the band's own fit used or
/// `FIT_WORK_TRIALS`, whichever is more.
pub const FIT_WORK_PER_BAND: u64 = 400_000_000;

/// Work the trials of one more mode in a band may use together at least (about 50 ms).
pub const FIT_WORK_TRIALS: u64 = 50_000_000;

/// Wall-clock limit of the band fits of one mode search: a backstop behind the work limits
/// (which alone keep results reproducible) for a machine many times slower than this one.
pub const FIT_TIME: std::time::Duration = std::time::Duration::from_secs(3);

/// A hard budget on band fits: least-squares work (per band and in all) and wall-clock
/// time; iterations are limited by `FitConfig::max_iterations`. A fit that runs out is
/// refused (its modes keep their half-power values) and listed in `refused`.
#[derive(Debug)]
pub struct FitBudget {
    work_left: std::cell::Cell<u64>,
    band_left: std::cell::Cell<u64>,
    band_limit: std::cell::Cell<u64>,
    deadline: Option<std::time::Instant>,
    failed: std::cell::Cell<bool>,
    refused: std::cell::RefCell<Vec<((f64, f64), usize)>>,
    trials_stopped: std::cell::RefCell<Vec<((f64, f64), usize)>>,
}

impl FitBudget {
    pub fn new(work: u64, time: Option<std::time::Duration>) -> Self {
        FitBudget {
            work_left: std::cell::Cell::new(work),
            band_left: std::cell::Cell::new(FIT_WORK_PER_BAND),
            band_limit: std::cell::Cell::new(FIT_WORK_PER_BAND),
            deadline: time.map(|t| std::time::Instant::now() + t),
            failed: std::cell::Cell::new(false),
            refused: std::cell::RefCell::new(Vec::new()),
            trials_stopped: std::cell::RefCell::new(Vec::new()),
        }
    }

    /// The budget of one mode search: `FIT_WORK`, `FIT_WORK_PER_BAND` and `FIT_TIME`.
    pub fn standard() -> Self {
        Self::new(FIT_WORK, Some(FIT_TIME))
    }

    /// Take `work` units; false (and this fit failed) when they are not left.
    pub(super) fn spend(&self, work: u64) -> bool {
        if self.failed.get() {
            return false;
        }
        let (left, band) = (self.work_left.get(), self.band_left.get());
        let late = self.deadline.is_some_and(|d| std::time::Instant::now() > d);
        if work > left || work > band || late {
            self.failed.set(true);
            return false;
        }
        self.work_left.set(left - work);
        self.band_left.set(band - work);
        true
    }

    /// Start one band fit with at most `limit` units of its own.
    pub(super) fn start_band(&self, limit: u64) {
        self.failed.set(false);
        self.band_limit.set(limit);
        self.band_left.set(limit);
    }

    /// Work the last band fit used.
    pub(super) fn band_used(&self) -> u64 {
        self.band_limit.get() - self.band_left.get()
    }

    /// End one band fit; true when it ran out of budget (then a band's own fit is listed
    /// in `refused`, a trial of more modes in `trials_stopped`).
    pub(super) fn end_band(&self, band_hz: (f64, f64), modes: usize, trial: bool) -> bool {
        let failed = self.failed.get();
        if failed {
            let list = if trial {
                &self.trials_stopped
            } else {
                &self.refused
            };
            let mut list = list.borrow_mut();
            if !list.iter().any(|(b, _)| *b == band_hz) {
                list.push((band_hz, modes));
            }
        }
        failed
    }

    /// Bands where the search for more modes stopped at the work limit: (band in Hz, modes
    /// of the trial).
    pub fn trials_stopped(&self) -> Vec<((f64, f64), usize)> {
        self.trials_stopped.borrow().clone()
    }

    /// Band fits refused for lack of budget: (band in Hz, modes in it).
    pub fn refused(&self) -> Vec<((f64, f64), usize)> {
        self.refused.borrow().clone()
    }

    /// True once a fit was refused for lack of budget.
    pub fn exhausted(&self) -> bool {
        !self.refused.borrow().is_empty()
    }
}
