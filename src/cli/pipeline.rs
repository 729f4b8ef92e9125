//! The headless pipeline shared by `spectrum`, `analyze` (one channel or two with
//! `--cross-channel`) and `bench`: open the source, feed every sample through the library's
//! stream loop ([`crate::analysis::stream`]) into the averager as fast as the source
//! delivers, word what was skipped and why the run stopped.

use std::io::IsTerminal;
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use crate::acquire::{
    self, AcqOptions, AcquireError, Acquisition, SourceConfig, SourceSpec, compact_number,
};
pub(super) use crate::analysis::stream::format_seconds;
use crate::analysis::stream::{
    self, Averager, Outcome, Stop, StreamError, StreamMessage, StreamSink, Watch,
};
use crate::dsp::{Averaging, MEDIAN_MEMORY_LIMIT_BYTES, Spectrum};

use super::args::{SourceArgs, WelchArgs};
use super::interrupt::{self, Interrupted};
use super::{InputError, config, note, warn};

/// Fewest samples per block read from the source.
const MIN_BLOCK_SAMPLES: usize = 1 << 16;
/// Most samples per block (2 MiB of f64). The workers take segments across blocks, so longer
/// blocks only hold memory: at segment 2²⁰, blocks of 6 MiB raised the peak RSS from 135 to
/// 154–163 MiB once the thread kept its blocks for reuse.
const MAX_BLOCK_SAMPLES: usize = 1 << 18;
/// Working memory above which a run is announced with its estimate (bytes).
const MEMORY_WARN_BYTES: f64 = 2.0 * (1u64 << 30) as f64;

/// A finished spectrum and what happened on the way.
#[derive(Debug)]
pub(crate) struct SpectrumRun {
    /// The averaged PSD (V²/Hz), every value finite.
    pub spectrum: Spectrum,
    /// One line per problem with the input (truncation, skipped segments, clipping).
    pub warnings: Vec<String>,
    /// Human description of the source.
    pub description: String,
    /// Status lines that are not problems (a live stream that closed).
    pub notes: Vec<String>,
}

/// Reads the source described by `source` and `welch` to the end (or to `--averages`
/// segments) and returns the averaged spectrum.
///
/// # Errors
/// As [`average_source`]; also no usable segment or a non-finite spectrum.
pub(crate) fn compute_spectrum(source: &SourceArgs, welch: &WelchArgs) -> Result<SpectrumRun> {
    let source_config = config::source_config(source)?;
    if source_config.cross_channel.is_some() {
        // Two channels take their own path (`cli::cross`); this one delivers one channel.
        return Err(
            InputError("--cross-channel works with spectrum and analyze only".into()).into(),
        );
    }
    let mut run = average_source(source, welch, &source_config)?;
    if run.averager.median_is_capped() {
        run.warnings.push(format!(
            "median of the last {} segments only (the stored periodograms reached {} MiB); \
             give --averages to choose how many",
            run.averager.median_rows_limit(),
            MEDIAN_MEMORY_LIMIT_BYTES >> 20
        ));
    }
    let stats = &run.outcome.stats;
    let segment = run.averager.config().segment;
    let Some(spectrum) = run.averager.spectrum() else {
        if stats.samples < segment as u64 {
            return Err(too_short(stats.samples, segment).into());
        }
        let skipped = run.averager.skipped_segments();
        if stats.non_finite_samples == 0 {
            return Err(InputError(format!(
                "no usable segment: the periodograms of all {skipped} segments overflowed (the \
                 samples are finite but too large, beyond ~1e140 V; check --volts-per-unit)"
            ))
            .into());
        }
        return Err(InputError(format!(
            "no usable segment: all {skipped} segments held non-finite samples or overflowed ({} \
             NaN/Inf samples in the record)",
            stats.non_finite_samples
        ))
        .into());
    };
    if let Some(k) = spectrum.psd_v2_per_hz.iter().position(|p| !p.is_finite()) {
        return Err(InputError(format!(
            "the spectrum is not finite at {} Hz (overflow: check --volts-per-unit and --rate)",
            compact_number(spectrum.frequency_hz(k))
        ))
        .into());
    }
    Ok(SpectrumRun {
        spectrum,
        warnings: run.warnings,
        description: run.description,
        notes: run.notes,
    })
}

/// A source read to its end (or until the average was complete, a signal or a stall) through
/// [`stream::drive`], with the run's warnings and notes worded.
pub(super) struct Averaged {
    /// The averager holding the estimate.
    pub averager: Averager,
    /// What the loop saw.
    pub outcome: Outcome,
    /// One line per problem with the input or the run.
    pub warnings: Vec<String>,
    /// Status lines that are not problems.
    pub notes: Vec<String>,
    /// Human description of the source.
    pub description: String,
}

/// Opens the source of `source_config` (one channel, or two with `--cross-channel`), averages
/// it through [`stream::drive`] and words what happened (the same for one and two channels;
/// two count samples per channel).
///
/// Live sources (stdin, TCP, a FIFO or other non-regular file, `--follow`) are watched: a
/// stall is reported every 10 s, and after `--stall-timeout` seconds without a sample the
/// run gives up and returns the average it has (with a warning). SIGINT/SIGTERM (see
/// [`super::interrupt`]) do the same for a live source; for a recording they end the run
/// with [`Interrupted`].
///
/// Long because it is the one ordered list of checks a headless run makes before its first
/// sample (each refusal must come before anything is read); each step is a few lines.
///
/// # Errors
/// Bad source options, unreadable source, too little data for one segment, a stall or an
/// interruption before one segment was averaged.
pub(super) fn average_source(
    source: &SourceArgs,
    welch: &WelchArgs,
    source_config: &SourceConfig,
) -> Result<Averaged> {
    let channels = if source_config.cross_channel.is_some() {
        2
    } else {
        1
    };
    if source_config.follow && welch.averages.is_none() {
        return Err(InputError(
            "--follow reads a growing file without end; give --averages K to say when to stop"
                .into(),
        )
        .into());
    }
    let stream_path = is_stream_path(&source_config.spec);
    let label = source_label(&source_config.spec);
    if stream_path && source_config.spec.is_wav() && !source_config.follow {
        return Err(InputError(format!(
            "{label} is a pipe, not a file: a WAV header needs a seekable file; save the WAV \
             first or send raw samples (--sample-format, --rate)"
        ))
        .into());
    }
    let live = source_config.spec.is_live() || source_config.follow || stream_path;
    interrupt::install();
    let reader = acquire::open(source_config).map_err(|e| match e {
        // These already name the path or address.
        AcquireError::Open { .. } | AcquireError::Connect { .. } => anyhow::Error::from(e),
        other => anyhow::Error::from(other).context(format!("cannot read {label}")),
    })?;
    let sample_rate_hz = reader.sample_rate_hz();
    let record_samples = if stream_path {
        None
    } else {
        acquire::known_length(source_config)
    };
    let welch_config = config::welch_config(welch, sample_rate_hz, record_samples)?;
    if let Some(len) = record_samples
        && len < welch_config.segment as u64
        && !source_config.follow
    {
        return Err(too_short(len, welch_config.segment).into());
    }
    let threads = config::worker_threads();
    check_memory(&welch_config, threads)?;
    let mut averager = Averager::new(welch_config, channels, threads)?;
    let progress = Progress::new(record_samples);
    let description = reader.describe();
    let watch = Watch {
        live,
        label: label.clone(),
        stall_timeout: (live && source.stall_timeout > 0.0)
            .then(|| Duration::try_from_secs_f64(source.stall_timeout).ok())
            .flatten(),
        follow: source_config.follow,
        deadline: None,
        limit: averager.sample_cap(),
    };
    let mut sink = CliSink {
        progress: &progress,
        signals: true,
    };
    let outcome = stream_into(reader, &mut averager, &watch, &mut sink)
        .with_context(|| format!("while reading {label}"))?;
    progress.finish();
    let (warnings, notes) = word_outcome(&outcome, &averager, &label, live, sample_rate_hz)?;
    Ok(Averaged {
        averager,
        outcome,
        warnings,
        notes,
        description,
    })
}

/// The warnings and notes of a finished run (one or two channels), or the error of a run
/// that has nothing to write: stopped by a signal or a stall before one segment, or a
/// recording interrupted. Long because it is one `match` over how the run stopped, each arm
/// a sentence; together they are the whole wording of a run's end for one and two channels.
fn word_outcome(
    outcome: &Outcome,
    averager: &Averager,
    label: &str,
    live: bool,
    sample_rate_hz: f64,
) -> Result<(Vec<String>, Vec<String>)> {
    let stats = &outcome.stats;
    let segments = averager.segments();
    let segment = averager.config().segment;
    let per_channel = if averager.channels() == 2 {
        " per channel"
    } else {
        ""
    };
    let mut warnings = stream::reader_warnings(stats, averager.skipped_segments());
    let mut notes = Vec::new();
    if stats.connection_reset {
        warnings.push(format!(
            "{label} reset the connection after {} samples{per_channel}; kept what had arrived",
            stats.samples
        ));
    }
    match outcome.stop {
        Stop::Ended if live => notes.push(format!(
            "{label} closed after {} samples{per_channel} ({} s at {} Hz)",
            stats.samples,
            format_seconds(stats.samples as f64 / sample_rate_hz),
            compact_number(sample_rate_hz)
        )),
        Stop::Signal(signal) if !live => {
            return Err(Interrupted {
                signal,
                what: format!("while reading {label} ({} samples read)", stats.samples),
            }
            .into());
        }
        Stop::Signal(signal) => {
            if segments == 0 {
                return Err(Interrupted {
                    signal,
                    what: format!(
                        "after {} samples{per_channel} of {label}, fewer than one segment of \
                         {segment}",
                        stats.samples
                    ),
                }
                .into());
            }
            notes.push(format!(
                "stopped by {signal} after {} samples{per_channel} of {label}: writing the \
                 average of the {segments} segment{} complete",
                stats.samples,
                plural(segments)
            ));
        }
        Stop::Stalled(waited) => {
            let why = format!(
                "no sample from {label} for {:.1} s (--stall-timeout): gave up after {} \
                 samples{per_channel}",
                waited.as_secs_f64(),
                stats.samples
            );
            if segments == 0 {
                return Err(InputError(format!(
                    "{why}, fewer than one segment of {segment}; nothing was written"
                ))
                .into());
            }
            warnings.push(format!(
                "{why}; writing the average of the {segments} segment{} complete",
                plural(segments)
            ));
        }
        Stop::Ended | Stop::Deadline | Stop::Complete => {}
    }
    let stopped = matches!(outcome.stop, Stop::Signal(_) | Stop::Stalled(_));
    if let Some(k) = averager.config().max_averages
        && (outcome.ended() || stopped)
        && segments < k
    {
        warnings.push(format!(
            "the source {} after {} samples{per_channel}: {segments} of the {k} averages asked \
             for",
            if outcome.ended() {
                "ended"
            } else {
                "was stopped"
            },
            stats.samples,
        ));
    }
    Ok((warnings, notes))
}

/// The command line's side of [`stream::drive`]: the progress bar, warnings and notes on
/// stderr (with the option that sets a limit), SIGINT/SIGTERM as stop requests.
pub(super) struct CliSink<'a> {
    /// The progress bar.
    pub progress: &'a Progress,
    /// SIGINT/SIGTERM stop the run ([`interrupt::install`] was called).
    pub signals: bool,
}

impl StreamSink for CliSink<'_> {
    fn progress(&mut self, position: u64) {
        self.progress.set(position);
    }

    fn message(&mut self, message: StreamMessage) {
        print_message(message);
    }

    fn stop_requested(&mut self) -> Option<&'static str> {
        (self.signals && interrupt::stop_requested())
            .then(|| interrupt::stop_reason().unwrap_or("a signal"))
    }
}

/// A message of [`stream::drive`] on stderr; a silent source's names the option that sets
/// how long the run waits.
pub(super) fn print_message(message: StreamMessage) {
    match message {
        StreamMessage::Silent { text, limited } => warn(&format!(
            "{text} ({})",
            if limited {
                "--stall-timeout"
            } else {
                "--stall-timeout 0"
            }
        )),
        StreamMessage::Note(text) => note(&text),
    }
}

/// "" for 1, "s" otherwise.
fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

/// True for a path that names an existing non-regular, non-folder file: a FIFO (`mkfifo`,
/// a shell's `<(…)`), a character device, a socket. Such inputs are read as streams.
fn is_stream_path(spec: &SourceSpec) -> bool {
    let SourceSpec::Path(path) = spec else {
        return false;
    };
    std::fs::metadata(path).is_ok_and(|m| !m.is_file() && !m.is_dir())
}

/// Refuses settings whose working memory cannot be had, and announces large ones, before
/// any sample is read: a median over `--averages K` keeps K periodograms (refused above the
/// averager's own cap for medians), and the averager's buffers grow with the segment.
fn check_memory(welch: &crate::dsp::WelchConfig, threads: usize) -> Result<()> {
    let bins = (welch.segment / 2 + 1) as f64;
    if matches!(welch.averaging, Averaging::Median)
        && let Some(k) = welch.max_averages
    {
        let bytes = k as f64 * bins * 8.0;
        if bytes > MEDIAN_MEMORY_LIMIT_BYTES as f64 {
            let most = (MEDIAN_MEMORY_LIMIT_BYTES as f64 / (bins * 8.0))
                .floor()
                .max(1.0);
            return Err(InputError(format!(
                "a median of --averages {k} segments keeps {k} periodograms of {} bins: {}, \
                 more than the {} MiB allowed; give --averages {most} or fewer at this \
                 --segment, or --averaging mean",
                bins,
                super::output::format_bytes(bytes as u64),
                MEDIAN_MEMORY_LIMIT_BYTES >> 20
            ))
            .into());
        }
    }
    let need = estimated_memory_bytes(welch.segment, threads);
    if let Some(total) = physical_memory_bytes()
        && need > total as f64
    {
        return Err(InputError(format!(
            "--segment {} needs about {} of working memory, more than this machine's {}; \
             give a smaller --segment",
            welch.segment,
            super::output::format_bytes(need as u64),
            super::output::format_bytes(total)
        ))
        .into());
    }
    if need > MEMORY_WARN_BYTES {
        warn(&format!(
            "--segment {} needs about {} of working memory",
            welch.segment,
            super::output::format_bytes(need as u64)
        ));
    }
    Ok(())
}

/// Peak working memory of a headless run at `segment` with `threads` workers, in bytes: the
/// blocks in flight, the pending samples and the workers' FFT buffers all scale with the
/// segment. The factor was measured (peak RSS with `/usr/bin/time -v`, DEVELOPERS.md).
pub(crate) fn estimated_memory_bytes(segment: usize, threads: usize) -> f64 {
    let per_sample = MEMORY_BYTES_PER_SAMPLE_BASE + MEMORY_BYTES_PER_SAMPLE_THREAD * threads as f64;
    segment as f64 * per_sample
}

// Measured (dev build, 2 workers, 2²⁴-sample f32 file): peak RSS 146 MiB at segment 2²⁰,
// 468 MiB at 2²², 916 MiB at 2²³, i.e. ≈ 112 bytes per segment sample; 80 + 24 × threads
// (128 at 2 workers) keeps the estimate on the safe side.
/// Measured bytes of peak RSS per segment sample, fixed part (see [`estimated_memory_bytes`]).
const MEMORY_BYTES_PER_SAMPLE_BASE: f64 = 80.0;
/// Measured bytes of peak RSS per segment sample and worker thread.
const MEMORY_BYTES_PER_SAMPLE_THREAD: f64 = 24.0;

/// Physical memory of the machine (Linux `/proc/meminfo` MemTotal), if known.
fn physical_memory_bytes() -> Option<u64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    let line = text.lines().find(|l| l.starts_with("MemTotal:"))?;
    let kib: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
    kib.checked_mul(1024)
}

/// What [`average_stream`] measured.
#[derive(Debug)]
pub(crate) struct Streamed {
    /// Samples per channel read from the source and pushed into the averager.
    pub samples_averaged: u64,
    /// Periodograms in the average.
    pub segments: usize,
    /// Blocks the acquisition thread dropped (0 on the headless path, which blocks instead).
    pub dropped_blocks: u64,
}

/// Averages `reader` (`channels` = 2: a paired reader, see
/// [`crate::acquire::SampleReader::pair_with`]) with `threads` worker threads through the
/// same acquisition thread, averager and loop as `spectrum`/`analyze`, until the stream ends
/// or `stop_after` has passed (for `stillpoint bench`).
///
/// # Errors
/// Invalid settings; the stream fails.
pub(crate) fn average_stream(
    reader: Box<dyn acquire::SampleReader>,
    welch: &crate::dsp::WelchConfig,
    channels: usize,
    threads: usize,
    stop_after: Option<Duration>,
) -> Result<Streamed> {
    let mut averager = Averager::new(welch.clone(), channels, threads)?;
    let watch = Watch {
        deadline: stop_after.map(|d| Instant::now() + d),
        limit: averager.sample_cap(),
        ..Watch::default()
    };
    let outcome = stream_into(reader, &mut averager, &watch, &mut stream::Plain)?;
    Ok(Streamed {
        samples_averaged: outcome.read,
        segments: averager.segments(),
        dropped_blocks: outcome.dropped_blocks,
    })
}

/// Runs the acquisition thread on `reader` with the headless settings and drives
/// `averager` through `sink` ([`stream::drive`]); every segment is averaged on return.
pub(super) fn stream_into(
    reader: Box<dyn acquire::SampleReader>,
    averager: &mut Averager,
    watch: &Watch,
    sink: &mut dyn StreamSink,
) -> Result<Outcome> {
    let config = averager.config();
    let mut options = headless_options(config.segment, config.hop(), averager.threads());
    // A paired block holds both channels.
    options.block_samples = options.block_samples.saturating_mul(averager.channels());
    let acquisition = Acquisition::spawn(reader, options, None)?;
    let outcome = stream::drive(&acquisition, averager, watch, sink);
    drop(acquisition);
    outcome.map_err(|e| match e {
        // The reader's own error, so the exit status is the one its kind gives.
        StreamError::Source(e) => anyhow::Error::from(e),
        other => anyhow::Error::from(other),
    })
}

/// Acquisition settings of the headless commands: block on a full channel (no sample is
/// lost), no pacing, a few blocks in flight. The averager's workers take groups of segments
/// across block boundaries, so a block need only be long enough to keep the channel traffic
/// small: a quarter of what 2 × `threads` segments span (measured on 2²⁵ samples, segment
/// 65536: the same time as whole spans, 28 instead of 34 MiB peak RSS). Eight blocks in the
/// channel rather than four let the reader run ahead while the workers are busy: 0.12–0.13 s
/// instead of 0.14–0.16 s (medians of 7, three rounds), for 3 MiB more.
pub(super) fn headless_options(segment: usize, hop: usize, threads: usize) -> AcqOptions {
    let wanted = segment.saturating_add(hop.saturating_mul(2 * threads)) / 4;
    AcqOptions {
        block_samples: wanted.clamp(MIN_BLOCK_SAMPLES, MAX_BLOCK_SAMPLES),
        channel_capacity: 8,
        ..AcqOptions::headless()
    }
}

/// "record has L samples, shorter than one segment of N".
pub(super) fn too_short(samples: u64, segment: usize) -> InputError {
    InputError(format!(
        "record has {samples} samples, shorter than one segment of {segment} (give a smaller \
         --segment)"
    ))
}

/// How the source is named in messages.
pub(super) fn source_label(spec: &SourceSpec) -> String {
    match spec {
        SourceSpec::Path(p) => p.display().to_string(),
        SourceSpec::Stdin => "stdin".to_string(),
        SourceSpec::Tcp(addr) => format!("tcp://{addr}"),
        SourceSpec::Demo { scenario, .. } => format!("demo stream `{scenario}`"),
    }
}

/// A progress bar on stderr that appears only on a terminal and only after ~1 s.
pub(crate) struct Progress {
    bar: ProgressBar,
    started: Instant,
    visible: std::cell::Cell<bool>,
    allowed: bool,
}

impl Progress {
    /// A hidden bar for `total` samples (unknown total: a counter).
    pub fn new(total: Option<u64>) -> Self {
        let bar = ProgressBar::with_draw_target(total, ProgressDrawTarget::hidden());
        let style = match total {
            Some(_) => ProgressStyle::with_template(
                "{elapsed_precise} [{bar:40}] {percent:>3}% {human_pos}/{human_len} samples, \
                 eta {eta}",
            ),
            None => ProgressStyle::with_template("{elapsed_precise} {human_pos} samples"),
        };
        if let Ok(style) = style {
            bar.set_style(style.progress_chars("=> "));
        }
        Self {
            bar,
            started: Instant::now(),
            visible: std::cell::Cell::new(false),
            allowed: std::io::stderr().is_terminal(),
        }
    }

    /// Samples processed so far.
    pub fn set(&self, position: u64) {
        self.bar.set_position(position);
        if self.allowed && !self.visible.get() && self.started.elapsed() > Duration::from_secs(1) {
            self.bar.set_draw_target(ProgressDrawTarget::stderr());
            self.visible.set(true);
        }
    }

    /// Removes the bar.
    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}
