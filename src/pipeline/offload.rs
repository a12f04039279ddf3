//! Per-hit transforms on other threads while the reading thread reads and detects on.
//!
//! An offline drain hands every accepted record to worker threads (one fewer than the
//! cores) and goes on reading; finished transforms come back in the order the records were
//! handed in, so the averages add them in stream order and stay bit-identical to doing it
//! one by one. When every worker has `HELP_AT` records waiting, the reading thread
//! transforms the next record itself (every core on the FFTs when the reading is the
//! quicker part); at most `limit` records are in flight, beyond that the reading thread
//! waits for the oldest (memory stays bounded however the threads are scheduled).

use crate::spectra::{HitSpectra, RecordTransform, SpectralAverager};
use std::collections::VecDeque;
use std::sync::mpsc::{Receiver, Sender, channel};
use std::thread::JoinHandle;

/// Records waiting per worker before the reading thread transforms one itself.
const HELP_AT: usize = 2;

/// One accepted record on its way through a transform.
pub struct Job {
    /// Index of the hit in the analysis.
    pub index: usize,
    pub record: Vec<Vec<f64>>,
    pub spectra: HitSpectra,
}

struct Worker {
    to: Option<Sender<Job>>,
    from: Receiver<Job>,
    thread: Option<JoinHandle<()>>,
}

/// Where the result of a handed-in record is.
enum Slot {
    /// On this worker (its results come back in the order it got the jobs).
    On(usize),
    Done(Job),
}

pub struct Offload {
    workers: Vec<Worker>,
    own: RecordTransform,
    order: VecDeque<Slot>,
    next: usize,
    limit: usize,
    /// Transform buffers of records already added, for reuse.
    spare: Vec<HitSpectra>,
}

impl Offload {
    /// `workers` threads (at least one) transforming as `averager` does; at most `limit`
    /// records in flight (see `full`).
    pub fn start(averager: &SpectralAverager, workers: usize, limit: usize) -> Self {
        let own = averager.record_transform();
        let workers = (0..workers.max(1))
            .map(|_| {
                let (to, jobs) = channel::<Job>();
                let (done, from) = channel::<Job>();
                let mut kit = own.fresh();
                let thread = std::thread::spawn(move || {
                    for mut job in jobs {
                        kit.transform_into(&job.record, &mut job.spectra);
                        if done.send(job).is_err() {
                            break;
                        }
                    }
                });
                Worker {
                    to: Some(to),
                    from,
                    thread: Some(thread),
                }
            })
            .collect();
        Offload {
            workers,
            own,
            order: VecDeque::new(),
            next: 0,
            limit: limit.max(1),
            spare: Vec::new(),
        }
    }

    /// Records handed in and not yet taken back.
    pub fn in_flight(&self) -> usize {
        self.order.len()
    }

    /// True when `limit` records are in flight: take the oldest back (`take(true)`)
    /// before handing in another.
    pub fn full(&self) -> bool {
        self.order.len() >= self.limit
    }

    /// Hand in an accepted record.
    pub fn submit(&mut self, index: usize, record: Vec<Vec<f64>>) {
        let spectra = self.spare.pop().unwrap_or_else(|| self.own.blank());
        let mut job = Job {
            index,
            record,
            spectra,
        };
        let busy = self
            .order
            .iter()
            .filter(|s| matches!(s, Slot::On(_)))
            .count();
        if busy >= HELP_AT * self.workers.len() {
            self.own.transform_into(&job.record, &mut job.spectra);
            self.order.push_back(Slot::Done(job));
            return;
        }
        let w = self.next % self.workers.len();
        self.next = self.next.wrapping_add(1);
        let job = match self.workers[w].to.as_ref() {
            Some(to) => match to.send(job) {
                Ok(()) => {
                    self.order.push_back(Slot::On(w));
                    return;
                }
                Err(back) => back.0,
            },
            None => job,
        };
        // The worker is gone (it can only have panicked): done here; its panic is carried
        // over when it is joined.
        let mut job = job;
        self.own.transform_into(&job.record, &mut job.spectra);
        self.order.push_back(Slot::Done(job));
    }

    /// The oldest record handed in, once transformed: `None` when none is waiting, or
    /// (unless `wait`) when the oldest is not done yet.
    pub fn take(&mut self, wait: bool) -> Option<Job> {
        let front = self.order.pop_front()?;
        let w = match front {
            Slot::Done(job) => return Some(job),
            Slot::On(w) => w,
        };
        let got = if wait {
            self.workers[w].from.recv().ok()
        } else {
            match self.workers[w].from.try_recv() {
                Ok(job) => Some(job),
                Err(std::sync::mpsc::TryRecvError::Empty) => {
                    self.order.push_front(Slot::On(w));
                    return None;
                }
                Err(std::sync::mpsc::TryRecvError::Disconnected) => None,
            }
        };
        match got {
            Some(job) => Some(job),
            None => {
                // The worker died with the job: a bug, carried to this thread.
                self.join_all();
                None
            }
        }
    }

    /// Keep a transform's buffers for a later record.
    pub fn recycle(&mut self, spectra: HitSpectra) {
        self.spare.push(spectra);
    }

    /// Stop the workers; a worker's panic is resumed on this thread.
    fn join_all(&mut self) {
        for w in &mut self.workers {
            w.to = None;
        }
        for w in &mut self.workers {
            if let Some(t) = w.thread.take()
                && let Err(e) = t.join()
            {
                std::panic::resume_unwind(e);
            }
        }
    }
}

impl Drop for Offload {
    fn drop(&mut self) {
        for w in &mut self.workers {
            w.to = None;
        }
        for w in &mut self.workers {
            if let Some(t) = w.thread.take() {
                let _ = t.join();
            }
        }
    }
}
