//! `stillpoint track`: a long record or a live stream cut into consecutive intervals of
//! `--every` seconds of samples, each analysed on its own exactly as `analyze` analyses a
//! record (its own Welch average of the segments wholly inside it, then
//! [`analysis::analyze`]), one CSV row per interval; optionally each interval's PSD as a row
//! of a float32 `.npy` waterfall with its axes in a `.json` beside it.
//!
//! Data flow: acquisition thread → this thread (the library's stream loop,
//! [`stream::drive`], with a sink that cuts the stream at interval boundaries, feeds the
//! shared Welch averager with its worker threads, flushes and restarts it at each boundary) → a bounded channel of interval spectra → the `track-analysis` thread
//! ([`analysis::analyze`], band following, rows out). The Welch of interval i + 1 runs while
//! interval i is analysed and written, so the intervals cost little more than `spectrum`.
//! Memory: the averager's (as `spectrum`), two interval spectra in the channel, and the
//! interval times kept for the waterfall's `.json` (16 bytes per interval).
//!
//! Outputs: from a recording, all files are written to temporary names beside their targets
//! and moved into place only when the whole run succeeded (an existing file is never replaced
//! by a failed run). From a live source (stdin, TCP, `--follow`) the CSV (and the waterfall
//! and its `.json`) are created when the first interval completes and then grow row by row,
//! each row flushed as its interval completes (the `.npy` header is rewritten after each row
//! so the file is always a complete array; the `.json` is replaced atomically after each row).
//!
//! Rows: [`TrendRow::from_report`] (the uncertainties of an interval, METHODS.md §11, are
//! explained there).

use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{Context, Result};
use crossbeam_channel::{Receiver, Sender};

use crate::acquire::{self, AcquireError};
use crate::analysis::stream::{self, Averager, Flow, Frames, StreamError, StreamSink, Watch};
use crate::analysis::{self, AnalysisOptions};
use crate::dsp::Spectrum;
use crate::model::trend::{TRACK_HEADER, TrendRow};
use crate::npy_writer::NpyWriter;
use crate::report::Report;

use super::args::TrackArgs;
use super::config;
use super::pipeline::{self, Progress};
use super::{InputError, note, output, warn};
use crate::model::CalibrationMethod;

/// One completed interval on its way to the analysis thread.
struct Interval {
    /// First sample (counted from the start of the stream).
    start: u64,
    /// One past the last sample.
    end: u64,
    /// The interval's Welch estimate; `None` if no segment was usable.
    spectrum: Option<Spectrum>,
}

/// Runs `stillpoint track`.
///
/// # Errors
/// Bad options or input, a failed analysis, an unwritable output.
pub fn run(args: &TrackArgs) -> Result<ExitCode> {
    let options = config::analysis_options(&args.calibration, &args.heterodyne, None)?;
    let kind = CalibrationMethod::of(&options);
    output::check_output_path(&args.output)?;
    let waterfall_paths = match &args.waterfall {
        Some(npy) => {
            output::check_output_path(npy)?;
            let json = npy.with_extension("json");
            if npy.as_os_str() == "-"
                || same_path(npy, &args.output)
                || same_path(&json, &args.output)
            {
                return Err(InputError(format!(
                    "--waterfall {} must be a file other than the CSV output (its axes go to {})",
                    npy.display(),
                    json.display()
                ))
                .into());
            }
            Some((npy.clone(), json))
        }
        None => None,
    };
    let source_config = config::source_config(&args.source)?;
    let live = source_config.spec.is_live() || source_config.follow;
    let reader = acquire::open(&source_config).map_err(|e| match e {
        AcquireError::Open { .. } | AcquireError::Connect { .. } => anyhow::Error::from(e),
        other => anyhow::Error::from(other).context(format!(
            "cannot read {}",
            pipeline::source_label(&source_config.spec)
        )),
    })?;
    let rate = reader.sample_rate_hz();
    let interval = interval_samples(args.every, rate)?;
    let record_samples = acquire::known_length(&source_config);
    let welch_config = config::welch_config(&args.welch, rate, Some(interval))?;
    if (welch_config.segment as u64) > interval {
        return Err(InputError(format!(
            "--every {} s is {interval} samples at {rate} Hz, shorter than one segment of {} \
             (give a longer --every or a smaller --segment)",
            args.every, welch_config.segment
        ))
        .into());
    }
    let limit = match args.duration {
        Some(d) => Some(duration_samples(d, rate)?),
        None => None,
    };
    let available = match (record_samples, limit) {
        (Some(a), Some(b)) => Some(a.min(b)),
        (a, b) => a.or(b),
    };
    if let Some(n) = available
        && n < interval
    {
        return Err(InputError(format!(
            "{} samples ({} s) to analyse, fewer than one interval of {interval} (--every {} s)",
            n,
            pipeline::format_seconds(n as f64 / rate),
            args.every
        ))
        .into());
    }
    let nyquist = rate / 2.0;
    if let Some((lo, _)) = options.mode_band_hz
        && lo >= nyquist
    {
        return Err(InputError(format!(
            "--mode-band starts at {lo} Hz, above the Nyquist frequency {nyquist} Hz"
        ))
        .into());
    }
    let bins = welch_config.segment / 2 + 1;
    let resolution = rate / welch_config.segment as f64;
    let waterfall = match waterfall_paths {
        Some((npy, json)) => {
            let (lo, hi) = args.waterfall_band.unwrap_or((0.0, nyquist));
            let first = (lo / resolution).ceil().max(0.0) as usize;
            let last = ((hi / resolution).floor() as usize).min(bins - 1);
            if lo >= nyquist || first > last {
                return Err(InputError(format!(
                    "--waterfall-band {lo}:{hi} Hz holds no frequency bin (bins every {resolution} \
                     Hz from 0 to {nyquist} Hz)"
                ))
                .into());
            }
            Some(WaterfallPlan {
                npy,
                json,
                first,
                last,
            })
        }
        None => None,
    };
    let mode_band = options.mode_band_hz;
    let threads = config::worker_threads();
    let mut averager = Averager::new(welch_config.clone(), 1, threads)?;
    // Median, exponential and max-hold with --averages K: the first K segment positions of
    // each interval, as `analyze` takes the first K of a record.
    let cap = averager.sample_cap().unwrap_or(interval);
    let analyst = Analyst {
        options,
        kind,
        band: mode_band,
        fixed_band: args.fixed_band,
        nyquist,
        rate,
        csv: Sink::new(&args.output, live),
        waterfall: waterfall.map(|plan| WaterfallOut {
            npy: Sink::new(&plan.npy, live),
            writer: None,
            json: plan.json,
            first: plan.first,
            last: plan.last,
            resolution,
            times: Vec::new(),
            unit: None,
        }),
        live,
        rows: 0,
        first_notes_shown: false,
    };
    let (sender, receiver) = crossbeam_channel::bounded::<Interval>(2);
    let handle = std::thread::Builder::new()
        .name("track-analysis".into())
        .spawn(move || analyst.run(&receiver))
        .context("cannot start the analysis thread")?;

    let progress = if live {
        Progress::new(None)
    } else {
        Progress::new(available)
    };
    let mut cut = Cutter {
        interval,
        cap,
        start: 0,
        filled: 0,
        total: 0,
        dropped_at_gaps: 0,
        sender: &sender,
        progress: &progress,
    };
    let watch = Watch {
        label: pipeline::source_label(&source_config.spec),
        limit,
        ..Watch::default()
    };
    let fed = pipeline::stream_into(reader, &mut averager, &watch, &mut cut);
    let (filled, total, dropped_at_gaps) = (cut.filled, cut.total, cut.dropped_at_gaps);
    progress.finish();
    drop(sender);
    let analysed = match handle.join() {
        Ok(result) => result,
        Err(_) => Err(anyhow::anyhow!("the analysis thread failed")),
    };
    // A failure of the analysis (an impossible band, an unwritable output) explains a
    // stopped feed better than the feed's own "the analysis stopped".
    let mut analyst = analysed?;
    let outcome = fed.with_context(|| format!("while reading {}", watch.label))?;
    let stats = outcome.stats;
    for warning in stream::reader_warnings(&stats, 0) {
        warn(&warning);
    }
    if dropped_at_gaps > 0 {
        warn(&format!(
            "{} samples of intervals cut by gaps in the stream (reconnections, reopened file) \
             were not analysed",
            dropped_at_gaps
        ));
    }
    if analyst.rows == 0 {
        return Err(InputError(format!(
            "the source ended after {} samples ({} s), before one interval of {interval} \
             samples (--every {} s) was complete",
            total,
            pipeline::format_seconds(total as f64 / rate),
            args.every
        ))
        .into());
    }
    analyst.finish()?;
    if filled > 0 {
        note(&format!(
            "the last {} samples ({} s) do not fill an interval of {interval} samples (--every \
             {} s): that partial interval was not analysed",
            filled,
            pipeline::format_seconds(filled as f64 / rate),
            args.every
        ));
    }
    if outcome.ended() && source_config.spec.is_live() {
        note(&format!(
            "{} closed after {} samples ({} s at {rate} Hz)",
            pipeline::source_label(&source_config.spec),
            stats.samples,
            pipeline::format_seconds(stats.samples as f64 / rate)
        ));
    }
    note(&format!(
        "{} intervals of {interval} samples ({} s) written to {}",
        analyst.rows,
        pipeline::format_seconds(interval as f64 / rate),
        args.output.display()
    ));
    Ok(ExitCode::SUCCESS)
}

/// True when `a` and `b` name the same file (textually or, when both exist, on disk).
fn same_path(a: &Path, b: &Path) -> bool {
    if a == b {
        return true;
    }
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

/// round(every × rate) samples, at least 1.
fn interval_samples(every: f64, rate: f64) -> Result<u64> {
    let n = (every * rate).round();
    if !(n.is_finite() && n >= 1.0 && n < 2f64.powi(62)) {
        return Err(InputError(format!(
            "--every {every} s at {rate} Hz is not a usable number of samples ({n})"
        ))
        .into());
    }
    Ok(n as u64)
}

/// round(duration × rate) samples.
fn duration_samples(duration: f64, rate: f64) -> Result<u64> {
    let n = (duration * rate).round();
    if !(n.is_finite() && n >= 1.0 && n < 2f64.powi(62)) {
        return Err(InputError(format!(
            "--duration {duration} s at {rate} Hz is not a usable number of samples ({n})"
        ))
        .into());
    }
    Ok(n as u64)
}

/// Cuts the stream into intervals and feeds the averager: the `track` side of
/// [`stream::drive`].
struct Cutter<'a> {
    /// Samples per interval.
    interval: u64,
    /// Samples of each interval pushed into the averager (≤ interval).
    cap: u64,
    /// First sample of the current interval.
    start: u64,
    /// Samples of the current interval so far.
    filled: u64,
    /// Samples read (and, after gaps, samples known to be missing).
    total: u64,
    /// Samples of intervals abandoned at gaps.
    dropped_at_gaps: u64,
    /// Completed intervals go to the analysis thread here.
    sender: &'a Sender<Interval>,
    /// The progress bar.
    progress: &'a Progress,
}

impl StreamSink for Cutter<'_> {
    fn block(&mut self, averager: &mut Averager, frames: Frames<'_>) -> Result<Flow, StreamError> {
        let mut rest = frames;
        while !rest.is_empty() {
            let need = usize::try_from(self.interval - self.filled).unwrap_or(usize::MAX);
            let (chunk, tail) = rest.split_at(need.min(rest.len()));
            let take = chunk.len();
            if self.filled < self.cap {
                let k = usize::try_from(self.cap - self.filled)
                    .unwrap_or(usize::MAX)
                    .min(take);
                averager.push(chunk.head(k));
            }
            self.filled += take as u64;
            self.total += take as u64;
            rest = tail;
            if self.filled == self.interval {
                averager.flush();
                let spectrum = averager.spectrum();
                averager.restart();
                averager.discard_pending();
                let done = Interval {
                    start: self.start,
                    end: self.start + self.interval,
                    spectrum,
                };
                self.start += self.interval;
                self.filled = 0;
                if self.sender.send(done).is_err() {
                    // The analysis thread stopped; its error says why.
                    return Err(StreamError::Sink("the analysis stopped".into()));
                }
            }
        }
        Ok(Flow::Continue)
    }

    fn gap(&mut self, averager: &mut Averager, samples: u64) {
        // No interval spans missing samples: the current one is abandoned and the next
        // starts after the gap.
        self.dropped_at_gaps += self.filled;
        averager.flush();
        averager.restart();
        averager.discard_pending();
        self.total += samples;
        self.start = self.total;
        self.filled = 0;
    }

    fn progress(&mut self, _position: u64) {
        self.progress.set(self.total);
    }
}

/// Where the waterfall goes and which bins it holds.
struct WaterfallPlan {
    npy: PathBuf,
    json: PathBuf,
    first: usize,
    last: usize,
}

/// An output file: a temporary beside the target moved into place at the end (recordings),
/// or the target itself written as it goes (live sources); `-` is stdout. Created at the
/// first write, so a run that fails before its first row leaves an existing file alone.
struct Sink {
    target: PathBuf,
    live: bool,
    file: Option<BufWriter<File>>,
    temp: Option<PathBuf>,
    stdout: bool,
}

impl Sink {
    fn new(target: &Path, live: bool) -> Self {
        Self {
            target: target.to_path_buf(),
            live,
            file: None,
            temp: None,
            stdout: target.as_os_str() == "-",
        }
    }

    /// The open file, created on first use.
    fn file(&mut self) -> io::Result<&mut BufWriter<File>> {
        if self.file.is_none() {
            let file = if self.live {
                File::create(&self.target)?
            } else {
                let name = self
                    .target
                    .file_name()
                    .map_or_else(|| "out".into(), |n| n.to_string_lossy().into_owned());
                let folder = match self.target.parent() {
                    Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
                    _ => PathBuf::from("."),
                };
                let temp = folder.join(format!(".{name}.{}.track.tmp", std::process::id()));
                let file = File::create(&temp)?;
                self.temp = Some(temp);
                file
            };
            self.file = Some(BufWriter::with_capacity(1 << 16, file));
        }
        self.file
            .as_mut()
            .ok_or_else(|| io::Error::other("output not open"))
    }

    /// Writes `bytes` (to stdout for `-`); flushes when live.
    fn write(&mut self, bytes: &[u8]) -> io::Result<()> {
        if self.stdout {
            let stdout = io::stdout();
            let mut lock = stdout.lock();
            lock.write_all(bytes)?;
            if self.live {
                lock.flush()?;
            }
            return Ok(());
        }
        let live = self.live;
        let file = self.file()?;
        file.write_all(bytes)?;
        if live {
            file.flush()?;
        }
        Ok(())
    }

    /// Flushes, syncs and (for a recording) moves the temporary file into place.
    fn commit(&mut self) -> io::Result<()> {
        if self.stdout {
            return io::stdout().lock().flush();
        }
        if let Some(mut file) = self.file.take() {
            file.flush()?;
            let file = file.into_inner().map_err(io::IntoInnerError::into_error)?;
            file.sync_all()?;
        }
        if let Some(temp) = self.temp.take()
            && let Err(e) = std::fs::rename(&temp, &self.target)
        {
            let _ = std::fs::remove_file(&temp);
            return Err(e);
        }
        Ok(())
    }
}

impl Drop for Sink {
    fn drop(&mut self) {
        if let Some(temp) = self.temp.take() {
            self.file = None;
            let _ = std::fs::remove_file(temp);
        }
    }
}

/// The waterfall being written.
struct WaterfallOut {
    npy: Sink,
    writer: Option<NpyWriter<BufWriter<File>>>,
    json: PathBuf,
    first: usize,
    last: usize,
    resolution: f64,
    times: Vec<(f64, f64)>,
    /// `m^2/Hz` or `V^2/Hz`, fixed by the first row.
    unit: Option<&'static str>,
}

impl WaterfallOut {
    /// Appends one interval's PSD over the band (NaN where the interval has none).
    fn append(
        &mut self,
        spectrum: Option<&Spectrum>,
        m_per_v: Option<f64>,
        times: (f64, f64),
        live: bool,
    ) -> Result<()> {
        let columns = self.last - self.first + 1;
        let unit = *self.unit.get_or_insert(if m_per_v.is_some() {
            "m^2/Hz"
        } else {
            "V^2/Hz"
        });
        let scale = match (unit, m_per_v) {
            ("m^2/Hz", Some(c)) => Some(c * c),
            ("m^2/Hz", None) => None,
            _ => Some(1.0),
        };
        let row: Vec<f64> = match (spectrum, scale) {
            (Some(s), Some(c2)) => (self.first..=self.last)
                .map(|k| s.psd_v2_per_hz.get(k).map_or(f64::NAN, |p| p * c2))
                .collect(),
            _ => vec![f64::NAN; columns],
        };
        if self.writer.is_none() {
            self.npy.file().context("cannot create the waterfall")?;
            let file = self
                .npy
                .file
                .take()
                .ok_or_else(|| anyhow::anyhow!("waterfall not open"))?;
            self.writer = Some(NpyWriter::new(file, columns)?);
        }
        let writer = self
            .writer
            .as_mut()
            .ok_or_else(|| anyhow::anyhow!("waterfall not open"))?;
        writer.append_row(&row)?;
        self.times.push(times);
        if live {
            writer.set_rows()?;
            self.write_json()?;
        }
        Ok(())
    }

    /// Writes the axes (atomically).
    fn write_json(&self) -> Result<()> {
        let frequency: Vec<f64> = (self.first..=self.last)
            .map(|k| k as f64 * self.resolution)
            .collect();
        let value = serde_json::json!({
            "frequency_hz": frequency,
            "t_start_s": self.times.iter().map(|t| t.0).collect::<Vec<_>>(),
            "t_end_s": self.times.iter().map(|t| t.1).collect::<Vec<_>>(),
            "unit": self.unit.unwrap_or("V^2/Hz"),
        });
        let text = serde_json::to_string(&value).context("cannot encode the waterfall axes")?;
        output::write_atomically(&self.json, |out| {
            out.write_all(text.as_bytes())?;
            out.write_all(b"\n")
        })
    }

    /// Final header, then the file moved into place, then the axes.
    fn finish(&mut self) -> Result<()> {
        if let Some(writer) = self.writer.take() {
            let file = writer.finish()?;
            self.npy.file = Some(file);
        }
        self.npy
            .commit()
            .with_context(|| format!("cannot write {}", self.npy.target.display()))?;
        self.write_json()
    }
}

/// The analysis thread's state.
struct Analyst {
    options: AnalysisOptions,
    kind: CalibrationMethod,
    /// The current mode band (follows the mode unless `fixed_band`).
    band: Option<(f64, f64)>,
    fixed_band: bool,
    nyquist: f64,
    rate: f64,
    csv: Sink,
    waterfall: Option<WaterfallOut>,
    live: bool,
    rows: u64,
    first_notes_shown: bool,
}

impl Analyst {
    /// Analyses every interval the channel brings; returns itself for [`Analyst::finish`].
    fn run(mut self, receiver: &Receiver<Interval>) -> Result<Self> {
        for interval in receiver {
            self.interval(&interval)?;
        }
        Ok(self)
    }

    /// Moves the outputs of a recording into place (live outputs are already complete).
    fn finish(&mut self) -> Result<()> {
        if let Some(w) = self.waterfall.as_mut() {
            w.finish()?;
        }
        self.csv
            .commit()
            .with_context(|| format!("cannot write {}", self.csv.target.display()))
    }

    /// One interval: analysis, row, waterfall row, next band.
    fn interval(&mut self, interval: &Interval) -> Result<()> {
        let t0 = interval.start as f64 / self.rate;
        let t1 = interval.end as f64 / self.rate;
        let band = self.band;
        let (row, m_per_v) = match &interval.spectrum {
            None => (
                TrendRow::empty(t0, t1, Some(0), band, "no_usable_segment"),
                None,
            ),
            Some(s) if s.psd_v2_per_hz.iter().any(|p| !p.is_finite()) => (
                TrendRow::empty(t0, t1, Some(s.averages as u64), band, "non_finite_spectrum"),
                None,
            ),
            Some(spectrum) => {
                let mut options = self.options.clone();
                options.mode_band_hz = band;
                let report = analysis::analyze(spectrum, &options)?;
                if !self.first_notes_shown {
                    self.first_notes_shown = true;
                    for text in &report.notes {
                        note(&format!("first interval: {text}"));
                    }
                    for text in &report.warnings {
                        warn(&format!("first interval: {text}"));
                    }
                }
                let row = TrendRow::from_report(
                    &report,
                    t0,
                    t1,
                    band,
                    self.kind != CalibrationMethod::None,
                );
                self.follow(&report);
                (row, report.calibration.m_per_v)
            }
        };
        if self.rows == 0 {
            let mut header = TRACK_HEADER.to_string();
            header.push('\n');
            self.csv
                .write(header.as_bytes())
                .with_context(|| format!("cannot write {}", self.csv.target.display()))?;
        }
        let line = row.to_csv_line();
        self.csv
            .write(line.as_bytes())
            .with_context(|| format!("cannot write {}", self.csv.target.display()))?;
        if let Some(w) = self.waterfall.as_mut() {
            w.append(interval.spectrum.as_ref(), m_per_v, (t0, t1), self.live)
                .with_context(|| format!("cannot write {}", w.npy.target.display()))?;
        }
        self.rows += 1;
        Ok(())
    }

    /// Moves the band onto the fitted mode ([`crate::model::trend::follow_band`], the rule
    /// the window's history uses too).
    fn follow(&mut self, report: &Report) {
        if self.fixed_band {
            return;
        }
        self.band = crate::model::trend::follow_band(self.band, report, self.nyquist);
    }
}
