//! The acquisition thread: runs one [`SampleReader`] on a named thread and hands
//! [`AcqEvent`]s to the consumer over a bounded crossbeam channel; see [`Acquisition`].

use std::panic::{self, AssertUnwindSafe};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::thread::{self, JoinHandle};
use std::time::{Duration, Instant};

use crossbeam_channel::{
    Receiver, RecvTimeoutError, SendTimeoutError, Sender, TrySendError, bounded,
};

use super::{AcqCommand, AcqEvent, AcqStatus, AcquireError, Backpressure, Result, SampleReader};

/// Called by the worker after it has sent an event (the window passes `request_repaint`).
pub type Waker = Box<dyn Fn() + Send + Sync>;

/// Longest the worker waits in one place before it looks at its commands again.
const RESPONSE_SLICE: Duration = Duration::from_millis(50);
/// Longest the worker waits for a reader before it looks at its commands again.
const READ_SLICE: Duration = Duration::from_millis(100);
/// How long dropping an [`Acquisition`] waits for the thread before leaving it detached
/// (only a reader stuck in a blocking read, e.g. silent standard input, takes that long).
const JOIN_WAIT: Duration = Duration::from_secs(2);
/// Paced playback delivers blocks of about this much stream time.
const PACED_BLOCK_SECS: f64 = 0.02;
/// If paced playback falls this far behind the wall clock it restarts the clock instead of
/// bursting to catch up.
const PACED_MAX_LAG_SECS: f64 = 0.25;

/// How an [`Acquisition`] runs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AcqOptions {
    /// What to do when the consumer's channel is full.
    pub backpressure: Backpressure,
    /// Capacity of the event channel, in events (≥ 1).
    pub channel_capacity: usize,
    /// Largest block of samples per [`AcqEvent::Block`] (≥ 1).
    pub block_samples: usize,
    /// Playback speed for recordings and the demo (1.0 = real time); `None`: as fast as the
    /// reader goes. Live sources ([`SampleReader::is_live`]) are never paced.
    pub speed: Option<f64>,
    /// Interval between [`AcqEvent::Status`] events.
    pub status_interval: Duration,
}

impl AcqOptions {
    /// Headless processing: [`Backpressure::Block`] (no sample lost), no pacing, 8192-sample
    /// blocks, 64 events of buffer.
    pub fn headless() -> Self {
        Self {
            backpressure: Backpressure::Block,
            channel_capacity: 64,
            block_samples: 8192,
            speed: None,
            status_interval: Duration::from_millis(250),
        }
    }

    /// The window: [`Backpressure::DropAndCount`] (never waits on the UI), recordings paced at
    /// real time.
    pub fn window() -> Self {
        Self {
            backpressure: Backpressure::DropAndCount,
            speed: Some(1.0),
            ..Self::headless()
        }
    }

    fn validate(&self) -> Result<()> {
        if self.channel_capacity == 0 || self.block_samples == 0 || self.block_samples > 1 << 24 {
            return Err(AcquireError::Config(format!(
                "acquisition needs a channel capacity ≥ 1 and a block of 1 to 16777216 samples (got {} and {})",
                self.channel_capacity, self.block_samples
            )));
        }
        if let Some(speed) = self.speed {
            check_speed(speed)?;
        }
        if self.status_interval.is_zero() {
            return Err(AcquireError::Config(
                "acquisition status interval must be positive".into(),
            ));
        }
        Ok(())
    }
}

impl Default for AcqOptions {
    fn default() -> Self {
        Self::headless()
    }
}

fn check_speed(speed: f64) -> Result<()> {
    if speed.is_finite() && speed > 0.0 {
        Ok(())
    } else {
        Err(AcquireError::Config(format!(
            "playback speed must be a positive number, got {speed}"
        )))
    }
}

/// A reader running on its own thread (`stillpoint-acquire`). See the [module docs](super)
/// for an example.
///
/// Events arrive on [`Acquisition::events`]: [`AcqEvent::Block`]s in stream order, an
/// [`AcqEvent::Status`] about every `status_interval`, and always one final
/// [`AcqEvent::Stopped`] (`None`: the stream ended or was shut down; `Some(error)`: why it
/// failed), preceded by a last status with the final counters. Dropping the handle shuts the
/// thread down and joins it.
pub struct Acquisition {
    events: Receiver<AcqEvent>,
    commands: Sender<AcqCommand>,
    recycle: Sender<Vec<f64>>,
    stop: Arc<AtomicBool>,
    done: Receiver<()>,
    handle: Option<JoinHandle<()>>,
    sample_rate_hz: f64,
    description: String,
}

impl Acquisition {
    /// Starts `reader` on a named thread. `waker` is called after every event sent.
    ///
    /// # Errors
    /// [`AcquireError::Config`] for inconsistent `options`; [`AcquireError::Thread`] if the
    /// thread cannot be spawned.
    pub fn spawn(
        reader: Box<dyn SampleReader>,
        options: AcqOptions,
        waker: Option<Waker>,
    ) -> Result<Self> {
        options.validate()?;
        let (event_tx, events) = bounded(options.channel_capacity);
        let (commands, command_rx) = bounded(64);
        // Two spare blocks are enough for the thread to always find one; more would only
        // hold memory (at segment 2²⁰ a headless block is 6 MiB).
        let (recycle, recycled) = bounded(2);
        let (done_tx, done) = bounded::<()>(1);
        let stop = Arc::new(AtomicBool::new(false));
        let sample_rate_hz = reader.sample_rate_hz();
        let description = reader.describe();
        let worker = Worker {
            status: AcqStatus {
                sample_rate_hz,
                description: description.clone(),
                ..AcqStatus::default()
            },
            live: reader.is_live(),
            reader,
            events: event_tx,
            commands: command_rx,
            stop: Arc::clone(&stop),
            waker,
            paused: false,
            speed: options.speed,
            pacer: Pacer::new(),
            options,
            last_status: Instant::now(),
            gap: None,
            reconnects: 0,
            recycled,
        };
        let handle = thread::Builder::new()
            .name("stillpoint-acquire".into())
            .spawn(move || {
                let _done = done_tx; // dropped when the thread ends, however it ends
                worker.run();
            })
            .map_err(AcquireError::Thread)?;
        Ok(Self {
            events,
            commands,
            recycle,
            stop,
            done,
            handle: Some(handle),
            sample_rate_hz,
            description,
        })
    }

    /// The events (drain with `try_recv` in a UI, `recv` headless).
    pub fn events(&self) -> &Receiver<AcqEvent> {
        &self.events
    }

    /// Sends a command without waiting; returns false if the thread has already ended (or
    /// its command queue is full). [`AcqCommand::Shutdown`] also raises a flag the thread
    /// sees even with a full queue.
    pub fn send(&self, command: AcqCommand) -> bool {
        if command == AcqCommand::Shutdown {
            self.stop.store(true, Ordering::SeqCst);
        }
        self.commands.try_send(command).is_ok()
    }

    /// Hands a block back once it has been used, so the thread reads the next one into it
    /// instead of allocating and copying (optional; a full return queue drops it).
    pub(crate) fn recycle(&self, block: Vec<f64>) {
        let _ = self.recycle.try_send(block);
    }

    /// Sample rate of the stream being read.
    pub fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    /// Description of the source being read.
    pub fn description(&self) -> &str {
        &self.description
    }

    /// True once the thread has ended (its [`AcqEvent::Stopped`] may still be queued).
    pub fn is_finished(&self) -> bool {
        self.handle.as_ref().is_none_or(JoinHandle::is_finished)
    }
}

impl Drop for Acquisition {
    fn drop(&mut self) {
        self.send(AcqCommand::Shutdown);
        // The worker holds the other end of `done`: disconnection means it has ended.
        if let Err(RecvTimeoutError::Disconnected) = self.done.recv_timeout(JOIN_WAIT)
            && let Some(handle) = self.handle.take()
        {
            let _ = handle.join();
        }
        // Otherwise the reader is stuck in a blocking read: leave the thread detached; it
        // ends as soon as the read returns (it sees the stop flag).
    }
}

/// Whether the worker goes on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Flow {
    Continue,
    Stop,
}

/// Real-time pacing: how many samples are due by the wall clock.
struct Pacer {
    origin: Instant,
    sent: f64,
}

impl Pacer {
    fn new() -> Self {
        Self {
            origin: Instant::now(),
            sent: 0.0,
        }
    }

    fn reset(&mut self) {
        *self = Self::new();
    }

    /// Samples to read now (≤ `max`), or how long to wait first.
    fn due(&mut self, samples_per_sec: f64, max: usize) -> std::result::Result<usize, Duration> {
        let chunk = (samples_per_sec * PACED_BLOCK_SECS).clamp(1.0, max as f64);
        let mut due = self.origin.elapsed().as_secs_f64() * samples_per_sec - self.sent;
        if due > (samples_per_sec * PACED_MAX_LAG_SECS).max(2.0 * chunk) {
            self.reset();
            due = chunk;
        }
        if due < chunk {
            let wait = Duration::from_secs_f64(((chunk - due) / samples_per_sec).min(1.0));
            return Err(wait.min(RESPONSE_SLICE));
        }
        Ok((due.floor() as usize).clamp(1, max))
    }

    fn consumed(&mut self, samples: usize) {
        self.sent += samples as f64;
    }
}

struct Worker {
    reader: Box<dyn SampleReader>,
    options: AcqOptions,
    events: Sender<AcqEvent>,
    commands: Receiver<AcqCommand>,
    stop: Arc<AtomicBool>,
    waker: Option<Waker>,
    status: AcqStatus,
    live: bool,
    paused: bool,
    speed: Option<f64>,
    pacer: Pacer,
    last_status: Instant,
    /// A gap not yet announced to the consumer: samples dropped since the last delivered
    /// block (plus nothing for a reconnection of the reader).
    gap: Option<u64>,
    /// The reader's reconnection counter when last looked at.
    reconnects: u64,
    /// Blocks the consumer handed back ([`Acquisition::recycle`]).
    recycled: Receiver<Vec<f64>>,
}

impl Worker {
    fn run(mut self) {
        let outcome = panic::catch_unwind(AssertUnwindSafe(|| self.pump()));
        let error = match outcome {
            Ok(Ok(())) => None,
            Ok(Err(e)) => Some(e),
            Err(_) => Some(AcquireError::Unsupported(
                "internal error: the source reader panicked".into(),
            )),
        };
        self.status.reader = self.reader.stats();
        let status = AcqEvent::Status(self.status.clone());
        self.deliver_final(status);
        self.deliver_final(AcqEvent::Stopped(error));
    }

    fn wake(&self) {
        if let Some(waker) = &self.waker {
            waker();
        }
    }

    fn stop_requested(&self) -> bool {
        self.stop.load(Ordering::SeqCst)
    }

    fn apply(&mut self, command: AcqCommand) -> Flow {
        match command {
            AcqCommand::Pause => self.paused = true,
            AcqCommand::Resume => {
                self.paused = false;
                self.pacer.reset();
            }
            AcqCommand::Speed(speed) => {
                if speed.is_none_or(|s| check_speed(s).is_ok()) {
                    self.speed = speed;
                    self.pacer.reset();
                }
            }
            AcqCommand::Shutdown => return Flow::Stop,
        }
        Flow::Continue
    }

    /// Applies queued commands; with `wait`, first waits up to that long for one.
    fn commands(&mut self, wait: Option<Duration>) -> Flow {
        if let Some(wait) = wait {
            match self.commands.recv_timeout(wait) {
                Ok(command) => {
                    if self.apply(command) == Flow::Stop {
                        return Flow::Stop;
                    }
                }
                Err(RecvTimeoutError::Timeout) => {}
                Err(RecvTimeoutError::Disconnected) => return Flow::Stop,
            }
        }
        while let Ok(command) = self.commands.try_recv() {
            if self.apply(command) == Flow::Stop {
                return Flow::Stop;
            }
        }
        if self.stop_requested() {
            Flow::Stop
        } else {
            Flow::Continue
        }
    }

    fn maybe_status(&mut self) {
        if self.last_status.elapsed() < self.options.status_interval {
            return;
        }
        self.last_status = Instant::now();
        self.status.reader = self.reader.stats();
        // A status that finds the channel full is skipped: the next one carries the counters.
        if self
            .events
            .try_send(AcqEvent::Status(self.status.clone()))
            .is_ok()
        {
            self.wake();
        }
    }

    fn count_dropped(&mut self, samples: usize) {
        self.status.dropped_blocks += 1;
        self.status.dropped_samples += samples as u64;
        self.gap = Some(self.gap.unwrap_or(0) + samples as u64);
    }

    /// Notes a gap if the reader reconnected or reopened its file since the last look.
    fn check_reconnects(&mut self) {
        let reconnects = self.reader.stats().reconnects;
        if reconnects != self.reconnects {
            self.reconnects = reconnects;
            self.gap = Some(self.gap.unwrap_or(0));
        }
    }

    /// Announces a pending gap before the next block: `Continue` once it is sent (or there is
    /// none), `Stop` on shutdown; with the drop policy a full channel returns `Continue`
    /// with the gap still pending (the caller then drops the block too).
    fn announce_gap(&mut self) -> Flow {
        let Some(samples) = self.gap else {
            return Flow::Continue;
        };
        let sent = match self.options.backpressure {
            Backpressure::DropAndCount => match self.events.try_send(AcqEvent::Gap { samples }) {
                Ok(()) => true,
                Err(TrySendError::Full(_)) => false,
                Err(TrySendError::Disconnected(_)) => return Flow::Stop,
            },
            Backpressure::Block => {
                let mut event = AcqEvent::Gap { samples };
                loop {
                    match self.events.send_timeout(event, READ_SLICE) {
                        Ok(()) => break true,
                        Err(SendTimeoutError::Timeout(back)) => {
                            event = back;
                            if self.commands(None) == Flow::Stop {
                                return Flow::Stop;
                            }
                        }
                        Err(SendTimeoutError::Disconnected(_)) => return Flow::Stop,
                    }
                }
            }
        };
        if sent {
            self.gap = None;
        }
        Flow::Continue
    }

    /// Hands one block to the consumer according to the back-pressure policy.
    fn deliver(&mut self, block: Vec<f64>) -> Flow {
        let samples = block.len();
        if self.announce_gap() == Flow::Stop {
            return Flow::Stop;
        }
        if self.gap.is_some() {
            // No room even for the gap notice: this block is dropped as well.
            self.count_dropped(samples);
            return Flow::Continue;
        }
        match self.options.backpressure {
            Backpressure::DropAndCount => match self.events.try_send(AcqEvent::Block(block)) {
                Ok(()) => self.wake(),
                Err(TrySendError::Full(_)) => self.count_dropped(samples),
                Err(TrySendError::Disconnected(_)) => return Flow::Stop,
            },
            Backpressure::Block => {
                let mut event = AcqEvent::Block(block);
                loop {
                    match self.events.send_timeout(event, READ_SLICE) {
                        Ok(()) => {
                            self.wake();
                            break;
                        }
                        Err(SendTimeoutError::Timeout(back)) => {
                            event = back;
                            if self.commands(None) == Flow::Stop {
                                return Flow::Stop;
                            }
                        }
                        Err(SendTimeoutError::Disconnected(_)) => return Flow::Stop,
                    }
                }
            }
        }
        Flow::Continue
    }

    /// Sends a last event, waiting for room unless shutdown was asked for.
    fn deliver_final(&mut self, mut event: AcqEvent) {
        loop {
            match self.events.send_timeout(event, RESPONSE_SLICE) {
                Ok(()) => {
                    self.wake();
                    return;
                }
                Err(SendTimeoutError::Timeout(back)) => {
                    event = back;
                    if self.commands(None) == Flow::Stop {
                        return;
                    }
                }
                Err(SendTimeoutError::Disconnected(_)) => return,
            }
        }
    }

    /// The main loop; `Ok(())` when the stream ended or shutdown was asked for.
    fn pump(&mut self) -> Result<()> {
        let max = self.options.block_samples;
        // The block being filled: a recycled one when the consumer hands them back (no
        // allocation, no copy), else a new one. Its length only grows, so a recycled block
        // of full length is reused without writing it first.
        let mut buf: Vec<f64> = Vec::new();
        loop {
            if self.commands(None) == Flow::Stop {
                return Ok(());
            }
            self.maybe_status();
            if self.paused && !self.live {
                if self.commands(Some(RESPONSE_SLICE)) == Flow::Stop {
                    return Ok(());
                }
                continue;
            }
            // Paired channels: `ch` values per frame, so pace `ch` values per sample time
            // and never ask for less than one frame.
            let ch = self.reader.channels_delivered().max(1);
            let want = match self.speed {
                Some(speed) if !self.live && !self.paused => {
                    match self
                        .pacer
                        .due(self.reader.sample_rate_hz() * speed * ch as f64, max)
                    {
                        Ok(n) => n,
                        Err(wait) => {
                            if self.commands(Some(wait)) == Flow::Stop {
                                return Ok(());
                            }
                            continue;
                        }
                    }
                }
                _ => max,
            };
            let want = (want - want % ch).max(ch);
            if buf.capacity() == 0
                && let Ok(block) = self.recycled.try_recv()
            {
                buf = block;
            }
            if buf.len() < want {
                buf.resize(want, 0.0);
            }
            let Some(dest) = buf.get_mut(..want) else {
                return Ok(());
            };
            let n = match self.reader.read_block_timeout(dest, READ_SLICE)? {
                None => continue,
                Some(0) => return Ok(()),
                Some(n) => n.min(want),
            };
            self.pacer.consumed(n);
            self.check_reconnects();
            if self.paused {
                // A live source keeps being drained while paused; what it delivers is dropped.
                self.count_dropped(n);
                continue;
            }
            let block = if n < want / 2 {
                // A short read (a pipe hands over at most its 64 KiB): copy it into a
                // recycled block and keep this full-length one, instead of handing it over
                // and zero-filling it to full length again before the next read.
                let mut small = self.recycled.try_recv().unwrap_or_default();
                small.clear();
                small.extend_from_slice(buf.get(..n).unwrap_or(&[]));
                small
            } else {
                let mut block = std::mem::take(&mut buf);
                block.truncate(n);
                block
            };
            if self.deliver(block) == Flow::Stop {
                return Ok(());
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::acquire::ReaderStats;

    /// Counts 0, 1, 2, … up to `len`, optionally failing at the end.
    struct Counter {
        next: u64,
        len: u64,
        fail: bool,
        rate_hz: f64,
        /// Sleep per read (a source that takes its time).
        delay: Duration,
    }

    impl SampleReader for Counter {
        fn sample_rate_hz(&self) -> f64 {
            self.rate_hz
        }
        fn read_block(&mut self, out: &mut [f64]) -> Result<usize> {
            thread::sleep(self.delay);
            let n = out.len().min((self.len - self.next) as usize);
            if n == 0 && self.fail {
                return Err(AcquireError::Wav("broken on purpose".into()));
            }
            for v in &mut out[..n] {
                *v = self.next as f64;
                self.next += 1;
            }
            Ok(n)
        }
        fn stats(&self) -> ReaderStats {
            ReaderStats {
                samples: self.next,
                ..ReaderStats::default()
            }
        }
        fn describe(&self) -> String {
            "counter".into()
        }
    }

    #[test]
    fn pacing_follows_the_wall_clock() {
        // 2000 samples at 10 kHz and speed 2 → 0.1 s of wall time (tolerance 0.07 to 0.5 s).
        let reader = Counter {
            next: 0,
            len: 2000,
            fail: false,
            rate_hz: 10_000.0,
            delay: Duration::ZERO,
        };
        let options = AcqOptions {
            speed: Some(2.0),
            ..AcqOptions::headless()
        };
        let started = Instant::now();
        let acq = Acquisition::spawn(Box::new(reader), options, None).unwrap();
        let mut total = 0;
        loop {
            match acq.events().recv().unwrap() {
                AcqEvent::Block(b) => total += b.len(),
                AcqEvent::Status(_) | AcqEvent::Gap { .. } => {}
                AcqEvent::Stopped(e) => {
                    assert!(e.is_none());
                    break;
                }
            }
        }
        let secs = started.elapsed().as_secs_f64();
        assert_eq!(total, 2000);
        assert!((0.07..0.5).contains(&secs), "took {secs} s");
    }

    #[test]
    fn bad_options_are_refused() {
        let reader = Counter {
            next: 0,
            len: 1,
            fail: false,
            rate_hz: 1.0,
            delay: Duration::ZERO,
        };
        let options = AcqOptions {
            speed: Some(0.0),
            ..AcqOptions::headless()
        };
        assert!(Acquisition::spawn(Box::new(reader), options, None).is_err());
    }

    #[test]
    fn dropped_blocks_are_announced_as_gaps_before_the_next_block() {
        // A counter (sample k has the value k; 1000-sample blocks every ≥ 50 µs, ≥ 0.1 s in
        // all) into a one-event channel whose consumer stalls for 20 ms after its tenth
        // block: blocks are dropped mid-stream, then delivered again. Every block must
        // continue the previous one exactly, unless gap notices came between them, whose sizes
        // then add up to the jump; they add up to the dropped samples.
        let total = 2_000_000;
        let reader = Counter {
            next: 0,
            len: total,
            fail: false,
            rate_hz: 1.0,
            delay: Duration::from_micros(50),
        };
        let options = AcqOptions {
            backpressure: Backpressure::DropAndCount,
            channel_capacity: 1,
            block_samples: 1000,
            speed: None,
            status_interval: Duration::from_millis(5),
        };
        let acq = Acquisition::spawn(Box::new(reader), options, None).unwrap();
        let (mut next, mut pending_gap, mut gaps, mut gap_samples) = (0_u64, None, 0, 0);
        let (mut received, mut last_status, mut blocks) = (0_u64, None, 0);
        loop {
            match acq.events().recv().unwrap() {
                AcqEvent::Block(b) => {
                    let first = b[0] as u64;
                    match pending_gap.take() {
                        Some(samples) => assert_eq!(first, next + samples),
                        None => assert_eq!(first, next, "a jump without a gap notice"),
                    }
                    next = first + b.len() as u64;
                    received += b.len() as u64;
                    blocks += 1;
                    if blocks == 10 {
                        thread::sleep(Duration::from_millis(20));
                    }
                }
                AcqEvent::Gap { samples } => {
                    // Two in a row when the block after a notice found no room either.
                    pending_gap = Some(pending_gap.unwrap_or(0) + samples);
                    gaps += 1;
                    gap_samples += samples;
                }
                AcqEvent::Status(s) => last_status = Some(s),
                AcqEvent::Stopped(e) => {
                    assert!(e.is_none());
                    break;
                }
            }
        }
        let status = last_status.unwrap();
        assert!(status.dropped_blocks > 0, "nothing was dropped: {status:?}");
        assert!(gaps > 0);
        // Samples dropped after the last delivered block have no block to precede: only
        // those already announced (`trailing`) are in the gap notices.
        let trailing = pending_gap.unwrap_or(0);
        assert_eq!(
            gap_samples,
            status.dropped_samples - (total - next - trailing)
        );
        assert_eq!(received + status.dropped_samples, total);
    }

    #[test]
    fn recycled_blocks_are_read_into_again() {
        // A buffer handed back must be the one the thread reads into next: hand back an empty
        // buffer of a capacity the thread never allocates (12 345; blocks are 1000) and look
        // for it among the following blocks. The samples must still be every count in order.
        let reader = Counter {
            next: 0,
            len: 200_000,
            fail: false,
            rate_hz: 1.0,
            delay: Duration::from_micros(20),
        };
        let options = AcqOptions {
            channel_capacity: 2,
            block_samples: 1000,
            ..AcqOptions::headless()
        };
        let acq = Acquisition::spawn(Box::new(reader), options, None).unwrap();
        let (mut next, mut handed_back, mut reused) = (0.0, false, false);
        loop {
            match acq.events().recv().unwrap() {
                AcqEvent::Block(b) => {
                    for v in &b {
                        assert_eq!(*v, next);
                        next += 1.0;
                    }
                    reused |= b.capacity() == 12_345;
                    if !handed_back {
                        acq.recycle(Vec::with_capacity(12_345));
                        handed_back = true;
                    }
                }
                AcqEvent::Stopped(e) => {
                    assert!(e.is_none());
                    break;
                }
                AcqEvent::Status(_) | AcqEvent::Gap { .. } => {}
            }
        }
        assert_eq!(next, 200_000.0);
        assert!(reused, "the recycled buffer never came back");
    }
}
