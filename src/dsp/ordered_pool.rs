//! Persistent worker threads that take jobs in submission order, run them in any order and
//! hand them back strictly in submission order; one pool type for the parallel
//! [`super::Welch`] (groups of segments of one channel) and [`super::cross::CrossWelch`]
//! (groups of both channels).
//!
//! At most `max_in_flight` jobs exist at once and their buffers are recycled
//! ([`OrderedPool::take_free`], [`OrderedPool::recycle`]), so a running averager allocates
//! nothing. A job whose worker panicked comes back marked by its `failed` hook (its segments
//! then count as skipped); when every worker is gone the jobs still in flight come back as
//! [`Next::Lost`], in order, so the caller can count their positions as skipped.

use std::collections::VecDeque;
use std::thread::JoinHandle;

use crossbeam_channel::{Receiver, Sender, TryRecvError, bounded};

/// A job: a sequence number the pool sets, and whatever its worker reads and writes.
pub(super) trait Job: Send + 'static {
    /// The job's place in submission order.
    fn seq(&self) -> u64;
    /// Sets the job's place in submission order.
    fn set_seq(&mut self, seq: u64);
}

/// What [`OrderedPool::next`] hands back.
pub(super) enum Next<J> {
    /// The next job in submission order, finished.
    Ready(J),
    /// The next job in submission order was lost with the workers.
    Lost,
    /// Nothing in flight, or (without waiting) the next job has not finished yet.
    Idle,
}

/// Worker threads and the jobs in flight.
pub(super) struct OrderedPool<J> {
    jobs: Option<Sender<J>>,
    results: Receiver<J>,
    handles: Vec<JoinHandle<()>>,
    max_in_flight: usize,
    next_seq: u64,
    next_out: u64,
    /// Finished jobs waiting for an earlier one (index = seq − next_out).
    waiting: VecDeque<Option<J>>,
    free: Vec<J>,
    /// False once the workers are gone.
    alive: bool,
}

impl<J: Job> OrderedPool<J> {
    /// Starts one thread per worker state in `workers` (named `name-0`, `name-1`, …), each
    /// running `run` on the jobs it takes; a job whose `run` panicked is passed to `failed`
    /// (which must leave it meaning "nothing accepted") and returned all the same, so the
    /// caller never waits for it forever. `None` if not one thread could be started.
    pub(super) fn start<W, R, F>(
        name: &str,
        workers: Vec<W>,
        max_in_flight: usize,
        run: R,
        failed: F,
    ) -> Option<Self>
    where
        W: Send + 'static,
        R: Fn(&mut W, &mut J) + Send + Clone + 'static,
        F: Fn(&mut J) + Send + Clone + 'static,
    {
        let max_in_flight = max_in_flight.max(1);
        let (jobs, job_rx) = bounded::<J>(max_in_flight);
        let (result_tx, results) = bounded::<J>(max_in_flight);
        let mut handles = Vec::with_capacity(workers.len());
        for (t, mut worker) in workers.into_iter().enumerate() {
            let job_rx = job_rx.clone();
            let result_tx = result_tx.clone();
            let (run, failed) = (run.clone(), failed.clone());
            let spawned = std::thread::Builder::new()
                .name(format!("{name}-{t}"))
                .spawn(move || {
                    while let Ok(mut job) = job_rx.recv() {
                        let ran = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                            run(&mut worker, &mut job);
                        }));
                        if ran.is_err() {
                            failed(&mut job);
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
            jobs: Some(jobs),
            results,
            handles,
            max_in_flight,
            next_seq: 0,
            next_out: 0,
            waiting: VecDeque::new(),
            free: Vec::new(),
            alive: true,
        })
    }

    /// Worker threads running.
    pub(super) fn threads(&self) -> usize {
        self.handles.len()
    }

    /// Jobs sent and not yet handed back.
    pub(super) fn in_flight(&self) -> usize {
        usize::try_from(self.next_seq - self.next_out).unwrap_or(usize::MAX)
    }

    /// True while the workers run and as many jobs are in flight as may be: the caller
    /// takes finished ones ([`OrderedPool::next`] with `wait`) before it sends another.
    pub(super) fn is_full(&self) -> bool {
        self.alive && self.in_flight() >= self.max_in_flight
    }

    /// False once the workers are gone.
    pub(super) fn is_alive(&self) -> bool {
        self.alive
    }

    /// A recycled job buffer, if any.
    pub(super) fn take_free(&mut self) -> Option<J> {
        self.free.pop()
    }

    /// Keeps a job's buffers for a later job.
    pub(super) fn recycle(&mut self, job: J) {
        self.free.push(job);
    }

    /// Sends `job` to a worker; gives it back when the workers are gone.
    ///
    /// # Errors
    /// The job itself, when no worker is left to take it.
    pub(super) fn send(&mut self, mut job: J) -> Result<(), J> {
        job.set_seq(self.next_seq);
        let sent = match (&self.jobs, self.alive) {
            (Some(jobs), true) => jobs.send(job).map_err(|e| e.into_inner()),
            _ => Err(job),
        };
        match sent {
            Ok(()) => {
                self.next_seq += 1;
                Ok(())
            }
            Err(job) => {
                self.alive = false;
                Err(job)
            }
        }
    }

    /// The next job in submission order: finished ([`Next::Ready`]), lost with the workers
    /// ([`Next::Lost`]), or [`Next::Idle`] when nothing is in flight or, without `wait`, the
    /// next one has not finished yet. With `wait`, blocks until it has.
    pub(super) fn next(&mut self, wait: bool) -> Next<J> {
        loop {
            if self.next_out == self.next_seq {
                return Next::Idle;
            }
            if matches!(self.waiting.front(), Some(Some(_))) {
                self.next_out += 1;
                return match self.waiting.pop_front() {
                    Some(Some(job)) => Next::Ready(job),
                    _ => Next::Lost,
                };
            }
            if !self.alive {
                self.waiting.pop_front();
                self.next_out += 1;
                return Next::Lost;
            }
            let arrived = if wait {
                self.results.recv().ok()
            } else {
                match self.results.try_recv() {
                    Ok(job) => Some(job),
                    Err(TryRecvError::Empty) => return Next::Idle,
                    Err(TryRecvError::Disconnected) => None,
                }
            };
            match arrived {
                Some(job) => self.file(job),
                None => self.alive = false,
            }
        }
    }

    /// Waits for every job in flight and keeps their buffers, results unread (a restart).
    pub(super) fn discard(&mut self) {
        loop {
            match self.next(true) {
                Next::Ready(job) => self.free.push(job),
                Next::Lost => {}
                Next::Idle => break,
            }
        }
    }

    /// Files a finished job at its place in the order.
    fn file(&mut self, job: J) {
        let index = usize::try_from(job.seq().saturating_sub(self.next_out)).unwrap_or(0);
        if self.waiting.len() <= index {
            self.waiting.resize_with(index + 1, || None);
        }
        if let Some(slot) = self.waiting.get_mut(index) {
            *slot = Some(job);
        }
    }
}

impl<J> Drop for OrderedPool<J> {
    fn drop(&mut self) {
        // Closing the job channel ends every worker's loop; results in flight fit in the
        // result channel, so no worker blocks.
        self.jobs = None;
        for handle in self.handles.drain(..) {
            let _ = handle.join();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Square {
        seq: u64,
        x: u64,
        y: u64,
    }

    impl Job for Square {
        fn seq(&self) -> u64 {
            self.seq
        }
        fn set_seq(&mut self, seq: u64) {
            self.seq = seq;
        }
    }

    fn square(_: &mut (), job: &mut Square) {
        // Later jobs finish first now and then: the order must come from the pool.
        if job.x.is_multiple_of(3) {
            std::thread::sleep(std::time::Duration::from_millis(2));
        }
        assert!(job.x != 13, "a worker that panics");
        job.y = job.x * job.x;
    }

    fn failed(job: &mut Square) {
        job.y = u64::MAX;
    }

    #[test]
    fn jobs_come_back_in_submission_order_and_a_panic_loses_none() {
        let mut pool =
            OrderedPool::start("test", vec![(), (), ()], 4, square, failed).expect("threads");
        assert_eq!(pool.threads(), 3);
        let mut out = Vec::new();
        for x in 0..40 {
            while pool.is_full() {
                if let Next::Ready(job) = pool.next(true) {
                    out.push(job.y);
                    pool.recycle(job);
                }
            }
            let mut job = pool.take_free().unwrap_or(Square { seq: 0, x: 0, y: 0 });
            job.x = x;
            assert!(pool.send(job).is_ok());
        }
        while let Next::Ready(job) = pool.next(true) {
            out.push(job.y);
        }
        let expected: Vec<u64> = (0..40)
            .map(|x| if x == 13 { u64::MAX } else { x * x })
            .collect();
        assert_eq!(out, expected);
        assert_eq!(pool.in_flight(), 0);
        assert!(matches!(pool.next(false), Next::Idle));
    }
}
