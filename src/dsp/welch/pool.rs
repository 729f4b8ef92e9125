//! Worker threads of a parallel [`super::Welch`]: whole groups of consecutive segments go to
//! persistent workers as owned copies of their samples; the results come back in any order
//! and are added to the average strictly in stream order on the caller's thread.
//!
//! A job holds the `(G − 1)·D + N` samples of one group of G segment positions. A worker
//! detrends, windows and transforms each segment and returns, for a linear average, the sum
//! of the accepted periodograms (started from zero, in position order — the same arithmetic
//! as the caller's thread would do), otherwise every periodogram. At most `max_in_flight`
//! jobs exist at once; their buffers are recycled, so a running averager allocates nothing.

use super::super::ordered_pool::{self, Next, OrderedPool};
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

impl ordered_pool::Job for Job {
    fn seq(&self) -> u64 {
        self.seq
    }

    fn set_seq(&mut self, seq: u64) {
        self.seq = seq;
    }
}

/// Persistent worker threads and the jobs in flight ([`OrderedPool`], shared with the
/// two-channel averager).
pub(super) struct Pool {
    shape: Shape,
    inner: OrderedPool<Job>,
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
        let workers = (0..threads).map(|_| main.fork()).collect();
        let inner = OrderedPool::start(
            "welch-worker",
            workers,
            max_in_flight,
            move |worker: &mut Transformer, job: &mut Job| run_job(worker, job, shape),
            // A worker that panicked: the group's segments count as skipped.
            move |job: &mut Job| {
                job.accepted = 0;
                job.rows.clear();
                job.rows.resize(shape.rows_len(), 0.0);
            },
        )?;
        Some(Self { shape, inner })
    }

    /// Worker threads running.
    pub(super) fn threads(&self) -> usize {
        self.inner.threads()
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
        self.inner.in_flight() * self.shape.group
    }

    /// False once the workers are gone.
    pub(super) fn is_alive(&self) -> bool {
        self.inner.is_alive()
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
        while self.inner.is_full() {
            match self.add_next(true, acc) {
                Some(n) => added += n,
                None => break,
            }
        }
        let mut job = self.inner.take_free().unwrap_or_else(|| Job {
            seq: 0,
            samples: Vec::with_capacity(self.shape.span()),
            rows: Vec::new(),
            accepted: 0,
        });
        job.samples.clear();
        job.samples.extend_from_slice(head);
        job.samples.extend_from_slice(tail);
        if let Err(mut job) = self.inner.send(job) {
            // No worker left: what was in flight is added or counted as skipped; this
            // group is done here.
            added += self.drain(acc);
            run_job(main, &mut job, self.shape);
            added += apply(&job, self.shape, acc);
            self.inner.recycle(job);
        }
        added
    }

    /// Adds every job that has finished and is next in order, without waiting.
    pub(super) fn collect(&mut self, acc: &mut Accumulator) -> usize {
        let mut added = 0;
        while let Some(n) = self.add_next(false, acc) {
            added += n;
        }
        added
    }

    /// Waits for every job in flight and adds them all.
    pub(super) fn drain(&mut self, acc: &mut Accumulator) -> usize {
        let mut added = 0;
        while let Some(n) = self.add_next(true, acc) {
            added += n;
        }
        added
    }

    /// Waits for every job in flight and throws the results away (a restart).
    pub(super) fn discard(&mut self) {
        self.inner.discard();
    }

    /// Adds the next job in order (waiting for it with `wait`), or counts the positions of
    /// a job lost with the workers as skipped; the segments added, `None` when there is
    /// nothing to add now.
    fn add_next(&mut self, wait: bool, acc: &mut Accumulator) -> Option<usize> {
        match self.inner.next(wait) {
            Next::Ready(job) => {
                let added = apply(&job, self.shape, acc);
                self.inner.recycle(job);
                Some(added)
            }
            Next::Lost => {
                (0..self.shape.group).for_each(|_| acc.skip());
                Some(0)
            }
            Next::Idle => None,
        }
    }
}
