//! The headless pipeline shared by `spectrum` and `analyze`: open the source, feed every
//! sample into the Welch averager as fast as the source delivers, report what was skipped.

use std::io::IsTerminal;
use std::path::Path;
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use crate::acquire::{
    self, AcqEvent, AcqOptions, AcquireError, Acquisition, ReaderStats, SourceConfig, SourceSpec,
    WavReader, compact_number,
};
use crate::dsp::{Averaging, MEDIAN_MEMORY_LIMIT_BYTES, Spectrum, Welch};

use super::args::{SourceArgs, WelchArgs};
use super::interrupt::{self, Interrupted};
use super::{InputError, config, note, warn};

/// Fewest samples per block read from the source.
const MIN_BLOCK_SAMPLES: usize = 1 << 16;
/// Most samples per block (2 MiB of f64). The workers take segments across blocks, so longer
/// blocks only hold memory: at segment 2²⁰, blocks of 6 MiB raised the peak RSS from 135 to
/// 154–163 MiB once the thread kept its blocks for reuse.
const MAX_BLOCK_SAMPLES: usize = 1 << 18;
/// How often the consumer looks at the stop flag and the stall clock while waiting.
const POLL: Duration = Duration::from_millis(100);
/// A stalled live source is reported this often (the first time after this long, or after
/// half the stall timeout if that is shorter).
const STALL_REPORT_EVERY: Duration = Duration::from_secs(10);
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
/// Live sources (stdin, TCP, a FIFO or other non-regular file, `--follow`) are watched: a
/// stall is reported every 10 s, and after `--stall-timeout` seconds without a sample the
/// run gives up and returns the average it has (with a warning). SIGINT/SIGTERM (see
/// [`super::interrupt`]) do the same for a live source; for a recording they end the run
/// with [`Interrupted`].
///
/// # Errors
/// Bad source options, unreadable source, too little data for one segment, no usable
/// segment, a non-finite spectrum, an interruption before one segment was averaged.
pub(crate) fn compute_spectrum(source: &SourceArgs, welch: &WelchArgs) -> Result<SpectrumRun> {
    let source_config = config::source_config(source)?;
    if source_config.cross_channel.is_some() {
        // Two channels take their own path (`cli::cross`); this one delivers one channel.
        return Err(
            InputError("--cross-channel works with spectrum and analyze only".into()).into(),
        );
    }
    if source_config.follow && welch.averages.is_none() {
        return Err(InputError(
            "--follow reads a growing file without end; give --averages K to say when to stop"
                .into(),
        )
        .into());
    }
    let stream_path = is_stream_path(&source_config.spec);
    if stream_path && source_config.spec.is_wav() && !source_config.follow {
        return Err(InputError(format!(
            "{} is a pipe, not a file: a WAV header needs a seekable file; save the WAV first \
             or send raw samples (--sample-format, --rate)",
            source_label(&source_config.spec)
        ))
        .into());
    }
    let live = source_config.spec.is_live() || source_config.follow || stream_path;
    interrupt::install();
    let reader = acquire::open(&source_config).map_err(|e| match e {
        // These already name the path or address.
        AcquireError::Open { .. } | AcquireError::Connect { .. } => anyhow::Error::from(e),
        other => anyhow::Error::from(other)
            .context(format!("cannot read {}", source_label(&source_config.spec))),
    })?;
    let sample_rate_hz = reader.sample_rate_hz();
    let record_samples = if stream_path {
        None
    } else {
        known_length(&source_config)
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
    let mut averager = Welch::new(welch_config.clone())?.with_threads(threads);
    let progress = Progress::new(record_samples);
    let description = reader.describe();
    let label = source_label(&source_config.spec);
    let guard = Guard {
        live,
        label: label.clone(),
        stall_timeout: (source.stall_timeout > 0.0)
            .then(|| Duration::try_from_secs_f64(source.stall_timeout).ok())
            .flatten(),
        follow: source_config.follow,
    };
    let fed = stream_into(reader, &mut averager, &progress, None, &guard)
        .with_context(|| format!("while reading {label}"))?;
    let stats = fed.stats;
    progress.finish();
    let mut warnings = reader_warnings(&stats, averager.skipped_segments());
    let mut notes = Vec::new();
    if stats.connection_reset {
        warnings.push(format!(
            "{label} reset the connection after {} samples; kept what had arrived",
            stats.samples
        ));
    }
    if fed.ended && live {
        notes.push(format!(
            "{label} closed after {} samples ({} s at {} Hz)",
            stats.samples,
            format_seconds(stats.samples as f64 / sample_rate_hz),
            compact_number(sample_rate_hz)
        ));
    }
    match fed.stop {
        Some(Stop::Signal(signal)) if !live => {
            return Err(Interrupted {
                signal,
                what: format!("while reading {label} ({} samples read)", stats.samples),
            }
            .into());
        }
        Some(Stop::Signal(signal)) => {
            if averager.segments() == 0 {
                return Err(Interrupted {
                    signal,
                    what: format!(
                        "after {} samples of {label}, fewer than one segment of {}",
                        stats.samples, welch_config.segment
                    ),
                }
                .into());
            }
            notes.push(format!(
                "stopped by {signal} after {} samples of {label}: writing the average of the \
                 {} segment{} complete",
                stats.samples,
                averager.segments(),
                plural(averager.segments())
            ));
        }
        Some(Stop::Stalled(waited)) => {
            let why = format!(
                "no sample from {label} for {:.1} s (--stall-timeout): gave up after {} samples",
                waited.as_secs_f64(),
                stats.samples
            );
            if averager.segments() == 0 {
                return Err(InputError(format!(
                    "{why}, fewer than one segment of {}; nothing was written",
                    welch_config.segment
                ))
                .into());
            }
            warnings.push(format!(
                "{why}; writing the average of the {} segment{} complete",
                averager.segments(),
                plural(averager.segments())
            ));
        }
        None => {}
    }
    if let Some(k) = welch_config.max_averages
        && (fed.ended || fed.stop.is_some())
        && averager.segments() < k
    {
        warnings.push(format!(
            "the source {} after {} samples: {} of the {k} averages asked for",
            if fed.ended { "ended" } else { "was stopped" },
            stats.samples,
            averager.segments()
        ));
    }
    if averager.median_is_capped() {
        warnings.push(format!(
            "median of the last {} segments only (the stored periodograms reached {} MiB); \
             give --averages to choose how many",
            averager.median_rows_limit(),
            MEDIAN_MEMORY_LIMIT_BYTES >> 20
        ));
    }
    let Some(spectrum) = averager.spectrum() else {
        if stats.samples < welch_config.segment as u64 {
            return Err(too_short(stats.samples, welch_config.segment).into());
        }
        if stats.non_finite_samples == 0 {
            return Err(InputError(format!(
                "no usable segment: the periodograms of all {} segments overflowed (the \
                 samples are finite but too large, beyond ~1e140 V; check --volts-per-unit)",
                averager.skipped_segments()
            ))
            .into());
        }
        return Err(InputError(format!(
            "no usable segment: all {} segments held non-finite samples or overflowed ({} \
             NaN/Inf samples in the record)",
            averager.skipped_segments(),
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
        warnings,
        description,
        notes,
    })
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
    /// Samples read from the source and pushed into the averager.
    pub samples_averaged: u64,
    /// Periodograms in the average.
    pub segments: usize,
    /// Blocks the acquisition thread dropped (0 on the headless path, which blocks instead).
    pub dropped_blocks: u64,
}

/// Averages `reader` with `threads` worker threads through the same acquisition thread and
/// averager as `spectrum`/`analyze`, until the stream ends or `stop_after` has passed
/// (for `stillpoint bench`).
///
/// # Errors
/// Invalid settings; the stream fails.
pub(crate) fn average_stream(
    reader: Box<dyn acquire::SampleReader>,
    welch: &crate::dsp::WelchConfig,
    threads: usize,
    stop_after: Option<Duration>,
) -> Result<Streamed> {
    let mut averager = Welch::new(welch.clone())?.with_threads(threads);
    let deadline = stop_after.map(|d| Instant::now() + d);
    let guard = Guard {
        live: false,
        label: String::new(),
        stall_timeout: None,
        follow: false,
    };
    let fed = stream_into(reader, &mut averager, &Progress::hidden(), deadline, &guard)?;
    Ok(Streamed {
        samples_averaged: fed.pushed,
        segments: averager.segments(),
        dropped_blocks: fed.dropped_blocks,
    })
}

/// How the consumer watches a live source.
struct Guard {
    /// The source delivers in real time (stall watch and stop on a signal apply).
    live: bool,
    /// The source as named in messages.
    label: String,
    /// Give up after this long without a sample (`None`: wait forever).
    stall_timeout: Option<Duration>,
    /// A followed file: every reopening is reported.
    follow: bool,
}

/// Why a run stopped before its source ended or its average was complete.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Stop {
    /// SIGINT or SIGTERM.
    Signal(&'static str),
    /// No sample for this long (`--stall-timeout`).
    Stalled(Duration),
}

/// What [`feed`] saw.
struct Fed {
    /// The reader's last counters.
    stats: ReaderStats,
    /// Blocks the acquisition thread dropped.
    dropped_blocks: u64,
    /// Samples read from the source (pushed, or cut off by `--averages`).
    pushed: u64,
    /// The source ended by itself (not cut off by the average being complete or a deadline).
    ended: bool,
    /// The run was stopped (signal, stall).
    stop: Option<Stop>,
}

/// Runs the acquisition thread on `reader` and feeds `averager` until the stream ends, the
/// average is complete, `deadline` passes or `guard` stops it; every segment is averaged on
/// return. Returns what [`feed`] saw.
fn stream_into(
    reader: Box<dyn acquire::SampleReader>,
    averager: &mut Welch,
    progress: &Progress,
    deadline: Option<Instant>,
    guard: &Guard,
) -> Result<Fed> {
    let config = averager.config();
    let options = headless_options(config.segment, config.hop(), averager.threads());
    let acquisition = Acquisition::spawn(reader, options, None)?;
    let fed = feed(&acquisition, averager, progress, deadline, guard);
    drop(acquisition);
    averager.flush();
    fed
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

/// Feeds the acquisition's blocks into `averager` until the stream ends, enough segments
/// are averaged, or (live sources) a signal or a stall stops it; returns the reader's last
/// counters.
fn feed(
    acquisition: &Acquisition,
    averager: &mut Welch,
    progress: &Progress,
    deadline: Option<Instant>,
    guard: &Guard,
) -> Result<Fed> {
    let limit = averager.config().max_averages;
    // Median, exponential and max-hold with --averages K: exactly the first K segment
    // positions (a linear average stops by itself after K accepted segments).
    let cap_total = match (limit, averager.config().averaging) {
        (Some(k), averaging) if !matches!(averaging, Averaging::Linear) => {
            let c = averager.config();
            Some(((k.max(1) - 1) * c.hop() + c.segment) as u64)
        }
        _ => None,
    };
    let mut stats = ReaderStats::default();
    let mut dropped_blocks = 0_u64;
    let mut read_total: u64 = 0;
    let mut reopenings = 0_u64;
    let mut last_sample = Instant::now();
    let first_report = guard.stall_timeout.map_or(STALL_REPORT_EVERY, |t| {
        (t / 2).clamp(Duration::from_secs(1), STALL_REPORT_EVERY)
    });
    let mut next_report = first_report;
    let stopped = |stats: &mut ReaderStats,
                   read_total: u64,
                   dropped_blocks: u64,
                   stop: Option<Stop>|
     -> Result<Fed> {
        stats.samples = stats.samples.max(read_total);
        Ok(Fed {
            stats: *stats,
            dropped_blocks,
            pushed: read_total,
            ended: false,
            stop,
        })
    };
    loop {
        if interrupt::stop_requested() {
            let signal = interrupt::stop_reason().unwrap_or("a signal");
            return stopped(
                &mut stats,
                read_total,
                dropped_blocks,
                Some(Stop::Signal(signal)),
            );
        }
        let event = match acquisition.events().recv_timeout(POLL) {
            Ok(event) => event,
            Err(crossbeam_channel::RecvTimeoutError::Timeout) => {
                if guard.live {
                    let quiet = last_sample.elapsed();
                    if let Some(limit) = guard.stall_timeout
                        && quiet >= limit
                    {
                        return stopped(
                            &mut stats,
                            read_total,
                            dropped_blocks,
                            Some(Stop::Stalled(quiet)),
                        );
                    }
                    if quiet >= next_report {
                        let until = guard.stall_timeout.map_or_else(
                            || "waiting without limit (--stall-timeout 0)".to_string(),
                            |t| {
                                format!(
                                    "giving up at {} s (--stall-timeout)",
                                    format_seconds(t.as_secs_f64())
                                )
                            },
                        );
                        warn(&format!(
                            "no sample from {} for {} s ({} samples so far); {until}",
                            guard.label,
                            quiet.as_secs(),
                            stats.samples.max(read_total)
                        ));
                        next_report = quiet + STALL_REPORT_EVERY;
                    }
                }
                continue;
            }
            Err(crossbeam_channel::RecvTimeoutError::Disconnected) => {
                anyhow::bail!("the acquisition thread ended without saying why");
            }
        };
        match event {
            AcqEvent::Block(block) => {
                last_sample = Instant::now();
                next_report = first_report;
                let take = cap_total.map_or(block.len(), |c| {
                    usize::try_from(c.saturating_sub(read_total))
                        .unwrap_or(usize::MAX)
                        .min(block.len())
                });
                averager.push(block.get(..take).unwrap_or(&block));
                read_total += block.len() as u64;
                acquisition.recycle(block);
                progress.set(read_total);
                if averager.is_complete()
                    || cap_total.is_some_and(|c| read_total >= c)
                    || deadline.is_some_and(|d| Instant::now() >= d)
                {
                    // Enough: the counters cover what was read so far.
                    return stopped(&mut stats, read_total, dropped_blocks, None);
                }
            }
            AcqEvent::Gap { .. } => {
                // A followed file was reopened: no segment spans the seam.
                averager.discard_pending();
                if guard.follow {
                    reopenings += 1;
                    note(&format!(
                        "{} was truncated, rewritten or replaced: reopened it and reading from \
                         its start (reopening {reopenings}, after {read_total} samples; no \
                         segment spans the seam)",
                        guard.label
                    ));
                }
            }
            AcqEvent::Status(status) => {
                stats = status.reader;
                dropped_blocks = status.dropped_blocks;
            }
            AcqEvent::Stopped(None) => {
                stats.samples = stats.samples.max(read_total);
                return Ok(Fed {
                    stats,
                    dropped_blocks,
                    pushed: read_total,
                    ended: true,
                    stop: None,
                });
            }
            AcqEvent::Stopped(Some(error)) => return Err(error.into()),
        }
    }
}

/// Seconds for a message: 4 decimals below 10 s, 1 above, trailing zeros dropped.
pub(super) fn format_seconds(seconds: f64) -> String {
    let text = if seconds < 10.0 {
        format!("{seconds:.4}")
    } else {
        format!("{seconds:.1}")
    };
    text.trim_end_matches('0').trim_end_matches('.').to_string()
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

/// Samples of the selected channel in a recording whose length is known before reading
/// (a WAV or raw file that is not followed); `None` for streams.
pub(super) fn known_length(config: &SourceConfig) -> Option<u64> {
    let SourceSpec::Path(path) = &config.spec else {
        return None;
    };
    if config.follow {
        return None;
    }
    if config.spec.is_wav() {
        return wav_length(path);
    }
    if config.spec.is_npy() || config.spec.is_hdf5() {
        return acquire::lab_file_length(config, path);
    }
    let frame_bytes = config.sample_format?.bytes() as u64 * config.channels.max(1) as u64;
    let bytes = std::fs::metadata(path).ok()?.len();
    Some(bytes / frame_bytes)
}

/// Frames of a WAV file per its header, capped by what the file actually holds.
fn wav_length(path: &Path) -> Option<u64> {
    let header = WavReader::open(path, 0, 1.0, None).ok()?.header();
    let frame_bytes = header.frame_bytes() as u64;
    let file_bytes = std::fs::metadata(path).ok()?.len();
    let present = file_bytes.saturating_sub(header.data_offset);
    let bytes = header
        .data_bytes_declared
        .map_or(present, |d| d.min(present));
    bytes.checked_div(frame_bytes)
}

/// One warning per problem the reader or the averager met.
pub(super) fn reader_warnings(stats: &ReaderStats, skipped_segments: usize) -> Vec<String> {
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
            if stats.partial_frame_bytes == 1 {
                ""
            } else {
                "s"
            }
        ));
    }
    if stats.non_finite_samples > 0 || skipped_segments > 0 {
        warnings.push(format!(
            "{} non-finite sample{} (NaN/Inf) → {} segment{} skipped",
            stats.non_finite_samples,
            if stats.non_finite_samples == 1 {
                ""
            } else {
                "s"
            },
            skipped_segments,
            if skipped_segments == 1 { "" } else { "s" }
        ));
    }
    if stats.clipped_samples > 0 {
        warnings.push(format!(
            "{} sample{} at integer full scale (clipping distorts the spectrum)",
            stats.clipped_samples,
            if stats.clipped_samples == 1 { "" } else { "s" }
        ));
    }
    warnings
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

    /// A bar that never shows.
    pub fn hidden() -> Self {
        let progress = Self::new(None);
        Self {
            allowed: false,
            ..progress
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
