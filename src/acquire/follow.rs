//! Following a growing file (raw or WAV), like a recorder writing it right now.
//!
//! At the end of the bytes written so far the reader waits and polls every
//! [`POLL_INTERVAL`]. If the file shrinks (truncated in place) or the path now names another
//! file (rotated: new inode), it reopens from the start, drops any partial frame and counts
//! [`ReaderStats::reconnects`](super::ReaderStats::reconnects). For WAV the header's data size
//! is not trusted while the file grows (recorders fill it in only when they close the file):
//! samples are read to the end of the bytes written; once a real size appears (re-read at
//! every read) and is not behind what was read, reading stops there, so chunks a recorder
//! appends after the data are not taken for samples. A replacement WAV must have the same
//! encoding, channels and rate.
//!
//! A file truncated and rewritten past the read position within one poll keeps its inode
//! and does not look shorter: the first [`HEAD_BYTES`] bytes of its data are therefore kept
//! and compared at every poll at the end of the data; if they changed, the file was
//! rewritten and is reopened like a truncated one.

use std::fs::{self, File};
use std::io::{self, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};
use std::thread;
use std::time::{Duration, Instant};

use super::frames::{ByteSource, Fill, FrameReader};
use super::raw::RawFormat;
use super::wav::{self, HeaderError, WavHeader};
use super::{AcquireError, ReaderStats, Result, SampleReader};

/// How often a followed file is polled for new bytes.
pub const POLL_INTERVAL: Duration = Duration::from_millis(50);

/// Bytes at the start of the data (after a WAV header) compared at every poll to notice a
/// file rewritten in place.
pub(crate) const HEAD_BYTES: usize = 64;

/// How long opening a followed WAV waits for a header that is still being written.
const HEADER_WAIT: Duration = Duration::from_secs(2);

/// Identity of a file (device, inode) where the platform has one.
fn identity(meta: &fs::Metadata) -> Option<(u64, u64)> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        Some((meta.dev(), meta.ino()))
    }
    #[cfg(not(unix))]
    {
        let _ = meta;
        None
    }
}

/// A growing file as a byte source.
struct FollowSource {
    path: PathBuf,
    file: File,
    id: Option<(u64, u64)>,
    /// Absolute read position in `file`.
    pos: u64,
    /// For WAV: the header of the first file (a replacement must match it).
    wav: Option<WavHeader>,
    /// The current file still needs its WAV header parsed.
    needs_header: bool,
    /// WAV: offset of the first data byte of the current file.
    data_offset: u64,
    /// WAV: end of the data once the recorder has written a real data size (then chunks
    /// appended after the data are not read as samples).
    data_end: Option<u64>,
    /// The first bytes of the current file's data as read (up to [`HEAD_BYTES`]).
    head: Vec<u8>,
    /// The last read found no new bytes: before reading again, check that the file was not
    /// truncated, rewritten or replaced meanwhile.
    at_end: bool,
}

fn open_error(path: &Path, source: io::Error) -> AcquireError {
    AcquireError::Open {
        path: path.to_path_buf(),
        source,
    }
}

impl FollowSource {
    fn open(path: &Path, wav: bool) -> Result<Self> {
        let file = File::open(path).map_err(|e| open_error(path, e))?;
        let id = identity(&file.metadata()?);
        Ok(Self {
            path: path.to_path_buf(),
            file,
            id,
            pos: 0,
            wav: None,
            needs_header: wav,
            data_offset: 0,
            data_end: None,
            head: Vec::new(),
            at_end: false,
        })
    }

    /// Keeps the bytes just read at `start` if they belong to the first [`HEAD_BYTES`] of
    /// the data.
    fn remember_head(&mut self, start: u64, bytes: &[u8]) {
        let offset = start.saturating_sub(self.data_offset);
        if start < self.data_offset || offset != self.head.len() as u64 {
            return;
        }
        let room = HEAD_BYTES - self.head.len().min(HEAD_BYTES);
        self.head
            .extend_from_slice(bytes.get(..room.min(bytes.len())).unwrap_or(&[]));
    }

    /// True if the first data bytes on disk differ from those read (the file was rewritten
    /// in place). Restores the read position.
    fn head_changed(&mut self) -> Result<bool> {
        if self.head.is_empty() {
            return Ok(false);
        }
        let mut now = vec![0_u8; self.head.len()];
        self.file.seek(SeekFrom::Start(self.data_offset))?;
        let got = self.file.read_exact(&mut now);
        self.file.seek(SeekFrom::Start(self.pos))?;
        Ok(got.is_err() || now != self.head)
    }

    /// Starts over at the beginning of the (same or new) current file.
    fn restart_current(&mut self) -> Result<()> {
        self.file.seek(SeekFrom::Start(0))?;
        self.pos = 0;
        self.data_offset = 0;
        self.head.clear();
        self.needs_header = self.wav.is_some();
        Ok(())
    }

    /// Parses the WAV header of the current file if it is complete. `Ok(None)`: not yet.
    fn try_header(&mut self) -> Result<Option<WavHeader>> {
        let len = self.file.metadata()?.len();
        match wav::parse_header(&mut self.file, len) {
            Ok(header) => {
                self.file.seek(SeekFrom::Start(header.data_offset))?;
                self.pos = header.data_offset;
                self.data_offset = header.data_offset;
                self.data_end = None;
                self.needs_header = false;
                Ok(Some(header))
            }
            Err(HeaderError::Incomplete(_)) => Ok(None),
            Err(HeaderError::Bad(m)) => Err(AcquireError::Wav(m)),
        }
    }

    /// Parses the header of a replacement file and checks it against the first one.
    fn restart_header(&mut self) -> Result<bool> {
        let Some(header) = self.try_header()? else {
            return Ok(false);
        };
        if let Some(first) = self.wav {
            let mut differs = Vec::new();
            if first.format != header.format || first.valid_bits != header.valid_bits {
                differs.push(format!(
                    "{} samples instead of {}",
                    header.encoding_name(),
                    first.encoding_name()
                ));
            }
            if first.channels != header.channels {
                differs.push(format!(
                    "{} channels instead of {}",
                    header.channels, first.channels
                ));
            }
            if first.sample_rate_hz != header.sample_rate_hz {
                differs.push(format!(
                    "{} Hz instead of {} Hz",
                    header.sample_rate_hz, first.sample_rate_hz
                ));
            }
            if !differs.is_empty() {
                return Err(AcquireError::Wav(format!(
                    "the followed file {} was replaced by one with a different format ({})",
                    self.path.display(),
                    differs.join(", ")
                )));
            }
        }
        Ok(true)
    }

    /// WAV: re-reads the data size field. A real size (not 0 or 0xFFFFFFFF) that does not
    /// end before what was already read sets [`FollowSource::data_end`]. Returns true if more
    /// data may now be read.
    fn refresh_data_end(&mut self) -> Result<bool> {
        if self.wav.is_none() || self.data_offset < 4 {
            return Ok(false);
        }
        let mut field = [0_u8; 4];
        self.file.seek(SeekFrom::Start(self.data_offset - 4))?;
        let got = self.file.read_exact(&mut field);
        self.file.seek(SeekFrom::Start(self.pos))?;
        if got.is_err() {
            return Ok(false);
        }
        let size = u32::from_le_bytes(field);
        let end = self.data_offset + u64::from(size);
        if size == 0 || size == u32::MAX || end < self.pos || Some(end) == self.data_end {
            return Ok(false);
        }
        self.data_end = Some(end);
        Ok(self.pos < end)
    }

    /// At the end of the current bytes: reopens if the file was truncated or replaced.
    /// Returns true if the stream restarted.
    fn check_replaced(&mut self) -> Result<bool> {
        let open_len = self.file.metadata()?.len();
        if open_len < self.pos || self.head_changed()? {
            self.restart_current()?;
            return Ok(true);
        }
        let Ok(meta) = fs::metadata(&self.path) else {
            return Ok(false); // Rotation in progress: the new file is not there yet.
        };
        let new_id = identity(&meta);
        if new_id.is_some() && new_id != self.id {
            let Ok(file) = File::open(&self.path) else {
                return Ok(false);
            };
            self.id = identity(&file.metadata()?);
            self.file = file;
            self.restart_current()?;
            return Ok(true);
        }
        Ok(false)
    }
}

/// Sleeps one poll interval, or until `deadline`; returns false if the deadline has passed.
fn wait(deadline: Option<Instant>) -> bool {
    let now = Instant::now();
    let nap = match deadline {
        Some(d) if d <= now => return false,
        Some(d) => POLL_INTERVAL.min(d - now),
        None => POLL_INTERVAL,
    };
    thread::sleep(nap);
    true
}

impl ByteSource for FollowSource {
    fn fill(&mut self, buf: &mut [u8], deadline: Option<Instant>) -> Result<Fill> {
        loop {
            if self.needs_header {
                if self.restart_header()? {
                    continue;
                }
                if !wait(deadline) {
                    return Ok(Fill::Idle);
                }
                continue;
            }
            // New bytes after a wait may belong to a rewritten or replaced file: look first.
            if self.at_end && self.check_replaced()? {
                self.at_end = false;
                return Ok(Fill::Restarted);
            }
            // A recorder may have finalised the header since the last look.
            self.refresh_data_end()?;
            let allowed = self
                .data_end
                .map_or(buf.len() as u64, |end| end.saturating_sub(self.pos));
            let take = usize::try_from(allowed)
                .unwrap_or(usize::MAX)
                .min(buf.len());
            let read = match buf.get_mut(..take) {
                Some(dest) if take > 0 => self.file.read(dest),
                _ => Ok(0),
            };
            match read {
                Ok(0) => {}
                Ok(n) => {
                    let start = self.pos;
                    if let Some(bytes) = buf.get(..n) {
                        self.remember_head(start, bytes);
                    }
                    self.pos += n as u64;
                    self.at_end = false;
                    return Ok(Fill::Bytes(n));
                }
                Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(e.into()),
            }
            if self.check_replaced()? {
                self.at_end = false;
                return Ok(Fill::Restarted);
            }
            self.at_end = true;
            if !wait(deadline) {
                return Ok(Fill::Idle);
            }
        }
    }
}

/// A growing raw or WAV file as a [`SampleReader`]; `read_block` waits for new bytes and
/// returns 0 only on an error-free end, which a followed file never reaches.
pub struct FollowReader {
    frames: FrameReader,
    sample_rate_hz: f64,
    description: String,
}

impl FollowReader {
    /// Follows a raw file with the given layout, from its first byte.
    ///
    /// # Errors
    /// [`AcquireError::Open`] if the file cannot be opened, [`AcquireError::Config`] for an
    /// inconsistent `format`.
    pub fn raw(path: &Path, format: RawFormat) -> Result<Self> {
        format.validate()?;
        let source = FollowSource::open(path, false)?;
        Ok(Self {
            frames: FrameReader::new(Box::new(source), format.layout()),
            sample_rate_hz: format.sample_rate_hz,
            description: format!("following {}, raw {}", path.display(), format.describe()),
        })
    }

    /// Follows a WAV file being written, from its first sample. Waits up to 2 s for a header
    /// that is still incomplete.
    ///
    /// # Errors
    /// [`AcquireError::Open`], [`AcquireError::Wav`] for a bad header (or one still incomplete
    /// after the wait), [`AcquireError::Config`] for a channel out of range.
    pub fn wav(
        path: &Path,
        channel: usize,
        volts_per_unit: f64,
        rate_hz: Option<f64>,
    ) -> Result<Self> {
        let mut source = FollowSource::open(path, true)?;
        let started = Instant::now();
        let header = loop {
            if let Some(h) = source.try_header()? {
                break h;
            }
            if started.elapsed() > HEADER_WAIT {
                let len = source.file.metadata()?.len();
                let why = match wav::parse_header(&mut source.file, len) {
                    Err(HeaderError::Incomplete(m) | HeaderError::Bad(m)) => m,
                    Ok(_) => "header changed while reading".into(),
                };
                return Err(AcquireError::Wav(format!(
                    "{why} (waited {} s)",
                    HEADER_WAIT.as_secs()
                )));
            }
            thread::sleep(POLL_INTERVAL);
        };
        let sample_rate_hz = wav::check_options(&header, channel, rate_hz, volts_per_unit)?;
        source.wav = Some(header);
        Ok(Self {
            frames: FrameReader::new(
                Box::new(source),
                wav::layout(&header, channel, volts_per_unit),
            ),
            sample_rate_hz,
            description: format!(
                "following {}",
                wav::describe_header(&header, sample_rate_hz, channel)
            ),
        })
    }
}

impl SampleReader for FollowReader {
    fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    fn read_block(&mut self, out: &mut [f64]) -> Result<usize> {
        loop {
            if let Some(n) = self.frames.read(out, None)? {
                return Ok(n);
            }
        }
    }

    fn read_block_timeout(&mut self, out: &mut [f64], timeout: Duration) -> Result<Option<usize>> {
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
        true
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::acquire::{Endian, SampleFormat};
    use std::io::Write;

    #[test]
    fn sees_appended_bytes_and_times_out_when_idle() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("grow.bin");
        let mut f = File::create(&path).unwrap();
        f.write_all(&1_i16.to_le_bytes()).unwrap();
        let format = RawFormat {
            sample_format: SampleFormat::I16,
            endian: Endian::Little,
            channels: 1,
            channel: 0,
            sample_rate_hz: 10.0,
            volts_per_unit: 1.0,
        };
        let mut r = FollowReader::raw(&path, format).unwrap();
        let mut out = [0.0; 4];
        assert_eq!(
            r.read_block_timeout(&mut out, Duration::from_millis(200))
                .unwrap(),
            Some(1)
        );
        assert_eq!(
            r.read_block_timeout(&mut out, Duration::from_millis(120))
                .unwrap(),
            None
        );
        f.write_all(&[2, 0, 3]).unwrap(); // one frame and a half
        assert_eq!(
            r.read_block_timeout(&mut out, Duration::from_millis(200))
                .unwrap(),
            Some(1)
        );
        assert_eq!(out[0], 2.0);
        f.write_all(&[0]).unwrap();
        assert_eq!(
            r.read_block_timeout(&mut out, Duration::from_millis(200))
                .unwrap(),
            Some(1)
        );
        assert_eq!(out[0], 3.0);
    }
}
