//! Acquisition: turns a source (WAV, raw binary file, growing file, stdin, TCP, the built-in
//! demo generator) into blocks of calibrated-in-volts samples of one channel, on its own thread.
//!
//! Readers implement [`SampleReader`] (pull, one block at a time, a `Result` per block, shaped
//! like hound's reader). [`open`] picks the reader for a [`SourceConfig`]:
//!
//! | source | reader | notes |
//! |---|---|---|
//! | `*.wav` | [`WavReader`] | PCM 16/24/32-bit int, 32/64-bit float, plain or EXTENSIBLE, RF64 |
//! | `*.npy` | [`RawReader`] via [`npy`] | NumPy array: layout from its header; needs `rate_hz` |
//! | `*.h5`, `*.hdf5` | [`RawReader`] via [`hdf5`] | the `dataset`; rate from `rate_hz` or an attribute |
//! | other path | [`RawReader`] | needs `sample_format` and `rate_hz` |
//! | path + `follow` | [`FollowReader`] | polls every 50 ms, reopens on truncation/rotation |
//! | `-` | [`RawReader::stdin`] | live |
//! | `tcp://HOST:PORT` | [`TcpReader`] | live; `reconnect` retries with back-off |
//! | demo | [`DemoReader`] | [`crate::synth`] generator, paced like a recording |
//!
//! [`Acquisition`] runs a reader on a thread named `stillpoint-acquire` and hands
//! [`AcqEvent`]s to the consumer over a *bounded* crossbeam channel; [`AcqCommand`]s go the
//! other way; a [`Waker`] (the window passes `request_repaint`, never an egui type) is called
//! after each event. The last event is always [`AcqEvent::Stopped`], so the consumer learns why
//! the stream ended.
//!
//! Back-pressure: headless commands use [`Backpressure::Block`] for every source (no sample is
//! lost; a file is simply read as fast as the consumer takes it, a live source's kernel buffer
//! fills). The window uses [`Backpressure::DropAndCount`] (see [`AcqOptions::window`]): the
//! worker never waits on the UI; blocks that find the channel full are dropped and counted in
//! [`AcqStatus::dropped_blocks`]/[`AcqStatus::dropped_samples`]. Recordings and the demo are
//! paced to the playback speed ([`AcqOptions::speed`], changeable with [`AcqCommand::Speed`]);
//! live sources ([`SampleReader::is_live`]: stdin, TCP, followed files) are never paced.
//!
//! ```no_run
//! use stillpoint::acquire::{self, AcqEvent, AcqOptions, Acquisition, SourceConfig, SourceSpec};
//!
//! let config = SourceConfig::new(SourceSpec::parse("cooldown.wav"));
//! let reader = acquire::open(&config)?;
//! let acq = Acquisition::spawn(reader, AcqOptions::headless(), None)?;
//! for event in acq.events() {
//!     match event {
//!         AcqEvent::Block(volts) => { /* feed the Welch averager */ let _ = volts; }
//!         AcqEvent::Gap { .. } => { /* samples missing: start a new segment */ }
//!         AcqEvent::Status(status) => eprintln!("{} samples", status.reader.samples),
//!         AcqEvent::Stopped(None) => break,
//!         AcqEvent::Stopped(Some(error)) => return Err(error.into()),
//!     }
//! }
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```
//!
//! Volts: WAV integers of b bits are divided by 2^(b−1) (full scale ±1) and then multiplied by
//! `volts_per_unit`; raw integers are not divided (volts = count × `volts_per_unit`); floats
//! are multiplied by `volts_per_unit`.
//!
//! Non-finite samples are passed through unchanged (as NaN/±Inf) and counted in
//! [`ReaderStats::non_finite_samples`]; the Welch averager skips any segment containing one.
//! Integers at their most negative or most positive code are counted in
//! [`ReaderStats::clipped_samples`].
//!
//! Memory: readers never allocate according to a header's claims; buffers are bounded by the
//! block asked for (at most 1 MiB, or one frame if larger) and by the bytes really present.

mod demo;
mod error;
mod follow;
mod frames;
pub mod hdf5;
mod length;
pub mod npy;
mod raw;
mod tcp;
mod thread;
mod wav;

pub use demo::DemoReader;
pub use error::{AcquireError, Result};
pub use follow::{FollowReader, POLL_INTERVAL};
pub use length::known_length;
pub use raw::{MAX_CHANNELS, RawFormat, RawReader};
pub use tcp::{FIRST_BACKOFF, MAX_BACKOFF, TcpReader};
pub use thread::{AcqOptions, Acquisition, Waker};
pub use wav::{WavHeader, WavReader};

use std::path::PathBuf;
use std::time::Duration;

/// Binary layout of one raw sample.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SampleFormat {
    /// Signed 16-bit integer.
    I16,
    /// Signed 24-bit integer, packed in 3 bytes.
    I24,
    /// Signed 32-bit integer.
    I32,
    /// IEEE 754 binary32.
    F32,
    /// IEEE 754 binary64.
    F64,
}

impl SampleFormat {
    /// Bytes one sample occupies in a raw stream.
    pub fn bytes(self) -> usize {
        match self {
            Self::I16 => 2,
            Self::I24 => 3,
            Self::I32 | Self::F32 => 4,
            Self::F64 => 8,
        }
    }

    /// The command-line spelling (`i16`, `i24`, `i32`, `f32`, `f64`).
    pub fn name(self) -> &'static str {
        match self {
            Self::I16 => "i16",
            Self::I24 => "i24",
            Self::I32 => "i32",
            Self::F32 => "f32",
            Self::F64 => "f64",
        }
    }

    /// Parses the command-line spelling.
    pub fn parse(text: &str) -> Option<Self> {
        match text {
            "i16" => Some(Self::I16),
            "i24" => Some(Self::I24),
            "i32" => Some(Self::I32),
            "f32" => Some(Self::F32),
            "f64" => Some(Self::F64),
            _ => None,
        }
    }
}

/// Byte order of a raw stream.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Endian {
    /// Least significant byte first (the default).
    #[default]
    Little,
    /// Most significant byte first.
    Big,
}

/// Where samples come from.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SourceSpec {
    /// A file: `.wav` (case-insensitive) is read as WAV, anything else as raw binary.
    Path(PathBuf),
    /// Raw samples on standard input (`-` on the command line).
    Stdin,
    /// Raw samples from a TCP server, `HOST:PORT` (from `tcp://HOST:PORT`).
    Tcp(String),
    /// The built-in synthesiser, generating a scenario live (see [`crate::synth`]).
    Demo {
        /// Scenario name as `stillpoint synth` spells it.
        scenario: String,
        /// RNG seed.
        seed: u64,
    },
}

impl SourceSpec {
    /// Parses a SOURCE argument: `-` → stdin, `tcp://HOST:PORT` → TCP, else a path.
    pub fn parse(text: &str) -> Self {
        if text == "-" {
            Self::Stdin
        } else if let Some(rest) = text.strip_prefix("tcp://") {
            Self::Tcp(rest.to_string())
        } else {
            Self::Path(PathBuf::from(text))
        }
    }

    /// True for a path ending in `.wav` (any case).
    pub(crate) fn is_wav(&self) -> bool {
        match self {
            Self::Path(p) => p
                .extension()
                .and_then(|e| e.to_str())
                .is_some_and(|e| e.eq_ignore_ascii_case("wav")),
            _ => false,
        }
    }

    /// True for a path ending in `.npy` (any case): a NumPy array file.
    pub(crate) fn is_npy(&self) -> bool {
        self.has_extension(&["npy"])
    }

    /// True for a path ending in `.h5` or `.hdf5` (any case): an HDF5 file.
    pub(crate) fn is_hdf5(&self) -> bool {
        self.has_extension(&["h5", "hdf5"])
    }

    /// True for a file whose header states its sample layout (WAV, `.npy`, HDF5), so
    /// `--sample-format` does not apply.
    pub(crate) fn is_self_describing(&self) -> bool {
        self.is_wav() || self.is_npy() || self.is_hdf5()
    }

    fn has_extension(&self, wanted: &[&str]) -> bool {
        match self {
            Self::Path(p) => p
                .extension()
                .and_then(|e| e.to_str())
                .is_some_and(|e| wanted.iter().any(|w| e.eq_ignore_ascii_case(w))),
            _ => false,
        }
    }

    /// True for sources whose samples arrive in real time (stdin, TCP, a followed file is
    /// decided by [`SourceConfig::follow`]).
    pub fn is_live(&self) -> bool {
        matches!(self, Self::Stdin | Self::Tcp(_))
    }
}

/// Everything needed to open a source (the "source options" of the command-line contract).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SourceConfig {
    /// Where the samples come from.
    pub spec: SourceSpec,
    /// Raw sample layout; required for raw sources, ignored for WAV.
    pub sample_format: Option<SampleFormat>,
    /// Raw byte order.
    pub endian: Endian,
    /// Interleaved channels in a raw stream (WAV: from the header).
    pub channels: usize,
    /// Channel to analyse, 0-based.
    pub channel: usize,
    /// Sample rate; required for raw sources, overrides nothing for WAV unless given.
    pub rate_hz: Option<f64>,
    /// Volts per unit (see the module docs for integer scaling).
    pub volts_per_unit: f64,
    /// Keep reading as the file grows.
    pub follow: bool,
    /// TCP only: when the connection is lost, reconnect with back-off instead of ending the
    /// stream (the window sets this; headless runs end at the peer's close). Ignored for
    /// other sources.
    #[serde(default)]
    pub reconnect: bool,
    /// HDF5 only: the dataset to read, `/GROUP/NAME` (`--dataset`).
    #[serde(default)]
    pub dataset: Option<String>,
    /// A second channel (`--cross-channel J`, called b) delivered with `channel` (a) in the
    /// same pass: blocks then hold both (see [`SampleReader::channels_delivered`]).
    #[serde(default)]
    pub cross_channel: Option<usize>,
}

impl SourceConfig {
    /// A configuration with the contract's defaults for the given source.
    pub fn new(spec: SourceSpec) -> Self {
        Self {
            spec,
            sample_format: None,
            endian: Endian::Little,
            channels: 1,
            channel: 0,
            rate_hz: None,
            volts_per_unit: 1.0,
            follow: false,
            reconnect: false,
            dataset: None,
            cross_channel: None,
        }
    }
}

/// Counters a reader keeps about what it read and what it had to skip.
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ReaderStats {
    /// Samples of the selected channel delivered so far.
    pub samples: u64,
    /// Delivered samples that were NaN or ±Inf.
    pub non_finite_samples: u64,
    /// Delivered samples at or beyond integer full scale (clipping).
    pub clipped_samples: u64,
    /// Bytes dropped at the end of the stream because they did not make a whole frame.
    pub partial_frame_bytes: u64,
    /// True if a WAV data chunk ended before its header said it would.
    pub truncated: bool,
    /// Times a live source reconnected or a followed file was reopened.
    pub reconnects: u64,
    /// A TCP source ended because the peer reset (or the network dropped) the connection
    /// after samples had arrived; they were kept, like at a normal close.
    #[serde(default)]
    pub connection_reset: bool,
}

/// A pull reader of one channel's samples in volts.
pub trait SampleReader: Send {
    /// Samples per second of the stream.
    fn sample_rate_hz(&self) -> f64;

    /// Reads up to `out.len()` samples into `out`; returns how many were written.
    /// `Ok(0)` means the stream has ended (for a followed file or live source: only when
    /// it is closed for good).
    ///
    /// # Errors
    /// I/O or format errors of the underlying stream.
    fn read_block(&mut self, out: &mut [f64]) -> Result<usize>;

    /// What has been read and skipped so far.
    fn stats(&self) -> ReaderStats;

    /// A one-line human description ("WAV, 2 ch, 24-bit int, 250 kHz, channel 0").
    fn describe(&self) -> String;

    /// Like [`SampleReader::read_block`], but waits at most about `timeout` for samples:
    /// `Ok(None)` means none arrived in time and the stream is still open. Readers that can
    /// wait (followed files, TCP) implement it so the acquisition thread stays responsive;
    /// the default simply calls `read_block`.
    ///
    /// # Errors
    /// As [`SampleReader::read_block`].
    fn read_block_timeout(&mut self, out: &mut [f64], timeout: Duration) -> Result<Option<usize>> {
        let _ = timeout;
        self.read_block(out).map(Some)
    }

    /// True if samples arrive at their own real-time pace (stdin, TCP, a followed file), so
    /// the acquisition thread must not pace them; false for recordings and the demo
    /// generator, which are paced to the requested playback speed.
    fn is_live(&self) -> bool {
        false
    }

    /// Channels in each delivered block: 1, or 2 once [`SampleReader::pair_with`] succeeded.
    /// A block of `2n` values then holds `n` samples of the selected channel (a) followed by
    /// the `n` samples of the paired channel (b) taken at the same instants.
    fn channels_delivered(&self) -> usize {
        1
    }

    /// Also delivers `channel_b` of the same interleaved stream, read in the same pass (no
    /// second pass over a file, no second socket); see [`SampleReader::channels_delivered`].
    /// Readers of interleaved frames (WAV, raw file, stdin, TCP, followed file) support it.
    ///
    /// # Errors
    /// [`AcquireError::Config`] for a channel out of range; [`AcquireError::Unsupported`]
    /// for a source with a single channel by nature (the demo generator).
    fn pair_with(&mut self, channel_b: usize) -> Result<()> {
        let _ = channel_b;
        Err(AcquireError::Unsupported(
            "--cross-channel needs an interleaved source (WAV or raw)".into(),
        ))
    }
}

/// Opens a reader for `config`.
///
/// # Errors
/// Missing file, malformed header, inconsistent options (raw without `--rate`, channel out
/// of range, …), connection refused.
pub fn open(config: &SourceConfig) -> Result<Box<dyn SampleReader>> {
    let mut reader = open_one(config)?;
    if let Some(channel_b) = config.cross_channel {
        reader.pair_with(channel_b)?;
    }
    Ok(reader)
}

/// [`open`] for the selected channel alone.
fn open_one(config: &SourceConfig) -> Result<Box<dyn SampleReader>> {
    check_rate(config.rate_hz)?;
    check_volts_per_unit(config.volts_per_unit)?;
    if config.follow && !matches!(config.spec, SourceSpec::Path(_)) {
        return Err(AcquireError::Config(
            "--follow applies only to a file".into(),
        ));
    }
    let vpu = config.volts_per_unit;
    Ok(match &config.spec {
        SourceSpec::Path(path) if config.spec.is_wav() => {
            if config.follow {
                Box::new(FollowReader::wav(
                    path,
                    config.channel,
                    vpu,
                    config.rate_hz,
                )?)
            } else {
                Box::new(WavReader::open(path, config.channel, vpu, config.rate_hz)?)
            }
        }
        SourceSpec::Path(path) if config.spec.is_npy() || config.spec.is_hdf5() => {
            if config.follow {
                return Err(AcquireError::Config(
                    "--follow applies to WAV and raw files, not to .npy or HDF5".into(),
                ));
            }
            if config.spec.is_npy() {
                Box::new(npy::open(config, path)?)
            } else {
                Box::new(hdf5::open(config, path)?)
            }
        }
        SourceSpec::Path(path) => {
            let format = RawFormat::from_config(config)?;
            if config.follow {
                Box::new(FollowReader::raw(path, format)?)
            } else {
                Box::new(RawReader::open(path, format)?)
            }
        }
        SourceSpec::Stdin => Box::new(RawReader::stdin(RawFormat::from_config(config)?)?),
        SourceSpec::Tcp(address) => {
            let format = RawFormat::from_config(config)?;
            Box::new(TcpReader::connect(address, format, config.reconnect)?)
        }
        SourceSpec::Demo { scenario, seed } => Box::new(DemoReader::new(scenario, *seed, vpu)?),
    })
}

/// Samples per channel a `.npy` or HDF5 source holds according to its header (`None` for
/// other sources or an unreadable file).
pub(crate) fn lab_file_length(config: &SourceConfig, path: &std::path::Path) -> Option<u64> {
    if config.spec.is_npy() {
        npy::NpyHeader::read(path).ok().map(|h| h.samples)
    } else if config.spec.is_hdf5() {
        let dataset = config.dataset.as_deref()?;
        hdf5::Hdf5Dataset::open(path, dataset)
            .ok()
            .map(|d| d.layout.samples)
    } else {
        None
    }
}

/// Lowest sample rate accepted: below it the spectrum's 1/rate scaling leaves the range of
/// f64 arithmetic for ordinary signals.
pub(crate) const MIN_RATE_HZ: f64 = 1e-9;
/// Highest sample rate accepted.
pub(crate) const MAX_RATE_HZ: f64 = 1e15;

/// A rate option must be a positive finite number of hertz in a range f64 arithmetic handles.
fn check_rate(rate_hz: Option<f64>) -> Result<()> {
    match rate_hz {
        Some(r) if !(r.is_finite() && r > 0.0) => Err(AcquireError::Config(format!(
            "--rate must be a positive number of samples per second, got {}",
            compact_number(r)
        ))),
        Some(r) if !(MIN_RATE_HZ..=MAX_RATE_HZ).contains(&r) => Err(AcquireError::Config(format!(
            "--rate {} Hz is outside the {MIN_RATE_HZ:e} to {MAX_RATE_HZ:e} Hz this program \
                 handles (the spectrum scales with 1/rate)",
            compact_number(r)
        ))),
        _ => Ok(()),
    }
}

/// A number for a message: plain when moderate, `1.234568e300` style when very large or
/// very small, so no message carries hundreds of digits.
pub(crate) fn compact_number(value: f64) -> String {
    let magnitude = value.abs();
    if value == 0.0 || !value.is_finite() || (1e-4..1e9).contains(&magnitude) {
        format!("{value}")
    } else {
        format!("{value:.6e}")
    }
}

/// `--volts-per-unit` must be finite and non-zero (negative inverts, which is allowed).
fn check_volts_per_unit(volts_per_unit: f64) -> Result<()> {
    if volts_per_unit.is_finite() && volts_per_unit != 0.0 {
        Ok(())
    } else {
        Err(AcquireError::Config(format!(
            "--volts-per-unit must be a finite, non-zero number, got {}",
            compact_number(volts_per_unit)
        )))
    }
}

/// "250 kHz", "44.1 kHz", "1.5 MHz", "12 Hz".
pub(crate) fn format_rate(rate_hz: f64) -> String {
    let (value, unit) = if rate_hz >= 1e6 {
        (rate_hz / 1e6, "MHz")
    } else if rate_hz >= 1e3 {
        (rate_hz / 1e3, "kHz")
    } else {
        (rate_hz, "Hz")
    };
    let text = format!("{value:.6}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    format!("{text} {unit}")
}

/// Worker → consumer messages.
#[derive(Debug)]
pub enum AcqEvent {
    /// A block of samples in volts, in stream order.
    Block(Vec<f64>),
    /// Samples are missing between the previous block and the next one: blocks dropped
    /// because the consumer was slow (`samples` of them), or a reconnection / reopened file
    /// (the count is then unknown and not included). Sent before the next block, so a
    /// consumer can start a new segment instead of averaging one across the gap.
    Gap {
        /// Samples known to be missing (dropped blocks); 0 if only a reconnection.
        samples: u64,
    },
    /// Periodic status: counters and rates.
    Status(AcqStatus),
    /// The stream ended: `None` when it ended normally, `Some(error)` otherwise.
    Stopped(Option<AcquireError>),
}

/// Periodic status of a running acquisition.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct AcqStatus {
    /// Reader counters.
    pub reader: ReaderStats,
    /// Blocks dropped because the consumer's channel was full (drop policy only).
    pub dropped_blocks: u64,
    /// Samples in the dropped blocks.
    pub dropped_samples: u64,
    /// Sample rate of the stream.
    pub sample_rate_hz: f64,
    /// Human description of the source.
    pub description: String,
}

/// Consumer → worker messages.
#[derive(Debug, Clone, PartialEq)]
pub enum AcqCommand {
    /// Pause delivery (the reader stops reading; live sources keep draining and count drops).
    Pause,
    /// Resume delivery.
    Resume,
    /// Set playback speed for recordings (1.0 = real time; `None` = as fast as possible).
    Speed(Option<f64>),
    /// Stop and end the thread.
    Shutdown,
}

/// What the worker does when the consumer's channel is full.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Backpressure {
    /// Wait for room (no sample is ever lost; the source is slowed down). Headless default.
    Block,
    /// Drop the block and count it in [`AcqStatus::dropped_blocks`]. The window's default for
    /// live sources, so acquisition never waits on the UI.
    DropAndCount,
}
