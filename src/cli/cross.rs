//! `spectrum`/`analyze` with `--cross-channel J`: two channels of one source read in one pass
//! (the acquisition thread delivers both, see [`crate::acquire::SampleReader::pair_with`]),
//! averaged by [`CrossWelch`] into both PSDs, the cross-spectral density and the coherence.

use std::process::ExitCode;

use anyhow::{Context, Result};

use crate::acquire::{self, AcqEvent, AcquireError, Acquisition, ReaderStats};
use crate::dsp::cross::{CrossSpectrum, CrossWelch};
use crate::report::{self, cross::analyze_cross};

use super::args::{AnalyzeArgs, AveragingArg, HeterodyneArgs, SourceArgs, SpectrumArgs, WelchArgs};
use super::config::{self, CalibrationKind};
use super::interrupt::{self, Interrupted};
use super::pipeline::{self, Progress};
use super::{InputError, note, output, warn};

/// A finished two-channel average and what happened on the way.
#[derive(Debug)]
pub struct CrossRun {
    /// Both PSDs, the CSD (V²/Hz) and the settings; every value finite.
    pub cross: CrossSpectrum,
    /// Channels (a, b).
    pub channels: (usize, usize),
    /// One line per problem with the input.
    pub warnings: Vec<String>,
    /// Human description of the source.
    pub description: String,
    /// Status lines that are not problems.
    pub notes: Vec<String>,
}

/// Reads channels `--channel` (a) and `--cross-channel` (b) of the source in one pass and
/// averages them.
///
/// # Errors
/// Bad options or input, too little data, no usable segment, a non-finite result.
pub fn compute_cross(source: &SourceArgs, welch: &WelchArgs) -> Result<CrossRun> {
    let source_config = config::source_config(source)?;
    let Some(channel_b) = source_config.cross_channel else {
        return Err(InputError("--cross-channel J is needed for a cross-spectrum".into()).into());
    };
    if !matches!(welch.averaging, AveragingArg::Mean) {
        return Err(InputError(
            "--cross-channel averages the cross-spectrum linearly: use --averaging mean".into(),
        )
        .into());
    }
    if source_config.follow && welch.averages.is_none() {
        return Err(InputError(
            "--follow reads a growing file without end; give --averages K to say when to stop"
                .into(),
        )
        .into());
    }
    let label = pipeline::source_label(&source_config.spec);
    let live = source_config.spec.is_live() || source_config.follow;
    if live {
        // A live stream ends by SIGINT/SIGTERM: the average so far is written (below).
        interrupt::install();
    }
    let stall_timeout = (live && source.stall_timeout > 0.0)
        .then(|| std::time::Duration::try_from_secs_f64(source.stall_timeout).ok())
        .flatten();
    let reader = acquire::open(&source_config).map_err(|e| match e {
        AcquireError::Open { .. } | AcquireError::Connect { .. } => anyhow::Error::from(e),
        other => anyhow::Error::from(other).context(format!("cannot read {label}")),
    })?;
    let sample_rate_hz = reader.sample_rate_hz();
    let record_samples = pipeline::known_length(&source_config);
    let welch_config = config::welch_config(welch, sample_rate_hz, record_samples)?;
    if let Some(len) = record_samples
        && len < welch_config.segment as u64
        && !source_config.follow
    {
        return Err(pipeline::too_short(len, welch_config.segment).into());
    }
    let mut averager =
        CrossWelch::new(welch_config.clone())?.with_threads(config::worker_threads());
    let description = reader.describe();
    let progress = Progress::new(record_samples);
    let mut options = pipeline::headless_options(
        welch_config.segment,
        welch_config.hop(),
        config::worker_threads(),
    );
    options.block_samples = options.block_samples.saturating_mul(2);
    let acquisition = Acquisition::spawn(reader, options, None)?;
    let watch = Watch {
        live,
        stall_timeout,
        label: label.clone(),
    };
    let (stats, ended, stop) = feed(&acquisition, &mut averager, &progress, &watch)
        .with_context(|| format!("while reading {label}"))?;
    drop(acquisition);
    averager.flush();
    progress.finish();
    let mut warnings = pipeline::reader_warnings(&stats, averager.skipped_segments());
    let mut notes = Vec::new();
    match stop {
        Some(CrossStop::Signal(signal)) if averager.segments() == 0 => {
            return Err(Interrupted {
                signal,
                what: format!(
                    "after {} samples per channel of {label}, fewer than one segment of {}",
                    stats.samples, welch_config.segment
                ),
            }
            .into());
        }
        Some(CrossStop::Signal(signal)) => notes.push(format!(
            "stopped by {signal} after {} samples per channel of {label}: writing the average of \
             the {} segments complete",
            stats.samples,
            averager.segments()
        )),
        Some(CrossStop::Stalled(quiet)) => warnings.push(format!(
            "no sample from {label} for {} s (--stall-timeout): writing the average of the {} \
             segments complete",
            quiet.as_secs(),
            averager.segments()
        )),
        None => {}
    }
    if ended && source_config.spec.is_live() {
        notes.push(format!(
            "{label} closed after {} samples per channel ({} s at {} Hz)",
            stats.samples,
            pipeline::format_seconds(stats.samples as f64 / sample_rate_hz),
            sample_rate_hz
        ));
    }
    if let Some(k) = welch_config.max_averages
        && ended
        && averager.segments() + averager.skipped_segments() < k
    {
        warnings.push(format!(
            "the source ended after {} samples: {} of the {k} averages asked for",
            stats.samples,
            averager.segments()
        ));
    }
    let Some(cross) = averager.spectrum() else {
        if stats.samples < welch_config.segment as u64 {
            return Err(pipeline::too_short(stats.samples, welch_config.segment).into());
        }
        return Err(InputError(format!(
            "no usable segment: all {} segments held non-finite samples in channel {} or {} \
             ({} NaN/Inf samples in the record)",
            averager.skipped_segments(),
            source_config.channel,
            channel_b,
            stats.non_finite_samples
        ))
        .into());
    };
    let all = [
        &cross.a.psd_v2_per_hz,
        &cross.psd_b_v2_per_hz,
        &cross.csd_re_v2_per_hz,
        &cross.csd_im_v2_per_hz,
    ];
    if let Some(k) = all
        .iter()
        .find_map(|column| column.iter().position(|p| !p.is_finite()))
    {
        return Err(InputError(format!(
            "the spectrum is not finite at {} Hz (overflow: check --volts-per-unit)",
            cross.a.frequency_hz(k)
        ))
        .into());
    }
    Ok(CrossRun {
        cross,
        channels: (source_config.channel, channel_b),
        warnings,
        description,
        notes,
    })
}

/// How [`feed`] watches a live source.
struct Watch {
    /// SIGINT/SIGTERM end the run (the average so far is kept).
    live: bool,
    /// Give up after this long without a sample.
    stall_timeout: Option<std::time::Duration>,
    /// The source as named in messages.
    label: String,
}

/// A live source that has been silent this long is reported (and again each time as long).
const STALL_REPORT_EVERY: std::time::Duration = std::time::Duration::from_secs(10);

/// Why [`feed`] stopped before the stream ended or the average was complete.
enum CrossStop {
    Signal(&'static str),
    Stalled(std::time::Duration),
}

/// Feeds the paired blocks (channel a's samples, then channel b's) until the stream ends,
/// the average is complete or (live) a signal or a stall stops it; returns the reader's
/// counters, whether the stream ended, and why it was stopped.
fn feed(
    acquisition: &Acquisition,
    averager: &mut CrossWelch,
    progress: &Progress,
    watch: &Watch,
) -> Result<(ReaderStats, bool, Option<CrossStop>)> {
    let mut stats = ReaderStats::default();
    let mut frames: u64 = 0;
    let mut last_sample = std::time::Instant::now();
    let mut next_report = STALL_REPORT_EVERY;
    loop {
        if watch.live && interrupt::stop_requested() {
            let signal = interrupt::stop_reason().unwrap_or("a signal");
            stats.samples = stats.samples.max(frames);
            return Ok((stats, false, Some(CrossStop::Signal(signal))));
        }
        let event = match acquisition
            .events()
            .recv_timeout(std::time::Duration::from_millis(100))
        {
            Ok(event) => event,
            Err(crossbeam_channel::RecvTimeoutError::Timeout) => {
                let quiet = last_sample.elapsed();
                if let Some(limit) = watch.stall_timeout
                    && quiet >= limit
                {
                    stats.samples = stats.samples.max(frames);
                    return Ok((stats, false, Some(CrossStop::Stalled(quiet))));
                }
                if watch.live && quiet >= next_report {
                    warn(&format!(
                        "no sample from {} for {} s ({frames} samples per channel so far); {}",
                        watch.label,
                        quiet.as_secs(),
                        watch.stall_timeout.map_or_else(
                            || "waiting without limit (--stall-timeout 0)".to_string(),
                            |t| format!("giving up at {} s (--stall-timeout)", t.as_secs())
                        )
                    ));
                    next_report = quiet + STALL_REPORT_EVERY;
                }
                continue;
            }
            Err(crossbeam_channel::RecvTimeoutError::Disconnected) => {
                anyhow::bail!("the acquisition thread ended without saying why");
            }
        };
        match event {
            AcqEvent::Block(block) => {
                last_sample = std::time::Instant::now();
                next_report = STALL_REPORT_EVERY;
                let half = block.len() / 2;
                let (a, b) = block.split_at(half);
                averager.push(a, b.get(..half).unwrap_or(b));
                frames += half as u64;
                acquisition.recycle(block);
                progress.set(frames);
                if averager.is_complete() {
                    stats.samples = stats.samples.max(frames);
                    return Ok((stats, false, None));
                }
            }
            AcqEvent::Gap { .. } => averager.discard_pending(),
            AcqEvent::Status(status) => stats = status.reader,
            AcqEvent::Stopped(None) => {
                stats.samples = stats.samples.max(frames);
                return Ok((stats, true, None));
            }
            AcqEvent::Stopped(Some(error)) => return Err(error.into()),
        }
    }
}

/// Averages the two channels `reader` delivers (it must be paired, see
/// [`crate::acquire::SampleReader::pair_with`]) through the same acquisition thread and
/// [`CrossWelch`] as `spectrum --cross-channel`, until the stream ends or `stop_after` has
/// passed (for `stillpoint bench --channels 2`). `samples_averaged` counts samples per
/// channel.
///
/// # Errors
/// Invalid settings; the stream fails.
pub(crate) fn average_cross_stream(
    reader: Box<dyn acquire::SampleReader>,
    welch: &crate::dsp::WelchConfig,
    threads: usize,
    stop_after: Option<std::time::Duration>,
) -> Result<pipeline::Streamed> {
    let mut averager = CrossWelch::new(welch.clone())?.with_threads(threads);
    let mut options = pipeline::headless_options(welch.segment, welch.hop(), threads);
    options.block_samples = options.block_samples.saturating_mul(2);
    let acquisition = Acquisition::spawn(reader, options, None)?;
    let deadline = stop_after.map(|d| std::time::Instant::now() + d);
    let mut frames: u64 = 0;
    loop {
        let event = match deadline {
            Some(deadline) => match acquisition.events().recv_deadline(deadline) {
                Ok(event) => event,
                Err(crossbeam_channel::RecvTimeoutError::Timeout) => break,
                Err(crossbeam_channel::RecvTimeoutError::Disconnected) => {
                    anyhow::bail!("the acquisition thread ended without saying why")
                }
            },
            None => match acquisition.events().recv() {
                Ok(event) => event,
                Err(_) => anyhow::bail!("the acquisition thread ended without saying why"),
            },
        };
        match event {
            AcqEvent::Block(block) => {
                let half = block.len() / 2;
                let (a, b) = block.split_at(half);
                averager.push(a, b.get(..half).unwrap_or(b));
                frames += half as u64;
                acquisition.recycle(block);
                if averager.is_complete() {
                    break;
                }
            }
            AcqEvent::Gap { .. } => averager.discard_pending(),
            AcqEvent::Status(_) => {}
            AcqEvent::Stopped(None) => break,
            AcqEvent::Stopped(Some(error)) => return Err(error.into()),
        }
    }
    drop(acquisition);
    averager.flush();
    Ok(pipeline::Streamed {
        samples_averaged: frames,
        segments: averager.segments(),
        dropped_blocks: 0,
    })
}

/// `stillpoint spectrum --cross-channel J`.
///
/// # Errors
/// Bad options or input, a failed calibration, an unwritable output.
pub fn run_spectrum(args: &SpectrumArgs) -> Result<ExitCode> {
    let kind = config::calibration_kind(&args.calibration)?;
    let options = config::analysis_options(&args.calibration, &HeterodyneArgs::default(), None)?;
    output::check_output_for(&args.output, &args.source.source)?;
    let run = compute_cross(&args.source, &args.welch)?;
    for warning in &run.warnings {
        warn(warning);
    }
    for text in &run.notes {
        note(text);
    }
    // Calibrated columns: m²/Hz with each channel's own m/V (the CSD with c_a c_b).
    let factors = match kind {
        CalibrationKind::None => None,
        CalibrationKind::Given => options.m_per_v.map(|c| (c, c)),
        CalibrationKind::Tone | CalibrationKind::Equipartition => {
            let report = analyze_cross(&run.cross, &options, run.channels)?;
            let cross = report.cross.as_ref();
            match (
                cross.and_then(|c| c.m_per_v_a.zip(c.m_per_v_b)),
                report.calibration.m_per_v,
            ) {
                (Some(ab), _) => Some(ab),
                (None, Some(c)) if c.is_finite() && c > 0.0 => Some((c, c)),
                _ => {
                    return Err(InputError(format!(
                        "the calibration failed: {}",
                        report.notes.join("; ")
                    ))
                    .into());
                }
            }
        }
    };
    let text = cross_csv(&run.cross, factors)?;
    output::write_atomically(&args.output, |out| out.write_all(text.as_bytes()))?;
    Ok(ExitCode::SUCCESS)
}

/// The contract's columns (`frequency_hz, psd_v2_per_hz, psd_b_v2_per_hz, csd_re_v2_per_hz,
/// csd_im_v2_per_hz, coherence`), then with a calibration `psd_m2_per_hz, psd_b_m2_per_hz,
/// csd_re_m2_per_hz, csd_im_m2_per_hz`; shortest round-trip numbers.
///
/// # Errors
/// A value that is not finite (after calibration).
pub fn cross_csv(cross: &CrossSpectrum, m_per_v: Option<(f64, f64)>) -> Result<String> {
    let mut out = String::with_capacity(cross.len() * 120);
    out.push_str(
        "frequency_hz,psd_v2_per_hz,psd_b_v2_per_hz,csd_re_v2_per_hz,csd_im_v2_per_hz,coherence",
    );
    if m_per_v.is_some() {
        out.push_str(",psd_m2_per_hz,psd_b_m2_per_hz,csd_re_m2_per_hz,csd_im_m2_per_hz");
    }
    out.push('\n');
    for k in 0..cross.len() {
        let f = cross.a.frequency_hz(k);
        let paa = cross.a.psd_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let pbb = cross.psd_b_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let re = cross.csd_re_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let im = cross.csd_im_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let coh = cross.coherence_at(k);
        let mut row = vec![f, paa, pbb, re, im, coh];
        if let Some((ca, cb)) = m_per_v {
            let ab = ca * cb;
            row.extend([paa * ca * ca, pbb * cb * cb, re * ab, im * ab]);
        }
        if let Some(bad) = row.iter().find(|v| !v.is_finite()) {
            return Err(InputError(format!(
                "bin {k} ({f} Hz) is not finite ({bad}); check the calibration and --volts-per-unit"
            ))
            .into());
        }
        let line: Vec<String> = row.iter().map(|v| format!("{v:?}")).collect();
        out.push_str(&line.join(","));
        out.push('\n');
    }
    Ok(out)
}

/// `stillpoint analyze --cross-channel J`: the report of [`analyze_cross`] and the run (its
/// `spectrum` is channel a's PSD) for `analyze` to finish as usual.
///
/// # Errors
/// Bad options or input, an impossible analysis input.
pub fn run_analyze(
    args: &AnalyzeArgs,
    options: &crate::analysis::AnalysisOptions,
) -> Result<(report::Report, pipeline::SpectrumRun)> {
    let run = compute_cross(&args.source, &args.welch)?;
    let report = analyze_cross(&run.cross, options, run.channels)?;
    Ok((
        report,
        pipeline::SpectrumRun {
            spectrum: run.cross.a,
            warnings: run.warnings,
            description: run.description,
            notes: run.notes,
        },
    ))
}
