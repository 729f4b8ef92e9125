//! Helpers for the command-line tests: run the built binary, make small records, check that
//! a failed run failed cleanly.

#![allow(dead_code)]

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use stillpoint::synth::rng::splitmix64;

/// The `stillpoint` binary cargo built for these tests.
pub fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_stillpoint"))
}

/// Runs the binary with `args` (no stdin).
pub fn run(args: &[&str]) -> Output {
    bin()
        .args(args)
        .stdin(Stdio::null())
        .output()
        .expect("run stillpoint")
}

/// Runs the binary with `args`, feeding `input` on stdin.
pub fn run_with_stdin(args: &[&str], input: &[u8]) -> Output {
    let mut child = bin()
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn stillpoint");
    let mut stdin = child.stdin.take().expect("stdin");
    let data = input.to_vec();
    let feeder = std::thread::spawn(move || {
        // The program may stop reading early (enough averages); ignore a broken pipe.
        let _ = stdin.write_all(&data);
    });
    let output = child.wait_with_output().expect("wait for stillpoint");
    feeder.join().expect("stdin feeder");
    output
}

/// stderr as text.
pub fn stderr(output: &Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// stdout as text.
pub fn stdout(output: &Output) -> String {
    String::from_utf8_lossy(&output.stdout).into_owned()
}

/// Asserts a successful run, showing stderr otherwise.
pub fn assert_success(output: &Output, what: &str) {
    assert!(
        output.status.success(),
        "{what}: exit {:?}\nstderr:\n{}",
        output.status.code(),
        stderr(output)
    );
    assert!(
        !stderr(output).contains("panicked"),
        "{what}: {}",
        stderr(output)
    );
}

/// Asserts a clean failure: non-zero exit `code`, exactly one line mentioning "error" on
/// stderr, no panic text, and `keep` (if given) still holding `original` byte for byte.
pub fn assert_clean_failure(output: &Output, code: i32, what: &str, keep: Option<(&Path, &[u8])>) {
    let err = stderr(output);
    assert_eq!(
        output.status.code(),
        Some(code),
        "{what}: expected exit {code}\nstderr:\n{err}"
    );
    assert!(!err.contains("panicked"), "{what}: panic\n{err}");
    assert!(
        !err.to_lowercase().contains("backtrace"),
        "{what}: backtrace\n{err}"
    );
    let error_lines = err
        .lines()
        .filter(|l| l.to_lowercase().contains("error"))
        .count();
    assert_eq!(error_lines, 1, "{what}: want exactly one error line\n{err}");
    if let Some((path, original)) = keep {
        let now = fs::read(path).unwrap_or_default();
        assert_eq!(now, original, "{what}: the existing output was changed");
        let dir = path.parent().expect("parent");
        let leftovers: Vec<PathBuf> = fs::read_dir(dir)
            .expect("read dir")
            .map(|e| e.expect("entry").path())
            .filter(|p| {
                p.file_name()
                    .is_some_and(|n| n.to_string_lossy().ends_with(".tmp"))
            })
            .collect();
        assert!(
            leftovers.is_empty(),
            "{what}: temporary files left: {leftovers:?}"
        );
    }
}

/// splitmix64: a tiny fixed-seed generator for test data.
pub struct SplitMix(pub u64);

impl SplitMix {
    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        splitmix64(&mut self.0)
    }

    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Standard normal (Box–Muller).
    pub fn normal(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// Gaussian noise of standard deviation `sigma`, as f32.
pub fn noise_f32(len: usize, sigma: f64, seed: u64) -> Vec<f32> {
    let mut rng = SplitMix(seed);
    (0..len).map(|_| (sigma * rng.normal()) as f32).collect()
}

/// Integer-valued noise that fits i16 exactly (so raw i16 and WAV f32 carry the same values).
pub fn integer_noise(len: usize, seed: u64) -> Vec<i16> {
    let mut rng = SplitMix(seed);
    (0..len)
        .map(|_| (1000.0 * rng.normal()).round().clamp(-32000.0, 32000.0) as i16)
        .collect()
}

/// Writes a float WAV with `channels` interleaved channels.
pub fn write_wav_f32(path: &Path, rate_hz: u32, channels: u16, interleaved: &[f32]) {
    let spec = hound::WavSpec {
        channels,
        sample_rate: rate_hz,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut writer = hound::WavWriter::create(path, spec).expect("create wav");
    for &s in interleaved {
        writer.write_sample(s).expect("write sample");
    }
    writer.finalize().expect("finalize wav");
}

/// Writes a 16-bit integer WAV, mono.
pub fn write_wav_i16(path: &Path, rate_hz: u32, samples: &[i16]) {
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: rate_hz,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut writer = hound::WavWriter::create(path, spec).expect("create wav");
    for &s in samples {
        writer.write_sample(s).expect("write sample");
    }
    writer.finalize().expect("finalize wav");
}

/// Raw little-endian f32 bytes.
pub fn f32_le_bytes(samples: &[f32]) -> Vec<u8> {
    samples.iter().flat_map(|s| s.to_le_bytes()).collect()
}

/// A parsed spectrum CSV.
pub struct Csv {
    /// Header names.
    pub headers: Vec<String>,
    /// Rows of numbers.
    pub rows: Vec<Vec<f64>>,
}

impl Csv {
    /// Column `name`.
    pub fn column(&self, name: &str) -> Vec<f64> {
        let i = self
            .headers
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("no column {name} in {:?}", self.headers));
        self.rows.iter().map(|r| r[i]).collect()
    }
}

/// Reads a CSV written by `stillpoint spectrum` with the `csv` crate (no comment lines).
pub fn read_csv(path: &Path) -> Csv {
    let mut reader = csv::Reader::from_path(path).expect("open csv");
    let headers = reader
        .headers()
        .expect("headers")
        .iter()
        .map(str::to_string)
        .collect();
    let rows = reader
        .records()
        .map(|r| {
            r.expect("record")
                .iter()
                .map(|v| {
                    v.parse::<f64>()
                        .unwrap_or_else(|_| panic!("not a number: {v}"))
                })
                .collect()
        })
        .collect();
    Csv { headers, rows }
}

/// Reads a JSON file.
pub fn read_json(path: &Path) -> serde_json::Value {
    serde_json::from_slice(&fs::read(path).expect("read json")).expect("parse json")
}

/// The value at a dotted path (`"quantum.x_zpf_m"`); `None` if a key is missing.
pub fn json_path<'a>(value: &'a serde_json::Value, path: &str) -> Option<&'a serde_json::Value> {
    path.split('.').try_fold(value, |v, key| v.get(key))
}

/// Path as &str.
pub fn s(path: &Path) -> &str {
    path.to_str().expect("utf-8 path")
}
