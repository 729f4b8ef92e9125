//! The shared core of every byte-stream reader: pulls bytes from a [`ByteSource`], keeps a
//! partial frame between reads, and decodes whole interleaved frames of one channel into
//! volts in tight bulk loops (`from_le_bytes`/`from_be_bytes` over big byte buffers).
//!
//! Allocation is bounded by the caller's block size (at most [`MAX_BUFFER_BYTES`], at least
//! one frame) and, where the source knows it, by the bytes that are really left: a lying
//! header never decides how much memory is taken.

use std::time::Instant;

use super::{Endian, ReaderStats, Result, SampleFormat};

/// Largest byte buffer a reader keeps (unless one frame alone is larger).
pub(crate) const MAX_BUFFER_BYTES: usize = 1 << 20;

/// What one call to [`ByteSource::fill`] produced.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Fill {
    /// This many bytes were written to the start of the buffer.
    Bytes(usize),
    /// Nothing arrived before the deadline; the stream is still open.
    Idle,
    /// The stream restarted (reconnect, reopened file): bytes held from before belong to the
    /// old stream and must be dropped. No bytes were written.
    Restarted,
    /// The stream has ended for good. `truncated`: it ended before its header said it would.
    End {
        /// Ended early (WAV data chunk shorter than declared).
        truncated: bool,
    },
}

/// A source of raw bytes (file, socket, stdin, growing file).
pub(crate) trait ByteSource: Send {
    /// Reads some bytes into `buf` (non-empty). With `deadline`, gives up with
    /// [`Fill::Idle`] once it has passed and nothing arrived; without, waits as long as needed.
    fn fill(&mut self, buf: &mut [u8], deadline: Option<Instant>) -> Result<Fill>;

    /// Bytes that are certainly left, if the source knows (bounds the buffer size).
    fn remaining_hint(&self) -> Option<u64> {
        None
    }
}

/// How to turn one interleaved frame into the selected channel's volts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Layout {
    /// Sample encoding. For WAV integers in wider containers this is the container format.
    pub format: SampleFormat,
    /// Byte order.
    pub endian: Endian,
    /// Interleaved channels.
    pub channels: usize,
    /// Selected channel (checked `< channels`).
    pub channel: usize,
    /// Volts per integer count or per float unit (WAV: already divided by 2^(b−1)).
    pub volts_per_count: f64,
}

impl Layout {
    /// Bytes of one frame (all channels). Callers have checked that this does not overflow.
    pub fn frame_bytes(&self) -> usize {
        self.channels.saturating_mul(self.format.bytes())
    }

    /// Byte offset of the selected channel within a frame.
    fn offset(&self) -> usize {
        self.channel.saturating_mul(self.format.bytes())
    }
}

/// Pulls bytes from a source and decodes whole frames; see the module docs.
pub(crate) struct FrameReader {
    source: Box<dyn ByteSource>,
    layout: Layout,
    buf: Vec<u8>,
    start: usize,
    end: usize,
    ended: bool,
    /// Counters (public to the owning reader, which may set `truncated` up front).
    pub stats: ReaderStats,
    /// A second channel delivered with the first ([`FrameReader::pair_with`]).
    pair: Option<usize>,
}

impl FrameReader {
    /// A reader of `layout` frames from `source`.
    pub fn new(source: Box<dyn ByteSource>, layout: Layout) -> Self {
        Self {
            source,
            layout,
            buf: Vec::new(),
            start: 0,
            end: 0,
            ended: false,
            stats: ReaderStats::default(),
            pair: None,
        }
    }

    /// Delivers `channel_b` together with the selected channel from now on: every block of
    /// `2n` values then holds the `n` samples of the selected channel followed by the `n`
    /// samples of `channel_b` of the same frames (one pass over the bytes; `stats.samples`
    /// counts frames).
    ///
    /// # Errors
    /// [`super::AcquireError::Config`] if `channel_b` is not a channel of the stream.
    pub fn pair_with(&mut self, channel_b: usize) -> Result<()> {
        if channel_b >= self.layout.channels {
            return Err(super::AcquireError::Config(format!(
                "--cross-channel {channel_b} is out of range: the stream has {} channel(s) (0 to {})",
                self.layout.channels,
                self.layout.channels.saturating_sub(1)
            )));
        }
        self.pair = Some(channel_b);
        Ok(())
    }

    /// Channels in each delivered block: 1, or 2 after [`FrameReader::pair_with`].
    pub fn channels_delivered(&self) -> usize {
        if self.pair.is_some() { 2 } else { 1 }
    }

    /// Reads up to `out.len()` samples (paired: up to `out.len() / 2` frames, see
    /// [`FrameReader::pair_with`]; `out` must then hold at least 2). `Ok(Some(0))`: ended (or `out` empty);
    /// `Ok(None)`: nothing before `deadline`.
    pub fn read(&mut self, out: &mut [f64], deadline: Option<Instant>) -> Result<Option<usize>> {
        if out.is_empty() || self.ended || (self.pair.is_some() && out.len() < 2) {
            return Ok(Some(0));
        }
        let frame_bytes = self.layout.frame_bytes().max(1);
        loop {
            let whole = (self.end - self.start) / frame_bytes;
            if let Some(channel_b) = self.pair
                && whole > 0
            {
                return Ok(Some(self.decode_pair(out, whole, frame_bytes, channel_b)));
            }
            if whole > 0 {
                let frames = whole.min(out.len());
                let bytes_end = self.start + frames * frame_bytes;
                let (Some(bytes), Some(dest)) =
                    (self.buf.get(self.start..bytes_end), out.get_mut(..frames))
                else {
                    return Ok(Some(0));
                };
                decode(&self.layout, bytes, dest, &mut self.stats);
                self.start = bytes_end;
                self.stats.samples += frames as u64;
                return Ok(Some(frames));
            }
            // Keep the partial frame at the front and make room behind it.
            self.buf.copy_within(self.start..self.end, 0);
            self.end -= self.start;
            self.start = 0;
            let mut target = out
                .len()
                .saturating_mul(frame_bytes)
                .clamp(frame_bytes, MAX_BUFFER_BYTES.max(frame_bytes));
            if let Some(left) = self.source.remaining_hint() {
                let left = usize::try_from(left).unwrap_or(usize::MAX);
                target = target.min(self.end.saturating_add(left)).max(self.end + 1);
            }
            if self.buf.len() < target {
                self.buf.resize(target, 0);
            }
            let Some(space) = self.buf.get_mut(self.end..) else {
                return Ok(Some(0));
            };
            match self.source.fill(space, deadline)? {
                Fill::Bytes(n) => self.end += n.min(space.len()),
                Fill::Idle => return Ok(None),
                Fill::Restarted => {
                    self.stats.partial_frame_bytes += (self.end - self.start) as u64;
                    self.stats.reconnects += 1;
                    self.start = 0;
                    self.end = 0;
                }
                Fill::End { truncated } => {
                    self.stats.partial_frame_bytes += (self.end - self.start) as u64;
                    self.stats.truncated |= truncated;
                    self.start = 0;
                    self.end = 0;
                    self.ended = true;
                    self.buf = Vec::new();
                    return Ok(Some(0));
                }
            }
        }
    }
}

impl FrameReader {
    /// Paired delivery: decodes up to `out.len() / 2` of the `whole` buffered frames into
    /// the two halves of `out[..2 frames]`; returns the values written (2 × frames).
    fn decode_pair(
        &mut self,
        out: &mut [f64],
        whole: usize,
        frame_bytes: usize,
        channel_b: usize,
    ) -> usize {
        let frames = whole.min(out.len() / 2).max(1);
        let bytes_end = self.start + frames * frame_bytes;
        let (Some(bytes), Some(dest)) = (
            self.buf.get(self.start..bytes_end),
            out.get_mut(..2 * frames),
        ) else {
            return 0;
        };
        let (dest_a, dest_b) = dest.split_at_mut(frames);
        decode(&self.layout, bytes, dest_a, &mut self.stats);
        let layout_b = Layout {
            channel: channel_b,
            ..self.layout
        };
        decode(&layout_b, bytes, dest_b, &mut self.stats);
        self.start = bytes_end;
        self.stats.samples += frames as u64;
        2 * frames
    }
}

/// Decodes `bytes` (a whole number of frames, `dest.len()` of them) into `dest`.
/// Format and byte order are matched outside the loops, so each loop is a plain bulk
/// conversion the compiler can unroll and vectorise.
fn decode(layout: &Layout, bytes: &[u8], dest: &mut [f64], stats: &mut ReaderStats) {
    use SampleFormat as F;
    let stride = layout.frame_bytes().max(1);
    let offset = layout.offset();
    let scale = layout.volts_per_count;
    let big = layout.endian == Endian::Big;
    let (i16_lo, i16_hi) = (i32::from(i16::MIN), i32::from(i16::MAX));
    let (i24_lo, i24_hi) = (-(1_i32 << 23), (1_i32 << 23) - 1);
    // 24-bit: put the three bytes in the top of an i32, then shift back (sign extension).
    let i24_le = |b: [u8; 3]| i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8;
    let i24_be = |b: [u8; 3]| i32::from_be_bytes([b[0], b[1], b[2], 0]) >> 8;
    let clipped = match (layout.format, big) {
        (F::I16, false) => ints::<2>(bytes, stride, offset, dest, scale, (i16_lo, i16_hi), |b| {
            i32::from(i16::from_le_bytes(b))
        }),
        (F::I16, true) => ints::<2>(bytes, stride, offset, dest, scale, (i16_lo, i16_hi), |b| {
            i32::from(i16::from_be_bytes(b))
        }),
        (F::I24, false) => ints::<3>(bytes, stride, offset, dest, scale, (i24_lo, i24_hi), i24_le),
        (F::I24, true) => ints::<3>(bytes, stride, offset, dest, scale, (i24_lo, i24_hi), i24_be),
        (F::I32, false) => ints::<4>(
            bytes,
            stride,
            offset,
            dest,
            scale,
            (i32::MIN, i32::MAX),
            i32::from_le_bytes,
        ),
        (F::I32, true) => ints::<4>(
            bytes,
            stride,
            offset,
            dest,
            scale,
            (i32::MIN, i32::MAX),
            i32::from_be_bytes,
        ),
        (F::F32, false) => {
            frames::<4>(bytes, stride, offset, dest, |b| {
                f64::from(f32::from_le_bytes(b)) * scale
            });
            0
        }
        (F::F32, true) => {
            frames::<4>(bytes, stride, offset, dest, |b| {
                f64::from(f32::from_be_bytes(b)) * scale
            });
            0
        }
        (F::F64, false) => {
            frames::<8>(bytes, stride, offset, dest, |b| {
                f64::from_le_bytes(b) * scale
            });
            0
        }
        (F::F64, true) => {
            frames::<8>(bytes, stride, offset, dest, |b| {
                f64::from_be_bytes(b) * scale
            });
            0
        }
    };
    stats.clipped_samples += clipped;
    stats.non_finite_samples += dest.iter().map(|v| u64::from(!v.is_finite())).sum::<u64>();
}

/// Integer frames: converts with `code`, scales, and counts codes at `lo` or `hi` (clipping).
#[inline(always)]
fn ints<const N: usize>(
    bytes: &[u8],
    stride: usize,
    offset: usize,
    dest: &mut [f64],
    scale: f64,
    (lo, hi): (i32, i32),
    code: impl Fn([u8; N]) -> i32,
) -> u64 {
    let mut clipped = 0_u64;
    frames::<N>(bytes, stride, offset, dest, |b| {
        let c = code(b);
        clipped += u64::from(c == lo || c == hi);
        f64::from(c) * scale
    });
    clipped
}

/// Applies `convert` to the `N` bytes at `offset` of every `stride`-byte frame.
#[inline(always)]
fn frames<const N: usize>(
    bytes: &[u8],
    stride: usize,
    offset: usize,
    dest: &mut [f64],
    mut convert: impl FnMut([u8; N]) -> f64,
) {
    if stride == N {
        // One channel: the common, fastest case.
        for (o, chunk) in dest.iter_mut().zip(bytes.chunks_exact(N)) {
            let mut b = [0_u8; N];
            b.copy_from_slice(chunk);
            *o = convert(b);
        }
    } else {
        for (o, frame) in dest.iter_mut().zip(bytes.chunks_exact(stride)) {
            let mut b = [0_u8; N];
            if let Some(s) = frame.get(offset..offset + N) {
                b.copy_from_slice(s);
            }
            *o = convert(b);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A source that hands out fixed pieces, then ends.
    struct Pieces(Vec<Vec<u8>>);

    impl ByteSource for Pieces {
        fn fill(&mut self, buf: &mut [u8], _deadline: Option<Instant>) -> Result<Fill> {
            if self.0.is_empty() {
                return Ok(Fill::End { truncated: false });
            }
            let piece = self.0.remove(0);
            let n = piece.len().min(buf.len());
            buf[..n].copy_from_slice(&piece[..n]);
            if n < piece.len() {
                self.0.insert(0, piece[n..].to_vec());
            }
            Ok(Fill::Bytes(n))
        }
    }

    fn layout(format: SampleFormat, endian: Endian, channels: usize, channel: usize) -> Layout {
        Layout {
            format,
            endian,
            channels,
            channel,
            volts_per_count: 1.0,
        }
    }

    fn read_all(reader: &mut FrameReader) -> Vec<f64> {
        let mut all = Vec::new();
        let mut out = [0.0; 3];
        loop {
            let n = reader.read(&mut out, None).unwrap().unwrap();
            if n == 0 {
                return all;
            }
            all.extend_from_slice(&out[..n]);
        }
    }

    #[test]
    fn frames_split_across_reads_are_joined() {
        // i16 LE, 2 channels, channel 1: frames (1, -2), (3, -4), (5, -6) cut at odd places.
        let bytes: Vec<u8> = [1_i16, -2, 3, -4, 5, -6]
            .iter()
            .flat_map(|v| v.to_le_bytes())
            .collect();
        let pieces = vec![
            bytes[..3].to_vec(),
            bytes[3..7].to_vec(),
            bytes[7..].to_vec(),
        ];
        let mut r = FrameReader::new(
            Box::new(Pieces(pieces)),
            layout(SampleFormat::I16, Endian::Little, 2, 1),
        );
        assert_eq!(read_all(&mut r), vec![-2.0, -4.0, -6.0]);
        assert_eq!(r.stats.samples, 3);
        assert_eq!(r.stats.partial_frame_bytes, 0);
    }

    #[test]
    fn i24_sign_extends_both_byte_orders() {
        let le = vec![
            0xFF, 0xFF, 0xFF, 0x00, 0x00, 0x80, 0xFF, 0xFF, 0x7F, 0x01, 0x00, 0x00,
        ];
        let be: Vec<u8> = le.chunks(3).flat_map(|c| [c[2], c[1], c[0]]).collect();
        let want = vec![-1.0, -8_388_608.0, 8_388_607.0, 1.0];
        for (bytes, endian) in [(le, Endian::Little), (be, Endian::Big)] {
            let mut r = FrameReader::new(
                Box::new(Pieces(vec![bytes])),
                layout(SampleFormat::I24, endian, 1, 0),
            );
            assert_eq!(read_all(&mut r), want);
            assert_eq!(r.stats.clipped_samples, 2);
        }
    }

    #[test]
    fn partial_last_frame_is_counted_and_non_finite_passed_through() {
        let mut bytes: Vec<u8> = [1.5_f32, f32::NAN, f32::INFINITY]
            .iter()
            .flat_map(|v| v.to_be_bytes())
            .collect();
        bytes.extend_from_slice(&[1, 2, 3]);
        let mut r = FrameReader::new(
            Box::new(Pieces(vec![bytes])),
            layout(SampleFormat::F32, Endian::Big, 1, 0),
        );
        let got = read_all(&mut r);
        assert_eq!(got[0], 1.5);
        assert!(got[1].is_nan());
        assert_eq!(got[2], f64::INFINITY);
        assert_eq!(r.stats.non_finite_samples, 2);
        assert_eq!(r.stats.partial_frame_bytes, 3);
    }
}
