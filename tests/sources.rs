//! Sources end to end: the same samples through every WAV and raw encoding, stdin-like
//! readers, TCP, growing files, damaged input, and the acquisition thread.
//!
//! Reference for WAV integer scaling: full scale is ±1, i.e. a b-bit code c reads as
//! c / 2^(b−1) (our command-line contract; common practice, e.g. how hound's writer and every
//! audio tool map codes). Reference decoder for the formats hound 3.5 reads: hound itself.

// A counting global allocator (below) needs `unsafe impl GlobalAlloc`; it only forwards to
// the system allocator and records the largest request made on the current thread.
#![allow(unsafe_code)]
#![allow(clippy::unwrap_used)] // test helpers outside #[test] functions

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::fs::{self, File, OpenOptions};
use std::io::{Cursor, Read, Seek, Write};
use std::net::TcpListener;
use std::path::{Path, PathBuf};
use std::thread;
use std::time::{Duration, Instant};
use stillpoint::synth::rng::splitmix64;

use proptest::prelude::*;
use stillpoint::acquire::{
    self, AcqCommand, AcqEvent, AcqOptions, AcqStatus, AcquireError, Acquisition, Backpressure,
    Endian, RawFormat, RawReader, ReaderStats, SampleFormat, SampleReader, SourceConfig,
    SourceSpec, WavReader,
};

// ---------------------------------------------------------------------------------------------
// Allocation watch

struct Watch;

thread_local! {
    static LARGEST: Cell<usize> = const { Cell::new(0) };
}

// SAFETY: every call is forwarded unchanged to `System`; the thread-local is a const-initialised
// `Cell<usize>` without destructor, so touching it never allocates.
unsafe impl GlobalAlloc for Watch {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let _ = LARGEST.try_with(|l| l.set(l.get().max(layout.size())));
        // SAFETY: same contract as the caller's.
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: same contract as the caller's.
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let _ = LARGEST.try_with(|l| l.set(l.get().max(new_size)));
        // SAFETY: same contract as the caller's.
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Watch = Watch;

/// Runs `f` and returns its result with the largest single allocation it made on this thread.
fn largest_allocation<T>(f: impl FnOnce() -> T) -> (T, usize) {
    LARGEST.with(|l| l.set(0));
    let value = f();
    (value, LARGEST.with(Cell::get))
}

// ---------------------------------------------------------------------------------------------
// Test data

/// splitmix64 (Steele et al. 2014), fixed seed.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        splitmix64(&mut self.0)
    }
}

const CHANNELS: usize = 3;
const FRAMES: usize = 1000;
const RATE: u32 = 48_000;

/// 16-bit codes, `FRAMES` × `CHANNELS` interleaved, including both extremes and zero.
fn codes() -> Vec<i16> {
    let mut rng = Rng(20_261_202);
    let mut c: Vec<i16> = (0..FRAMES * CHANNELS).map(|_| rng.next() as i16).collect();
    c[0] = i16::MIN;
    c[1] = i16::MAX;
    c[2] = 0;
    c[4] = -1;
    c
}

/// Channel `ch` of interleaved `all`.
fn channel_of<T: Copy>(all: &[T], channels: usize, ch: usize) -> Vec<T> {
    all.iter().skip(ch).step_by(channels).copied().collect()
}

/// The volts every encoding must give for `codes` (channel `ch`, `channels` wide): code/2^15.
fn wav_expected(codes: &[i16], channels: usize, ch: usize, vpu: f64) -> Vec<f64> {
    channel_of(codes, channels, ch)
        .iter()
        .map(|&c| f64::from(c) / 32_768.0 * vpu)
        .collect()
}

fn read_all(reader: &mut dyn SampleReader) -> Vec<f64> {
    let mut all = Vec::new();
    let mut out = vec![0.0; 777];
    loop {
        let n = reader.read_block(&mut out).unwrap();
        if n == 0 {
            return all;
        }
        all.extend_from_slice(&out[..n]);
    }
}

/// A first-channel subset of `codes` reinterpreted for a `channels`-wide file.
fn codes_for(channels: usize) -> Vec<i16> {
    codes()[..FRAMES * channels].to_vec()
}

/// Writes `codes` as a WAV of the given encoding through hound (ints, f32).
fn write_hound(path: &Path, codes: &[i16], channels: usize, bits: u16, float: bool) {
    let spec = hound::WavSpec {
        channels: channels as u16,
        sample_rate: RATE,
        bits_per_sample: bits,
        sample_format: if float {
            hound::SampleFormat::Float
        } else {
            hound::SampleFormat::Int
        },
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for &c in codes {
        match (float, bits) {
            (true, _) => w.write_sample(f32::from(c) / 32_768.0).unwrap(),
            (false, 16) => w.write_sample(c).unwrap(),
            (false, 24) => w.write_sample(i32::from(c) << 8).unwrap(),
            (false, _) => w.write_sample(i32::from(c) << 16).unwrap(),
        }
    }
    w.finalize().unwrap();
}

/// A WAV header by hand: `tag` 1/3, or 0xFFFE (EXTENSIBLE with `sub` 1/3 and `valid` bits).
fn wav_header(
    tag: u16,
    channels: u16,
    container_bits: u16,
    sub: u32,
    valid: u16,
    data_len: u32,
) -> Vec<u8> {
    let align = channels * container_bits / 8;
    let mut fmt = Vec::new();
    fmt.extend_from_slice(&tag.to_le_bytes());
    fmt.extend_from_slice(&channels.to_le_bytes());
    fmt.extend_from_slice(&RATE.to_le_bytes());
    fmt.extend_from_slice(&(RATE * u32::from(align)).to_le_bytes());
    fmt.extend_from_slice(&align.to_le_bytes());
    fmt.extend_from_slice(&container_bits.to_le_bytes());
    if tag == 0xFFFE {
        fmt.extend_from_slice(&22_u16.to_le_bytes());
        fmt.extend_from_slice(&valid.to_le_bytes());
        fmt.extend_from_slice(&0_u32.to_le_bytes());
        fmt.extend_from_slice(&sub.to_le_bytes());
        fmt.extend_from_slice(&[0, 0, 0x10, 0, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71]);
    }
    let mut h = Vec::new();
    h.extend_from_slice(b"RIFF");
    let riff = 4 + 8 + fmt.len() as u32 + 8 + data_len;
    h.extend_from_slice(&riff.to_le_bytes());
    h.extend_from_slice(b"WAVEfmt ");
    h.extend_from_slice(&(fmt.len() as u32).to_le_bytes());
    h.extend_from_slice(&fmt);
    h.extend_from_slice(b"data");
    h.extend_from_slice(&data_len.to_le_bytes());
    h
}

/// The 64-bit float WAV of `codes` (hound cannot write it), plain or EXTENSIBLE.
fn f64_wav(codes: &[i16], channels: usize, extensible: bool) -> Vec<u8> {
    let data_len = (codes.len() * 8) as u32;
    let mut bytes = if extensible {
        wav_header(0xFFFE, channels as u16, 64, 3, 64, data_len)
    } else {
        wav_header(3, channels as u16, 64, 0, 0, data_len)
    };
    for &c in codes {
        bytes.extend_from_slice(&(f64::from(c) / 32_768.0).to_le_bytes());
    }
    bytes
}

/// 24 valid bits left-justified in 32-bit containers (EXTENSIBLE).
fn i24_in_32_wav(codes: &[i16], channels: usize) -> Vec<u8> {
    let mut bytes = wav_header(0xFFFE, channels as u16, 32, 1, 24, (codes.len() * 4) as u32);
    for &c in codes {
        bytes.extend_from_slice(&((i32::from(c) << 16) & !0xFF).to_le_bytes());
    }
    bytes
}

fn wav_config(path: &Path, channel: usize, vpu: f64) -> SourceConfig {
    let mut config = SourceConfig::new(SourceSpec::Path(path.to_path_buf()));
    config.channel = channel;
    config.volts_per_unit = vpu;
    config
}

// ---------------------------------------------------------------------------------------------
// WAV

#[test]
fn every_wav_encoding_gives_the_same_volts() {
    let dir = tempfile::tempdir().unwrap();
    let vpu = 2.5;
    for channels in [1, CHANNELS] {
        let codes = codes_for(channels);
        let mut files: Vec<(String, PathBuf)> = Vec::new();
        for (bits, float) in [(16, false), (24, false), (32, false), (32, true)] {
            let name = format!("{}{bits}-{channels}ch.wav", if float { "f" } else { "i" });
            let path = dir.path().join(&name);
            write_hound(&path, &codes, channels, bits, float);
            files.push((name, path));
        }
        for (name, bytes) in [
            ("f64", f64_wav(&codes, channels, false)),
            ("f64-ext", f64_wav(&codes, channels, true)),
            ("i24in32-ext", i24_in_32_wav(&codes, channels)),
        ] {
            let path = dir.path().join(format!("{name}-{channels}ch.wav"));
            fs::write(&path, bytes).unwrap();
            files.push((name.to_string(), path));
        }
        for ch in 0..channels {
            let want = wav_expected(&codes, channels, ch, vpu);
            for (name, path) in &files {
                let mut reader = acquire::open(&wav_config(path, ch, vpu)).unwrap();
                assert_eq!(reader.sample_rate_hz(), f64::from(RATE));
                let got = read_all(reader.as_mut());
                assert_eq!(got, want, "{name}, channel {ch} of {channels}");
                let stats = reader.stats();
                assert_eq!(stats.samples, FRAMES as u64);
                assert!(
                    !stats.truncated && stats.partial_frame_bytes == 0,
                    "{name}: {stats:?}"
                );
                // Channel 0 holds the codes at full scale: one at each extreme (channels 1/3:
                // c[0] = MIN; with 3 channels c[1] = MAX lands in channel 1).
                let extremes = want
                    .iter()
                    .filter(|v| v.abs() >= 32_767.0 / 32_768.0 * vpu)
                    .count();
                if name.starts_with("i16") {
                    assert_eq!(stats.clipped_samples as usize, extremes, "{name} ch {ch}");
                }
            }
        }
    }
}

#[test]
fn wav_integer_scaling_matches_the_definition_and_hound() {
    // Full scale ±1: code c of b bits reads as c / 2^(b−1) (contract; common practice).
    let dir = tempfile::tempdir().unwrap();
    let cases: [(u16, Vec<i32>); 3] = [
        (16, vec![-32_768, -1, 0, 1, 16_384, 32_767]),
        (24, vec![-8_388_608, -1, 0, 1, 4_194_304, 8_388_607]),
        (32, vec![i32::MIN, -1, 0, 1, 1 << 30, i32::MAX]),
    ];
    for (bits, values) in cases {
        let path = dir.path().join(format!("scale{bits}.wav"));
        let spec = hound::WavSpec {
            channels: 1,
            sample_rate: 1000,
            bits_per_sample: bits,
            sample_format: hound::SampleFormat::Int,
        };
        let mut w = hound::WavWriter::create(&path, spec).unwrap();
        for &v in &values {
            if bits == 16 {
                w.write_sample(v as i16).unwrap();
            } else {
                w.write_sample(v).unwrap();
            }
        }
        w.finalize().unwrap();
        let mut reader = WavReader::open(&path, 0, 1.0, None).unwrap();
        let got = read_all(&mut reader);
        let full_scale = 2_f64.powi(i32::from(bits) - 1);
        let want: Vec<f64> = values.iter().map(|&v| f64::from(v) / full_scale).collect();
        assert_eq!(got, want, "{bits}-bit");
        assert_eq!(got[0], -1.0);
        assert_eq!(got[5], 1.0 - 1.0 / full_scale);
        assert_eq!(reader.stats().clipped_samples, 2);
        // hound's own decoding of the same file agrees code for code.
        let hound_codes: Vec<i32> = hound::WavReader::open(&path)
            .unwrap()
            .samples::<i32>()
            .map(Result::unwrap)
            .collect();
        let from_hound: Vec<f64> = hound_codes
            .iter()
            .map(|&v| f64::from(v) / full_scale)
            .collect();
        assert_eq!(got, from_hound);
    }
}

#[test]
fn wav_rate_override_and_description() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("x.wav");
    write_hound(&path, &codes_for(CHANNELS), CHANNELS, 24, false);
    let mut config = wav_config(&path, 2, 1.0);
    config.rate_hz = Some(250_000.0);
    let reader = acquire::open(&config).unwrap();
    assert_eq!(reader.sample_rate_hz(), 250_000.0);
    assert_eq!(
        reader.describe(),
        "WAV, 3 ch, 24-bit int, 250 kHz, channel 2"
    );
}

#[test]
fn wav_cut_short_delivers_what_is_there() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("died.wav");
    let codes = codes_for(CHANNELS);
    write_hound(&path, &codes, CHANNELS, 16, false);
    let full = fs::metadata(&path).unwrap().len();
    // Cut 100.5 frames (603 bytes) off the end: 899 whole frames and 3 bytes remain.
    let cut = 100 * 6 + 3;
    OpenOptions::new()
        .write(true)
        .open(&path)
        .unwrap()
        .set_len(full - cut)
        .unwrap();
    let mut reader = acquire::open(&wav_config(&path, 1, 1.0)).unwrap();
    let got = read_all(reader.as_mut());
    let want = wav_expected(&codes, CHANNELS, 1, 1.0);
    assert_eq!(got, want[..899]);
    let stats = reader.stats();
    assert!(stats.truncated);
    assert_eq!(stats.partial_frame_bytes, 3);
}

#[test]
fn bad_wav_files_are_refused_with_a_reason() {
    let dir = tempfile::tempdir().unwrap();
    let good = {
        let p = dir.path().join("good.wav");
        write_hound(&p, &codes_for(1), 1, 16, false);
        fs::read(&p).unwrap()
    };
    let mut garbage_data = good.clone();
    garbage_data[40..44].copy_from_slice(&0xFFFF_FFF0_u32.to_le_bytes());
    let mut garbage_fmt = good.clone();
    garbage_fmt[16..20].copy_from_slice(&0xFFFF_FFF0_u32.to_le_bytes());
    let mut zero_channels = good.clone();
    zero_channels[22..24].copy_from_slice(&0_u16.to_le_bytes());
    let mut zero_rate = good.clone();
    zero_rate[24..28].copy_from_slice(&0_u32.to_le_bytes());
    let mut eight_bit = good.clone();
    eight_bit[32..34].copy_from_slice(&1_u16.to_le_bytes()); // block align 1
    eight_bit[34..36].copy_from_slice(&8_u16.to_le_bytes());
    let cases: Vec<(&str, Vec<u8>, &str)> = vec![
        ("empty", Vec::new(), "empty"),
        ("short", good[..30].to_vec(), "truncated header"),
        ("garbage-data", garbage_data, "damaged header"),
        ("garbage-fmt", garbage_fmt, "damaged header"),
        ("zero-channels", zero_channels, "zero channels"),
        ("zero-rate", zero_rate, "0 Hz"),
        (
            "eight-bit",
            eight_bit,
            "8-bit integer samples are not supported",
        ),
        ("text", b"hello, this is not audio".to_vec(), "RIFF/WAVE"),
    ];
    for (name, bytes, want) in cases {
        let path = dir.path().join(format!("{name}.wav"));
        fs::write(&path, &bytes).unwrap();
        let err = acquire::open(&wav_config(&path, 0, 1.0)).err().unwrap();
        assert!(matches!(err, AcquireError::Wav(_)), "{name}: {err:?}");
        let text = err.to_string();
        assert!(
            text.contains(want),
            "{name}: {text:?} should contain {want:?}"
        );
        assert!(!text.contains('\n'), "{name}: one line: {text:?}");
    }
    let err = acquire::open(&wav_config(&dir.path().join("good.wav"), 1, 1.0))
        .err()
        .unwrap();
    assert!(matches!(err, AcquireError::Config(_)), "{err:?}");
    assert!(err.to_string().contains("--channel 1"), "{err}");
}

#[test]
fn missing_files_name_the_path() {
    let dir = tempfile::tempdir().unwrap();
    for name in ["absent.wav", "absent.bin"] {
        let path = dir.path().join(name);
        let mut config = wav_config(&path, 0, 1.0);
        config.sample_format = Some(SampleFormat::F32);
        config.rate_hz = Some(1.0);
        for follow in [false, true] {
            config.follow = follow;
            let err = acquire::open(&config).err().unwrap();
            assert!(matches!(err, AcquireError::Open { .. }), "{err:?}");
            assert!(err.to_string().contains(name), "{err}");
        }
    }
}

#[test]
fn option_errors_name_the_option() {
    let mut config = SourceConfig::new(SourceSpec::Path("x.bin".into()));
    config.sample_format = Some(SampleFormat::I16);
    for (rate, vpu, want) in [
        (Some(0.0), 1.0, "--rate"),
        (Some(f64::INFINITY), 1.0, "--rate"),
        (None, 1.0, "--rate"),
        (Some(1.0), f64::NAN, "--volts-per-unit"),
        (Some(1.0), 0.0, "--volts-per-unit"),
    ] {
        config.rate_hz = rate;
        config.volts_per_unit = vpu;
        let err = acquire::open(&config).err().unwrap();
        assert!(
            matches!(err, AcquireError::Config(_)) && err.to_string().contains(want),
            "{err}"
        );
    }
    let mut tcp = SourceConfig::new(SourceSpec::Tcp("127.0.0.1:1".into()));
    tcp.follow = true;
    assert!(
        acquire::open(&tcp)
            .err()
            .unwrap()
            .to_string()
            .contains("--follow")
    );
    let demo = SourceConfig::new(SourceSpec::Demo {
        scenario: "no-such".into(),
        seed: 1,
    });
    assert!(
        acquire::open(&demo)
            .err()
            .unwrap()
            .to_string()
            .contains("unknown demo scenario")
    );
}

// ---------------------------------------------------------------------------------------------
// Raw

/// `codes` encoded as raw `format`/`endian` (integers keep the code: raw is not rescaled).
fn raw_bytes(codes: &[i16], format: SampleFormat, endian: Endian) -> Vec<u8> {
    let mut out = Vec::new();
    for &c in codes {
        let v = i32::from(c);
        let le: Vec<u8> = match format {
            SampleFormat::I16 => c.to_le_bytes().to_vec(),
            SampleFormat::I24 => v.to_le_bytes()[..3].to_vec(),
            SampleFormat::I32 => v.to_le_bytes().to_vec(),
            SampleFormat::F32 => f32::from(c).to_le_bytes().to_vec(),
            SampleFormat::F64 => f64::from(c).to_le_bytes().to_vec(),
        };
        match endian {
            Endian::Little => out.extend_from_slice(&le),
            Endian::Big => out.extend(le.iter().rev()),
        }
    }
    out
}

const FORMATS: [SampleFormat; 5] = [
    SampleFormat::I16,
    SampleFormat::I24,
    SampleFormat::I32,
    SampleFormat::F32,
    SampleFormat::F64,
];

fn raw_format(
    sample_format: SampleFormat,
    endian: Endian,
    channels: usize,
    channel: usize,
) -> RawFormat {
    RawFormat {
        sample_format,
        endian,
        channels,
        channel,
        sample_rate_hz: 1.0e5,
        volts_per_unit: 0.75,
    }
}

fn raw_expected(codes: &[i16], channels: usize, ch: usize, vpu: f64) -> Vec<f64> {
    channel_of(codes, channels, ch)
        .iter()
        .map(|&c| f64::from(c) * vpu)
        .collect()
}

/// A `Read` that hands out 1 to 7 bytes per call, like a pipe under load.
struct Trickle {
    bytes: Vec<u8>,
    at: usize,
    rng: Rng,
}

impl Read for Trickle {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = (1 + (self.rng.next() % 7) as usize)
            .min(buf.len())
            .min(self.bytes.len() - self.at);
        buf[..n].copy_from_slice(&self.bytes[self.at..self.at + n]);
        self.at += n;
        Ok(n)
    }
}

#[test]
fn every_raw_encoding_gives_the_same_volts_from_files_and_pipes() {
    let dir = tempfile::tempdir().unwrap();
    let codes = codes();
    for format in FORMATS {
        for endian in [Endian::Little, Endian::Big] {
            let bytes = raw_bytes(&codes, format, endian);
            let path = dir.path().join(format!("{}-{endian:?}.bin", format.name()));
            fs::write(&path, &bytes).unwrap();
            for ch in 0..CHANNELS {
                let want = raw_expected(&codes, CHANNELS, ch, 0.75);
                let mut config = SourceConfig::new(SourceSpec::Path(path.clone()));
                config.sample_format = Some(format);
                config.endian = endian;
                config.channels = CHANNELS;
                config.channel = ch;
                config.rate_hz = Some(1.0e5);
                config.volts_per_unit = 0.75;
                let mut file = acquire::open(&config).unwrap();
                assert_eq!(
                    read_all(file.as_mut()),
                    want,
                    "file {format:?} {endian:?} ch {ch}"
                );
                let trickle = Trickle {
                    bytes: bytes.clone(),
                    at: 0,
                    rng: Rng(ch as u64),
                };
                let mut pipe =
                    RawReader::new(trickle, raw_format(format, endian, CHANNELS, ch)).unwrap();
                assert_eq!(
                    read_all(&mut pipe),
                    want,
                    "pipe {format:?} {endian:?} ch {ch}"
                );
                let ints = !matches!(format, SampleFormat::F32 | SampleFormat::F64);
                let stats = pipe.stats();
                assert_eq!(stats.samples, FRAMES as u64);
                assert_eq!(stats.partial_frame_bytes, 0);
                // Only i16 puts the ±32767/−32768 codes at its own full scale.
                if ints && format == SampleFormat::I16 {
                    let extremes = channel_of(&codes, CHANNELS, ch)
                        .iter()
                        .filter(|&&c| c == i16::MIN || c == i16::MAX)
                        .count();
                    assert_eq!(stats.clipped_samples as usize, extremes);
                } else {
                    assert_eq!(stats.clipped_samples, 0);
                }
            }
        }
    }
}

#[test]
fn partial_last_raw_frame_is_dropped_and_counted() {
    let codes = codes();
    let mut bytes = raw_bytes(&codes, SampleFormat::I24, Endian::Big);
    bytes.extend_from_slice(&[1, 2, 3, 4, 5, 6, 7]); // 2 samples and 1 byte of a 3-channel frame
    let mut r = RawReader::new(
        Cursor::new(bytes),
        raw_format(SampleFormat::I24, Endian::Big, 3, 2),
    )
    .unwrap();
    assert_eq!(read_all(&mut r), raw_expected(&codes, 3, 2, 0.75));
    assert_eq!(r.stats().partial_frame_bytes, 7);
}

#[test]
fn non_finite_samples_pass_through_and_are_counted() {
    let values = [1.0_f64, f64::NAN, -2.0, f64::NEG_INFINITY, f64::INFINITY];
    let bytes: Vec<u8> = values.iter().flat_map(|v| v.to_le_bytes()).collect();
    let mut r = RawReader::new(
        Cursor::new(bytes),
        raw_format(SampleFormat::F64, Endian::Little, 1, 0),
    )
    .unwrap();
    let got = read_all(&mut r);
    assert_eq!(got.len(), 5);
    assert!(got[1].is_nan());
    assert_eq!(
        (got[0], got[2], got[3], got[4]),
        (0.75, -1.5, f64::NEG_INFINITY, f64::INFINITY)
    );
    assert_eq!(r.stats().non_finite_samples, 3);
}

// ---------------------------------------------------------------------------------------------
// TCP

/// A port nobody listens on: bind, read the port, drop the listener.
fn free_port() -> u16 {
    TcpListener::bind("127.0.0.1:0")
        .unwrap()
        .local_addr()
        .unwrap()
        .port()
}

fn tcp_config(address: &str, format: SampleFormat, endian: Endian, channel: usize) -> SourceConfig {
    let mut config = SourceConfig::new(SourceSpec::parse(&format!("tcp://{address}")));
    config.sample_format = Some(format);
    config.endian = endian;
    config.channels = CHANNELS;
    config.channel = channel;
    config.rate_hz = Some(1.0e5);
    config.volts_per_unit = 0.75;
    config
}

/// Writes `bytes` to the next connection in pieces of 1 to 1000 bytes, then closes it.
fn serve_once(listener: &TcpListener, bytes: &[u8], seed: u64) {
    let (mut stream, _) = listener.accept().unwrap();
    let mut rng = Rng(seed);
    let mut at = 0;
    while at < bytes.len() {
        let n = (1 + (rng.next() % 1000) as usize).min(bytes.len() - at);
        stream.write_all(&bytes[at..at + n]).unwrap();
        at += n;
        if rng.next().is_multiple_of(8) {
            thread::sleep(Duration::from_millis(1));
        }
    }
}

#[test]
fn tcp_delivers_the_same_volts_and_ends_at_close() {
    let codes = codes();
    for (i, (format, endian)) in [
        (SampleFormat::F32, Endian::Little),
        (SampleFormat::I24, Endian::Big),
        (SampleFormat::F64, Endian::Big),
    ]
    .into_iter()
    .enumerate()
    {
        let listener = TcpListener::bind("127.0.0.1:0").unwrap();
        let address = listener.local_addr().unwrap().to_string();
        let bytes = raw_bytes(&codes, format, endian);
        let server = thread::spawn(move || serve_once(&listener, &bytes, i as u64));
        let mut reader = acquire::open(&tcp_config(&address, format, endian, 1)).unwrap();
        assert!(reader.is_live());
        assert_eq!(
            read_all(reader.as_mut()),
            raw_expected(&codes, CHANNELS, 1, 0.75),
            "{format:?}"
        );
        server.join().unwrap();
    }
}

#[test]
fn tcp_refused_names_the_address() {
    let address = format!("127.0.0.1:{}", free_port());
    let err = acquire::open(&tcp_config(&address, SampleFormat::I16, Endian::Little, 0))
        .err()
        .unwrap();
    assert!(matches!(err, AcquireError::Connect { .. }), "{err:?}");
    let text = err.to_string();
    assert!(text.contains(&format!("tcp://{address}")), "{text}");
}

#[test]
fn tcp_reconnecting_mode_survives_a_peer_disconnect() {
    let codes = codes();
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let address = listener.local_addr().unwrap().to_string();
    let bytes = raw_bytes(&codes, SampleFormat::I32, Endian::Little);
    // First connection: the first 1000.5 frames... cut inside a frame, then closed.
    let cut = 500 * CHANNELS * 4 + 5;
    let (first, second) = (bytes[..cut].to_vec(), bytes.clone());
    let server = thread::spawn(move || {
        serve_once(&listener, &first, 1);
        serve_once(&listener, &second, 2);
    });
    let mut config = tcp_config(&address, SampleFormat::I32, Endian::Little, 0);
    config.reconnect = true;
    let mut reader = acquire::open(&config).unwrap();
    let want = raw_expected(&codes, CHANNELS, 0, 0.75);
    let mut got = Vec::new();
    let mut out = vec![0.0; 100];
    let started = Instant::now();
    while got.len() < 500 + FRAMES && started.elapsed() < Duration::from_secs(10) {
        if let Some(n) = reader
            .read_block_timeout(&mut out, Duration::from_millis(100))
            .unwrap()
        {
            got.extend_from_slice(&out[..n]);
        }
    }
    server.join().unwrap();
    assert_eq!(got[..500], want[..500]);
    assert_eq!(got[500..], want[..]);
    let stats = reader.stats();
    assert_eq!(stats.reconnects, 1);
    assert_eq!(stats.partial_frame_bytes, 5);
    // The server is gone: the reader keeps retrying instead of ending.
    assert_eq!(
        reader
            .read_block_timeout(&mut out, Duration::from_millis(300))
            .unwrap(),
        None
    );
}

// ---------------------------------------------------------------------------------------------
// Growing files

fn follow_config(path: &Path) -> SourceConfig {
    let mut config = SourceConfig::new(SourceSpec::Path(path.to_path_buf()));
    config.sample_format = Some(SampleFormat::F32);
    config.rate_hz = Some(1000.0);
    config.follow = true;
    config
}

/// Reads with timeouts until `count` samples arrived or 10 s passed.
fn read_until(reader: &mut dyn SampleReader, count: usize) -> Vec<f64> {
    let mut got = Vec::new();
    let mut out = vec![0.0; 64];
    let started = Instant::now();
    while got.len() < count && started.elapsed() < Duration::from_secs(10) {
        if let Some(n) = reader
            .read_block_timeout(&mut out, Duration::from_millis(100))
            .unwrap()
        {
            assert!(n > 0, "a followed file does not end");
            got.extend_from_slice(&out[..n]);
        }
    }
    got
}

fn f32_bytes(range: std::ops::Range<u32>) -> Vec<u8> {
    range.flat_map(|i| (i as f32).to_le_bytes()).collect()
}

#[test]
fn follow_reads_appended_bytes_and_reopens_after_truncation_and_rotation() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("live.f32");
    fs::write(&path, f32_bytes(0..10)).unwrap();
    let mut reader = acquire::open(&follow_config(&path)).unwrap();
    assert!(reader.is_live());
    let writer_path = path.clone();
    let writer = thread::spawn(move || {
        let mut f = OpenOptions::new().append(true).open(&writer_path).unwrap();
        for block in 1..10_u32 {
            let bytes = f32_bytes(block * 10..block * 10 + 10);
            f.write_all(&bytes[..17]).unwrap(); // split inside a sample
            f.flush().unwrap();
            thread::sleep(Duration::from_millis(15));
            f.write_all(&bytes[17..]).unwrap();
            thread::sleep(Duration::from_millis(15));
        }
    });
    let got = read_until(reader.as_mut(), 100);
    writer.join().unwrap();
    assert_eq!(got, (0..100).map(f64::from).collect::<Vec<_>>());

    // Truncated in place (the recorder restarted): read again from the start.
    OpenOptions::new()
        .write(true)
        .open(&path)
        .unwrap()
        .set_len(0)
        .unwrap();
    thread::sleep(Duration::from_millis(120));
    OpenOptions::new()
        .append(true)
        .open(&path)
        .unwrap()
        .write_all(&f32_bytes(500..505))
        .unwrap();
    assert_eq!(
        read_until(reader.as_mut(), 5),
        vec![500.0, 501.0, 502.0, 503.0, 504.0]
    );
    assert_eq!(reader.stats().reconnects, 1);

    // Rotated: a new file renamed over the path.
    let fresh = dir.path().join("fresh.f32");
    fs::write(&fresh, f32_bytes(900..903)).unwrap();
    fs::rename(&fresh, &path).unwrap();
    assert_eq!(read_until(reader.as_mut(), 3), vec![900.0, 901.0, 902.0]);
    assert_eq!(reader.stats().reconnects, 2);
}

#[test]
fn follow_wav_ignores_the_unfinished_data_size() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("recording.wav");
    // A recorder's header before it is finalised: data size 0.
    let mut f = File::create(&path).unwrap();
    f.write_all(&wav_header(1, 2, 16, 0, 0, 0)).unwrap();
    let mut config = follow_config(&path);
    config.channel = 1;
    let mut reader = acquire::open(&config).unwrap();
    let codes = codes_for(2);
    let bytes: Vec<u8> = codes.iter().flat_map(|c| c.to_le_bytes()).collect();
    for piece in bytes.chunks(999) {
        f.write_all(piece).unwrap();
    }
    let got = read_until(reader.as_mut(), FRAMES);
    assert_eq!(got, wav_expected(&codes, 2, 1, 1.0));
    // The recorder finishes: writes the real sizes and appends a LIST chunk after the data,
    // whose bytes must not be read as samples.
    f.write_all(b"LIST\x08\0\0\0INFOjunk").unwrap();
    let data_len = (codes.len() * 2) as u32;
    f.seek(std::io::SeekFrom::Start(40)).unwrap();
    f.write_all(&data_len.to_le_bytes()).unwrap();
    f.seek(std::io::SeekFrom::Start(4)).unwrap();
    f.write_all(&(36 + data_len + 16).to_le_bytes()).unwrap();
    f.flush().unwrap();
    let mut out = [0.0; 16];
    assert_eq!(
        reader
            .read_block_timeout(&mut out, Duration::from_millis(300))
            .unwrap(),
        None
    );
    assert_eq!(reader.stats().samples, FRAMES as u64);
}

#[test]
fn empty_finalised_wav_with_trailing_chunk_has_no_samples() {
    // data size 0 in a header whose RIFF size matches the file: really empty; the LIST chunk
    // after it is not audio. (A 0 that the RIFF size does not back is a placeholder instead.)
    let mut bytes = wav_header(1, 1, 16, 0, 0, 0);
    bytes.extend_from_slice(b"LIST\x04\0\0\0abcd");
    let riff = (bytes.len() - 8) as u32;
    bytes[4..8].copy_from_slice(&riff.to_le_bytes());
    let mut r = WavReader::new(Cursor::new(bytes.clone()), 0, 1.0, None).unwrap();
    assert_eq!(read_all(&mut r), Vec::<f64>::new());
    bytes[4..8].copy_from_slice(&0_u32.to_le_bytes()); // never finalised: read what follows
    let mut r = WavReader::new(Cursor::new(bytes), 0, 1.0, None).unwrap();
    assert_eq!(read_all(&mut r).len(), 6);
}

// ---------------------------------------------------------------------------------------------
// Acquisition thread

/// Counts 0, 1, 2, … up to `len` samples, then ends (or fails with `fail`).
struct Counter {
    next: u64,
    len: u64,
    fail: bool,
}

impl SampleReader for Counter {
    fn sample_rate_hz(&self) -> f64 {
        1.0e6
    }
    fn read_block(&mut self, out: &mut [f64]) -> acquire::Result<usize> {
        let n = out.len().min((self.len - self.next) as usize);
        if n == 0 && self.fail {
            return Err(AcquireError::Config("the test source failed".into()));
        }
        for v in &mut out[..n] {
            *v = self.next as f64;
            self.next += 1;
        }
        Ok(n)
    }
    fn stats(&self) -> ReaderStats {
        ReaderStats {
            samples: self.next,
            ..ReaderStats::default()
        }
    }
    fn describe(&self) -> String {
        "counter".into()
    }
}

/// Receives until `Stopped`; returns the samples, the last status and the stop reason.
fn drain(acq: &Acquisition) -> (Vec<f64>, Option<AcqStatus>, Option<AcquireError>) {
    let mut samples = Vec::new();
    let mut status = None;
    loop {
        match acq.events().recv_timeout(Duration::from_secs(10)).unwrap() {
            AcqEvent::Block(b) => samples.extend(b),
            AcqEvent::Gap { samples } => panic!("a gap of {samples} samples in block mode"),
            AcqEvent::Status(s) => status = Some(s),
            AcqEvent::Stopped(e) => return (samples, status, e),
        }
    }
}

#[test]
fn block_mode_delivers_every_sample_to_a_slow_consumer() {
    let len = 100_000;
    let options = AcqOptions {
        channel_capacity: 2,
        block_samples: 1000,
        ..AcqOptions::headless()
    };
    let wakes = std::sync::Arc::new(std::sync::atomic::AtomicUsize::new(0));
    let w = std::sync::Arc::clone(&wakes);
    let waker: acquire::Waker = Box::new(move || {
        w.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    });
    let acq = Acquisition::spawn(
        Box::new(Counter {
            next: 0,
            len,
            fail: false,
        }),
        options,
        Some(waker),
    )
    .unwrap();
    thread::sleep(Duration::from_millis(300)); // the worker must wait, not drop
    let (samples, status, stop) = drain(&acq);
    assert!(stop.is_none());
    assert_eq!(samples, (0..len).map(|i| i as f64).collect::<Vec<_>>());
    let status = status.unwrap();
    assert_eq!((status.dropped_blocks, status.reader.samples), (0, len));
    assert!(wakes.load(std::sync::atomic::Ordering::Relaxed) >= 100);
}

#[test]
fn drop_mode_never_waits_for_a_consumer_that_does_not_read() {
    let len = 1_000_000_u64;
    let options = AcqOptions {
        backpressure: Backpressure::DropAndCount,
        channel_capacity: 4,
        block_samples: 1000,
        speed: None,
        ..AcqOptions::headless()
    };
    let acq = Acquisition::spawn(
        Box::new(Counter {
            next: 0,
            len,
            fail: false,
        }),
        options,
        None,
    )
    .unwrap();
    // The reader is read to the end while nobody reads the channel.
    thread::sleep(Duration::from_millis(1500));
    let (samples, status, stop) = drain(&acq);
    assert!(stop.is_none());
    let status = status.unwrap();
    assert_eq!(status.reader.samples, len, "the producer was held up");
    assert_eq!(status.dropped_samples + samples.len() as u64, len);
    assert_eq!(status.dropped_blocks, status.dropped_samples / 1000);
    assert!(status.dropped_blocks >= 990, "{status:?}");
}

#[test]
fn errors_end_with_stopped_some_and_shutdown_is_prompt() {
    let acq = Acquisition::spawn(
        Box::new(Counter {
            next: 0,
            len: 10,
            fail: true,
        }),
        AcqOptions::headless(),
        None,
    )
    .unwrap();
    let (samples, _, stop) = drain(&acq);
    assert_eq!(samples.len(), 10);
    assert!(stop.unwrap().to_string().contains("the test source failed"));

    // A paced endless source: Pause, Speed, then drop → joined promptly.
    let endless = Counter {
        next: 0,
        len: u64::MAX,
        fail: false,
    };
    let acq = Acquisition::spawn(Box::new(endless), AcqOptions::window(), None).unwrap();
    assert_eq!(acq.description(), "counter");
    assert!(acq.send(AcqCommand::Speed(Some(4.0))));
    thread::sleep(Duration::from_millis(100));
    assert!(acq.send(AcqCommand::Pause));
    thread::sleep(Duration::from_millis(100));
    while acq.events().try_recv().is_ok() {}
    thread::sleep(Duration::from_millis(100));
    let paused_blocks = acq
        .events()
        .try_iter()
        .filter(|e| matches!(e, AcqEvent::Block(_)))
        .count();
    assert_eq!(paused_blocks, 0, "a paused recording delivers nothing");
    let started = Instant::now();
    drop(acq);
    // A hang guard (an endless paced source must not hold up the drop), not a speed bound.
    assert!(started.elapsed() < Duration::from_secs(5));
}

#[test]
fn acquisition_reads_a_real_source_to_the_end() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("a.wav");
    let codes = codes_for(CHANNELS);
    write_hound(&path, &codes, CHANNELS, 32, true);
    let reader = acquire::open(&wav_config(&path, 2, 1.0)).unwrap();
    let acq = Acquisition::spawn(
        reader,
        AcqOptions {
            block_samples: 64,
            ..AcqOptions::headless()
        },
        None,
    )
    .unwrap();
    let (samples, status, stop) = drain(&acq);
    assert!(stop.is_none());
    assert_eq!(samples, wav_expected(&codes, CHANNELS, 2, 1.0));
    assert_eq!(status.unwrap().sample_rate_hz, f64::from(RATE));
}

// ---------------------------------------------------------------------------------------------
// Throughput (dev profile: a loose floor; the release figure is in the acquire report)

#[test]
fn f32_wav_decoding_is_bulk() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("big.wav");
    let n: u32 = 1 << 22;
    let mut bytes = wav_header(3, 1, 32, 0, 0, n * 4);
    bytes.extend((0..n).flat_map(|i| ((i % 1000) as f32).to_le_bytes()));
    fs::write(&path, bytes).unwrap();
    let mut reader = WavReader::open(&path, 0, 1.0, None).unwrap();
    let mut out = vec![0.0; 8192];
    let started = Instant::now();
    let mut total = 0_u64;
    let mut sum = 0.0;
    loop {
        let k = reader.read_block(&mut out).unwrap();
        if k == 0 {
            break;
        }
        total += k as u64;
        sum += out[k - 1];
    }
    let secs = started.elapsed().as_secs_f64();
    assert_eq!(total, u64::from(n));
    assert!(sum > 0.0);
    let msps = total as f64 / secs / 1e6;
    eprintln!("f32 WAV decoding (this profile): {msps:.0} MS/s");
    assert!(msps > 20.0, "{msps} MS/s");
}

// ---------------------------------------------------------------------------------------------
// Arbitrary bytes never panic, and never allocate by a header's word

/// Largest buffer a reader may take for an input of `len` bytes read in blocks of `block`
/// samples: the bytes themselves, a 4 KiB header allowance, or one block of the widest frame.
fn allowance(len: usize, block: usize, frame_bytes: usize) -> usize {
    len.max(4096).max(block * 8).max(frame_bytes) + 64
}

#[test]
fn allocation_watch_sees_allocations() {
    // The allocation bound below is only meaningful if the watch records allocations.
    let (v, largest) = largest_allocation(|| vec![0_u8; 123_457]);
    assert_eq!(v.len(), 123_457);
    assert!(largest >= 123_457, "{largest}");
    let (_, none) = largest_allocation(|| 1 + 1);
    assert_eq!(none, 0);
}

/// Valid WAVs of several layouts (the seeds that mutation starts from), made once.
fn seed_wavs() -> &'static [Vec<u8>] {
    static SEEDS: std::sync::OnceLock<Vec<Vec<u8>>> = std::sync::OnceLock::new();
    SEEDS.get_or_init(make_seed_wavs)
}

fn make_seed_wavs() -> Vec<Vec<u8>> {
    let codes = codes_for(CHANNELS)[..60].to_vec();
    let mut list = vec![
        f64_wav(&codes, CHANNELS, false),
        f64_wav(&codes, CHANNELS, true),
        i24_in_32_wav(&codes, CHANNELS),
    ];
    let dir = tempfile::tempdir().unwrap();
    for (bits, float) in [(16, false), (24, false), (32, true)] {
        let p = dir.path().join("seed.wav");
        write_hound(&p, &codes, CHANNELS, bits, float);
        list.push(fs::read(&p).unwrap());
    }
    list
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, ..ProptestConfig::default() })]

    #[test]
    fn arbitrary_wav_bytes_never_panic(mut bytes in proptest::collection::vec(any::<u8>(), 0..600), riff in any::<bool>()) {
        if riff && bytes.len() >= 16 {
            // Steer most cases past the signature so the chunk walk and fmt parser are hit.
            bytes[..4].copy_from_slice(b"RIFF");
            bytes[8..16].copy_from_slice(b"WAVEfmt ");
        }
        let len = bytes.len();
        let (result, largest) = largest_allocation(|| {
            let mut out = [0.0; 256];
            let mut total = 0;
            if let Ok(mut r) = WavReader::new(Cursor::new(bytes), 0, 1.0, None) {
                while let Ok(n) = r.read_block(&mut out) {
                    if n == 0 { break; }
                    total += n;
                }
                let _ = r.describe();
            }
            total
        });
        prop_assert!(result * 2 <= len);
        prop_assert!(largest <= allowance(len, 256, 8), "allocated {} for {} bytes", largest, len);
    }

    #[test]
    fn mutated_wav_headers_never_panic(
        which in 0_usize..6,
        edits in proptest::collection::vec((0_usize..80, any::<u8>()), 1..6),
        cut in any::<Option<usize>>(),
        channel in 0_usize..4,
    ) {
        // Valid files with a few header bytes changed and perhaps cut: parse or refuse, and
        // deliver whole frames only from bytes that are there.
        let mut bytes = seed_wavs()[which].clone();
        for (at, value) in edits {
            if let Some(b) = bytes.get_mut(at) {
                *b = value;
            }
        }
        if let Some(cut) = cut {
            bytes.truncate(cut % (bytes.len() + 1));
        }
        let len = bytes.len();
        let (result, largest) = largest_allocation(|| {
            let mut out = [0.0; 100];
            let mut total = 0;
            if let Ok(mut r) = WavReader::new(Cursor::new(bytes), channel, 1.0, None) {
                while let Ok(n) = r.read_block(&mut out) {
                    if n == 0 { break; }
                    total += n;
                }
            }
            total
        });
        prop_assert!(result * 2 <= len);
        prop_assert!(largest <= allowance(len, 100, 8), "allocated {} for {} bytes", largest, len);
    }

    #[test]
    fn arbitrary_raw_bytes_never_panic(
        bytes in proptest::collection::vec(any::<u8>(), 0..600),
        format in 0_usize..5,
        big in any::<bool>(),
        channels in 1_usize..5,
        channel_seed in any::<usize>(),
    ) {
        let channel = channel_seed % channels;
        let endian = if big { Endian::Big } else { Endian::Little };
        let format = raw_format(FORMATS[format], endian, channels, channel);
        let len = bytes.len();
        let frame = channels * format.sample_format.bytes();
        let ((delivered, stats), largest) = largest_allocation(|| {
            let mut r = RawReader::new(Cursor::new(bytes), format).unwrap();
            let mut out = [0.0; 100];
            let mut total = 0;
            loop {
                let n = r.read_block(&mut out).unwrap();
                if n == 0 { break; }
                total += n;
            }
            (total, r.stats())
        });
        prop_assert_eq!(delivered, len / frame);
        prop_assert_eq!(stats.partial_frame_bytes as usize, len % frame);
        prop_assert!(largest <= allowance(0, 100, frame), "allocated {}", largest);
    }
}

#[test]
fn idle_live_sources_do_not_hold_up_shutdown() {
    // A followed file that never grows and a TCP peer that never sends: the worker must still
    // see Shutdown within a read slice (~100 ms), so dropping the handle is prompt.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("quiet.f32");
    fs::write(&path, f32_bytes(0..4)).unwrap();
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let address = listener.local_addr().unwrap().to_string();
    // The peer stays silent until the test is over (not for a fixed time), so the bound
    // below measures the worker's read slice, never the peer closing.
    let (done_tx, done_rx) = std::sync::mpsc::channel::<()>();
    let server = thread::spawn(move || {
        let (stream, _) = listener.accept().unwrap();
        let _ = done_rx.recv_timeout(Duration::from_secs(60));
        drop(stream);
    });
    let followed = acquire::open(&follow_config(&path)).unwrap();
    let mut tcp = tcp_config(&address, SampleFormat::I16, Endian::Little, 0);
    tcp.reconnect = true;
    let silent = acquire::open(&tcp).unwrap();
    for reader in [followed, silent] {
        let acq = Acquisition::spawn(reader, AcqOptions::window(), None).unwrap();
        thread::sleep(Duration::from_millis(300));
        let started = Instant::now();
        drop(acq);
        // A hang guard, not a speed bound: a read slice is ~100 ms, a blocked worker would
        // wait for the peer (60 s); 5 s leaves room for a loaded debug build.
        assert!(
            started.elapsed() < Duration::from_secs(5),
            "{:?}",
            started.elapsed()
        );
    }
    let _ = done_tx.send(());
    server.join().unwrap();
}
