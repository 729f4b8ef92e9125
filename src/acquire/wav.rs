//! WAV (RIFF/WAVE, also RF64/BW64) files: header parsing and bulk decoding of one channel.
//!
//! Supported sample encodings: PCM integers of 16, 24 and 32 bits, IEEE floats of 32 and 64
//! bits, each plain or inside `WAVE_FORMAT_EXTENSIBLE` (integers may sit left-justified in a
//! wider container, e.g. 24 valid bits in 4 bytes), any number of channels.
//!
//! Why not decode through hound: hound 3.5 refuses 64-bit float (`WAVE_FORMAT_IEEE_FLOAT` with
//! 64 bits), skips odd-sized chunks without their pad byte, refuses streaming placeholders
//! (data size 0xFFFFFFFF), has no notion of a file cut short, and decodes one sample per
//! iterator call (far below the > 300 MS/s the headless path needs). So the RIFF header is
//! parsed here, carefully, and the data chunk is read in big blocks. hound is the reference
//! the tests check this reader against (same samples out of files hound wrote).
//!
//! Damage: a data chunk shorter than its header says (the RIFF size agrees with the data size,
//! the file simply stops: the recorder died) is read up to where it stops and
//! [`ReaderStats::truncated`](super::ReaderStats::truncated) is set. A header that contradicts
//! itself or the file (a chunk larger than the file and than the RIFF size, zero channels,
//! zero rate, unsupported encodings) is refused with [`AcquireError::Wav`].

use std::fs::File;
use std::io::{self, BufReader, Read, Seek, SeekFrom};
use std::path::Path;
use std::time::Instant;

use super::frames::{ByteSource, Fill, FrameReader, Layout};
use super::{AcquireError, Endian, ReaderStats, Result, SampleFormat, SampleReader};

/// Largest `fmt ` chunk accepted (the real ones are 16 to 40 bytes).
const MAX_FMT_BYTES: u32 = 4096;

/// `KSDATAFORMAT_SUBTYPE_*` GUID bytes after the leading format code
/// (`xxxxxxxx-0000-0010-8000-00aa00389b71`, Microsoft mmreg.h, from memory).
const SUBTYPE_TAIL: [u8; 12] = [
    0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71,
];

/// What a WAV header says about the data.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct WavHeader {
    /// Container encoding of one sample.
    pub format: SampleFormat,
    /// Bits that carry signal (≤ 8 × container bytes; informational).
    pub valid_bits: u16,
    /// Interleaved channels.
    pub channels: u16,
    /// Samples per second per channel.
    pub sample_rate_hz: u32,
    /// Byte offset of the first data byte.
    pub data_offset: u64,
    /// Data chunk size the header declares (after RF64 resolution); `None` for the streaming
    /// placeholders (0xFFFFFFFF, or 0 when the RIFF size does not match the file either):
    /// length unknown, read to the end of the file.
    pub data_bytes_declared: Option<u64>,
    /// End of the RIFF form the header declares (`None` for a placeholder).
    pub riff_end_declared: Option<u64>,
}

impl WavHeader {
    /// Bytes of one frame.
    pub fn frame_bytes(&self) -> usize {
        usize::from(self.channels) * self.format.bytes()
    }

    /// "16-bit int", "64-bit float", "24-bit int in 32".
    pub(crate) fn encoding_name(&self) -> String {
        let container_bits = self.format.bytes() * 8;
        match self.format {
            SampleFormat::F32 | SampleFormat::F64 => format!("{container_bits}-bit float"),
            _ if usize::from(self.valid_bits) < container_bits => {
                format!("{}-bit int in {container_bits}", self.valid_bits)
            }
            _ => format!("{container_bits}-bit int"),
        }
    }
}

/// Why a header could not be parsed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) enum HeaderError {
    /// The file ends inside the header (a growing file may still complete it).
    Incomplete(String),
    /// The header is malformed or unsupported.
    Bad(String),
}

impl HeaderError {
    fn into_acquire(self) -> AcquireError {
        match self {
            Self::Incomplete(m) | Self::Bad(m) => AcquireError::Wav(m),
        }
    }
}

fn io_header(e: &io::Error) -> HeaderError {
    HeaderError::Bad(format!("cannot read the header: {e}"))
}

/// Reads exactly `buf.len()` bytes or reports an incomplete header.
fn read_header_bytes<R: Read>(
    r: &mut R,
    buf: &mut [u8],
    what: &str,
) -> std::result::Result<(), HeaderError> {
    match r.read_exact(buf) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == io::ErrorKind::UnexpectedEof => Err(HeaderError::Incomplete(
            format!("the file ends inside the {what} (truncated header)"),
        )),
        Err(e) => Err(io_header(&e)),
    }
}

fn le_u16(b: &[u8], at: usize) -> u16 {
    let mut w = [0_u8; 2];
    if let Some(s) = b.get(at..at + 2) {
        w.copy_from_slice(s);
    }
    u16::from_le_bytes(w)
}

fn le_u32(b: &[u8], at: usize) -> u32 {
    let mut w = [0_u8; 4];
    if let Some(s) = b.get(at..at + 4) {
        w.copy_from_slice(s);
    }
    u32::from_le_bytes(w)
}

fn le_u64(b: &[u8], at: usize) -> u64 {
    let mut w = [0_u8; 8];
    if let Some(s) = b.get(at..at + 8) {
        w.copy_from_slice(s);
    }
    u64::from_le_bytes(w)
}

fn chunk_name(id: [u8; 4]) -> String {
    id.iter()
        .map(|&c| {
            if c.is_ascii_graphic() || c == b' ' {
                char::from(c)
            } else {
                '?'
            }
        })
        .collect()
}

/// Encoding, valid bits and channel count from a `fmt ` chunk body.
fn parse_fmt(fmt: &[u8]) -> std::result::Result<(SampleFormat, u16, u16, u32), HeaderError> {
    if fmt.len() < 16 {
        return Err(HeaderError::Bad(format!(
            "the fmt chunk is {} bytes, at least 16 are needed",
            fmt.len()
        )));
    }
    let tag = le_u16(fmt, 0);
    let channels = le_u16(fmt, 2);
    let rate = le_u32(fmt, 4);
    let block_align = le_u16(fmt, 12);
    let bits = le_u16(fmt, 14);
    if channels == 0 {
        return Err(HeaderError::Bad(
            "the header says the file has zero channels".into(),
        ));
    }
    if rate == 0 {
        return Err(HeaderError::Bad(
            "the header says the sample rate is 0 Hz".into(),
        ));
    }
    if bits == 0 {
        return Err(HeaderError::Bad("the header says 0 bits per sample".into()));
    }
    const PCM: u16 = 0x0001;
    const IEEE_FLOAT: u16 = 0x0003;
    const EXTENSIBLE: u16 = 0xFFFE;
    let (is_float, container_bytes, valid_bits) = match tag {
        PCM | IEEE_FLOAT => {
            if !bits.is_multiple_of(8)
                || usize::from(block_align) != usize::from(channels) * usize::from(bits / 8)
            {
                return Err(HeaderError::Bad(format!(
                    "block align {block_align} does not fit {channels} channel(s) of {bits} bits"
                )));
            }
            (tag == IEEE_FLOAT, bits / 8, bits)
        }
        EXTENSIBLE => {
            if fmt.len() < 40 || le_u16(fmt, 16) < 22 {
                return Err(HeaderError::Bad(
                    "WAVE_FORMAT_EXTENSIBLE header is too short (fmt chunk under 40 bytes)".into(),
                ));
            }
            let code = le_u32(fmt, 24);
            if fmt.get(28..40) != Some(&SUBTYPE_TAIL[..]) || !(code == 1 || code == 3) {
                return Err(HeaderError::Bad(
                    "unsupported WAVE_FORMAT_EXTENSIBLE sub-format (only PCM integer and IEEE float)".into(),
                ));
            }
            if !block_align.is_multiple_of(channels) {
                return Err(HeaderError::Bad(format!(
                    "block align {block_align} is not a multiple of {channels} channel(s)"
                )));
            }
            let container = block_align / channels;
            let valid = match le_u16(fmt, 18) {
                0 => container.saturating_mul(8),
                v => v,
            };
            if u32::from(valid) > u32::from(container) * 8
                || u32::from(bits) > u32::from(container) * 8
            {
                return Err(HeaderError::Bad(format!(
                    "{valid} valid bits do not fit a {container}-byte sample container"
                )));
            }
            (code == 3, container, valid)
        }
        0x0002 | 0x0006 | 0x0007 | 0x0011 | 0x0055 => {
            return Err(HeaderError::Bad(format!(
                "compressed WAV (format tag 0x{tag:04X}) is not supported; use PCM integer or IEEE float"
            )));
        }
        _ => {
            return Err(HeaderError::Bad(format!(
                "unknown WAV format tag 0x{tag:04X}; only PCM integer and IEEE float are supported"
            )));
        }
    };
    let format = match (is_float, container_bytes) {
        (false, 2) => SampleFormat::I16,
        (false, 3) => SampleFormat::I24,
        (false, 4) => SampleFormat::I32,
        (true, 4) => SampleFormat::F32,
        (true, 8) => SampleFormat::F64,
        (float, bytes) => {
            let kind = if float { "float" } else { "integer" };
            return Err(HeaderError::Bad(format!(
                "{}-bit {kind} samples are not supported (16, 24 or 32-bit integer; 32 or 64-bit float)",
                u32::from(bytes) * 8
            )));
        }
    };
    Ok((format, valid_bits, channels, rate))
}

/// Parses the header of a RIFF/WAVE (or RF64/BW64) file of `file_len` bytes, leaving `r`
/// anywhere. Every size is checked against `file_len` before it is used.
pub(crate) fn parse_header<R: Read + Seek>(
    r: &mut R,
    file_len: u64,
) -> std::result::Result<WavHeader, HeaderError> {
    if file_len == 0 {
        return Err(HeaderError::Incomplete("the file is empty".into()));
    }
    r.seek(SeekFrom::Start(0)).map_err(|e| io_header(&e))?;
    let mut riff = [0_u8; 12];
    read_header_bytes(r, &mut riff, "RIFF header")?;
    let id = riff.get(0..4).unwrap_or_default();
    let rf64 = id == b"RF64" || id == b"BW64";
    if id == b"RIFX" {
        return Err(HeaderError::Bad(
            "big-endian RIFX files are not supported".into(),
        ));
    }
    if !(id == b"RIFF" || rf64) || riff.get(8..12) != Some(&b"WAVE"[..]) {
        return Err(HeaderError::Bad(
            "no RIFF/WAVE signature at the start of the file".into(),
        ));
    }
    let riff_size = le_u32(&riff, 4);
    let mut riff_end = (riff_size != u32::MAX && !rf64).then(|| u64::from(riff_size) + 8);
    let mut ds64_data: Option<u64> = None;
    let mut fmt: Option<(SampleFormat, u16, u16, u32)> = None;
    let mut pos: u64 = 12;
    loop {
        let mut head = [0_u8; 8];
        read_header_bytes(r, &mut head, "chunk list before the data chunk")?;
        pos += 8;
        let mut cid = [0_u8; 4];
        cid.copy_from_slice(head.get(0..4).unwrap_or(&[0; 4]));
        let size = le_u32(&head, 4);
        let left = file_len.saturating_sub(pos);
        if &cid == b"data" {
            let Some((format, valid_bits, channels, sample_rate_hz)) = fmt else {
                return Err(HeaderError::Bad(
                    "the data chunk comes before any fmt chunk".into(),
                ));
            };
            let declared = if rf64 && size == u32::MAX {
                ds64_data
            } else if size == u32::MAX || (size == 0 && riff_end != Some(file_len)) {
                // Streaming placeholders: 0xFFFFFFFF, or 0 in a header whose RIFF size does
                // not describe this file either (never finalised).
                None
            } else {
                Some(u64::from(size))
            };
            return Ok(WavHeader {
                format,
                valid_bits,
                channels,
                sample_rate_hz,
                data_offset: pos,
                data_bytes_declared: declared,
                riff_end_declared: riff_end,
            });
        }
        if u64::from(size) > left {
            let message = format!(
                "chunk '{}' claims {size} bytes but only {left} remain in the file",
                chunk_name(cid)
            );
            // If the RIFF size says the file is complete, the chunk size is garbage; else the
            // file may simply stop early (or still be growing).
            return Err(if riff_end.is_some_and(|end| end <= file_len) {
                HeaderError::Bad(format!("{message} (damaged header)"))
            } else {
                HeaderError::Incomplete(format!("{message} (truncated header)"))
            });
        }
        match &cid {
            b"fmt " => {
                if size > MAX_FMT_BYTES {
                    return Err(HeaderError::Bad(format!(
                        "the fmt chunk claims {size} bytes (damaged header)"
                    )));
                }
                let mut body = vec![0_u8; size as usize];
                read_header_bytes(r, &mut body, "fmt chunk")?;
                fmt = Some(parse_fmt(&body)?);
            }
            b"ds64" if rf64 => {
                let mut body = [0_u8; 24];
                if size < 24 {
                    return Err(HeaderError::Bad(
                        "the RF64 ds64 chunk is shorter than 24 bytes".into(),
                    ));
                }
                read_header_bytes(r, &mut body, "ds64 chunk")?;
                let riff64 = le_u64(&body, 0);
                riff_end = riff64.checked_add(8);
                ds64_data = Some(le_u64(&body, 8));
                r.seek(SeekFrom::Current(i64::from(size) - 24))
                    .map_err(|e| io_header(&e))?;
            }
            _ => {
                r.seek(SeekFrom::Current(i64::from(size)))
                    .map_err(|e| io_header(&e))?;
            }
        }
        pos += u64::from(size);
        // Chunks are word aligned: an odd size is followed by one pad byte.
        if !size.is_multiple_of(2) && pos < file_len {
            r.seek(SeekFrom::Current(1)).map_err(|e| io_header(&e))?;
            pos += 1;
        }
    }
}

/// Length of a seekable stream (restores nothing: callers seek afterwards).
fn stream_len<R: Seek>(r: &mut R) -> io::Result<u64> {
    r.seek(SeekFrom::End(0))
}

/// How many data bytes to read and whether the file was cut short, for a non-growing file.
pub(crate) fn data_extent(header: &WavHeader, file_len: u64) -> Result<(u64, bool)> {
    let available = file_len.saturating_sub(header.data_offset);
    let Some(declared) = header.data_bytes_declared else {
        return Ok((available, false));
    };
    if declared <= available {
        return Ok((declared, false));
    }
    // Claims more than there is: a file cut short if the RIFF size agrees with the data size
    // (or is a placeholder), else a damaged header.
    let data_end = header.data_offset.saturating_add(declared);
    match header.riff_end_declared {
        Some(riff_end) if riff_end < data_end => Err(AcquireError::Wav(format!(
            "the data chunk claims {declared} bytes but the file holds {available} after the header \
             and its RIFF size ends the file {} bytes after the data starts (damaged header)",
            riff_end.saturating_sub(header.data_offset)
        ))),
        _ => Ok((available, true)),
    }
}

/// Checks a channel choice, a rate override and the scale against a header; returns the rate.
pub(crate) fn check_options(
    header: &WavHeader,
    channel: usize,
    rate_hz: Option<f64>,
    volts_per_unit: f64,
) -> Result<f64> {
    super::check_rate(rate_hz)?;
    super::check_volts_per_unit(volts_per_unit)?;
    if channel >= usize::from(header.channels) {
        return Err(AcquireError::Config(format!(
            "--channel {channel} is out of range: the WAV file has {} channel(s) (0 to {})",
            header.channels,
            header.channels - 1
        )));
    }
    Ok(rate_hz.unwrap_or(f64::from(header.sample_rate_hz)))
}

/// Volts per container count: integers are divided by 2^(bits−1) of the container (full
/// scale ±1; a left-justified narrower sample has the same full scale), floats are not.
pub(crate) fn volts_per_count(format: SampleFormat, volts_per_unit: f64) -> f64 {
    match format {
        SampleFormat::I16 => volts_per_unit / 32_768.0,
        SampleFormat::I24 => volts_per_unit / 8_388_608.0,
        SampleFormat::I32 => volts_per_unit / 2_147_483_648.0,
        SampleFormat::F32 | SampleFormat::F64 => volts_per_unit,
    }
}

/// The frame layout of a header's data.
pub(crate) fn layout(header: &WavHeader, channel: usize, volts_per_unit: f64) -> Layout {
    Layout {
        format: header.format,
        endian: Endian::Little,
        channels: usize::from(header.channels),
        channel,
        volts_per_count: volts_per_count(header.format, volts_per_unit),
    }
}

/// "WAV, 2 ch, 24-bit int, 250 kHz, channel 0".
pub(crate) fn describe_header(header: &WavHeader, rate_hz: f64, channel: usize) -> String {
    format!(
        "WAV, {} ch, {}, {}, channel {channel}",
        header.channels,
        header.encoding_name(),
        super::format_rate(rate_hz)
    )
}

/// Reads exactly the data chunk's bytes from a seekable stream.
struct DataChunk<R> {
    inner: R,
    remaining: u64,
    truncated: bool,
}

impl<R: Read + Send> ByteSource for DataChunk<R> {
    fn fill(&mut self, buf: &mut [u8], _deadline: Option<Instant>) -> Result<Fill> {
        if self.remaining == 0 {
            return Ok(Fill::End {
                truncated: self.truncated,
            });
        }
        let want = buf
            .len()
            .min(usize::try_from(self.remaining).unwrap_or(usize::MAX));
        let Some(dest) = buf.get_mut(..want) else {
            return Ok(Fill::End {
                truncated: self.truncated,
            });
        };
        loop {
            match self.inner.read(dest) {
                Ok(0) => {
                    // The file ended before the extent measured at open: it shrank under us.
                    self.remaining = 0;
                    return Ok(Fill::End { truncated: true });
                }
                Ok(n) => {
                    self.remaining -= n as u64;
                    return Ok(Fill::Bytes(n));
                }
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e.into()),
            }
        }
    }

    fn remaining_hint(&self) -> Option<u64> {
        Some(self.remaining)
    }
}

/// A WAV file (or any seekable WAV byte stream) as a [`SampleReader`] of one channel.
pub struct WavReader {
    frames: FrameReader,
    header: WavHeader,
    sample_rate_hz: f64,
    description: String,
}

impl WavReader {
    /// Opens the WAV file at `path`, selecting `channel`, scaled by `volts_per_unit` (see the
    /// module docs of [`crate::acquire`]); `rate_hz` overrides the header's rate.
    ///
    /// # Errors
    /// [`AcquireError::Open`] if the file cannot be opened, [`AcquireError::Wav`] for a damaged
    /// or unsupported header, [`AcquireError::Config`] for a channel out of range, a rate
    /// that is not a positive finite number, or a zero or non-finite `volts_per_unit`.
    pub fn open(
        path: &Path,
        channel: usize,
        volts_per_unit: f64,
        rate_hz: Option<f64>,
    ) -> Result<Self> {
        let file = File::open(path).map_err(|source| AcquireError::Open {
            path: path.to_path_buf(),
            source,
        })?;
        Self::new(
            BufReader::with_capacity(8 * 1024, file),
            channel,
            volts_per_unit,
            rate_hz,
        )
    }

    /// Reads a WAV from any seekable byte stream (a file, a `Cursor` over bytes).
    ///
    /// # Errors
    /// As [`WavReader::open`], without the open error.
    pub fn new<R: Read + Seek + Send + 'static>(
        mut reader: R,
        channel: usize,
        volts_per_unit: f64,
        rate_hz: Option<f64>,
    ) -> Result<Self> {
        let file_len = stream_len(&mut reader)?;
        let header = parse_header(&mut reader, file_len).map_err(HeaderError::into_acquire)?;
        let sample_rate_hz = check_options(&header, channel, rate_hz, volts_per_unit)?;
        let (data_bytes, truncated) = data_extent(&header, file_len)?;
        reader.seek(SeekFrom::Start(header.data_offset))?;
        let source = DataChunk {
            inner: reader,
            remaining: data_bytes,
            truncated,
        };
        let mut frames =
            FrameReader::new(Box::new(source), layout(&header, channel, volts_per_unit));
        frames.stats.truncated = truncated;
        Ok(Self {
            frames,
            header,
            sample_rate_hz,
            description: describe_header(&header, sample_rate_hz, channel),
        })
    }

    /// The parsed header.
    pub fn header(&self) -> WavHeader {
        self.header
    }
}

impl SampleReader for WavReader {
    fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    fn read_block(&mut self, out: &mut [f64]) -> Result<usize> {
        Ok(self.frames.read(out, None)?.unwrap_or(0))
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
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    /// A minimal canonical header: PCM/float tag, then `data` of `data_len` bytes.
    fn header_bytes(
        tag: u16,
        channels: u16,
        rate: u32,
        bits: u16,
        data_len: u32,
        riff: u32,
    ) -> Vec<u8> {
        let align = channels * bits / 8;
        let mut h = Vec::new();
        h.extend_from_slice(b"RIFF");
        h.extend_from_slice(&riff.to_le_bytes());
        h.extend_from_slice(b"WAVEfmt ");
        h.extend_from_slice(&16_u32.to_le_bytes());
        h.extend_from_slice(&tag.to_le_bytes());
        h.extend_from_slice(&channels.to_le_bytes());
        h.extend_from_slice(&rate.to_le_bytes());
        h.extend_from_slice(&(rate * u32::from(align)).to_le_bytes());
        h.extend_from_slice(&align.to_le_bytes());
        h.extend_from_slice(&bits.to_le_bytes());
        h.extend_from_slice(b"data");
        h.extend_from_slice(&data_len.to_le_bytes());
        h
    }

    fn read_all(r: &mut WavReader) -> Vec<f64> {
        let mut all = Vec::new();
        let mut out = [0.0; 5];
        loop {
            let n = r.read_block(&mut out).unwrap();
            if n == 0 {
                return all;
            }
            all.extend_from_slice(&out[..n]);
        }
    }

    #[test]
    fn f64_float_and_odd_chunk_padding() {
        let mut bytes = header_bytes(3, 1, 1000, 64, 16, 0);
        // Insert an odd-sized LIST chunk (5 bytes + pad) before data.
        let data_at = bytes.len() - 8;
        let list = [b"LIST".as_slice(), &5_u32.to_le_bytes(), b"abcde", &[0]].concat();
        bytes.splice(data_at..data_at, list);
        bytes.extend_from_slice(&0.25_f64.to_le_bytes());
        bytes.extend_from_slice(&(-3.5_f64).to_le_bytes());
        let riff = (bytes.len() - 8) as u32;
        bytes[4..8].copy_from_slice(&riff.to_le_bytes());
        let mut r = WavReader::new(Cursor::new(bytes), 0, 2.0, None).unwrap();
        assert_eq!(r.sample_rate_hz(), 1000.0);
        assert_eq!(read_all(&mut r), vec![0.5, -7.0]);
        assert!(!r.stats().truncated);
        assert!(r.describe().contains("64-bit float"), "{}", r.describe());
    }

    #[test]
    fn placeholder_size_reads_to_end() {
        let mut bytes = header_bytes(1, 1, 8000, 16, u32::MAX, u32::MAX);
        for v in [16_384_i16, -32_768, 1] {
            bytes.extend_from_slice(&v.to_le_bytes());
        }
        let mut r = WavReader::new(Cursor::new(bytes), 0, 1.0, None).unwrap();
        assert_eq!(read_all(&mut r), vec![0.5, -1.0, 1.0 / 32_768.0]);
        assert_eq!(r.stats().clipped_samples, 1);
        assert!(!r.stats().truncated);
    }

    #[test]
    fn bad_headers_give_messages() {
        let cases: Vec<(Vec<u8>, &str)> = vec![
            (Vec::new(), "empty"),
            (b"RIFF\x10\0\0\0WAVEfm".to_vec(), "truncated header"),
            (header_bytes(1, 0, 8000, 16, 0, 36), "zero channels"),
            (header_bytes(1, 1, 0, 16, 0, 36), "0 Hz"),
            (header_bytes(1, 1, 8000, 8, 0, 36), "8-bit"),
            (header_bytes(2, 1, 8000, 16, 0, 36), "compressed"),
            (header_bytes(3, 1, 8000, 16, 0, 36), "16-bit float"),
            (
                header_bytes(1, 1, 8000, 16, 0xFFFF_FFF0, 36),
                "damaged header",
            ),
            (b"RIFX\x10\0\0\0WAVE".to_vec(), "RIFX"),
            (b"not a wav file at all".to_vec(), "signature"),
        ];
        for (bytes, want) in cases {
            let err = WavReader::new(Cursor::new(bytes), 0, 1.0, None)
                .err()
                .unwrap();
            let text = err.to_string();
            assert!(text.contains(want), "{text:?} should mention {want:?}");
        }
    }

    #[test]
    fn channel_out_of_range_names_the_option() {
        let bytes = header_bytes(1, 2, 8000, 16, 0, 36);
        let err = WavReader::new(Cursor::new(bytes), 2, 1.0, None)
            .err()
            .unwrap();
        assert!(err.to_string().contains("--channel 2"), "{err}");
    }
}
