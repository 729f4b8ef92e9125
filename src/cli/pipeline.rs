//! The headless pipeline shared by `spectrum` and `analyze`: open the source, feed every
//! sample into the Welch averager as fast as the source delivers, report what was skipped.

use std::io::IsTerminal;
use std::path::Path;
use std::time::{Duration, Instant};

use anyhow::{Context, Result};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

use crate::acquire::{
    self, AcqEvent, AcqOptions, AcquireError, Acquisition, ReaderStats, SourceConfig, SourceSpec,
    WavReader,
};
use crate::dsp::{Averaging, MEDIAN_MEMORY_LIMIT_BYTES, Spectrum, Welch};

use super::InputError;
use super::args::{SourceArgs, WelchArgs};
use super::config;

/// Fewest samples per block read from the source.
const MIN_BLOCK_SAMPLES: usize = 1 << 16;
/// Most samples per block (2 MiB of f64). The workers take segments across blocks, so longer
/// blocks only hold memory: at segment 2²⁰, blocks of 6 MiB raised the peak RSS from 135 to
/// 154–163 MiB once the thread kept its blocks for reuse.
const MAX_BLOCK_SAMPLES: usize = 1 << 18;

/// A finished spectrum and what happened on the way.
#[derive(Debug)]
pub struct SpectrumRun {
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
/// Bad source options, unreadable source, too little data for one segment, no usable
/// segment, a non-finite spectrum.
pub fn compute_spectrum(source: &SourceArgs, welch: &WelchArgs) -> Result<SpectrumRun> {
    let source_config = config::source_config(source)?;
    if source_config.follow && welch.averages.is_none() {
        return Err(InputError(
            "--follow reads a growing file without end; give --averages K to say when to stop"
                .into(),
        )
        .into());
    }
    let reader = acquire::open(&source_config).map_err(|e| match e {
        // These already name the path or address.
        AcquireError::Open { .. } | AcquireError::Connect { .. } => anyhow::Error::from(e),
        other => anyhow::Error::from(other)
            .context(format!("cannot read {}", source_label(&source_config.spec))),
    })?;
    let sample_rate_hz = reader.sample_rate_hz();
    let record_samples = known_length(&source_config);
    let welch_config = config::welch_config(welch, sample_rate_hz, record_samples)?;
    if let Some(len) = record_samples
        && len < welch_config.segment as u64
        && !source_config.follow
    {
        return Err(too_short(len, welch_config.segment).into());
    }
    let threads = config::worker_threads();
    let mut averager = Welch::new(welch_config.clone())?.with_threads(threads);
    let progress = Progress::new(record_samples);
    let description = reader.describe();
    let fed = stream_into(reader, &mut averager, &progress, None)
        .with_context(|| format!("while reading {}", source_label(&source_config.spec)))?;
    let stats = fed.stats;
    progress.finish();
    let mut warnings = reader_warnings(&stats, averager.skipped_segments());
    let mut notes = Vec::new();
    if fed.ended && source_config.spec.is_live() {
        notes.push(format!(
            "{} closed after {} samples ({} s at {} Hz)",
            source_label(&source_config.spec),
            stats.samples,
            format_seconds(stats.samples as f64 / sample_rate_hz),
            sample_rate_hz
        ));
    }
    if let Some(k) = welch_config.max_averages
        && fed.ended
        && averager.segments() < k
    {
        warnings.push(format!(
            "the source ended after {} samples: {} of the {k} averages asked for",
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
        return Err(InputError(format!(
            "no usable segment: all {} segments held non-finite samples ({} NaN/Inf samples \
             in the record)",
            averager.skipped_segments(),
            stats.non_finite_samples
        ))
        .into());
    };
    if let Some(k) = spectrum.psd_v2_per_hz.iter().position(|p| !p.is_finite()) {
        return Err(InputError(format!(
            "the spectrum is not finite at {} Hz (overflow: check --volts-per-unit)",
            spectrum.frequency_hz(k)
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
    let fed = stream_into(reader, &mut averager, &Progress::hidden(), deadline)?;
    Ok(Streamed {
        samples_averaged: fed.pushed,
        segments: averager.segments(),
        dropped_blocks: fed.dropped_blocks,
    })
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
}

/// Runs the acquisition thread on `reader` and feeds `averager` until the stream ends, the
/// average is complete or `deadline` passes; every segment is averaged on return. Returns
/// what [`feed`] saw.
fn stream_into(
    reader: Box<dyn acquire::SampleReader>,
    averager: &mut Welch,
    progress: &Progress,
    deadline: Option<Instant>,
) -> Result<Fed> {
    let config = averager.config();
    let options = headless_options(config.segment, config.hop(), averager.threads());
    let acquisition = Acquisition::spawn(reader, options, None)?;
    let fed = feed(&acquisition, averager, progress, deadline);
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

/// Feeds the acquisition's blocks into `averager` until the stream ends or enough segments
/// are averaged; returns the reader's last counters.
fn feed(
    acquisition: &Acquisition,
    averager: &mut Welch,
    progress: &Progress,
    deadline: Option<Instant>,
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
    loop {
        let Ok(event) = acquisition.events().recv() else {
            anyhow::bail!("the acquisition thread ended without saying why");
        };
        match event {
            AcqEvent::Block(block) => {
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
                    stats.samples = stats.samples.max(read_total);
                    return Ok(Fed {
                        stats,
                        dropped_blocks,
                        pushed: read_total,
                        ended: false,
                    });
                }
            }
            AcqEvent::Gap { .. } => {
                // A followed file was reopened: no segment spans the seam.
                averager.discard_pending();
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
            "the WAV data ends before its header says (recording cut short?); analysed the {} \
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
pub struct Progress {
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
