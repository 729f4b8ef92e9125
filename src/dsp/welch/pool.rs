//! Worker threads of a parallel [`super::Welch`]: whole groups of consecutive segments go to
//! persistent workers as owned copies of their samples; the results come back in any order
//! and are added to the average strictly in stream order on the caller's thread.
//!
//! A job holds the `(G − 1)·D + N` samples of one group of G segment positions. A worker
//! detrends, windows and transforms each segment and returns, for a linear average, the sum
//! of the accepted periodograms (started from zero, in position order — the same arithmetic
//! as the caller's thread would do), otherwise every periodogram. At most `max_in_flight`
//! jobs exist at once; their buffers are recycled, so a running averager allocates nothing.

use std::collections::VecDeque;
use std::thread::JoinHandle;

use crossbeam_channel::{Receiver, Sender, TryRecvError, bounded};

use super::{Accumulator, Transformer};

/// Memory the jobs in flight may take (samples and result rows), bytes.
const IN_FLIGHT_BYTES: usize = 24 << 20;

/// Shape of every job of one averager.
#[derive(Debug, Clone, Copy)]
struct Shape {
    /// Segment length N.
    n: usize,
    /// Hop D.
    hop: usize,
    /// Segment positions per job G.
    group: usize,
    /// Bins per periodogram.
    bins: usize,
    /// Linear average: one summed row per job; otherwise G rows.
    summed: bool,
}

impl Shape {
    fn span(self) -> usize {
        (self.group - 1) * self.hop + self.n
    }

    fn rows_len(self) -> usize {
        if self.summed {
            self.bins
        } else {
            self.group * self.bins
        }
    }
}

/// One group: its samples in, its periodograms out.
struct Job {
    seq: u64,
    samples: Vec<f64>,
    rows: Vec<f64>,
    /// Bit i set: segment i was accepted.
    accepted: u64,
}

/// Transforms every segment of `job` with `worker` (see the module docs).
fn run_job(worker: &mut Transformer, job: &mut Job, shape: Shape) {
    job.accepted = 0;
    job.rows.clear();
    job.rows.resize(shape.rows_len(), 0.0);
    for i in 0..shape.group {
        let start = i * shape.hop;
        let segment = job.samples.get(start..start + shape.n).unwrap_or(&[]);
        if !worker.transform(segment, &[]) {
            continue;
        }
        job.accepted |= 1 << i;
        if shape.summed {
            for (r, p) in job.rows.iter_mut().zip(worker.powers()) {
                *r += p;
            }
        } else if let Some(row) = job.rows.get_mut(i * shape.bins..(i + 1) * shape.bins) {
            for (r, p) in row.iter_mut().zip(worker.powers()) {
                *r = p;
            }
        }
    }
}

/// Adds a finished job to the average (in stream order).
fn apply(job: &Job, shape: Shape, acc: &mut Accumulator) -> usize {
    let accepted = job.accepted.count_ones() as usize;
    if shape.summed {
        acc.add_group(&job.rows, accepted, shape.group - accepted);
        return accepted;
    }
    for i in 0..shape.group {
        let row = job
            .rows
            .get(i * shape.bins..(i + 1) * shape.bins)
            .unwrap_or(&[]);
        if job.accepted & (1 << i) != 0 {
            acc.add(row.iter().copied(), None);
        } else {
            acc.skip();
        }
    }
    accepted
}

/// Persistent worker threads and the jobs in flight.
pub(super) struct Pool {
    shape: Shape,
    jobs: Option<Sender<Job>>,
    results: Receiver<Job>,
    handles: Vec<JoinHandle<()>>,
    max_in_flight: usize,
    next_seq: u64,
    next_apply: u64,
    /// Finished jobs waiting for an earlier one (index = seq − next_apply).
    waiting: VecDeque<Option<Job>>,
    free: Vec<Job>,
    /// False once the workers are gone (the caller then averages on its own thread).
    alive: bool,
}

impl Pool {
    /// Starts `threads` workers (forks of `main`). `None` if not one could be started.
    pub(super) fn start(
        main: &Transformer,
        threads: usize,
        hop: usize,
        group: usize,
        summed: bool,
    ) -> Option<Self> {
        let n = main.fft_in.len();
        let shape = Shape {
            n,
            hop,
            group: group.clamp(1, 64),
            bins: main.fft_out.len(),
            summed,
        };
        let job_bytes = (shape.span() + shape.rows_len()) * std::mem::size_of::<f64>();
        let max_in_flight = (IN_FLIGHT_BYTES / job_bytes.max(1)).clamp(threads + 1, 2 * threads);
        let (jobs, job_rx) = bounded::<Job>(max_in_flight);
        let (result_tx, results) = bounded::<Job>(max_in_flight);
        let mut handles = Vec::with_capacity(threads);
        for t in 0..threads {
            let mut worker = main.fork();
            let job_rx = job_rx.clone();
            let result_tx = result_tx.clone();
            let spawned = std::thread::Builder::new()
                .name(format!("welch-worker-{t}"))
                .spawn(move || {
                    while let Ok(mut job) = job_rx.recv() {
                        // A panic must not lose the job (the caller would wait for it
                        // forever): its segments then count as skipped.
                        let ran = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                            run_job(&mut worker, &mut job, shape);
                        }));
                        if ran.is_err() {
                            job.accepted = 0;
                            job.rows.clear();
                            job.rows.resize(shape.rows_len(), 0.0);
                        }
                        if result_tx.send(job).is_err() {
                            break;
                        }
                    }
                });
            if let Ok(handle) = spawned {
                handles.push(handle);
            }
        }
        if handles.is_empty() {
            return None;
        }
        Some(Self {
            shape,
            jobs: Some(jobs),
            results,
            handles,
            max_in_flight,
            next_seq: 0,
            next_apply: 0,
            waiting: VecDeque::new(),
            free: Vec::new(),
            alive: true,
        })
    }

    /// Worker threads running.
    pub(super) fn threads(&self) -> usize {
        self.handles.len()
    }

    /// Samples one job covers: `(G − 1)·D + N`.
    pub(super) fn span(&self) -> usize {
        self.shape.span()
    }

    /// Segment positions one job covers (G).
    pub(super) fn group(&self) -> usize {
        self.shape.group
    }

    /// Segment positions sent to the workers and not yet added.
    pub(super) fn positions_in_flight(&self) -> usize {
        (self.next_seq - self.next_apply) as usize * self.shape.group
    }

    /// False once the workers are gone.
    pub(super) fn is_alive(&self) -> bool {
        self.alive
    }

    /// Sends the group `head ++ tail` (exactly [`Pool::span`] samples) to a worker, first
    /// adding finished jobs while too many are in flight. If the workers are gone the group
    /// is transformed with `main`. Returns the segments added to `acc` meanwhile.
    pub(super) fn dispatch(
        &mut self,
        head: &[f64],
        tail: &[f64],
        acc: &mut Accumulator,
        main: &mut Transformer,
    ) -> usize {
        let mut added = 0;
        while self.alive && self.next_seq - self.next_apply >= self.max_in_flight as u64 {
            added += self.wait_one(acc);
        }
        let mut job = self.free.pop().unwrap_or_else(|| Job {
            seq: 0,
            samples: Vec::with_capacity(self.shape.span()),
            rows: Vec::new(),
            accepted: 0,
        });
        job.seq = self.next_seq;
        job.samples.clear();
        job.samples.extend_from_slice(head);
        job.samples.extend_from_slice(tail);
        let sent = match (&self.jobs, self.alive) {
            (Some(jobs), true) => jobs.send(job).map_err(|e| e.into_inner()),
            _ => Err(job),
        };
        match sent {
            Ok(()) => self.next_seq += 1,
            Err(mut job) => {
                // No worker left: everything in flight is lost; do this group here.
                added += self.drain(acc);
                run_job(main, &mut job, self.shape);
                added += apply(&job, self.shape, acc);
                self.free.push(job);
            }
        }
        added
    }

    /// Adds every job that has finished and is next in order, without waiting.
    pub(super) fn collect(&mut self, acc: &mut Accumulator) -> usize {
        let mut added = 0;
        while self.alive && self.next_apply < self.next_seq {
            match self.results.try_recv() {
                Ok(job) => added += self.arrive(job, acc),
                Err(TryRecvError::Empty) => break,
                Err(TryRecvError::Disconnected) => added += self.lose_in_flight(acc),
            }
        }
        added
    }

    /// Waits for every job in flight and adds them all.
    pub(super) fn drain(&mut self, acc: &mut Accumulator) -> usize {
        let mut added = 0;
        while self.next_apply < self.next_seq {
            added += self.wait_one(acc);
        }
        added
    }

    /// Waits for every job in flight and throws the results away (a restart).
    pub(super) fn discard(&mut self) {
        let arrived = self.waiting.iter().filter(|j| j.is_some()).count() as u64;
        let mut outstanding = (self.next_seq - self.next_apply).saturating_sub(arrived);
        while self.alive && outstanding > 0 {
            match self.results.recv() {
                Ok(job) => {
                    self.free.push(job);
                    outstanding -= 1;
                }
                Err(_) => self.alive = false,
            }
        }
        self.free.extend(self.waiting.drain(..).flatten());
        self.next_apply = self.next_seq;
    }

    /// Waits for one job (any) and adds whatever is then next in order.
    fn wait_one(&mut self, acc: &mut Accumulator) -> usize {
        if !self.alive {
            return self.lose_in_flight(acc);
        }
        match self.results.recv() {
            Ok(job) => self.arrive(job, acc),
            Err(_) => self.lose_in_flight(acc),
        }
    }

    /// Files a finished job and adds every job that is now next in order.
    fn arrive(&mut self, job: Job, acc: &mut Accumulator) -> usize {
        let index = (job.seq - self.next_apply) as usize;
        if self.waiting.len() <= index {
            self.waiting.resize_with(index + 1, || None);
        }
        if let Some(slot) = self.waiting.get_mut(index) {
            *slot = Some(job);
        }
        let mut added = 0;
        while let Some(Some(_)) = self.waiting.front() {
            if let Some(Some(job)) = self.waiting.pop_front() {
                added += apply(&job, self.shape, acc);
                self.free.push(job);
            }
            self.next_apply += 1;
        }
        added
    }

    /// The workers are gone: adds the finished jobs in order and counts the segment
    /// positions of the lost ones as skipped.
    fn lose_in_flight(&mut self, acc: &mut Accumulator) -> usize {
        self.alive = false;
        let mut added = 0;
        while self.next_apply < self.next_seq {
            match self.waiting.pop_front() {
                Some(Some(job)) => {
                    added += apply(&job, self.shape, acc);
                    self.free.push(job);
                }
                _ => (0..self.shape.group).for_each(|_| acc.skip()),
            }
            self.next_apply += 1;
        }
        self.waiting.clear();
        added
    }
}

impl Drop for Pool {
    fn drop(&mut self) {
        // Closing the job channel ends every worker's loop; results in flight fit in the
        // result channel, so no worker blocks.
        self.jobs = None;
        for handle in self.handles.drain(..) {
            let _ = handle.join();
        }
    }
}
