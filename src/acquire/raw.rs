//! Raw binary samples (i16, packed i24, i32, f32, f64; little or big endian; interleaved
//! channels) from any byte stream: a file, standard input, or a socket (see `tcp.rs`).
//!
//! Raw integers are not rescaled: volts = count × `volts_per_unit`. A partial last frame is
//! dropped and counted in [`ReaderStats::partial_frame_bytes`].

use std::fs::File;
use std::io::{self, Read};
use std::path::Path;
use std::time::Instant;

use super::frames::{ByteSource, Fill, FrameReader, Layout};
use super::{AcquireError, Endian, ReaderStats, Result, SampleFormat, SampleReader, SourceConfig};

/// Most interleaved channels a raw stream may declare (keeps one frame a sane size).
pub const MAX_CHANNELS: usize = 65_536;

/// The layout of a raw stream and how to scale it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RawFormat {
    /// Encoding of one sample.
    pub sample_format: SampleFormat,
    /// Byte order.
    pub endian: Endian,
    /// Interleaved channels (≥ 1).
    pub channels: usize,
    /// Selected channel, 0-based (< `channels`).
    pub channel: usize,
    /// Samples per second per channel.
    pub sample_rate_hz: f64,
    /// Volts per count (integers) or per unit (floats).
    pub volts_per_unit: f64,
}

impl RawFormat {
    /// The raw layout a [`SourceConfig`] asks for.
    ///
    /// # Errors
    /// [`AcquireError::Config`] naming the option: no `--sample-format`, no `--rate`, a rate that
    /// is not a positive finite number, zero or too many channels, a channel out of range, a
    /// zero or non-finite `--volts-per-unit`.
    pub fn from_config(config: &SourceConfig) -> Result<Self> {
        let sample_format = config.sample_format.ok_or_else(|| {
            AcquireError::Config(
                "raw source needs --sample-format (i16, i24, i32, f32 or f64)".into(),
            )
        })?;
        let sample_rate_hz = config.rate_hz.ok_or_else(|| {
            AcquireError::Config("raw source needs --rate (samples per second, Hz)".into())
        })?;
        let format = Self {
            sample_format,
            endian: config.endian,
            channels: config.channels,
            channel: config.channel,
            sample_rate_hz,
            volts_per_unit: config.volts_per_unit,
        };
        format.validate()?;
        Ok(format)
    }

    /// Checks the fields (see [`RawFormat::from_config`]).
    ///
    /// # Errors
    /// [`AcquireError::Config`] naming the offending option.
    pub fn validate(&self) -> Result<()> {
        super::check_rate(Some(self.sample_rate_hz))?;
        super::check_volts_per_unit(self.volts_per_unit)?;
        if self.channels == 0 {
            return Err(AcquireError::Config("--channels must be at least 1".into()));
        }
        if self.channels > MAX_CHANNELS {
            return Err(AcquireError::Config(format!(
                "--channels {} is more than the {MAX_CHANNELS} supported",
                self.channels
            )));
        }
        if self.channel >= self.channels {
            return Err(AcquireError::Config(format!(
                "--channel {} is out of range: the stream has {} channel(s) (0 to {})",
                self.channel,
                self.channels,
                self.channels - 1
            )));
        }
        Ok(())
    }

    pub(crate) fn layout(&self) -> Layout {
        Layout {
            format: self.sample_format,
            endian: self.endian,
            channels: self.channels,
            channel: self.channel,
            volts_per_count: self.volts_per_unit,
        }
    }

    /// "f32 little-endian, 2 ch, 250 kHz, channel 1".
    pub(crate) fn describe(&self) -> String {
        let endian = match self.endian {
            Endian::Little => "little-endian",
            Endian::Big => "big-endian",
        };
        format!(
            "{} {endian}, {} ch, {}, channel {}",
            self.sample_format.name(),
            self.channels,
            super::format_rate(self.sample_rate_hz),
            self.channel
        )
    }
}

/// Any `Read` as a byte source; blocks until bytes arrive; `Ok(0)` from `read` ends it.
pub(crate) struct PlainRead<R>(pub R);

impl<R: Read + Send> ByteSource for PlainRead<R> {
    fn fill(&mut self, buf: &mut [u8], _deadline: Option<Instant>) -> Result<Fill> {
        loop {
            match self.0.read(buf) {
                Ok(0) => return Ok(Fill::End { truncated: false }),
                Ok(n) => return Ok(Fill::Bytes(n)),
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e.into()),
            }
        }
    }
}

/// Raw samples of one channel from a byte stream, as a [`SampleReader`].
pub struct RawReader {
    frames: FrameReader,
    format: RawFormat,
    description: String,
    live: bool,
}

impl RawReader {
    /// Reads raw samples from any byte stream (standard input, a pipe, a `Cursor`, a socket).
    /// The stream ends when `read` returns 0.
    ///
    /// # Errors
    /// [`AcquireError::Config`] if `format` is inconsistent (see [`RawFormat::validate`]).
    pub fn new<R: Read + Send + 'static>(reader: R, format: RawFormat) -> Result<Self> {
        Self::with_description(
            Box::new(PlainRead(reader)),
            format,
            format!("raw {}", format.describe()),
            false,
        )
    }

    /// Raw samples on standard input (live: not paced).
    ///
    /// # Errors
    /// As [`RawReader::new`].
    pub fn stdin(format: RawFormat) -> Result<Self> {
        let mut reader = Self::new(io::stdin(), format)?;
        reader.description = format!("stdin, raw {}", format.describe());
        reader.live = true;
        Ok(reader)
    }

    /// Opens a raw binary file.
    ///
    /// # Errors
    /// [`AcquireError::Open`] if it cannot be opened, else as [`RawReader::new`].
    pub fn open(path: &Path, format: RawFormat) -> Result<Self> {
        format.validate()?;
        let file = File::open(path).map_err(|source| AcquireError::Open {
            path: path.to_path_buf(),
            source,
        })?;
        let name = path.file_name().map_or_else(
            || path.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        );
        Self::with_description(
            Box::new(PlainRead(file)),
            format,
            format!("{name}, raw {}", format.describe()),
            false,
        )
    }

    pub(crate) fn with_description(
        source: Box<dyn ByteSource>,
        format: RawFormat,
        description: String,
        live: bool,
    ) -> Result<Self> {
        format.validate()?;
        Ok(Self {
            frames: FrameReader::new(source, format.layout()),
            format,
            description,
            live,
        })
    }

    /// The layout being read.
    pub fn format(&self) -> RawFormat {
        self.format
    }
}

impl SampleReader for RawReader {
    fn sample_rate_hz(&self) -> f64 {
        self.format.sample_rate_hz
    }

    fn read_block(&mut self, out: &mut [f64]) -> Result<usize> {
        loop {
            if let Some(n) = self.frames.read(out, None)? {
                return Ok(n);
            }
        }
    }

    fn read_block_timeout(
        &mut self,
        out: &mut [f64],
        timeout: std::time::Duration,
    ) -> Result<Option<usize>> {
        self.frames.read(out, Instant::now().checked_add(timeout))
    }

    fn stats(&self) -> ReaderStats {
        self.frames.stats
    }

    fn describe(&self) -> String {
        self.description.clone()
    }

    fn channels_delivered(&self) -> usize {
        self.frames.channels_delivered()
    }

    fn pair_with(&mut self, channel_b: usize) -> Result<()> {
        self.frames.pair_with(channel_b)?;
        self.description.push_str(&format!(" and {channel_b}"));
        Ok(())
    }

    fn is_live(&self) -> bool {
        self.live
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    fn format(sample_format: SampleFormat, channels: usize, channel: usize) -> RawFormat {
        RawFormat {
            sample_format,
            endian: Endian::Little,
            channels,
            channel,
            sample_rate_hz: 1000.0,
            volts_per_unit: 0.5,
        }
    }

    #[test]
    fn integers_are_not_divided() {
        let bytes: Vec<u8> = [100_i32, -7, i32::MAX]
            .iter()
            .flat_map(|v| v.to_le_bytes())
            .collect();
        let mut r = RawReader::new(Cursor::new(bytes), format(SampleFormat::I32, 1, 0)).unwrap();
        let mut out = [0.0; 8];
        assert_eq!(r.read_block(&mut out).unwrap(), 3);
        assert_eq!(&out[..3], &[50.0, -3.5, f64::from(i32::MAX) * 0.5]);
        assert_eq!(r.stats().clipped_samples, 1);
        assert_eq!(r.read_block(&mut out).unwrap(), 0);
    }

    #[test]
    fn config_errors_name_the_option() {
        let mut config = SourceConfig::new(super::super::SourceSpec::Stdin);
        let e = RawFormat::from_config(&config).unwrap_err().to_string();
        assert!(e.contains("--sample-format"), "{e}");
        config.sample_format = Some(SampleFormat::F32);
        let e = RawFormat::from_config(&config).unwrap_err().to_string();
        assert!(e.contains("--rate"), "{e}");
        for (rate, channels, channel, vpu, want) in [
            (0.0, 1, 0, 1.0, "--rate"),
            (f64::NAN, 1, 0, 1.0, "--rate"),
            (-5.0, 1, 0, 1.0, "--rate"),
            (1.0, 0, 0, 1.0, "--channels"),
            (1.0, 2, 2, 1.0, "--channel 2"),
            (1.0, 1, 0, 0.0, "--volts-per-unit"),
            (1.0, 1, 0, f64::INFINITY, "--volts-per-unit"),
        ] {
            config.rate_hz = Some(rate);
            config.channels = channels;
            config.channel = channel;
            config.volts_per_unit = vpu;
            let e = RawFormat::from_config(&config).unwrap_err().to_string();
            assert!(e.contains(want), "{e:?} should name {want}");
        }
    }
}
