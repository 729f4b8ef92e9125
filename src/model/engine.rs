//! The engine: a named thread that owns the acquisition, feeds its blocks into the streaming
//! Welch averager, runs the analysis (calibration, mode fit, quantum references, sidebands,
//! stray peaks) every publish interval, and hands a [`Frame`] to the window over a *bounded*
//! channel (drop-oldest, counted), waking it with a caller-supplied closure. The window
//! never computes a spectrum or a fit; it only draws frames and sends [`EngineCommand`]s.
//!
//! **History.** The waterfall rows and trend points are not taken from the running average:
//! the stream is cut into intervals of [`EngineConfig::history_interval`] (at least 4
//! segments: `N + 3·hop` samples), and each row and point is the spectrum of that interval
//! alone — the mean of the periodograms of the segments wholly inside it, which the Welch
//! averager keeps beside its running estimate ([`crate::dsp::Welch::set_intervals`], no second
//! transform) — analysed with the same settings and its own band that follows the mode by
//! `stillpoint track`'s rule ([`crate::model::trend::follow_band`]). So the window's trend of
//! a recording is `track`'s on the same file and interval. Times: on a recording, stream time
//! (samples / rate: playback speed, pauses and a slow machine do not change them; a recording
//! is never dropped from, its reader waits instead); on a live source (TCP, stdin, a followed
//! file, the demo), seconds on the wall clock since the engine started at the moment the
//! interval closed (samples lost in a gap are not in any interval). Two detectors keep the
//! older rule (a row of the running cross-spectrum once per interval of wall time).
//!
//! **End of a recording.** The panel shows the mean of the whole record and its fit, unless
//! the mode moved by more than its linewidth between the intervals (or the whole-record fit
//! failed while the last interval fits): then it shows the last interval's spectrum and fit
//! and [`EngineStatus::record_note`] says so in one line.

use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

use crossbeam_channel::{Receiver, Sender, TrySendError, bounded, never, select};

use super::decimate::{MinMaxBlocks, log_columns_max};
use super::history::{TrendPoint, WaterfallRow};
use super::state::{SourceKind, WelchSettings};
use super::{ModelError, Result};
use crate::acquire::{
    self, AcqCommand, AcqEvent, AcqOptions, Acquisition, SourceConfig, SourceSpec,
};
use crate::analysis::stream::{Averager, Frames, reader_warnings};
use crate::analysis::{self, AnalysisOptions};
use crate::dsp::cross::CrossSpectrum;
use crate::dsp::{Averaging, Spectrum};
use crate::report::Report;

/// Closure that wakes the window (the window passes `ctx.request_repaint()`).
pub type Waker = Box<dyn Fn() + Send + Sync>;

/// How the engine starts.
#[derive(Debug, Clone, PartialEq)]
pub struct EngineConfig {
    /// Source to open.
    pub source: SourceConfig,
    /// Welch settings (the sample rate comes from the source).
    pub welch: WelchSettings,
    /// Calibration/mode/heterodyne options.
    pub analysis: AnalysisOptions,
    /// Let the fit band follow the fitted mode as it drifts (and pick one automatically
    /// around the strongest line when none is given).
    pub follow_mode: bool,
    /// Playback speed of recordings (1 = real time, `None` = as fast as possible).
    pub playback_speed: Option<f64>,
    /// Interval between frames.
    pub publish_interval: Duration,
    /// Interval between waterfall rows and trend points.
    pub history_interval: Duration,
    /// Columns of a waterfall row.
    pub waterfall_columns: usize,
}

impl EngineConfig {
    /// Defaults (150 ms frames, 1 s history, 480 waterfall columns, real-time playback).
    pub fn new(source: SourceConfig) -> Self {
        Self {
            source,
            welch: WelchSettings::default(),
            analysis: AnalysisOptions::default(),
            follow_mode: true,
            playback_speed: Some(1.0),
            publish_interval: Duration::from_millis(150),
            history_interval: Duration::from_secs(1),
            waterfall_columns: 480,
        }
    }
}

/// Window → engine.
#[derive(Debug, Clone, PartialEq)]
pub enum EngineCommand {
    /// Forget the averaged data and start a new average.
    RestartAverage,
    /// Freeze: stop reading the recording (live sources keep draining) and stop updating.
    Pause,
    /// Resume after [`EngineCommand::Pause`].
    Resume,
    /// New Welch settings (restarts the average).
    SetWelch(WelchSettings),
    /// New calibration/mode/heterodyne options (re-analyses the current spectrum at once).
    SetAnalysis {
        /// The options.
        options: AnalysisOptions,
        /// Band follows the mode.
        follow_mode: bool,
    },
    /// Playback speed of recordings (`None` = as fast as possible).
    SetSpeed(Option<f64>),
    /// Close the current source and open another.
    OpenSource(SourceConfig),
    /// End the engine thread.
    Shutdown,
}

/// Counters and settings shown in the status line.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct EngineStatus {
    /// Human description of the source.
    pub source: String,
    /// Sample rate, Hz.
    pub sample_rate_hz: f64,
    /// Segments in the current average.
    pub averages: usize,
    /// Overlap-corrected independent averages.
    pub k_eff: f64,
    /// Segment length N.
    pub segment: usize,
    /// Bin spacing Δf, Hz.
    pub resolution_hz: f64,
    /// Resolution bandwidth (ENBW), Hz.
    pub rbw_hz: f64,
    /// Time from the arrival of the block that completed the newest segment to this frame.
    pub latency_s: f64,
    /// Acquisition blocks dropped because the engine fell behind.
    pub dropped_blocks: u64,
    /// Samples in those blocks.
    pub dropped_samples: u64,
    /// Gaps in the stream (dropped blocks, reconnections, reopened files) at which the
    /// segment in progress was discarded so that no segment spans missing samples.
    pub gaps: u64,
    /// Frames dropped because the window fell behind.
    pub dropped_frames: u64,
    /// Segments skipped because they held NaN/Inf.
    pub skipped_segments: usize,
    /// Samples received.
    pub samples: u64,
    /// Reader warnings (non-finite samples, clipping, truncation, partial frames).
    pub warnings: Vec<String>,
    /// Paused by the user.
    pub paused: bool,
    /// Set when the stream ended ("end of recording", or the error).
    pub ended: Option<String>,
    /// True when `ended` is an error.
    pub failed: bool,
    /// Seconds since the engine started.
    pub elapsed_s: f64,
    /// Wall time of the last analysis, s.
    pub analysis_s: f64,
    /// How the spectrum is averaged, in words ("mean of every segment (auto: a recording)").
    pub averaging: String,
    /// True for a recording of known length (Restart after its end replays it).
    pub recording: bool,
    /// The average holds the K segments asked for ("at most K") and takes no more.
    pub max_averages_reached: Option<usize>,
    /// A live source has delivered nothing for this long, s (waiting for it).
    pub waiting_s: Option<f64>,
    /// Times a live source reconnected.
    pub reconnects: u64,
    /// The last interruption of a live source, in words ("reconnected after 3.2 s, about
    /// 320 000 samples lost").
    pub stream_note: Option<String>,
    /// At the end of a recording whose mode drifted: what the panel shows instead of the
    /// whole-record mean ("the mode moved 300 Hz during the record; showing the last 1.2 s").
    pub record_note: Option<String>,
    /// Samples per history interval (0: the older wall-clock rule of two detectors).
    pub interval_samples: u64,
}

/// Something that happened during the session, marked on the history (a band set by hand,
/// a gap in a live stream).
#[derive(Debug, Clone, PartialEq)]
pub struct SessionMark {
    /// Seconds since the engine started (the time axis of the history).
    pub time_s: f64,
    /// What happened.
    pub text: String,
}

/// One interval of the history: the spectrum of that interval alone, analysed.
#[derive(Debug, Clone)]
pub struct HistoryEntry {
    /// Start of the interval (the history's time axis), s.
    pub t_start_s: f64,
    /// End of the interval, s (the trend point's and the waterfall row's time).
    pub t_end_s: f64,
    /// Seconds of stream the interval holds (samples / rate).
    pub duration_s: f64,
    /// The waterfall row of the interval's spectrum.
    pub waterfall_row: Option<WaterfallRow>,
    /// The trend point of its analysis.
    pub trend: Option<TrendPoint>,
    /// Its analysis.
    pub report: Option<Arc<Report>>,
    /// The fit band it was analysed with, Hz.
    pub band_hz: Option<(f64, f64)>,
}

/// One update for the window.
#[derive(Debug, Clone)]
pub struct Frame {
    /// Bumped whenever a new source is opened (the window then clears its history).
    pub generation: u64,
    /// The current spectrum (shared, not copied).
    pub spectrum: Option<Arc<Spectrum>>,
    /// Bin frequencies of `spectrum`, Hz (shared while the grid is unchanged).
    pub frequencies_hz: Option<Arc<Vec<f64>>>,
    /// log10 of `spectrum`'s PSD in V²/Hz (NaN where the PSD is not positive), computed here
    /// so the window only decimates and maps (see [`super::state::unit_affine`]).
    pub log_psd: Option<Arc<Vec<f64>>>,
    /// Min/max blocks of `log_psd` (made here once per spectrum, so the window's decimation
    /// reads wide pixel columns from them).
    pub log_psd_blocks: Option<Arc<MinMaxBlocks>>,
    /// Two detectors (`cross_channel` set on the source): both channels' PSDs, the
    /// cross-spectral density and the coherence, of which `spectrum` is channel a.
    pub cross: Option<Arc<CrossSpectrum>>,
    /// The two channels (a, b) of `cross`.
    pub cross_channels: Option<(usize, usize)>,
    /// Analysis of that spectrum (with two detectors: the mode fitted on Re P_ab).
    pub report: Option<Arc<Report>>,
    /// Why the analysis failed (bad options), if it did.
    pub analysis_error: Option<String>,
    /// The fit band in use (after following the mode), Hz.
    pub band_hz: Option<(f64, f64)>,
    /// Status line.
    pub status: EngineStatus,
    /// Intervals of the history closed since the previous frame, oldest first (about one
    /// per history interval; several when a recording plays fast).
    pub history: Vec<HistoryEntry>,
    /// Marks since the previous frame.
    pub marks: Vec<SessionMark>,
}

/// A message that must not be lost (sent on its own channel).
#[derive(Debug, Clone, PartialEq)]
pub enum EngineNotice {
    /// A source was opened (its description).
    Opened(String),
    /// A source could not be opened; the one running before (if any) runs on untouched.
    OpenFailed(String),
    /// Something the user should know that is not a failure (a stream reconnected).
    Info(String),
    /// Something failed (bad settings, a source that stopped with an error); shown in red.
    Error(String),
}

/// Handle of the running engine; dropping it shuts the thread down and joins it.
pub struct Engine {
    commands: Sender<EngineCommand>,
    frames: Receiver<Frame>,
    notices: Receiver<EngineNotice>,
    thread: Option<JoinHandle<()>>,
}

impl std::fmt::Debug for Engine {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Engine").finish_non_exhaustive()
    }
}

const FRAME_QUEUE: usize = 8;
const NOTICE_QUEUE: usize = 64;
const COMMAND_QUEUE: usize = 64;

impl Engine {
    /// Starts the engine thread; the source is opened on that thread (a failure arrives as
    /// an [`EngineNotice::Error`]).
    ///
    /// # Errors
    /// [`ModelError::Spawn`] if the thread cannot be created.
    pub fn start(config: EngineConfig, waker: Waker) -> Result<Self> {
        let (cmd_tx, cmd_rx) = bounded(COMMAND_QUEUE);
        let (frame_tx, frame_rx) = bounded(FRAME_QUEUE);
        let (notice_tx, notice_rx) = bounded(NOTICE_QUEUE);
        let drop_rx = frame_rx.clone();
        let thread = std::thread::Builder::new()
            .name("stillpoint-engine".into())
            .spawn(move || {
                let mut worker = Worker::new(config, frame_tx, drop_rx, notice_tx, waker);
                worker.run(&cmd_rx);
            })
            .map_err(ModelError::Spawn)?;
        Ok(Self {
            commands: cmd_tx,
            frames: frame_rx,
            notices: notice_rx,
            thread: Some(thread),
        })
    }

    /// Sends a command; false if the engine has stopped or its queue is full.
    pub fn send(&self, command: EngineCommand) -> bool {
        self.commands.try_send(command).is_ok()
    }

    /// Every frame waiting, oldest first (each may carry a waterfall row and a trend point).
    pub fn drain_frames(&self) -> Vec<Frame> {
        self.frames.try_iter().collect()
    }

    /// Every notice waiting, oldest first.
    pub fn drain_notices(&self) -> Vec<EngineNotice> {
        self.notices.try_iter().collect()
    }

    /// Waits up to `timeout` for the next frame (tests and headless use).
    pub fn recv_frame_timeout(&self, timeout: Duration) -> Option<Frame> {
        self.frames.recv_timeout(timeout).ok()
    }
}

impl Drop for Engine {
    fn drop(&mut self) {
        let _ = self
            .commands
            .send_timeout(EngineCommand::Shutdown, Duration::from_secs(1));
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

/// A running source: A's acquisition thread plus whether it is live.
struct Source {
    acquisition: Acquisition,
    live: bool,
    kind: SourceKind,
}

/// Events of the acquisition queue. A pipe delivers at most 16 Ki f32 samples per read, so
/// at 100 MS/s 64 events held only 10 ms, less than one analysis pass takes: 1 % of a paced
/// 100 MS/s stdin stream was dropped over 30 s (Xvfb, 2 cores). With 256: 0 and 0.09 % in two
/// such runs. Memory is only taken while the engine is behind (≤ 256 blocks of ≤ 64 Ki).
const SOURCE_QUEUE: usize = 256;

/// A slower source's queue holds at least this much stream (s), within
/// [`SOURCE_QUEUE_BYTES`]: an analysis can take seconds (the `quantum` demo's fits, 500 kS/s
/// at N = 131 072: 2.5–3.5 s on an idle 2-core machine) and the engine takes in nothing
/// meanwhile, so 256 blocks of 20 ms (5.1 s) overflowed: 21 blocks dropped in 25 s; with 10 s,
/// none. Memory is only taken while the engine is behind.
const SOURCE_QUEUE_SECS: f64 = 10.0;

/// Most bytes of samples the longer queue of [`SOURCE_QUEUE_SECS`] may hold (f64 samples).
const SOURCE_QUEUE_BYTES: f64 = 64e6;

/// Blocks the acquisition queue holds for blocks of `block_samples` at `rate_hz`: at least
/// [`SOURCE_QUEUE`], more (up to [`SOURCE_QUEUE_MAX`]) to hold [`SOURCE_QUEUE_SECS`] of a
/// slower source within [`SOURCE_QUEUE_BYTES`].
fn source_queue(block_samples: usize, rate_hz: f64) -> usize {
    if !(rate_hz.is_finite() && rate_hz > 0.0) {
        return SOURCE_QUEUE;
    }
    let block = block_samples.max(1) as f64;
    let by_time = SOURCE_QUEUE_SECS * rate_hz / block;
    let by_bytes = SOURCE_QUEUE_BYTES / (8.0 * block);
    let blocks = by_time.min(by_bytes);
    if blocks.is_finite() && blocks > SOURCE_QUEUE as f64 {
        (blocks.ceil() as usize).min(SOURCE_QUEUE_MAX)
    } else {
        SOURCE_QUEUE
    }
}

/// The longest acquisition queue (blocks).
const SOURCE_QUEUE_MAX: usize = 1024;

/// Opens `config` and starts its acquisition thread with
/// [`Backpressure::DropAndCount`](crate::acquire::Backpressure): the engine never makes the
/// reader wait, blocks it cannot take in time are dropped and counted. Recordings and the demo
/// are paced at `speed` × real time; live sources come as fast as they come.
fn start_source(config: &SourceConfig, speed: Option<f64>) -> Result<(Source, f64, String)> {
    let mut config = config.clone();
    // The window keeps a TCP source across a dropped connection (with back-off), so the
    // average and the history survive a restarted server.
    config.reconnect = matches!(config.spec, SourceSpec::Tcp(_));
    let config = &config;
    let reader = acquire::open(config).map_err(ModelError::Source)?;
    let live = reader.is_live() || config.spec.is_live() || config.follow;
    let kind = match acquire::known_length(config) {
        Some(len) if !live => SourceKind::Recording(len),
        _ => SourceKind::Live,
    };
    let rate = reader.sample_rate_hz();
    let block_samples = ((rate * 0.02) as usize).clamp(256, 1 << 16);
    let options = AcqOptions {
        // A recording is never dropped from (its reader waits for the engine: playback only
        // slows down), so its history is exactly the record's; live sources never wait.
        backpressure: if matches!(kind, SourceKind::Recording(_)) {
            acquire::Backpressure::Block
        } else {
            acquire::Backpressure::DropAndCount
        },
        channel_capacity: source_queue(block_samples, rate),
        block_samples,
        speed,
        ..AcqOptions::window()
    };
    let acquisition = Acquisition::spawn(reader, options, None).map_err(ModelError::Source)?;
    let description = acquisition.description().to_string();
    Ok((
        Source {
            acquisition,
            live,
            kind,
        },
        rate,
        description,
    ))
}

/// Everything the engine thread owns.
struct Worker {
    config: EngineConfig,
    frames: Sender<Frame>,
    frames_drop: Receiver<Frame>,
    notices: Sender<EngineNotice>,
    waker: Waker,
    started: Instant,
    source: Option<Source>,
    /// The Welch averager (two detectors: the cross-spectral one); `None` after bad settings.
    averager: Option<Averager>,
    /// Its newest estimate.
    cross_spectrum: Option<Arc<CrossSpectrum>>,
    sample_rate_hz: f64,
    generation: u64,
    status: EngineStatus,
    band_hz: Option<(f64, f64)>,
    waterfall_range_hz: Option<(f64, f64)>,
    spectrum: Option<Arc<Spectrum>>,
    frequencies_hz: Option<Arc<Vec<f64>>>,
    log_psd: Option<Arc<Vec<f64>>>,
    log_psd_blocks: Option<Arc<MinMaxBlocks>>,
    report: Option<Arc<Report>>,
    analysis_error: Option<String>,
    segments_at_analysis: usize,
    /// Blocks were thrown away while frozen: the next segment starts after them.
    skipped_while_paused: bool,
    dirty: bool,
    /// A live source's last analysis was a history interval's: the running average has the
    /// next turn (one analysis per frame, taking turns, so neither starves the other).
    running_owed: bool,
    last_publish: Instant,
    last_history: Option<Instant>,
    last_segment_arrival: Option<Instant>,
    /// What the source is (for the automatic Welch settings).
    source_kind: SourceKind,
    /// When the last block arrived (or the source was opened).
    last_block: Instant,
    /// A reconnection was announced (Gap without missing samples) and no block came since.
    reconnected: bool,
    /// Take a history row at the next publish whatever the interval (end of a recording).
    history_now: bool,
    /// Marks not yet published.
    marks: Vec<SessionMark>,
    /// Samples per history interval.
    interval_samples: u64,
    /// The fit band of the interval analyses (follows the mode by `track`'s rule).
    interval_band_hz: Option<(f64, f64)>,
    /// End of the last history interval, s.
    last_interval_end_s: Option<f64>,
    /// The newest complete interval: its spectrum, analysis, band and length (s).
    last_interval: Option<ShownInterval>,
    /// Lowest and highest fitted f_m of the intervals since the source opened, with σ.
    drift: Option<Drift>,
    /// History intervals published since the source opened.
    intervals_published: u64,
}

/// A history interval kept for the end of a recording.
#[derive(Debug, Clone)]
struct ShownInterval {
    spectrum: Arc<Spectrum>,
    report: Arc<Report>,
    band_hz: Option<(f64, f64)>,
    duration_s: f64,
    complete: bool,
}

/// The range of the fitted mode frequency over the intervals: (f, σ) at its ends.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Drift {
    lowest: (f64, f64),
    highest: (f64, f64),
}

impl Drift {
    fn add(this: Option<Self>, f: f64, sigma: f64) -> Self {
        match this {
            None => Self {
                lowest: (f, sigma),
                highest: (f, sigma),
            },
            Some(mut d) => {
                if f < d.lowest.0 {
                    d.lowest = (f, sigma);
                }
                if f > d.highest.0 {
                    d.highest = (f, sigma);
                }
                d
            }
        }
    }

    /// How far the mode moved, Hz, and whether that is more than `linewidth_hz` beyond the
    /// scatter of the two fits (2σ of their difference).
    fn moved_beyond(&self, linewidth_hz: f64) -> Option<f64> {
        let moved = self.highest.0 - self.lowest.0;
        let sigma = self.highest.1.hypot(self.lowest.1);
        (moved > linewidth_hz + 2.0 * sigma).then_some(moved)
    }
}

impl Worker {
    fn new(
        config: EngineConfig,
        frames: Sender<Frame>,
        frames_drop: Receiver<Frame>,
        notices: Sender<EngineNotice>,
        waker: Waker,
    ) -> Self {
        let band_hz = config.analysis.mode_band_hz;
        Self {
            config,
            frames,
            frames_drop,
            notices,
            waker,
            started: Instant::now(),
            source: None,
            averager: None,
            cross_spectrum: None,
            sample_rate_hz: 0.0,
            generation: 0,
            status: EngineStatus::default(),
            band_hz,
            waterfall_range_hz: None,
            spectrum: None,
            frequencies_hz: None,
            log_psd: None,
            log_psd_blocks: None,
            report: None,
            analysis_error: None,
            segments_at_analysis: 0,
            skipped_while_paused: false,
            dirty: false,
            running_owed: false,
            last_publish: Instant::now(),
            last_history: None,
            last_segment_arrival: None,
            source_kind: SourceKind::Live,
            last_block: Instant::now(),
            reconnected: false,
            history_now: false,
            marks: Vec::new(),
            interval_samples: 0,
            interval_band_hz: None,
            last_interval_end_s: None,
            last_interval: None,
            drift: None,
            intervals_published: 0,
        }
    }

    /// The history's clock, s: stream time (samples / rate) on a recording, so playback
    /// speed does not change it; the wall clock since the engine started on a live source.
    fn clock_s(&self) -> f64 {
        if self.status.recording && self.sample_rate_hz > 0.0 {
            self.status.samples as f64 / self.sample_rate_hz
        } else {
            self.started.elapsed().as_secs_f64()
        }
    }

    /// Channels per block of the averager (2: two detectors; 1 also without an averager).
    fn channels(&self) -> usize {
        self.averager.as_ref().map_or(1, Averager::channels)
    }

    /// Two detectors are averaged.
    fn two_channels(&self) -> bool {
        self.channels() == 2
    }

    /// The channels (a, b) when two detectors are read.
    fn cross_channels(&self) -> Option<(usize, usize)> {
        self.config
            .source
            .cross_channel
            .map(|b| (self.config.source.channel, b))
    }

    fn mark(&mut self, text: String) {
        let time_s = self.clock_s();
        self.marks.push(SessionMark { time_s, text });
        self.dirty = true;
    }

    fn notice(&self, notice: EngineNotice) {
        let _ = self.notices.try_send(notice);
        (self.waker)();
    }

    fn run(&mut self, commands: &Receiver<EngineCommand>) {
        let source = self.config.source.clone();
        self.open(&source);
        loop {
            let wait = self
                .config
                .publish_interval
                .saturating_sub(self.last_publish.elapsed());
            let events = self
                .source
                .as_ref()
                .map_or_else(never, |s| s.acquisition.events().clone());
            select! {
                recv(commands) -> cmd => match cmd {
                    Ok(EngineCommand::Shutdown) | Err(_) => break,
                    Ok(cmd) => self.command(cmd),
                },
                recv(events) -> ev => match ev {
                    Ok(ev) => {
                        self.event(ev);
                        // Take in what queued up meanwhile (after an analysis of a second or
                        // more, a live source has queued that long) before the next frame's
                        // analysis: one event per frame would let a slow fit starve the
                        // queue until the source drops. At most one queue's worth.
                        for _ in 0..SOURCE_QUEUE_MAX {
                            match events.try_recv() {
                                Ok(ev) => self.event(ev),
                                Err(_) => break,
                            }
                        }
                    }
                    Err(_) => {
                        // The source thread went away without a Stopped event.
                        if self.status.ended.is_none() {
                            self.status.ended = Some("source closed".into());
                        }
                        self.source = None;
                        self.dirty = true;
                    }
                },
                default(wait) => {}
            }
            if self.last_publish.elapsed() >= self.config.publish_interval {
                self.publish();
            }
        }
        self.source = None;
    }

    /// Opens `config`. On failure the source running before (if any) keeps running and
    /// everything shown from it stays: only a notice says what went wrong.
    fn open(&mut self, config: &SourceConfig) {
        match start_source(config, self.config.playback_speed) {
            Ok((source, rate, description)) => {
                self.generation += 1;
                self.spectrum = None;
                self.cross_spectrum = None;
                self.frequencies_hz = None;
                self.log_psd = None;
                self.log_psd_blocks = None;
                self.report = None;
                self.analysis_error = None;
                self.last_history = None;
                self.last_segment_arrival = None;
                self.band_hz = self.config.analysis.mode_band_hz;
                self.waterfall_range_hz = None;
                self.status = EngineStatus::default();
                self.marks.clear();
                self.reconnected = false;
                self.history_now = false;
                self.interval_band_hz = None;
                self.last_interval_end_s = None;
                self.last_interval = None;
                self.drift = None;
                self.intervals_published = 0;
                self.last_block = Instant::now();
                self.sample_rate_hz = rate;
                self.source_kind = source.kind;
                self.status.recording = matches!(source.kind, SourceKind::Recording(_));
                self.status.source = description.clone();
                self.status.sample_rate_hz = rate;
                self.source = Some(source);
                self.config.source = config.clone();
                self.rebuild_welch();
                self.notice(EngineNotice::Opened(description));
            }
            Err(e) => {
                let text = format!("cannot open source: {e}");
                if self.source.is_none() && self.spectrum.is_none() {
                    // Nothing was running: the status line says it too.
                    self.status.ended = Some(text.clone());
                    self.status.failed = true;
                }
                self.notice(EngineNotice::OpenFailed(text));
            }
        }
        self.dirty = true;
    }

    fn rebuild_welch(&mut self) {
        let mut cfg = self
            .config
            .welch
            .to_config_for(self.sample_rate_hz, self.source_kind);
        let segment = cfg.segment;
        self.averager = None;
        self.cross_spectrum = None;
        self.segments_at_analysis = 0;
        let channels = if self.config.source.cross_channel.is_some() {
            // The cross-spectrum is a mean: its uncorrelated residual falls as 1/√K_eff only
            // for a linear average (METHODS.md §10), so two detectors always average linearly.
            cfg.averaging = Averaging::Linear;
            2
        } else {
            1
        };
        if channels == 1 {
            // History intervals: the interval asked for, but at least 4 segments.
            let hop = cfg.hop() as u64;
            let asked = (self.config.history_interval.as_secs_f64() * self.sample_rate_hz).round();
            let asked = if asked.is_finite() && asked >= 1.0 {
                asked as u64
            } else {
                1
            };
            self.interval_samples = asked.max(segment as u64 + 3 * hop);
        }
        match Averager::new(cfg, channels, 1) {
            Ok(mut a) => {
                a.set_intervals(self.interval_samples, self.status.samples);
                self.averager = Some(a);
            }
            Err(e) => self.notice(EngineNotice::Error(format!("averaging settings: {e}"))),
        }
        self.status.interval_samples = if self.averager.as_ref().is_some_and(|a| a.channels() == 1)
        {
            self.interval_samples
        } else {
            0
        };
        self.status.segment = segment;
        self.status.averaging = if self.two_channels() {
            "mean (two detectors: the cross-spectrum is a linear average)".to_string()
        } else {
            self.config.welch.describe_for(self.source_kind)
        };
        self.status.max_averages_reached = None;
        self.dirty = true;
    }

    fn command(&mut self, command: EngineCommand) {
        match command {
            EngineCommand::RestartAverage => {
                if self.status.recording && self.status.ended.is_some() {
                    // The recording has been played: play it again.
                    let source = self.config.source.clone();
                    self.open(&source);
                    return;
                }
                self.status.max_averages_reached = None;
                if self.two_channels() {
                    self.rebuild_welch();
                } else if let Some(a) = self.averager.as_mut() {
                    a.restart();
                }
                self.segments_at_analysis = 0;
                self.dirty = true;
            }
            EngineCommand::Pause => {
                self.status.paused = true;
                if let Some(s) = &self.source {
                    s.acquisition.send(AcqCommand::Pause);
                }
                self.dirty = true;
            }
            EngineCommand::Resume => {
                self.status.paused = false;
                if let Some(s) = &self.source {
                    s.acquisition.send(AcqCommand::Resume);
                }
                self.dirty = true;
            }
            EngineCommand::SetWelch(settings) => {
                self.config.welch = settings;
                if self.sample_rate_hz > 0.0 {
                    self.rebuild_welch();
                }
            }
            EngineCommand::SetAnalysis {
                options,
                follow_mode,
            } => {
                if options.mode_band_hz != self.band_hz
                    && let Some((lo, hi)) = options.mode_band_hz
                {
                    // A band set by hand: the history is kept and the change marked on it;
                    // the waterfall's span moves only if the new band leaves it.
                    if self
                        .waterfall_range_hz
                        .is_some_and(|(a, b)| lo < a || hi > b)
                    {
                        self.waterfall_range_hz = None;
                    }
                    self.mark(format!("fit band set to {:.0} … {:.0} Hz", lo, hi));
                }
                self.band_hz = options.mode_band_hz;
                self.config.analysis = options;
                self.config.follow_mode = follow_mode;
                self.analyse();
                self.dirty = true;
            }
            EngineCommand::SetSpeed(speed) => {
                self.config.playback_speed = speed;
                if let Some(s) = &self.source {
                    s.acquisition.send(AcqCommand::Speed(speed));
                }
            }
            EngineCommand::OpenSource(config) => self.open(&config),
            EngineCommand::Shutdown => {}
        }
    }

    fn event(&mut self, event: AcqEvent) {
        match event {
            AcqEvent::Block(block) => {
                // Samples per channel (a paired block holds both channels).
                let per_channel = block.len() / self.channels();
                self.status.samples += per_channel as u64;
                self.block_arrived(block.len());
                if self.status.paused {
                    self.skipped_while_paused = true;
                    return;
                }
                if let Some(a) = self.averager.as_mut() {
                    if std::mem::take(&mut self.skipped_while_paused) {
                        // The frozen blocks are missing: no segment spans them.
                        a.discard_pending();
                    }
                    // A paired block: n samples of channel a, then n of channel b.
                    let channels = a.channels();
                    if a.push(Frames::of(&block, channels)) > 0 {
                        self.last_segment_arrival = Some(Instant::now());
                    }
                }
                if let Some(s) = &self.source {
                    s.acquisition.recycle(block);
                }
            }
            AcqEvent::Gap { samples } => {
                // Samples are missing: the next segment starts after the gap instead of
                // spanning it (a segment across a gap has a phase jump). The dropped blocks
                // themselves are counted in the status.
                if let Some(a) = self.averager.as_mut() {
                    a.discard_pending();
                }
                self.status.gaps += 1;
                if samples == 0 {
                    self.reconnected = true;
                    self.status.reconnects += 1;
                }
                self.dirty = true;
            }
            AcqEvent::Status(s) => {
                self.check_silence();
                let skipped = self.averager.as_ref().map_or(0, Averager::skipped_segments);
                let mut warnings = reader_warnings(&s.reader, skipped);
                if s.reader.reconnects > 0 {
                    // The command line notes each reopening as it happens; the window keeps
                    // the count beside the other counters.
                    warnings.push(format!("{} reconnects", s.reader.reconnects));
                }
                // A changed counter or warning is news even without a new segment (a stalled
                // or reconnecting stream): publish it.
                if warnings != self.status.warnings
                    || s.dropped_blocks != self.status.dropped_blocks
                    || s.dropped_samples != self.status.dropped_samples * self.channels() as u64
                {
                    self.dirty = true;
                }
                self.status.dropped_blocks = s.dropped_blocks;
                // Per channel, as `samples` (a paired block holds both channels).
                self.status.dropped_samples = s.dropped_samples / self.channels() as u64;
                self.status.warnings = warnings;
                if !s.description.is_empty() && s.description != self.status.source {
                    self.status.source = s.description;
                    self.dirty = true;
                }
            }
            AcqEvent::Stopped(None) => {
                self.status.ended = Some(if self.source.as_ref().is_some_and(|s| s.live) {
                    "stream closed".into()
                } else {
                    "end of recording".into()
                });
                self.status.waiting_s = None;
                // The last state of the record goes into the history too.
                self.history_now = true;
                self.dirty = true;
            }
            AcqEvent::Stopped(Some(e)) => {
                let text = format!("source stopped: {e}");
                self.status.ended = Some(text.clone());
                self.status.failed = true;
                self.notice(EngineNotice::Error(text));
                self.dirty = true;
            }
        }
    }

    /// A block arrived: if the live source had been silent (or had reconnected), say for how
    /// long and about how many samples that cost, and mark it on the history.
    fn block_arrived(&mut self, _samples: usize) {
        let silent_s = self.last_block.elapsed().as_secs_f64();
        self.last_block = Instant::now();
        let was_waiting = self.status.waiting_s.take().is_some();
        let reconnected = std::mem::take(&mut self.reconnected);
        let live = self.source.as_ref().is_some_and(|s| s.live);
        if !live || !(was_waiting || reconnected) {
            return;
        }
        let lost = (silent_s * self.sample_rate_hz).round();
        let what = if reconnected {
            "reconnected"
        } else {
            "stream resumed"
        };
        let text = format!(
            "{what} after {silent_s:.1} s without samples (about {} samples lost; the average \
             and the history go on)",
            crate::model::format::group_thousands(lost)
        );
        self.status.stream_note = Some(text.clone());
        self.mark(format!("{what} after {silent_s:.1} s"));
        self.notice(EngineNotice::Info(text));
    }

    /// A live source that has sent nothing for a second is shown as waiting (updated once a
    /// second, so the window repaints only then).
    fn check_silence(&mut self) {
        let live = self.source.as_ref().is_some_and(|s| s.live);
        if !live || self.status.paused || self.status.ended.is_some() {
            return;
        }
        let silent_s = self.last_block.elapsed().as_secs_f64();
        if silent_s >= 1.0 {
            let shown = self.status.waiting_s.map(f64::floor);
            self.status.waiting_s = Some(silent_s);
            if shown != Some(silent_s.floor()) {
                self.dirty = true;
            }
        }
    }

    /// Runs the analysis on the newest spectrum (on this thread), following the mode.
    fn analyse(&mut self) {
        let Some(spectrum) = self.spectrum.clone() else {
            return;
        };
        let t0 = Instant::now();
        let mut options = self.config.analysis.clone();
        options.mode_band_hz = self.band_hz;
        let cross = self.cross_spectrum.clone();
        let channels = self.cross_channels();
        let run = |options: &AnalysisOptions| match (&cross, channels) {
            (Some(c), Some(ch)) => crate::report::cross::analyze_cross(c, options, ch),
            _ => analysis::analyze(&spectrum, options),
        };
        let mut result = run(&options);
        if self.config.follow_mode
            && let Ok(r) = &result
        {
            let new_band = match self.band_hz {
                None => auto_band(&spectrum, r, &options),
                Some(band) => follow_band(band, r, &spectrum),
            };
            if new_band.is_some() && new_band != self.band_hz {
                self.band_hz = new_band;
                options.mode_band_hz = new_band;
                result = run(&options);
            }
        }
        match result {
            Ok(r) => {
                self.report = Some(Arc::new(r));
                self.analysis_error = None;
            }
            Err(e) => {
                self.analysis_error = Some(e.to_string());
            }
        }
        self.status.analysis_s = t0.elapsed().as_secs_f64();
    }

    /// Shows `spectrum` (the running estimate, or at the end of a drifting recording its
    /// last interval): the frame's log PSD and its min/max blocks are made here once.
    fn show_spectrum(&mut self, spectrum: Option<Arc<Spectrum>>) {
        self.spectrum = spectrum;
        let Some(sp) = &self.spectrum else {
            return;
        };
        let grid_changed = self
            .frequencies_hz
            .as_ref()
            .is_none_or(|f| f.len() != sp.len() || f.get(1).copied() != Some(sp.resolution_hz));
        if grid_changed {
            self.frequencies_hz = Some(Arc::new(sp.frequencies_hz()));
        }
        let log_psd: Vec<f64> = sp
            .psd_v2_per_hz
            .iter()
            .map(|&p| {
                if p > 0.0 && p.is_finite() {
                    p.log10()
                } else {
                    f64::NAN
                }
            })
            .collect();
        self.log_psd_blocks = Some(Arc::new(MinMaxBlocks::new(&log_psd)));
        self.log_psd = Some(Arc::new(log_psd));
    }

    /// The history intervals closed since the last frame, each analysed on its own. At the
    /// end of the stream the interval in progress is closed too; like `track`, a partial last
    /// interval becomes a row only when it is the only one.
    fn history_intervals(&mut self, ended_now: bool, analyse_newest: bool) -> Vec<HistoryEntry> {
        let Some(w) = self.averager.as_mut() else {
            return Vec::new();
        };
        let mut intervals = if ended_now {
            w.finish_interval()
        } else {
            w.take_intervals()
        };
        let len = self.interval_samples;
        if ended_now
            && intervals.last().is_some_and(|iv| iv.end - iv.start < len)
            && self.intervals_published + intervals.len() as u64 > 1
        {
            intervals.pop();
        }
        // A live source never waits for the engine: when several intervals closed since the
        // last frame (the engine is behind, an analysis of a noisy interval can take seconds),
        // only the newest is analysed (and only on its turn, `analyse_newest`); the others give
        // waterfall rows. A recording's reader waits, so each of its intervals is analysed.
        let count = intervals.len();
        let recording = self.status.recording;
        intervals
            .into_iter()
            .enumerate()
            .map(|(i, iv)| {
                let complete = iv.end - iv.start >= len;
                self.history_entry(
                    iv,
                    complete,
                    recording || (analyse_newest && i + 1 == count),
                )
            })
            .collect()
    }

    /// Analyses one interval's spectrum with the window's settings and the interval band,
    /// then moves that band onto the fitted mode by `track`'s rule.
    fn history_entry(
        &mut self,
        iv: crate::dsp::IntervalSpectrum,
        complete: bool,
        analyse: bool,
    ) -> HistoryEntry {
        let rate = self.sample_rate_hz.max(f64::MIN_POSITIVE);
        let duration_s = (iv.end - iv.start) as f64 / rate;
        let (t_start_s, t_end_s) = if self.status.recording {
            (iv.start as f64 / rate, iv.end as f64 / rate)
        } else {
            let end = self.clock_s();
            let start = self
                .last_interval_end_s
                .unwrap_or(end - duration_s)
                .min(end);
            (start, end)
        };
        self.last_interval_end_s = Some(t_end_s);
        self.intervals_published += 1;
        let spectrum = Arc::new(iv.spectrum);
        if self.interval_band_hz.is_none() {
            self.interval_band_hz = self.band_hz;
        }
        let band = self.interval_band_hz;
        let mut options = self.config.analysis.clone();
        options.mode_band_hz = band;
        // The stray-peak search is left out: nothing of a trend point depends on it.
        let report = if analyse {
            analysis::analyze_without_peaks(&spectrum, &options)
                .ok()
                .map(Arc::new)
        } else {
            None
        };
        if let Some(r) = &report {
            if self.config.follow_mode {
                let nyquist = 0.5 * spectrum.sample_rate_hz;
                self.interval_band_hz = crate::model::trend::follow_band(band, r, nyquist);
            }
            if let (Some(f), Some(sigma)) = (r.mode.frequency_hz, r.mode.frequency_hz_uncertainty)
                && f.is_finite()
                && sigma.is_finite()
            {
                self.drift = Some(Drift::add(self.drift, f, sigma));
            }
            self.last_interval = Some(ShownInterval {
                spectrum: Arc::clone(&spectrum),
                report: Arc::clone(r),
                band_hz: band,
                duration_s,
                complete,
            });
        }
        if self.waterfall_range_hz.is_none() {
            self.waterfall_range_hz = band.or(self.band_hz).map(|b| waterfall_span(b, &spectrum));
        }
        HistoryEntry {
            t_start_s,
            t_end_s,
            duration_s,
            waterfall_row: waterfall_row_of(
                &spectrum,
                self.waterfall_range_hz,
                self.config.waterfall_columns,
                t_end_s,
            ),
            trend: report.as_ref().map(|r| trend_point(r, t_end_s)),
            report,
            band_hz: band,
        }
    }

    /// The end of a recording: the whole-record mean stays on the panel unless the mode
    /// moved by more than its linewidth between the intervals, or the whole-record fit failed
    /// while the last interval fits; then the last interval is shown, and said.
    fn choose_final_state(&mut self) {
        let Some(last) = self.last_interval.clone() else {
            return;
        };
        let fitted = last.report.mode.frequency_hz.is_some_and(f64::is_finite);
        let Some(gamma_last) = last
            .report
            .mode
            .linewidth_hz
            .filter(|g| g.is_finite() && fitted)
        else {
            return;
        };
        let whole_fits = self
            .report
            .as_ref()
            .is_some_and(|r| r.mode.frequency_hz.is_some_and(f64::is_finite));
        let reason = match self.drift.and_then(|d| d.moved_beyond(gamma_last)) {
            Some(moved) => format!(
                "the mode moved {} during the record",
                super::format::hz_words(moved)
            ),
            None if !whole_fits => "the fit of the whole record found no mode".to_string(),
            None => return,
        };
        let what = if last.complete {
            format!(
                "showing the last {} s",
                super::format::seconds_words(last.duration_s)
            )
        } else {
            format!(
                "showing the last {} s (a partial interval)",
                super::format::seconds_words(last.duration_s)
            )
        };
        self.status.record_note = Some(format!("{reason}; {what}"));
        self.band_hz = last.band_hz;
        self.report = Some(last.report);
        self.analysis_error = None;
        self.show_spectrum(Some(last.spectrum));
    }

    /// The running estimate, made and analysed.
    fn refresh_running(&mut self, segments: usize) {
        let Some(a) = &self.averager else {
            return;
        };
        let spectrum = if a.channels() == 2 {
            self.cross_spectrum = a.cross_spectrum().map(Arc::new);
            self.cross_spectrum.as_ref().map(|c| Arc::new(c.a.clone()))
        } else {
            a.spectrum().map(Arc::new)
        };
        self.show_spectrum(spectrum);
        self.segments_at_analysis = segments;
        self.analyse();
    }

    fn publish(&mut self) {
        self.last_publish = Instant::now();
        if let Some(a) = self.averager.as_mut() {
            // Whole groups of two detectors wait for their span; every complete segment
            // counts now (one channel on this thread: nothing waits).
            a.flush();
        }
        let segments = self.averager.as_ref().map_or(0, Averager::segments);
        let history_now = std::mem::take(&mut self.history_now);
        let mut fresh = segments != self.segments_at_analysis;
        let recording = self.status.recording;
        if fresh && recording {
            // The running average first: its band (found or followed) starts the intervals'.
            self.refresh_running(segments);
        }
        // A live source: one analysis per frame (as before the history had its own, so a
        // live source is not dropped from for it), the newest closed interval's and the
        // running average's by turns: when intervals close faster than frames (a fast
        // source, a loaded machine) the running average is still analysed every other frame.
        let interval_turn = recording || !self.running_owed;
        let mut history = self.history_intervals(history_now, interval_turn);
        if fresh && !recording {
            // The newest interval's analysis was run (whether or not it found the mode):
            // the running average waits for the next frame.
            if interval_turn && !history.is_empty() {
                fresh = false;
                self.dirty = true;
                self.running_owed = true;
            } else {
                self.refresh_running(segments);
                self.running_owed = false;
            }
        }
        if history_now && self.status.recording && self.status.ended.is_some() {
            self.choose_final_state();
        }
        if !fresh && !self.dirty && history.is_empty() {
            return;
        }
        self.dirty = false;
        if let Some(a) = &self.averager {
            self.status.skipped_segments = a.skipped_segments();
        }
        if let Some(s) = &self.spectrum {
            self.status.averages = s.averages;
            self.status.k_eff = s.k_eff;
            self.status.segment = s.segment;
            self.status.resolution_hz = s.resolution_hz;
            self.status.rbw_hz = s.enbw_hz;
        } else {
            self.status.averages = 0;
        }
        if fresh {
            // From the arrival of the newest segment to its frame; held (not growing) while
            // nothing new arrives (a recording that has ended, a full "at most K" average).
            self.status.latency_s = self
                .last_segment_arrival
                .map_or(0.0, |t| t.elapsed().as_secs_f64());
        }
        if let (Some(k), Some(s)) = (self.config.welch.max_averages, &self.spectrum)
            && s.averages >= k
            && self.status.max_averages_reached.is_none()
            && !matches!(
                s.averaging,
                crate::dsp::Averaging::Exponential { .. } | crate::dsp::Averaging::MaxHold
            )
        {
            self.status.max_averages_reached = Some(k);
        }
        self.status.elapsed_s = self.started.elapsed().as_secs_f64();

        // Two detectors: a row of the running cross-spectrum once per interval of wall time.
        if self.averager.as_ref().is_some_and(|a| a.channels() == 2) {
            let history_due = self
                .last_history
                .is_none_or(|t| t.elapsed() >= self.config.history_interval);
            if (fresh && history_due || history_now)
                && !self.status.paused
                && let Some(s) = self.spectrum.clone()
            {
                self.last_history = Some(Instant::now());
                if self.waterfall_range_hz.is_none() {
                    self.waterfall_range_hz = self.band_hz.map(|b| waterfall_span(b, &s));
                }
                let t_end_s = self.clock_s();
                let t_start_s = self.last_interval_end_s.unwrap_or(0.0).min(t_end_s);
                self.last_interval_end_s = Some(t_end_s);
                history.push(HistoryEntry {
                    t_start_s,
                    t_end_s,
                    duration_s: t_end_s - t_start_s,
                    waterfall_row: waterfall_row_of(
                        &s,
                        self.waterfall_range_hz,
                        self.config.waterfall_columns,
                        t_end_s,
                    ),
                    trend: self.report.as_ref().map(|r| trend_point(r, t_end_s)),
                    report: self.report.clone(),
                    band_hz: self.band_hz,
                });
            }
        }
        let frame = Frame {
            generation: self.generation,
            spectrum: self.spectrum.clone(),
            cross: self.cross_spectrum.clone(),
            cross_channels: self.cross_channels(),
            frequencies_hz: self.frequencies_hz.clone(),
            log_psd: self.log_psd.clone(),
            log_psd_blocks: self.log_psd_blocks.clone(),
            report: self.report.clone(),
            analysis_error: self.analysis_error.clone(),
            band_hz: self.band_hz,
            status: self.status.clone(),
            history,
            marks: std::mem::take(&mut self.marks),
        };
        if let Err(TrySendError::Full(frame)) = self.frames.try_send(frame) {
            let _ = self.frames_drop.try_recv();
            self.status.dropped_frames += 1;
            let _ = self.frames.try_send(frame);
        }
        (self.waker)();
    }
}

/// The waterfall span for a fit band: the band and 2.5 band widths either side (so the
/// mode's drift during a cooldown and a nearby calibration tone stay in view), clipped to
/// the spectrum. Fixed once chosen, so rows stay comparable while the band follows the mode.
fn waterfall_span(band: (f64, f64), s: &Spectrum) -> (f64, f64) {
    let w = band.1 - band.0;
    let nyquist = s.frequency_hz(s.len().saturating_sub(1));
    let lo = (band.0 - 2.5 * w).max(s.resolution_hz);
    let hi = (band.1 + 2.5 * w).min(nyquist);
    if hi > lo {
        (lo, hi)
    } else {
        (s.resolution_hz, nyquist)
    }
}

/// Waterfall row over `range_hz`, or (Δf, Nyquist) without one.
fn waterfall_row_of(
    s: &Spectrum,
    range_hz: Option<(f64, f64)>,
    columns: usize,
    time_s: f64,
) -> Option<WaterfallRow> {
    let (lo, hi) = range_hz.unwrap_or((s.resolution_hz, s.frequency_hz(s.len().saturating_sub(1))));
    if !(lo > 0.0 && hi > lo) {
        return None;
    }
    let freqs = s.frequencies_hz();
    Some(WaterfallRow {
        time_s,
        range_hz: (lo, hi),
        log_psd: log_columns_max(&freqs, &s.psd_v2_per_hz, (lo, hi), columns),
    })
}

fn trend_point(r: &Report, time_s: f64) -> TrendPoint {
    let finite = |v: Option<f64>| v.filter(|x| x.is_finite());
    TrendPoint {
        time_s,
        frequency_hz: finite(r.mode.frequency_hz),
        linewidth_hz: finite(r.mode.linewidth_hz),
        // Heterodyne without a calibration: the sideband asymmetry's n̄.
        occupancy: finite(r.quantum.occupancy)
            .or_else(|| finite(r.sidebands.as_ref().and_then(|s| s.occupancy))),
        m_per_v: finite(r.calibration.m_per_v),
        m_per_v_uncertainty: finite(r.calibration.m_per_v_uncertainty),
        effective_temperature_k: finite(r.quantum.effective_temperature_k),
        quality_factor: finite(r.mode.quality_factor),
    }
}

/// A fit band around the strongest stray line (not the calibration tone), when no band was
/// given: ±max(25 γ, 12 RBW).
fn auto_band(s: &Spectrum, r: &Report, options: &AnalysisOptions) -> Option<(f64, f64)> {
    let tone = options
        .tone_frequency_hz
        .or(r.calibration.tone_frequency_hz);
    let guard_hz = 10.0 * s.enbw_hz.max(s.resolution_hz);
    let carrier = options.carrier_hz;
    let best = r
        .peaks
        .iter()
        .filter(|p| tone.is_none_or(|t| (p.frequency_hz - t).abs() > guard_hz))
        .filter(|p| p.frequency_hz.is_finite() && p.frequency_hz > 0.0)
        .max_by(|a, b| a.height_over_floor_db.total_cmp(&b.height_over_floor_db))?;
    // With a carrier the band is of f_m itself: the offset of the line from the carrier.
    let centre = match carrier {
        Some(c) => (best.frequency_hz - c).abs(),
        None => best.frequency_hz,
    };
    let half = (25.0 * best.linewidth_hz).max(12.0 * s.enbw_hz.max(s.resolution_hz));
    let lo = (centre - half).max(s.resolution_hz);
    let hi = centre + half;
    (centre > 0.0 && hi > lo).then_some((lo, hi))
}

/// Recentres `band` on the fitted f_m when the mode has moved by more than 5 % of the width
/// (keeping the width), so the fit window tracks a drifting mode.
fn follow_band(band: (f64, f64), r: &Report, s: &Spectrum) -> Option<(f64, f64)> {
    let f = r
        .sidebands
        .as_ref()
        .and_then(|sb| sb.mechanical_frequency_hz)
        .or(r.mode.frequency_hz)
        .filter(|f| f.is_finite())?;
    let (lo, hi) = band;
    let width = hi - lo;
    if width.is_nan() || width <= 0.0 || f < lo || f > hi {
        return Some(band);
    }
    let centre = 0.5 * (lo + hi);
    if (f - centre).abs() <= 0.05 * width {
        return Some(band);
    }
    let new_lo = (f - 0.5 * width).max(s.resolution_hz);
    Some((new_lo, new_lo + width))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::PeakReport;

    fn spectrum() -> Spectrum {
        Spectrum {
            sample_rate_hz: 1000.0,
            segment: 1000,
            overlap: 0.5,
            window: crate::dsp::WindowKind::Hann,
            detrend: crate::dsp::Detrend::Mean,
            averaging: crate::dsp::Averaging::Linear,
            averages: 1,
            k_eff: 1.0,
            resolution_hz: 1.0,
            enbw_hz: 1.5,
            psd_v2_per_hz: vec![1.0; 501],
        }
    }

    #[test]
    fn the_source_queue_holds_ten_seconds_of_a_slow_source_within_its_bytes() {
        // 500 kS/s in 20 ms blocks of 10 000: 500 blocks (10 s, 40 MB at most).
        assert_eq!(source_queue(10_000, 500_000.0), 500);
        // 48 kS/s: 10 s would be 500 blocks of 960 (3.8 MB).
        assert_eq!(source_queue(960, 48_000.0), 500);
        // 100 MS/s in blocks of 64 Ki: 64 MB is 122 blocks, below the 256 kept for fast
        // sources (SOURCE_QUEUE's measurement), so 256.
        assert_eq!(source_queue(1 << 16, 1e8), SOURCE_QUEUE);
        // Short blocks (256 samples at 100 kS/s): 10 s would be 3906 blocks; at most
        // SOURCE_QUEUE_MAX. A slow source's 256 blocks already hold more than 10 s.
        assert_eq!(source_queue(256, 1e5), SOURCE_QUEUE_MAX);
        assert_eq!(source_queue(256, 100.0), SOURCE_QUEUE);
        assert_eq!(source_queue(0, f64::NAN), SOURCE_QUEUE);
    }

    #[test]
    fn band_follows_a_drifting_mode_and_keeps_its_width() {
        let s = spectrum();
        let mut r = Report::default();
        r.mode.frequency_hz = Some(108.0);
        let b = follow_band((90.0, 110.0), &r, &s).unwrap();
        assert!((b.0 - 98.0).abs() < 1e-12 && (b.1 - 118.0).abs() < 1e-12);
        // small moves do not shake the band; a fit outside the band is not trusted
        r.mode.frequency_hz = Some(100.5);
        assert_eq!(follow_band((90.0, 110.0), &r, &s), Some((90.0, 110.0)));
        r.mode.frequency_hz = Some(300.0);
        assert_eq!(follow_band((90.0, 110.0), &r, &s), Some((90.0, 110.0)));
    }

    #[test]
    fn auto_band_takes_strongest_line_but_not_the_tone() {
        let s = spectrum();
        let r = Report {
            peaks: vec![
                PeakReport {
                    frequency_hz: 200.0,
                    height_over_floor_db: 40.0,
                    linewidth_hz: 1.0,
                    new_since_reference: None,
                },
                PeakReport {
                    frequency_hz: 120.0,
                    height_over_floor_db: 30.0,
                    linewidth_hz: 2.0,
                    new_since_reference: None,
                },
            ],
            ..Report::default()
        };
        let opts = AnalysisOptions {
            tone_frequency_hz: Some(200.0),
            ..AnalysisOptions::default()
        };
        let (lo, hi) = auto_band(&s, &r, &opts).unwrap();
        assert!((0.5 * (lo + hi) - 120.0).abs() < 1e-9);
        assert!((hi - lo - 100.0).abs() < 1e-9); // ±50 Hz = 25 γ
        assert!(auto_band(&s, &Report::default(), &opts).is_none());
    }

    #[test]
    fn demo_source_gives_frames_with_analysis_and_history_then_pauses() {
        let mut cfg = EngineConfig::new(SourceConfig::new(crate::acquire::SourceSpec::Demo {
            scenario: "cooldown".into(),
            seed: 1,
        }));
        cfg.welch.segment = 4096;
        cfg.welch.segment_auto = false;
        cfg.history_interval = Duration::from_millis(100);
        cfg.publish_interval = Duration::from_millis(50);
        let woken = Arc::new(std::sync::atomic::AtomicUsize::new(0));
        let w = Arc::clone(&woken);
        let engine = Engine::start(
            cfg,
            Box::new(move || {
                w.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
            }),
        )
        .unwrap();
        let mut live = crate::model::LiveState::new();
        let t0 = Instant::now();
        while t0.elapsed() < Duration::from_secs(30)
            && !(live.waterfall.rows().len() >= 2 && live.trends.points().len() >= 2)
        {
            if let Some(f) = engine.recv_frame_timeout(Duration::from_millis(200)) {
                live.apply(f);
            }
        }
        let frame = live.frame.clone().expect("no frame from the demo");
        let s = frame.spectrum.expect("no spectrum");
        assert_eq!(s.segment, 4096);
        assert_eq!(frame.status.sample_rate_hz, s.sample_rate_hz);
        assert!(frame.status.averages > 0);
        assert!(frame.report.is_some());
        assert!(live.waterfall.rows().len() >= 2, "no waterfall rows");
        assert!(
            woken.load(std::sync::atomic::Ordering::Relaxed) > 0,
            "waker never called"
        );
        // Frozen: at most the one frame that reports the pause, then silence.
        assert!(engine.send(EngineCommand::Pause));
        std::thread::sleep(Duration::from_millis(300));
        let _ = engine.drain_frames();
        std::thread::sleep(Duration::from_millis(400));
        assert!(engine.drain_frames().is_empty(), "frames while paused");
        assert!(engine.send(EngineCommand::Resume));
        assert!(engine.recv_frame_timeout(Duration::from_secs(10)).is_some());
    }

    #[test]
    fn two_detectors_give_the_cross_spectrum_and_the_mode_on_re_pab() {
        // The bundled two-detector recording (a line 6 dB below each channel's floor at
        // 5 kHz, γ = 100 Hz; the gains have opposite signs), played fast.
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("sample-streams")
            .join("two_detector.wav");
        let mut source = SourceConfig::new(crate::acquire::SourceSpec::Path(path));
        source.channel = 0;
        source.cross_channel = Some(1);
        let mut cfg = EngineConfig::new(source);
        cfg.welch.segment = 1024;
        cfg.welch.segment_auto = false;
        cfg.playback_speed = Some(50.0);
        cfg.analysis.mode_band_hz = Some((4400.0, 5600.0));
        cfg.publish_interval = Duration::from_millis(50);
        let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
        let mut last = None;
        let t0 = Instant::now();
        while t0.elapsed() < Duration::from_secs(60) {
            if let Some(f) = engine.recv_frame_timeout(Duration::from_millis(200)) {
                let done = f.status.ended.is_some() && f.cross.is_some();
                last = Some(f);
                if done {
                    break;
                }
            }
        }
        let frame = last.expect("no frame");
        assert_eq!(frame.cross_channels, Some((0, 1)));
        let cross = frame.cross.expect("no cross-spectrum");
        let spectrum = frame.spectrum.expect("no spectrum");
        // Channel a's PSD is the cross-spectrum's, and the average is linear.
        assert_eq!(spectrum.psd_v2_per_hz, cross.a.psd_v2_per_hz);
        assert!(matches!(spectrum.averaging, Averaging::Linear));
        assert!(
            frame.status.averaging.contains("mean"),
            "{}",
            frame.status.averaging
        );
        // Every sample per channel was counted (250 000 frames in the recording), averaged or
        // dropped while the engine was behind (a loaded machine at 50× speed).
        assert_eq!(
            frame.status.samples + frame.status.dropped_samples,
            250_000,
            "{:?}",
            frame.status
        );
        let report = frame.report.expect("no report");
        let f_m = report.mode.frequency_hz.expect("no mode on Re P_ab");
        let sigma = report.mode.frequency_hz_uncertainty.unwrap();
        assert!((f_m - 5000.0).abs() < 4.0 * sigma + 1.0, "{f_m} ± {sigma}");
        let c = report.cross.as_ref().expect("no cross keys");
        assert!(c.coherence_noise_threshold > 0.0 && c.coherence_noise_threshold < 0.1);
    }

    /// Plays a recording as fast as the engine takes it; every frame until the end.
    fn play_to_end(cfg: EngineConfig) -> (Vec<HistoryEntry>, Frame) {
        let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
        let mut history = Vec::new();
        let mut last = None;
        let t0 = Instant::now();
        // A deadline against a hang, not a speed requirement.
        while t0.elapsed() < Duration::from_secs(300) {
            if let Some(f) = engine.recv_frame_timeout(Duration::from_millis(200)) {
                history.extend(f.history.iter().cloned());
                let done = f.status.ended.is_some();
                last = Some(f);
                if done {
                    break;
                }
            }
        }
        while let Some(f) = engine.recv_frame_timeout(Duration::from_millis(500)) {
            history.extend(f.history.iter().cloned());
            last = Some(f);
        }
        (history, last.expect("no frame"))
    }

    #[test]
    fn a_drifting_recording_ends_on_its_last_interval_and_says_so() {
        // The README's example: cooldown.wav with the window's defaults (the command line's
        // segment, a mean, the band found and following the mode). f_m moves 86 100 → 86 400
        // Hz and γ narrows 43 → 7.2 Hz: the whole-record mean smears the line, so the end
        // shows the last interval. Check values: the record's truth (the schedule's last
        // second: 4 K, f_m = 86 400 Hz, Q = 12 000 → γ = 7.2 Hz).
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("sample-streams")
            .join("cooldown.wav");
        let mut cfg = EngineConfig::new(SourceConfig::new(crate::acquire::SourceSpec::Path(path)));
        cfg.playback_speed = None;
        cfg.publish_interval = Duration::from_millis(50);
        let (history, frame) = play_to_end(cfg);
        // 6 s of record in intervals of 1 s (250 000 samples ≥ N + 3 hops at N = 65 536).
        assert_eq!(frame.status.interval_samples, 250_000);
        let times: Vec<(f64, f64)> = history.iter().map(|e| (e.t_start_s, e.t_end_s)).collect();
        assert_eq!(
            times,
            (0..6)
                .map(|i| (i as f64, i as f64 + 1.0))
                .collect::<Vec<_>>()
        );
        let note = frame
            .status
            .record_note
            .clone()
            .expect("no note on a drifting record");
        assert!(
            note.contains("the mode moved") && note.contains("showing the last 1.0 s"),
            "{note}"
        );
        let report = frame.report.clone().expect("no report");
        let last = history.last().unwrap().report.clone().unwrap();
        // The panel is the last interval, and so the strip's last point.
        assert_eq!(report.mode.frequency_hz, last.mode.frequency_hz);
        assert_eq!(
            frame.spectrum.as_ref().unwrap().averages,
            last.welch.averages
        );
        let (f, sf) = (
            report.mode.frequency_hz.unwrap(),
            report.mode.frequency_hz_uncertainty.unwrap(),
        );
        let (g, sg) = (
            report.mode.linewidth_hz.unwrap(),
            report.mode.linewidth_hz_uncertainty.unwrap(),
        );
        eprintln!("cooldown end: f_m {f} ± {sf} Hz, γ {g} ± {sg} Hz; {note}");
        assert!((f - 86_400.0).abs() < 4.0 * sf + 0.5, "{f} ± {sf}");
        assert!((g - 7.2).abs() < 4.0 * sg + 1.0, "{g} ± {sg}");
        // The trend follows the drift: the first interval is near the start of the schedule.
        let first = history.first().unwrap().report.clone().unwrap();
        assert!(first.mode.frequency_hz.unwrap() < 86_250.0);
    }

    #[test]
    fn a_steady_recording_ends_on_the_whole_record() {
        // thermal.wav: one mode at 295 K, nothing drifts; the end shows the whole-record mean
        // (the command line's answer) and no note.
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("sample-streams")
            .join("thermal.wav");
        let mut cfg = EngineConfig::new(SourceConfig::new(crate::acquire::SourceSpec::Path(path)));
        cfg.playback_speed = None;
        cfg.publish_interval = Duration::from_millis(50);
        cfg.analysis.mode_band_hz = Some((85_600.0, 86_600.0));
        let (history, frame) = play_to_end(cfg);
        assert_eq!(frame.status.record_note, None);
        assert_eq!(history.len(), 4);
        let s = frame.spectrum.unwrap();
        // Every segment of the record: ⌊(10⁶ − 65 536)/32 768⌋ + 1.
        assert_eq!(s.averages, (1_000_000 - 65_536) / 32_768 + 1);
    }

    #[test]
    fn bad_source_reports_an_error_and_no_panic() {
        let cfg = EngineConfig::new(SourceConfig::new(crate::acquire::SourceSpec::Path(
            "/nonexistent/stillpoint-test.wav".into(),
        )));
        let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
        let mut got = None;
        for _ in 0..50 {
            if let Some(n) = engine.drain_notices().into_iter().next() {
                got = Some(n);
                break;
            }
            std::thread::sleep(Duration::from_millis(20));
        }
        assert!(matches!(got, Some(EngineNotice::OpenFailed(_))), "{got:?}");
        drop(engine); // joins without hanging
    }
}
