//! The one stream → averager loop: acquisition events in, Welch (one channel) or cross-Welch
//! (two detectors) estimates out, with the watch every consumer needs (a stalled live source,
//! a stop request, a deadline, an average that is complete, gaps, the reader's counters).
//!
//! Three users: `spectrum`/`analyze` (and `bench`) through [`drive`] with the default
//! [`StreamSink`] behaviour, `track` through [`drive`] with a sink that cuts the stream into
//! intervals, and the window's engine, which has its own event loop (commands, pacing,
//! publishing) but averages with the same [`Averager`] and words the reader's counters with
//! the same [`reader_warnings`].
//!
//! Nothing here knows the command line: settings come as [`Watch`] and
//! [`crate::dsp::WelchConfig`], messages name quantities and go to the sink
//! ([`StreamSink::message`]), which prints them (CLI) or shows them (window).

use std::time::{Duration, Instant};

use crossbeam_channel::RecvTimeoutError;

use crate::acquire::{AcqEvent, AcquireError, Acquisition, ReaderStats};
use crate::dsp::cross::{CrossSpectrum, CrossWelch};
use crate::dsp::{Averaging, DspError, Spectrum, Welch, WelchConfig};

/// How often the loop looks at the stop request and the stall clock while waiting.
const POLL: Duration = Duration::from_millis(100);
/// A stalled live source is reported this often (the first time after this long, or after
/// half the stall timeout if that is shorter, but not before 1 s).
pub const STALL_REPORT_EVERY: Duration = Duration::from_secs(10);

/// The streaming averager of one channel or of two detectors read in one pass.
#[derive(Debug)]
pub enum Averager {
    /// One channel: [`Welch`] (any averaging).
    One(Welch),
    /// Two channels: [`CrossWelch`] (linear mean only). A block holds n samples of channel a
    /// followed by the n samples of channel b.
    Two {
        /// The averager.
        cross: CrossWelch,
        /// Worker threads it was made with (kept for [`Averager::restart`]).
        threads: usize,
    },
}

impl Averager {
    /// An averager of `channels` (1 or 2) channels with `threads` worker threads (1: the
    /// caller's thread only).
    ///
    /// # Errors
    /// Invalid settings; two channels with an averaging other than the linear mean.
    pub fn new(config: WelchConfig, channels: usize, threads: usize) -> Result<Self, DspError> {
        if channels == 2 {
            Ok(Self::Two {
                cross: CrossWelch::new(config)?.with_threads(threads),
                threads,
            })
        } else {
            Ok(Self::One(Welch::new(config)?.with_threads(threads)))
        }
    }

    /// Channels per block (1 or 2).
    pub fn channels(&self) -> usize {
        match self {
            Self::One(_) => 1,
            Self::Two { .. } => 2,
        }
    }

    /// The settings.
    pub fn config(&self) -> &WelchConfig {
        match self {
            Self::One(w) => w.config(),
            Self::Two { cross, .. } => cross.config(),
        }
    }

    /// Worker threads in use.
    pub fn threads(&self) -> usize {
        match self {
            Self::One(w) => w.threads(),
            Self::Two { threads, .. } => *threads,
        }
    }

    /// Feeds the next samples (for two channels, both halves of a paired block); returns the
    /// segments this added to the estimate (with worker threads the estimate lags: see
    /// [`Welch::push`]).
    pub fn push(&mut self, frames: Frames<'_>) -> usize {
        match self {
            Self::One(w) => w.push(frames.a),
            Self::Two { cross, .. } => {
                let before = cross.segments();
                cross.push(frames.a, frames.b.unwrap_or(frames.a));
                cross.segments().saturating_sub(before)
            }
        }
    }

    /// Averages every complete segment pushed so far (waits for the workers).
    pub fn flush(&mut self) {
        match self {
            Self::One(w) => {
                w.flush();
            }
            Self::Two { cross, .. } => cross.flush(),
        }
    }

    /// Drops the segment in progress (a gap in the stream): no segment spans missing samples.
    pub fn discard_pending(&mut self) {
        match self {
            Self::One(w) => w.discard_pending(),
            Self::Two { cross, .. } => cross.discard_pending(),
        }
    }

    /// Forgets the averaged data (same settings).
    pub fn restart(&mut self) {
        match self {
            Self::One(w) => w.restart(),
            Self::Two { cross, threads } => {
                // A fresh averager: the settings were accepted once, so this cannot fail.
                if let Ok(fresh) = CrossWelch::new(cross.config().clone()) {
                    *cross = fresh.with_threads(*threads);
                }
            }
        }
    }

    /// True once the average holds `max_averages` segment positions and takes no more.
    pub fn is_complete(&self) -> bool {
        match self {
            Self::One(w) => w.is_complete(),
            Self::Two { cross, .. } => cross.is_complete(),
        }
    }

    /// Segments in the estimate.
    pub fn segments(&self) -> usize {
        match self {
            Self::One(w) => w.segments(),
            Self::Two { cross, .. } => cross.segments(),
        }
    }

    /// Segments skipped because they held NaN/Inf (or overflowed).
    pub fn skipped_segments(&self) -> usize {
        match self {
            Self::One(w) => w.skipped_segments(),
            Self::Two { cross, .. } => cross.skipped_segments(),
        }
    }

    /// One channel's median reached its memory cap (then the median of the most recent
    /// [`Averager::median_rows_limit`] segments); always false for two channels.
    pub fn median_is_capped(&self) -> bool {
        matches!(self, Self::One(w) if w.median_is_capped())
    }

    /// Most periodograms a median keeps.
    pub fn median_rows_limit(&self) -> usize {
        match self {
            Self::One(w) => w.median_rows_limit(),
            Self::Two { .. } => 0,
        }
    }

    /// The PSD of channel a (of the only channel), or `None` before the first segment.
    pub fn spectrum(&self) -> Option<Spectrum> {
        match self {
            Self::One(w) => w.spectrum(),
            Self::Two { cross, .. } => cross.spectrum().map(|c| c.a),
        }
    }

    /// Both PSDs, the CSD and the coherence (two channels), or `None`.
    pub fn cross_spectrum(&self) -> Option<CrossSpectrum> {
        match self {
            Self::One(_) => None,
            Self::Two { cross, .. } => cross.spectrum(),
        }
    }

    /// One channel: keeps the spectrum of each interval of `len` samples beside the running
    /// estimate, intervals counted from stream sample 0 and the stream now at `position`
    /// ([`Welch::set_intervals`]); two channels keep none.
    pub fn set_intervals(&mut self, len: u64, position: u64) {
        if let Self::One(w) = self {
            w.set_intervals(len, position);
        }
    }

    /// The intervals closed since the last call ([`Welch::take_intervals`]; none for two
    /// channels).
    pub fn take_intervals(&mut self) -> Vec<crate::dsp::welch::IntervalSpectrum> {
        match self {
            Self::One(w) => w.take_intervals(),
            Self::Two { .. } => Vec::new(),
        }
    }

    /// Closes the interval in progress too and returns every interval not yet taken
    /// ([`Welch::finish_interval`]; none for two channels).
    pub fn finish_interval(&mut self) -> Vec<crate::dsp::welch::IntervalSpectrum> {
        match self {
            Self::One(w) => w.finish_interval(),
            Self::Two { .. } => Vec::new(),
        }
    }

    /// Samples per channel after which the run has all it will average, if that is known
    /// before reading: median, exponential and max-hold with `max_averages` K take exactly
    /// the first K segment positions ((K − 1)·hop + N samples); a linear mean stops by itself
    /// after K accepted segments ([`Averager::is_complete`]).
    pub fn sample_cap(&self) -> Option<u64> {
        let c = self.config();
        match (c.max_averages, c.averaging) {
            (Some(k), averaging) if !matches!(averaging, Averaging::Linear) => {
                Some(((k.max(1) - 1) * c.hop() + c.segment) as u64)
            }
            _ => None,
        }
    }
}

/// Samples of one block as the averager takes them: channel a, and channel b of two
/// detectors (the same length).
#[derive(Debug, Clone, Copy)]
pub struct Frames<'a> {
    /// Channel a (the only channel).
    pub a: &'a [f64],
    /// Channel b, if two channels are read.
    pub b: Option<&'a [f64]>,
}

impl<'a> Frames<'a> {
    /// A block of `channels` channels (two: n samples of a, then n of b).
    pub fn of(block: &'a [f64], channels: usize) -> Self {
        if channels == 2 {
            let half = block.len() / 2;
            let (a, b) = block.split_at(half);
            Self {
                a,
                b: Some(b.get(..half).unwrap_or(b)),
            }
        } else {
            Self { a: block, b: None }
        }
    }

    /// Samples per channel.
    pub fn len(&self) -> usize {
        self.a.len()
    }

    /// True for no sample.
    pub fn is_empty(&self) -> bool {
        self.a.is_empty()
    }

    /// The first `n` samples of each channel.
    #[must_use]
    pub fn head(&self, n: usize) -> Self {
        Self {
            a: self.a.get(..n).unwrap_or(self.a),
            b: self.b.map(|b| b.get(..n).unwrap_or(b)),
        }
    }

    /// Splits after `n` samples of each channel.
    pub fn split_at(&self, n: usize) -> (Self, Self) {
        let n = n.min(self.len());
        let (a0, a1) = self.a.split_at(n);
        let (b0, b1) = match self.b {
            Some(b) => {
                let (x, y) = b.split_at(n.min(b.len()));
                (Some(x), Some(y))
            }
            None => (None, None),
        };
        (Self { a: a0, b: b0 }, Self { a: a1, b: b1 })
    }
}

/// How [`drive`] watches its source.
#[derive(Debug, Clone, Default)]
pub struct Watch {
    /// The source delivers in real time: a silent one is reported and may be given up.
    pub live: bool,
    /// Give up after this long without a sample (`None`: wait without limit).
    pub stall_timeout: Option<Duration>,
    /// The source as named in messages.
    pub label: String,
    /// A followed file: every reopening is reported.
    pub follow: bool,
    /// Stop at this instant (benchmarks).
    pub deadline: Option<Instant>,
    /// Take at most this many samples per channel, then stop (counting samples missing at
    /// gaps): [`Averager::sample_cap`], a duration.
    pub limit: Option<u64>,
}

/// What [`drive`] tells its sink along the way.
#[derive(Debug, Clone, PartialEq)]
pub enum StreamMessage {
    /// A live source has been silent for a while (`text`); `limited`: the run gives up after
    /// [`Watch::stall_timeout`] (else it waits without limit).
    Silent {
        /// The sentence.
        text: String,
        /// A stall timeout applies.
        limited: bool,
    },
    /// Information (a followed file reopened).
    Note(String),
}

/// Why a run stopped.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Stop {
    /// The source ended by itself.
    Ended,
    /// A stop was requested (SIGINT/SIGTERM in the CLI), named here.
    Signal(&'static str),
    /// No sample for this long ([`Watch::stall_timeout`]).
    Stalled(Duration),
    /// [`Watch::deadline`] passed.
    Deadline,
    /// The run has all it wanted: the average is complete, [`Watch::limit`] was reached, or
    /// the sink said so.
    Complete,
}

/// What a sink wants after a block.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    /// More samples.
    Continue,
    /// The run is complete.
    Done,
}

/// What [`drive`] saw.
#[derive(Debug, Clone, PartialEq)]
pub struct Outcome {
    /// The reader's last counters (`samples` at least the samples received).
    pub stats: ReaderStats,
    /// Blocks the acquisition thread dropped (0 with back-pressure).
    pub dropped_blocks: u64,
    /// Samples per channel received from the source (whole blocks, also those cut off by
    /// [`Watch::limit`]).
    pub read: u64,
    /// Why it stopped.
    pub stop: Stop,
}

impl Outcome {
    /// The source ended by itself.
    pub fn ended(&self) -> bool {
        self.stop == Stop::Ended
    }
}

/// Why [`drive`] failed.
#[derive(Debug, thiserror::Error)]
pub enum StreamError {
    /// The source failed.
    #[error(transparent)]
    Source(#[from] AcquireError),
    /// The acquisition thread went away without its final event.
    #[error("the acquisition thread ended without saying why")]
    ThreadGone,
    /// The sink could not go on (its own error says why).
    #[error("{0}")]
    Sink(String),
}

/// The consumer's side of [`drive`]: what to do with each block and gap, where progress and
/// messages go, whether a stop was requested. Every method has the behaviour of a plain
/// average (`spectrum`, `analyze`, `bench`).
pub trait StreamSink {
    /// Takes the next samples (already cut to [`Watch::limit`]).
    ///
    /// # Errors
    /// The sink cannot go on ([`StreamError::Sink`]).
    fn block(&mut self, averager: &mut Averager, frames: Frames<'_>) -> Result<Flow, StreamError> {
        averager.push(frames);
        Ok(if averager.is_complete() {
            Flow::Done
        } else {
            Flow::Continue
        })
    }

    /// `samples` are missing before the next block (0: a reopened file or a reconnection).
    fn gap(&mut self, averager: &mut Averager, _samples: u64) {
        averager.discard_pending();
    }

    /// Samples per channel taken so far (and missing at gaps).
    fn progress(&mut self, _position: u64) {}

    /// A warning or a note.
    fn message(&mut self, _message: StreamMessage) {}

    /// A stop was requested (named: "SIGINT"); polled between events.
    fn stop_requested(&mut self) -> Option<&'static str> {
        None
    }
}

/// The plain average with nothing to show: the default [`StreamSink`].
#[derive(Debug, Default)]
pub struct Plain;

impl StreamSink for Plain {}

/// Feeds the acquisition's blocks into `averager` through `sink` until the source ends, the
/// run is complete, or `watch` (stall, deadline, limit) or the sink (a stop request) stops
/// it, then averages every complete segment ([`Averager::flush`]).
///
/// # Errors
/// The source failed, the acquisition thread vanished, or the sink gave up.
pub fn drive(
    acquisition: &Acquisition,
    averager: &mut Averager,
    watch: &Watch,
    sink: &mut dyn StreamSink,
) -> Result<Outcome, StreamError> {
    let result = feed(acquisition, averager, watch, sink);
    averager.flush();
    result
}

/// The loop of [`drive`]. Long because it is one `match` over the acquisition's events and
/// the waits between them; each arm is short, and splitting them apart would only pass the
/// same counters around.
fn feed(
    acquisition: &Acquisition,
    averager: &mut Averager,
    watch: &Watch,
    sink: &mut dyn StreamSink,
) -> Result<Outcome, StreamError> {
    let channels = averager.channels();
    let mut stats = ReaderStats::default();
    let mut dropped_blocks = 0_u64;
    // Samples per channel received, and received plus missing at gaps.
    let mut read: u64 = 0;
    let mut position: u64 = 0;
    let mut reopenings = 0_u64;
    let mut last_sample = Instant::now();
    let first_report = watch.stall_timeout.map_or(STALL_REPORT_EVERY, |t| {
        (t / 2).clamp(Duration::from_secs(1), STALL_REPORT_EVERY)
    });
    let mut next_report = first_report;
    let per_channel = if channels == 2 { " per channel" } else { "" };
    let outcome = |mut stats: ReaderStats, dropped_blocks, read, position: u64, stop| {
        stats.samples = stats.samples.max(position).max(read);
        Ok(Outcome {
            stats,
            dropped_blocks,
            read,
            stop,
        })
    };
    loop {
        if let Some(signal) = sink.stop_requested() {
            return outcome(stats, dropped_blocks, read, position, Stop::Signal(signal));
        }
        let event = match acquisition.events().recv_timeout(POLL) {
            Ok(event) => event,
            Err(RecvTimeoutError::Timeout) => {
                if watch.deadline.is_some_and(|d| Instant::now() >= d) {
                    return outcome(stats, dropped_blocks, read, position, Stop::Deadline);
                }
                if watch.live {
                    let quiet = last_sample.elapsed();
                    if let Some(limit) = watch.stall_timeout
                        && quiet >= limit
                    {
                        let stop = Stop::Stalled(quiet);
                        return outcome(stats, dropped_blocks, read, position, stop);
                    }
                    if quiet >= next_report {
                        let until = watch.stall_timeout.map_or_else(
                            || "waiting without limit".to_string(),
                            |t| format!("giving up at {} s", format_seconds(t.as_secs_f64())),
                        );
                        sink.message(StreamMessage::Silent {
                            text: format!(
                                "no sample from {} for {} s ({} samples{per_channel} so far); \
                                 {until}",
                                watch.label,
                                quiet.as_secs(),
                                stats.samples.max(position).max(read)
                            ),
                            limited: watch.stall_timeout.is_some(),
                        });
                        next_report = quiet + STALL_REPORT_EVERY;
                    }
                }
                continue;
            }
            Err(RecvTimeoutError::Disconnected) => return Err(StreamError::ThreadGone),
        };
        match event {
            AcqEvent::Block(block) => {
                last_sample = Instant::now();
                next_report = first_report;
                let frames = Frames::of(&block, channels);
                let take = watch.limit.map_or(frames.len(), |l| {
                    usize::try_from(l.saturating_sub(position))
                        .unwrap_or(usize::MAX)
                        .min(frames.len())
                });
                let flow = sink.block(averager, frames.head(take));
                read += frames.len() as u64;
                position += if watch.limit.is_some() {
                    take as u64
                } else {
                    frames.len() as u64
                };
                acquisition.recycle(block);
                let flow = flow?;
                sink.progress(position);
                if flow == Flow::Done || watch.limit.is_some_and(|l| position >= l) {
                    return outcome(stats, dropped_blocks, read, position, Stop::Complete);
                }
                if watch.deadline.is_some_and(|d| Instant::now() >= d) {
                    return outcome(stats, dropped_blocks, read, position, Stop::Deadline);
                }
            }
            AcqEvent::Gap { samples } => {
                sink.gap(averager, samples);
                position += samples;
                if watch.follow {
                    reopenings += 1;
                    sink.message(StreamMessage::Note(format!(
                        "{} was truncated, rewritten or replaced: reopened it and reading from \
                         its start (reopening {reopenings}, after {read} samples; no segment \
                         spans the seam)",
                        watch.label
                    )));
                }
            }
            AcqEvent::Status(status) => {
                stats = status.reader;
                dropped_blocks = status.dropped_blocks;
            }
            AcqEvent::Stopped(None) => {
                return outcome(stats, dropped_blocks, read, position, Stop::Ended);
            }
            AcqEvent::Stopped(Some(error)) => return Err(error.into()),
        }
    }
}

/// Seconds for a message: 4 decimals below 10 s, 1 above, trailing zeros dropped.
pub fn format_seconds(seconds: f64) -> String {
    let text = if seconds < 10.0 {
        format!("{seconds:.4}")
    } else {
        format!("{seconds:.1}")
    };
    text.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// One warning per problem the reader or the averager met (a cut-short recording, a partial
/// last frame, non-finite samples and the segments they cost, clipping), worded for both
/// faces: the command line prints them on stderr, the window shows them in its status line.
pub fn reader_warnings(stats: &ReaderStats, skipped_segments: usize) -> Vec<String> {
    let s = |n: u64| if n == 1 { "" } else { "s" };
    let mut warnings = Vec::new();
    if stats.truncated {
        warnings.push(format!(
            "the data ends before the file's header says (recording cut short?); analysed the {} \
             samples present",
            stats.samples
        ));
    }
    if stats.partial_frame_bytes > 0 {
        warnings.push(format!(
            "dropped {} trailing byte{} that do not make a whole frame",
            stats.partial_frame_bytes,
            s(stats.partial_frame_bytes)
        ));
    }
    if stats.non_finite_samples > 0 || skipped_segments > 0 {
        warnings.push(format!(
            "{} non-finite sample{} (NaN/Inf) → {} segment{} skipped",
            stats.non_finite_samples,
            s(stats.non_finite_samples),
            skipped_segments,
            s(skipped_segments as u64)
        ));
    }
    if stats.clipped_samples > 0 {
        warnings.push(format!(
            "{} sample{} at integer full scale (clipping distorts the spectrum)",
            stats.clipped_samples,
            s(stats.clipped_samples)
        ));
    }
    warnings
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::acquire::{AcqOptions, SampleReader};
    use crate::dsp::cross::cross_spectrum;
    use crate::dsp::welch::welch;

    /// A recording in memory; with `b`, a paired reader (blocks of a then b).
    struct Slice {
        a: Vec<f64>,
        b: Option<Vec<f64>>,
        next: usize,
    }

    impl SampleReader for Slice {
        fn sample_rate_hz(&self) -> f64 {
            1000.0
        }
        fn read_block(&mut self, out: &mut [f64]) -> crate::acquire::Result<usize> {
            let per = if self.b.is_some() {
                out.len() / 2
            } else {
                out.len()
            };
            let n = per.min(self.a.len() - self.next);
            let (oa, ob) = out.split_at_mut(n);
            oa.copy_from_slice(&self.a[self.next..self.next + n]);
            if let Some(b) = &self.b {
                ob[..n].copy_from_slice(&b[self.next..self.next + n]);
            }
            self.next += n;
            Ok(if self.b.is_some() { 2 * n } else { n })
        }
        fn stats(&self) -> ReaderStats {
            ReaderStats {
                samples: self.next as u64,
                ..ReaderStats::default()
            }
        }
        fn describe(&self) -> String {
            "slice".into()
        }
        fn channels_delivered(&self) -> usize {
            if self.b.is_some() { 2 } else { 1 }
        }
    }

    /// Deterministic noise (a linear congruential sequence, common practice for tests).
    fn noise(n: usize, seed: u64) -> Vec<f64> {
        let mut x = seed;
        (0..n)
            .map(|_| {
                x = x
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                (x >> 11) as f64 / (1u64 << 53) as f64 - 0.5
            })
            .collect()
    }

    fn run(
        reader: Slice,
        averager: &mut Averager,
        watch: &Watch,
        sink: &mut dyn StreamSink,
    ) -> Outcome {
        let options = AcqOptions {
            block_samples: 1000,
            ..AcqOptions::headless()
        };
        let acquisition = Acquisition::spawn(Box::new(reader), options, None).unwrap();
        drive(&acquisition, averager, watch, sink).unwrap()
    }

    #[test]
    fn one_channel_through_the_loop_equals_welch_of_the_whole_record() {
        let a = noise(20_000, 1);
        let config = WelchConfig::new(1000.0, 512);
        let mut averager = Averager::new(config.clone(), 1, 2).unwrap();
        let reader = Slice {
            a: a.clone(),
            b: None,
            next: 0,
        };
        let outcome = run(reader, &mut averager, &Watch::default(), &mut Plain);
        assert_eq!(outcome.stop, Stop::Ended);
        assert_eq!(outcome.read, 20_000);
        assert_eq!(outcome.stats.samples, 20_000);
        let direct = welch(&a, &config).unwrap();
        // ⌊(L − N)/H⌋ + 1 segments (common practice), the same bits as the whole record.
        assert_eq!(averager.segments(), (20_000 - 512) / 256 + 1);
        assert_eq!(
            averager.spectrum().unwrap().psd_v2_per_hz,
            direct.psd_v2_per_hz
        );
    }

    #[test]
    fn two_channels_through_the_loop_equal_the_cross_spectrum_of_the_record() {
        let a = noise(9_000, 2);
        let b = noise(9_000, 3);
        let config = WelchConfig::new(1000.0, 256);
        let mut averager = Averager::new(config.clone(), 2, 1).unwrap();
        let reader = Slice {
            a: a.clone(),
            b: Some(b.clone()),
            next: 0,
        };
        let outcome = run(reader, &mut averager, &Watch::default(), &mut Plain);
        assert_eq!(outcome.read, 9_000);
        let direct = cross_spectrum(&a, &b, &config).unwrap();
        let got = averager.cross_spectrum().unwrap();
        assert_eq!(got.csd_re_v2_per_hz, direct.csd_re_v2_per_hz);
        assert_eq!(got.psd_b_v2_per_hz, direct.psd_b_v2_per_hz);
        assert_eq!(
            averager.spectrum().unwrap().psd_v2_per_hz,
            direct.a.psd_v2_per_hz
        );
    }

    #[test]
    fn a_median_of_k_takes_exactly_the_first_k_segment_positions() {
        let a = noise(50_000, 4);
        let mut config = WelchConfig::new(1000.0, 512);
        config.averaging = Averaging::Median;
        config.max_averages = Some(10);
        let mut averager = Averager::new(config.clone(), 1, 1).unwrap();
        let cap = averager.sample_cap();
        assert_eq!(cap, Some(9 * 256 + 512));
        let watch = Watch {
            limit: cap,
            ..Watch::default()
        };
        let reader = Slice {
            a: a.clone(),
            b: None,
            next: 0,
        };
        let outcome = run(reader, &mut averager, &watch, &mut Plain);
        assert_eq!(outcome.stop, Stop::Complete);
        assert_eq!(averager.segments(), 10);
        let direct = welch(&a[..9 * 256 + 512], &config).unwrap();
        assert_eq!(
            averager.spectrum().unwrap().psd_v2_per_hz,
            direct.psd_v2_per_hz
        );
    }

    /// A sink that counts what it is given and asks to stop after `stop_after` samples.
    struct Counting {
        taken: usize,
        stop_after: usize,
        progress: u64,
    }

    impl StreamSink for Counting {
        fn block(
            &mut self,
            averager: &mut Averager,
            frames: Frames<'_>,
        ) -> Result<Flow, StreamError> {
            averager.push(frames);
            self.taken += frames.len();
            Ok(if self.taken >= self.stop_after {
                Flow::Done
            } else {
                Flow::Continue
            })
        }
        fn progress(&mut self, position: u64) {
            self.progress = position;
        }
    }

    #[test]
    fn a_sink_sees_every_sample_and_can_end_the_run() {
        let mut averager = Averager::new(WelchConfig::new(1000.0, 256), 1, 1).unwrap();
        let mut sink = Counting {
            taken: 0,
            stop_after: 3_500,
            progress: 0,
        };
        let reader = Slice {
            a: noise(10_000, 5),
            b: None,
            next: 0,
        };
        let outcome = run(reader, &mut averager, &Watch::default(), &mut sink);
        assert_eq!(outcome.stop, Stop::Complete);
        // Blocks of 1000: the fourth block passes 3500.
        assert_eq!(sink.taken, 4_000);
        assert_eq!(sink.progress, 4_000);
        assert_eq!(outcome.read, 4_000);
    }

    #[test]
    fn a_limit_cuts_the_last_block() {
        let mut averager = Averager::new(WelchConfig::new(1000.0, 256), 1, 1).unwrap();
        let mut sink = Counting {
            taken: 0,
            stop_after: usize::MAX,
            progress: 0,
        };
        let watch = Watch {
            limit: Some(2_500),
            ..Watch::default()
        };
        let reader = Slice {
            a: noise(10_000, 6),
            b: None,
            next: 0,
        };
        let outcome = run(reader, &mut averager, &watch, &mut sink);
        assert_eq!(outcome.stop, Stop::Complete);
        assert_eq!(sink.taken, 2_500);
        assert_eq!(outcome.read, 3_000);
    }

    #[test]
    fn frames_split_both_channels_alike() {
        let block: Vec<f64> = (0..10).map(f64::from).collect();
        let f = Frames::of(&block, 2);
        assert_eq!(f.len(), 5);
        assert_eq!(f.b, Some(&block[5..]));
        let (x, y) = f.split_at(2);
        assert_eq!((x.a, x.b), (&block[..2], Some(&block[5..7])));
        assert_eq!((y.a, y.b), (&block[2..5], Some(&block[7..])));
        assert_eq!(f.head(1).b, Some(&block[5..6]));
        assert_eq!(Frames::of(&block, 1).len(), 10);
    }

    #[test]
    fn reader_warnings_name_counts_in_words_without_options() {
        let stats = ReaderStats {
            samples: 100,
            non_finite_samples: 1,
            clipped_samples: 2,
            partial_frame_bytes: 1,
            truncated: true,
            ..ReaderStats::default()
        };
        let w = reader_warnings(&stats, 3);
        assert_eq!(
            w,
            [
                "the data ends before the file's header says (recording cut short?); analysed \
                 the 100 samples present",
                "dropped 1 trailing byte that do not make a whole frame",
                "1 non-finite sample (NaN/Inf) → 3 segments skipped",
                "2 samples at integer full scale (clipping distorts the spectrum)",
            ]
        );
        assert!(w.iter().all(|line| !line.contains("--")));
        assert!(reader_warnings(&ReaderStats::default(), 0).is_empty());
    }

    #[test]
    fn restart_forgets_the_average_of_two_channels_too() {
        let mut averager = Averager::new(WelchConfig::new(1000.0, 256), 2, 1).unwrap();
        let a = noise(2_048, 7);
        averager.push(Frames { a: &a, b: Some(&a) });
        averager.flush();
        assert!(averager.segments() > 0);
        averager.restart();
        assert_eq!(averager.segments(), 0);
        assert!(averager.cross_spectrum().is_none());
    }
}
