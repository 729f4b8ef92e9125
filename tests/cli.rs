//! Command-line tests: run the built `stillpoint` binary on small records made here (fixed
//! seeds) and check the BRIEF.md contract — clean one-line errors that never touch an
//! existing output, identical spectra from every source kind, the CSV and JSON layouts,
//! agreement with scipy.signal.welch (tests/data/cli/make_reference.py), synth and bench.

mod util;

use std::fs;
use std::io::{Read, Write};
use std::net::TcpListener;
use std::path::{Path, PathBuf};
use std::process::Stdio;

use util::*;

const PRECIOUS: &[u8] = b"frequency_hz,psd_v2_per_hz\n0,1\n";

fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/cli")
}

/// A mono float WAV of white noise (σ = 0.5 V) at 10 kHz in `dir`.
fn noise_wav(dir: &Path, len: usize) -> PathBuf {
    let path = dir.join("noise.wav");
    write_wav_f32(&path, 10_000, 1, &noise_f32(len, 0.5, 7));
    path
}

/// A port on loopback that nobody listens on (bound, then released).
fn dead_port() -> u16 {
    let listener = TcpListener::bind("127.0.0.1:0").expect("bind loopback");
    let port = listener.local_addr().expect("local address").port();
    drop(listener);
    port
}

// ---------------------------------------------------------------- bad input

#[test]
fn bad_inputs_fail_cleanly_and_keep_the_existing_output() {
    let dir = tempfile::tempdir().unwrap();
    let wav = noise_wav(dir.path(), 4096);
    let wav = s(&wav);
    let raw = dir.path().join("samples.bin");
    fs::write(&raw, f32_le_bytes(&noise_f32(4096, 1.0, 3))).unwrap();
    let raw = s(&raw).to_string();
    let not_wav = dir.path().join("garbage.wav");
    fs::write(&not_wav, b"this is not a RIFF file at all, just text").unwrap();
    let not_wav = s(&not_wav).to_string();
    let missing = dir.path().join("missing.wav");
    let missing = s(&missing).to_string();
    let tcp = format!("tcp://127.0.0.1:{}", dead_port());
    let out = dir.path().join("out.csv");
    let out_s = s(&out).to_string();
    let json = dir.path().join("out.json");
    let json_s = s(&json).to_string();

    // (what, args, expected exit code); clap's own usage errors also exit 2.
    let cases: Vec<(&str, Vec<&str>, i32)> = vec![
        (
            "segment 0",
            vec!["spectrum", wav, "--segment", "0", "-o", &out_s],
            2,
        ),
        (
            "segment longer than the data",
            vec!["spectrum", wav, "--segment", "8192", "-o", &out_s],
            2,
        ),
        (
            "overlap 1",
            vec!["spectrum", wav, "--overlap", "1", "-o", &out_s],
            2,
        ),
        (
            "overlap negative",
            vec!["spectrum", wav, "--overlap=-0.2", "-o", &out_s],
            2,
        ),
        (
            "rate 0",
            vec![
                "spectrum",
                &raw,
                "--sample-format",
                "f32",
                "--rate",
                "0",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "rate negative",
            vec![
                "spectrum",
                &raw,
                "--sample-format",
                "f32",
                "--rate=-1e3",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "unknown window",
            vec!["spectrum", wav, "--window", "kaiser", "-o", &out_s],
            2,
        ),
        (
            "unknown format",
            vec![
                "spectrum",
                &raw,
                "--sample-format",
                "u8",
                "--rate",
                "1e3",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "unknown detrend",
            vec!["spectrum", wav, "--detrend", "cubic", "-o", &out_s],
            2,
        ),
        (
            "raw channel out of range",
            vec![
                "spectrum",
                &raw,
                "--sample-format",
                "f32",
                "--rate",
                "1e3",
                "--channels",
                "2",
                "--channel",
                "2",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "wav channel out of range",
            vec!["spectrum", wav, "--channel", "1", "-o", &out_s],
            2,
        ),
        (
            "raw without rate",
            vec!["spectrum", &raw, "--sample-format", "f32", "-o", &out_s],
            2,
        ),
        (
            "raw without format",
            vec!["spectrum", &raw, "--rate", "1e3", "-o", &out_s],
            2,
        ),
        (
            "stdin without format",
            vec!["spectrum", "-", "--rate", "1e3", "-o", &out_s],
            2,
        ),
        ("missing file", vec!["spectrum", &missing, "-o", &out_s], 2),
        ("not a wav", vec!["spectrum", &not_wav, "-o", &out_s], 2),
        (
            "tcp nobody listens",
            vec![
                "spectrum",
                &tcp,
                "--sample-format",
                "f32",
                "--rate",
                "1e3",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "follow without averages",
            vec!["spectrum", wav, "--follow", "-o", &out_s],
            2,
        ),
        (
            "zero volts per unit",
            vec!["spectrum", wav, "--volts-per-unit", "0", "-o", &out_s],
            2,
        ),
        (
            "m-per-v and bath temperature",
            vec![
                "spectrum",
                wav,
                "--m-per-v",
                "1e-9",
                "--bath-temperature",
                "4",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "tone frequency without size",
            vec!["spectrum", wav, "--tone-freq", "1e3", "-o", &out_s],
            2,
        ),
        (
            "equipartition without mass",
            vec![
                "spectrum",
                wav,
                "--bath-temperature",
                "4",
                "--mode-band",
                "1e3:2e3",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "bad band",
            vec![
                "spectrum",
                wav,
                "--bath-temperature",
                "4",
                "--mode-band",
                "2e3:1e3",
                "--mass",
                "1e-13",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "absurd segment on stdin",
            vec![
                "spectrum",
                "-",
                "--sample-format",
                "f32",
                "--rate",
                "1e3",
                "--segment",
                "1000000000000",
                "-o",
                &out_s,
            ],
            2,
        ),
        (
            "output folder missing",
            vec!["spectrum", wav, "-o", "/nonexistent-folder-xyz/out.csv"],
            2,
        ),
    ];
    for (what, args, code) in &cases {
        fs::write(&out, PRECIOUS).unwrap();
        let output = run(args);
        assert_clean_failure(&output, *code, what, Some((&out, PRECIOUS)));
    }

    let analyze_cases: Vec<(&str, Vec<&str>)> = vec![
        (
            "carrier without lo side",
            vec!["analyze", wav, "--carrier", "2e3", "-o", &json_s],
        ),
        (
            "lo side without carrier",
            vec!["analyze", wav, "--lo-side", "above", "-o", &json_s],
        ),
        (
            "given and tone calibration",
            vec![
                "analyze",
                wav,
                "--m-per-v",
                "1",
                "--tone-freq",
                "1e3",
                "--tone-rms-m",
                "1e-12",
                "-o",
                &json_s,
            ],
        ),
        (
            "tone amplitude and pm depth",
            vec![
                "analyze",
                wav,
                "--tone-freq",
                "1e3",
                "--tone-rms-m",
                "1e-12",
                "--pm-depth",
                "1e-3",
                "--freq-pull",
                "1e18",
                "-o",
                &json_s,
            ],
        ),
        (
            "pm depth without pull",
            vec![
                "analyze",
                wav,
                "--tone-freq",
                "1e3",
                "--pm-depth",
                "1e-3",
                "-o",
                &json_s,
            ],
        ),
        (
            "negative mass",
            vec!["analyze", wav, "--mass=-1e-13", "-o", &json_s],
        ),
        ("missing file", vec!["analyze", &missing, "-o", &json_s]),
        (
            "segment too long",
            vec!["analyze", wav, "--segment", "65536", "-o", &json_s],
        ),
    ];
    for (what, args) in &analyze_cases {
        fs::write(&json, PRECIOUS).unwrap();
        let output = run(args);
        assert_clean_failure(&output, 2, what, Some((&json, PRECIOUS)));
    }
}

#[test]
fn an_all_nan_record_is_refused_not_written() {
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("nan.wav");
    write_wav_f32(&wav, 1000, 1, &vec![f32::NAN; 2048]);
    let out = dir.path().join("out.csv");
    fs::write(&out, PRECIOUS).unwrap();
    let output = run(&["spectrum", s(&wav), "--segment", "256", "-o", s(&out)]);
    assert_clean_failure(&output, 2, "all NaN", Some((&out, PRECIOUS)));
    assert!(
        stderr(&output).contains("non-finite"),
        "{}",
        stderr(&output)
    );
}

#[test]
fn overflowing_scale_is_an_error_not_inf_in_the_csv() {
    let dir = tempfile::tempdir().unwrap();
    let wav = noise_wav(dir.path(), 4096);
    let out = dir.path().join("out.csv");
    fs::write(&out, PRECIOUS).unwrap();
    let output = run(&[
        "spectrum",
        s(&wav),
        "--segment",
        "512",
        "--volts-per-unit",
        "1e300",
        "-o",
        s(&out),
    ]);
    assert_clean_failure(&output, 2, "overflow", Some((&out, PRECIOUS)));
}

#[test]
fn a_closed_stdout_pipe_exits_quietly() {
    let dir = tempfile::tempdir().unwrap();
    let wav = noise_wav(dir.path(), 1 << 17);
    let mut child = bin()
        .args(["spectrum", s(&wav), "--segment", "65536", "-o", "-"])
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Read one chunk, then hang up: the rest of the ~1 MB of CSV hits a broken pipe.
    let mut stdout = child.stdout.take().unwrap();
    let mut first = [0u8; 64];
    let _ = stdout.read(&mut first).unwrap();
    drop(stdout);
    let mut err = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    let status = child.wait().unwrap();
    assert!(status.success(), "exit {status:?}, stderr: {err}");
    assert!(!err.contains("error") && !err.contains("panicked"), "{err}");
}

// ---------------------------------------------------------------- spectrum

#[test]
fn every_source_kind_gives_the_same_csv() {
    let dir = tempfile::tempdir().unwrap();
    let rate = 20_000u32;
    let len = 3 * 4096;
    // Two channels of integer-valued counts: exact in f32, i16 and f64.
    let ch0 = integer_noise(len, 11);
    let ch1 = integer_noise(len, 12);
    let wanted: Vec<f32> = ch1.iter().map(|&v| f32::from(v)).collect();
    let common = ["--segment", "1024", "--overlap", "0.5", "--window", "hann"];

    // 1. WAV f32, mono, holding channel 1's counts.
    let wav = dir.path().join("ch1.wav");
    write_wav_f32(&wav, rate, 1, &wanted);
    let out_wav = dir.path().join("wav.csv");
    let mut args = vec!["spectrum", s(&wav), "-o", s(&out_wav)];
    args.extend(common);
    assert_success(&run(&args), "wav");

    // 2. Raw i16 big-endian, 2 interleaved channels, channel 1.
    let raw = dir.path().join("both.i16be");
    let bytes: Vec<u8> = ch0
        .iter()
        .zip(&ch1)
        .flat_map(|(a, b)| [a.to_be_bytes(), b.to_be_bytes()].concat())
        .collect();
    fs::write(&raw, &bytes).unwrap();
    let out_raw = dir.path().join("raw.csv");
    let mut args = vec![
        "spectrum",
        s(&raw),
        "--sample-format",
        "i16",
        "--endian",
        "big",
        "--channels",
        "2",
        "--channel",
        "1",
        "--rate",
        "20000",
        "-o",
        s(&out_raw),
    ];
    args.extend(common);
    assert_success(&run(&args), "raw i16 big-endian 2 channels");

    // 3. The same raw bytes on stdin.
    let out_stdin = dir.path().join("stdin.csv");
    let mut args = vec![
        "spectrum",
        "-",
        "--sample-format",
        "i16",
        "--endian",
        "big",
        "--channels",
        "2",
        "--channel",
        "1",
        "--rate",
        "20000",
        "-o",
        s(&out_stdin),
    ];
    args.extend(common);
    assert_success(&run_with_stdin(&args, &bytes), "stdin");

    // 4. Raw f32 little-endian over TCP from a loopback server.
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let port = listener.local_addr().unwrap().port();
    let payload = f32_le_bytes(&wanted);
    let server = std::thread::spawn(move || {
        let (mut conn, _) = listener.accept().unwrap();
        conn.write_all(&payload).unwrap();
    });
    let out_tcp = dir.path().join("tcp.csv");
    let url = format!("tcp://127.0.0.1:{port}");
    let mut args = vec![
        "spectrum",
        &url,
        "--sample-format",
        "f32",
        "--rate",
        "20000",
        "-o",
        s(&out_tcp),
    ];
    args.extend(common);
    assert_success(&run(&args), "tcp");
    server.join().unwrap();

    let reference = fs::read(&out_wav).unwrap();
    for (what, path) in [("raw", &out_raw), ("stdin", &out_stdin), ("tcp", &out_tcp)] {
        assert_eq!(
            fs::read(path).unwrap(),
            reference,
            "{what} CSV differs from the WAV one"
        );
    }
}

#[test]
fn csv_has_every_bin_from_dc_to_nyquist_and_the_white_noise_level() {
    let dir = tempfile::tempdir().unwrap();
    let wav = noise_wav(dir.path(), 1 << 16);
    let out = dir.path().join("out.csv");
    let output = run(&["spectrum", s(&wav), "--segment", "1024", "-o", s(&out)]);
    assert_success(&output, "spectrum");
    let csv = read_csv(&out);
    assert_eq!(csv.headers, ["frequency_hz", "psd_v2_per_hz"]);
    assert_eq!(csv.rows.len(), 513, "N/2 + 1 rows");
    let f = csv.column("frequency_hz");
    assert_eq!(f[0], 0.0);
    assert_eq!(*f.last().unwrap(), 5000.0, "last row is Nyquist");
    for (k, fk) in f.iter().enumerate() {
        assert_eq!(*fk, k as f64 * 10_000.0 / 1024.0);
    }
    // White noise of variance σ² has the one-sided level 2σ²/f_s (METHODS.md §1, Heinzel et
    // al. 2002 §9). σ = 0.5 V, f_s = 10 kHz → 5e-5 V²/Hz. The mean over 511 inner bins of a
    // K = 127 average scatters by ~1/√(0.95·127·511/1.4) ≈ 0.5 %; allow 3 %.
    let p = csv.column("psd_v2_per_hz");
    let inner = &p[1..512];
    let mean = inner.iter().sum::<f64>() / inner.len() as f64;
    assert!((mean / 5e-5 - 1.0).abs() < 0.03, "mean level {mean}");
    assert!(p.iter().all(|v| v.is_finite() && *v >= 0.0));
}

#[test]
fn given_calibration_adds_the_m2_column() {
    let dir = tempfile::tempdir().unwrap();
    let wav = noise_wav(dir.path(), 8192);
    let out = dir.path().join("out.csv");
    let output = run(&[
        "spectrum",
        s(&wav),
        "--segment",
        "512",
        "--m-per-v",
        "2e-9",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "calibrated spectrum");
    let csv = read_csv(&out);
    assert_eq!(
        csv.headers,
        ["frequency_hz", "psd_v2_per_hz", "psd_m2_per_hz"]
    );
    for row in &csv.rows {
        let want = row[1] * 4e-18;
        assert!((row[2] - want).abs() <= 1e-15 * want.abs(), "{row:?}");
    }
}

/// `stillpoint spectrum` against scipy.signal.welch on committed inputs
/// (tests/data/cli/make_reference.py, numpy 2.4.6, scipy 1.17.1): 1e-9 relative.
#[test]
fn spectrum_agrees_with_scipy_welch() {
    let dir = tempfile::tempdir().unwrap();
    let data = data_dir();
    let f32_wav = data.join("noise_f32.wav");
    let i16_wav = data.join("noise_i16.wav");
    let cases: Vec<(&str, &Path, Vec<&str>)> = vec![
        ("hann_mean_50", &f32_wav, vec!["--segment", "1024"]),
        (
            "flattop_linear_75",
            &f32_wav,
            vec![
                "--segment",
                "512",
                "--overlap",
                "0.75",
                "--window",
                "flattop",
                "--detrend",
                "linear",
            ],
        ),
        (
            "bh_i16_vpu2.5_0",
            &i16_wav,
            vec![
                "--segment",
                "256",
                "--overlap",
                "0",
                "--window",
                "blackman-harris",
                "--volts-per-unit",
                "2.5",
            ],
        ),
        (
            "hamming_none_median",
            &f32_wav,
            vec![
                "--segment",
                "1024",
                "--window",
                "hamming",
                "--detrend",
                "none",
                "--averaging",
                "median",
            ],
        ),
    ];
    for (name, input, extra) in cases {
        let out = dir.path().join(format!("{name}.csv"));
        let mut args = vec!["spectrum", s(input), "-o", s(&out)];
        args.extend(extra);
        assert_success(&run(&args), name);
        let ours = read_csv(&out);
        let reference = read_csv(&data.join(format!("{name}.csv")));
        assert_eq!(ours.rows.len(), reference.rows.len(), "{name}: bins");
        let peak = reference
            .column("psd_v2_per_hz")
            .iter()
            .cloned()
            .fold(0.0, f64::max);
        for (a, b) in ours.rows.iter().zip(&reference.rows) {
            // scipy forms k/(N·(1/f_s)), we form k·(f_s/N): equal to rounding.
            assert!(
                (a[0] - b[0]).abs() <= 1e-12 * b[0].abs(),
                "{name}: frequency"
            );
            let tol = 1e-9 * b[1].abs() + 1e-15 * peak;
            assert!(
                (a[1] - b[1]).abs() <= tol,
                "{name}: {} vs {} at {} Hz",
                a[1],
                b[1],
                a[0]
            );
        }
    }
}

#[test]
fn averages_limits_the_segments_and_default_segment_fits_a_short_record() {
    let dir = tempfile::tempdir().unwrap();
    let wav = noise_wav(dir.path(), 10_000);
    // Default segment for 10 000 samples: largest power of two ≤ 1250 → 1024 (513 rows).
    let out = dir.path().join("default.csv");
    assert_success(
        &run(&["spectrum", s(&wav), "-o", s(&out)]),
        "default segment",
    );
    assert_eq!(read_csv(&out).rows.len(), 513);
    // --averages 1 uses only the first segment: the same as a record of exactly 1024 samples.
    let one = dir.path().join("one.csv");
    let all = dir.path().join("all.csv");
    for (path, extra) in [(&one, Some("1")), (&all, None)] {
        let mut args = vec!["spectrum", s(&wav), "--segment", "1024", "-o", s(path)];
        if let Some(k) = extra {
            args.extend(["--averages", k]);
        }
        assert_success(&run(&args), "averages");
    }
    assert_ne!(fs::read(&one).unwrap(), fs::read(&all).unwrap());
    let short = dir.path().join("short.wav");
    write_wav_f32(&short, 10_000, 1, &noise_f32(1024, 0.5, 7));
    let short_out = dir.path().join("short.csv");
    assert_success(
        &run(&[
            "spectrum",
            s(&short),
            "--segment",
            "1024",
            "-o",
            s(&short_out),
        ]),
        "short",
    );
    assert_eq!(fs::read(&one).unwrap(), fs::read(&short_out).unwrap());
}

/// `--averages K` with the median, max-hold and exponential averages uses exactly the first
/// K segment positions, like a record of (K − 1)·D + N samples (the parallel averager
/// transforms ahead in groups, so the CLI must cut the stream, not count finished segments).
#[test]
fn averages_limits_every_averaging_mode_to_the_first_k_segments() {
    let dir = tempfile::tempdir().unwrap();
    let wav = noise_wav(dir.path(), 200_000);
    let short = dir.path().join("short.wav");
    write_wav_f32(&short, 10_000, 1, &noise_f32(4 * 512 + 1024, 0.5, 7));
    for averaging in ["median", "max-hold", "exponential"] {
        let limited = dir.path().join(format!("{averaging}-5.csv"));
        let exact = dir.path().join(format!("{averaging}-short.csv"));
        let full = dir.path().join(format!("{averaging}-all.csv"));
        for (source, path, k) in [
            (&wav, &limited, Some("5")),
            (&short, &exact, None),
            (&wav, &full, None),
        ] {
            let mut args = vec![
                "spectrum",
                s(source),
                "--segment",
                "1024",
                "--averaging",
                averaging,
                "-o",
                s(path),
            ];
            if let Some(k) = k {
                args.extend(["--averages", k]);
            }
            assert_success(&run(&args), averaging);
        }
        assert_eq!(
            fs::read(&limited).unwrap(),
            fs::read(&exact).unwrap(),
            "{averaging}"
        );
        assert_ne!(
            fs::read(&limited).unwrap(),
            fs::read(&full).unwrap(),
            "{averaging}"
        );
    }
}

#[test]
fn damaged_input_is_analysed_with_one_warning_each() {
    let dir = tempfile::tempdir().unwrap();
    // A WAV whose recorder died: header says 8192 samples, 6000 are present.
    let wav = noise_wav(dir.path(), 8192);
    let bytes = fs::read(&wav).unwrap();
    let cut = dir.path().join("cut.wav");
    fs::write(&cut, &bytes[..bytes.len() - 4 * 2192]).unwrap();
    let out = dir.path().join("cut.csv");
    let output = run(&["spectrum", s(&cut), "--segment", "1024", "-o", s(&out)]);
    assert_success(&output, "truncated wav");
    let err = stderr(&output);
    assert_eq!(
        err.lines().filter(|l| l.contains("warning")).count(),
        1,
        "{err}"
    );
    assert!(
        err.contains("6000"),
        "warning should say how much was analysed: {err}"
    );
    assert_eq!(read_csv(&out).rows.len(), 513);

    // Raw f32 with 3 stray bytes at the end.
    let raw = dir.path().join("partial.f32");
    let mut raw_bytes = f32_le_bytes(&noise_f32(4096, 1.0, 5));
    raw_bytes.extend([1, 2, 3]);
    fs::write(&raw, raw_bytes).unwrap();
    let out = dir.path().join("partial.csv");
    let output = run(&[
        "spectrum",
        s(&raw),
        "--sample-format",
        "f32",
        "--rate",
        "1000",
        "--segment",
        "512",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "partial frame");
    let err = stderr(&output);
    assert_eq!(
        err.lines().filter(|l| l.contains("warning")).count(),
        1,
        "{err}"
    );
    assert!(err.contains("3 trailing bytes"), "{err}");

    // NaNs in one place: the segments holding them are skipped, the rest averaged.
    let mut samples = noise_f32(8192, 1.0, 9);
    samples[5000] = f32::NAN;
    samples[5001] = f32::INFINITY;
    let nan_wav = dir.path().join("nan.wav");
    write_wav_f32(&nan_wav, 1000, 1, &samples);
    let out = dir.path().join("nan.csv");
    let output = run(&[
        "spectrum",
        s(&nan_wav),
        "--segment",
        "1024",
        "--overlap",
        "0",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "non-finite samples");
    let err = stderr(&output);
    assert_eq!(
        err.lines().filter(|l| l.contains("warning")).count(),
        1,
        "{err}"
    );
    assert!(
        err.contains("2 non-finite samples") && err.contains("1 segment skipped"),
        "{err}"
    );
    let text = fs::read_to_string(&out).unwrap();
    assert!(
        !text.contains("NaN") && !text.contains("inf"),
        "non-finite value in the CSV"
    );
}

#[test]
fn help_speaks_in_units_and_shows_examples() {
    let output = run(&["spectrum", "--help"]);
    assert_success(&output, "help");
    let text = stdout(&output);
    for needle in [
        "--segment",
        "--overlap",
        "[default: 0.5]",
        "[default: hann]",
        "Hz",
        "m/V",
        "Examples:",
        "kg",
    ] {
        assert!(text.contains(needle), "spectrum --help lacks {needle}");
    }
    for sub in ["monitor", "spectrum", "analyze", "synth", "bench"] {
        assert!(
            stdout(&run(&["--help"])).contains(sub),
            "--help lacks {sub}"
        );
    }
}

// ---------------------------------------------------------------- analyze

/// Every dotted key path of the BRIEF.md JSON contract.
const CONTRACT_KEYS: &[&str] = &[
    "welch.segment",
    "welch.window",
    "welch.overlap",
    "welch.averages",
    "welch.resolution_hz",
    "welch.enbw_hz",
    "calibration.method",
    "calibration.m_per_v",
    "calibration.m_per_v_uncertainty",
    "mode.frequency_hz",
    "mode.frequency_hz_uncertainty",
    "mode.linewidth_hz",
    "mode.linewidth_hz_uncertainty",
    "mode.quality_factor",
    "mode.quality_factor_uncertainty",
    "mode.variance_m2",
    "mode.variance_m2_uncertainty",
    "mode.peak_psd_m2_per_hz",
    "mode.peak_psd_m2_per_hz_uncertainty",
    "mode.background_psd_m2_per_hz",
    "mode.background_psd_m2_per_hz_uncertainty",
    "quantum.x_zpf_m",
    "quantum.occupancy",
    "quantum.effective_temperature_k",
    "quantum.zero_point_peak_psd_m2_per_hz",
    "quantum.sql_psd_at_resonance_m2_per_hz",
];

/// A record with a thermal-like mode at 1.2 kHz (γ ≈ 10 Hz) over white noise, made here by
/// filtering noise through a damped oscillator (fixed seed).
fn mode_wav(dir: &Path) -> PathBuf {
    let rate = 10_000.0;
    let (f_m, gamma) = (1200.0, 10.0);
    let dt = 1.0 / rate;
    let w = 2.0 * std::f64::consts::PI * f_m;
    let damping = 2.0 * std::f64::consts::PI * gamma;
    // Exact discretisation of a lightly damped oscillator driven by white noise (AR(2)).
    let r = (-damping * dt / 2.0).exp();
    let a1 = 2.0 * r * (w * dt).cos();
    let a2 = -r * r;
    let mut rng = SplitMix(21);
    let (mut y1, mut y2) = (0.0, 0.0);
    let samples: Vec<f32> = (0..(1 << 17))
        .map(|_| {
            let y = a1 * y1 + a2 * y2 + 0.02 * rng.normal();
            y2 = y1;
            y1 = y;
            (y + 0.01 * rng.normal()) as f32
        })
        .collect();
    let path = dir.join("mode.wav");
    write_wav_f32(&path, rate as u32, 1, &samples);
    path
}

#[test]
fn analyze_writes_every_contract_key_and_says_why_nulls_are_null() {
    let dir = tempfile::tempdir().unwrap();
    let wav = mode_wav(dir.path());
    let out = dir.path().join("report.json");
    let output = run(&[
        "analyze",
        s(&wav),
        "--segment",
        "4096",
        "--mode-band",
        "1100:1300",
        "--m-per-v",
        "1e-9",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "analyze");
    let report = read_json(&out);
    for key in CONTRACT_KEYS {
        assert!(json_path(&report, key).is_some(), "missing key {key}");
    }
    assert!(report.get("peaks").is_some_and(serde_json::Value::is_array));
    assert_eq!(
        json_path(&report, "welch.segment"),
        Some(&serde_json::json!(4096))
    );
    assert_eq!(
        json_path(&report, "welch.window"),
        Some(&serde_json::json!("hann"))
    );
    assert_eq!(
        json_path(&report, "calibration.method"),
        Some(&serde_json::json!("given"))
    );
    // No --mass: x_zpf is null and a note says why.
    assert_eq!(
        json_path(&report, "quantum.x_zpf_m"),
        Some(&serde_json::Value::Null)
    );
    let notes = report["notes"].to_string().to_lowercase();
    assert!(
        notes.contains("mass"),
        "no note about the missing mass: {notes}"
    );
    // No --carrier: sidebands absent or null.
    assert!(
        report
            .get("sidebands")
            .is_none_or(serde_json::Value::is_null)
    );
    // The fitted mode is near 1.2 kHz (±2 γ).
    let f_m = json_path(&report, "mode.frequency_hz").and_then(serde_json::Value::as_f64);
    assert!(
        f_m.is_some_and(|f| (f - 1200.0).abs() < 20.0),
        "f_m = {f_m:?}"
    );
    // Summary on stdout, silent with --quiet.
    assert!(stdout(&output).contains("Hz"), "{}", stdout(&output));
    let quiet = run(&[
        "analyze",
        s(&wav),
        "--segment",
        "4096",
        "--mode-band",
        "1100:1300",
        "--quiet",
        "-o",
        s(&out),
    ]);
    assert_success(&quiet, "quiet");
    assert!(stdout(&quiet).is_empty());
    let text = fs::read_to_string(&out).unwrap();
    assert!(!text.contains("NaN") && !text.contains("Infinity"));
}

// ---------------------------------------------------------------- synth and bench

#[test]
fn synth_writes_a_wav_hound_can_read_and_a_truth_sidecar() {
    let dir = tempfile::tempdir().unwrap();
    let list = run(&[
        "synth",
        "no-such-scenario",
        "-o",
        s(&dir.path().join("x.wav")),
    ]);
    assert_clean_failure(&list, 2, "unknown scenario", None);
    let scenario = stillpoint::synth::SCENARIOS
        .first()
        .expect("the synthesiser names at least one scenario");
    let out = dir.path().join("demo.wav");
    let output = run(&[
        "synth",
        scenario,
        "--seed",
        "3",
        "--duration",
        "0.1",
        "--rate",
        "200000",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "synth");
    let reader = hound::WavReader::open(&out).expect("hound opens the synthesised WAV");
    assert_eq!(reader.spec().sample_rate, 200_000);
    assert_eq!(reader.duration(), 20_000);
    let sidecar = fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.extension().is_some_and(|e| e == "json"))
        .expect("a truth sidecar");
    let _ = read_json(&sidecar);
    // Same seed, same bytes.
    let again = dir.path().join("again.wav");
    assert_success(
        &run(&[
            "synth",
            scenario,
            "--seed",
            "3",
            "--duration",
            "0.1",
            "--rate",
            "200000",
            "-o",
            s(&again),
        ]),
        "synth again",
    );
    assert_eq!(fs::read(&out).unwrap(), fs::read(&again).unwrap());
}

#[test]
fn bench_reports_throughput_headroom_and_floor() {
    let output = run(&[
        "bench",
        "--rate",
        "1e5",
        "--segment",
        "1024",
        "--seconds",
        "0.3",
        "--json",
    ]);
    assert_success(&output, "bench");
    let v: serde_json::Value = serde_json::from_str(&stdout(&output)).expect("bench JSON");
    for key in [
        "throughput_samples_per_s",
        "headroom",
        "keeps_up",
        "fft_floor_samples_per_s",
        "ratio_to_floor",
    ] {
        assert!(v.get(key).is_some(), "bench JSON lacks {key}: {v}");
    }
    let throughput = v["throughput_samples_per_s"].as_f64().unwrap();
    let headroom = v["headroom"].as_f64().unwrap();
    assert!(throughput > 0.0 && ((headroom - throughput / 1e5) / headroom).abs() < 1e-9);
    assert_eq!(v["keeps_up"].as_bool().unwrap(), headroom > 1.0);
    // The live path (default --live both): a generator process over a pipe and over
    // loopback TCP, once as fast as it goes and once paced at --rate for 0.5 s. A paced
    // generator writes exactly rate × seconds samples unless its FIFO overflows, so every
    // sample is either averaged or counted as lost; 100 kS/s is far below what even a debug
    // build sustains, so none is lost.
    assert_eq!(v["live_errors"], serde_json::json!([]), "{v}");
    let live = v["live"].as_array().expect("bench JSON lacks live[]");
    let transports: Vec<&str> = live
        .iter()
        .map(|r| r["transport"].as_str().unwrap())
        .collect();
    assert_eq!(transports, ["pipe", "pipe", "tcp", "tcp"], "{v}");
    for run in live {
        assert_eq!(run["dropped_blocks"].as_u64(), Some(0), "{run}");
        let averaged = run["samples_averaged"].as_u64().unwrap();
        assert!(run["segments"].as_u64().unwrap() >= 1, "{run}");
        match run["paced_rate_hz"].as_f64() {
            None => assert!(averaged > 0 && run["samples_per_s"].as_f64().unwrap() > 0.0),
            Some(rate) => {
                assert_eq!(rate, 1e5);
                assert_eq!(run["samples_lost_at_source"].as_u64(), Some(0), "{run}");
                assert_eq!(averaged, 50_000, "{run}");
            }
        }
    }
    let text = run(&[
        "bench",
        "--rate",
        "1e5",
        "--segment",
        "1024",
        "--seconds",
        "0.3",
        "--live",
        "none",
    ]);
    assert_success(&text, "bench text");
    assert!(stdout(&text).contains("keeps up:"), "{}", stdout(&text));
    assert!(!stdout(&text).contains("Live path"), "{}", stdout(&text));
}

/// `bench --channels 2`: the cross-spectral averager's throughput per channel beside the
/// single-channel one, and the live path with two interleaved channels (paced at 50 kS/s per
/// channel for 0.5 s: every one of the 25 000 frames averaged, none lost).
#[test]
fn bench_two_channels_measures_the_cross_averager_and_the_live_pair() {
    let output = run(&[
        "bench",
        "--rate",
        "5e4",
        "--segment",
        "1024",
        "--seconds",
        "0.3",
        "--channels",
        "2",
        "--live",
        "tcp",
        "--json",
    ]);
    assert_success(&output, "bench --channels 2");
    let v: serde_json::Value = serde_json::from_str(&stdout(&output)).expect("bench JSON");
    assert_eq!(v["channels"].as_u64(), Some(2), "{v}");
    let single = v["throughput_samples_per_s"].as_f64().unwrap();
    let cross = v["cross_throughput_samples_per_s"].as_f64().unwrap();
    let ratio = v["cross_ratio"].as_f64().unwrap();
    assert!(
        cross > 0.0 && ((ratio - cross / single) / ratio).abs() < 1e-9,
        "{v}"
    );
    assert!(
        (v["headroom"].as_f64().unwrap() - cross / 5e4).abs() < 1e-9 * cross,
        "{v}"
    );
    assert_eq!(v["live_errors"], serde_json::json!([]), "{v}");
    let live = v["live"].as_array().expect("bench JSON lacks live[]");
    assert_eq!(live.len(), 2, "{v}");
    for run in live {
        assert_eq!(run["channels"].as_u64(), Some(2), "{run}");
        assert!(run["segments"].as_u64().unwrap() >= 1, "{run}");
        if run["paced_rate_hz"].as_f64().is_some() {
            assert_eq!(run["samples_lost_at_source"].as_u64(), Some(0), "{run}");
            assert_eq!(run["samples_averaged"].as_u64(), Some(25_000), "{run}");
        }
    }
    let bad = run(&["bench", "--channels", "3", "--live", "none"]);
    assert_eq!(bad.status.code(), Some(2), "--channels 3 must be refused");
}

/// `synth thermal` → `analyze`: the fitted mode and the tone calibration recover the
/// synthesiser's truth within 4 reported standard deviations (and the reported σ are not
/// absurdly large: ≤ 10 % of the value). The truth comes from the sidecar, i.e. from the
/// formulas of METHODS.md §2/§5b as the synthesiser implements them.
#[test]
fn analyze_recovers_the_synthesised_truth() {
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("thermal.wav");
    assert_success(
        &run(&[
            "synth",
            "thermal",
            "--seed",
            "5",
            "--duration",
            "2",
            "-o",
            s(&wav),
        ]),
        "synth",
    );
    let truth = read_json(&dir.path().join("thermal.truth.json"));
    let f_m = truth["mode"]["frequency_hz"].as_f64().unwrap();
    let tone_hz = truth["tone"]["frequency_hz"].as_f64().unwrap();
    let tone_rms_m = truth["tone"]["rms_m"].as_f64().unwrap();
    let mass = truth["mode"]["mass_kg"].as_f64().unwrap();
    let band = format!("{}:{}", f_m - 600.0, f_m + 600.0);
    let (tone_s, rms_s, mass_s) = (
        tone_hz.to_string(),
        tone_rms_m.to_string(),
        mass.to_string(),
    );
    let out = dir.path().join("report.json");
    let output = run(&[
        "analyze",
        s(&wav),
        "--segment",
        "16384",
        "--tone-freq",
        &tone_s,
        "--tone-rms-m",
        &rms_s,
        "--mode-band",
        &band,
        "--mass",
        &mass_s,
        "--quiet",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "analyze");
    let report = read_json(&out);
    let checks = [
        (
            "mode.frequency_hz",
            truth["mode"]["frequency_hz"].as_f64().unwrap(),
        ),
        (
            "mode.linewidth_hz",
            truth["mode"]["linewidth_hz"].as_f64().unwrap(),
        ),
        (
            "mode.variance_m2",
            truth["mode"]["variance_m2"].as_f64().unwrap(),
        ),
        ("calibration.m_per_v", truth["m_per_v"].as_f64().unwrap()),
        (
            "quantum.x_zpf_m",
            truth["mode"]["x_zpf_m"].as_f64().unwrap(),
        ),
    ];
    for (key, want) in checks {
        let got = json_path(&report, key).and_then(serde_json::Value::as_f64);
        let got = got.unwrap_or_else(|| panic!("{key} is null: {report}"));
        let sigma = json_path(&report, &format!("{key}_uncertainty"))
            .and_then(serde_json::Value::as_f64)
            // x_zpf has no uncertainty key: it follows from the given mass and f_m alone.
            .unwrap_or(1e-3 * want.abs());
        assert!(
            sigma <= 0.1 * got.abs(),
            "{key}: σ {sigma} too large for {got}"
        );
        assert!(
            (got - want).abs() <= 4.0 * sigma,
            "{key}: {got} ± {sigma}, truth {want}"
        );
    }
    assert_eq!(
        json_path(&report, "calibration.method"),
        Some(&serde_json::json!("tone"))
    );

    // spectrum with the same calibration options: psd_m2 = (m/V)² × psd_v2 with analyze's m/V.
    let csv_path = dir.path().join("cal.csv");
    assert_success(
        &run(&[
            "spectrum",
            s(&wav),
            "--segment",
            "16384",
            "--tone-freq",
            &tone_s,
            "--tone-rms-m",
            &rms_s,
            "--mode-band",
            &band,
            "--mass",
            &mass_s,
            "-o",
            s(&csv_path),
        ]),
        "tone-calibrated spectrum",
    );
    let m_per_v = report["calibration"]["m_per_v"].as_f64().unwrap();
    let csv = read_csv(&csv_path);
    assert_eq!(csv.headers.len(), 3);
    for row in csv.rows.iter().filter(|r| r[1] > 0.0) {
        let ratio = row[2] / row[1];
        assert!((ratio / (m_per_v * m_per_v) - 1.0).abs() < 1e-9, "{row:?}");
    }
}

#[test]
fn follow_waits_for_a_growing_file_until_enough_segments() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("growing.f32");
    let samples = noise_f32(5 * 1024, 1.0, 17);
    let bytes = f32_le_bytes(&samples);
    // Two segments' worth now, the rest a little later.
    fs::write(&path, &bytes[..2 * 4096]).unwrap();
    let out = dir.path().join("follow.csv");
    let mut child = bin()
        .args([
            "spectrum",
            s(&path),
            "--sample-format",
            "f32",
            "--rate",
            "1000",
            "--segment",
            "1024",
            "--overlap",
            "0",
            "--averages",
            "4",
            "--follow",
            "-o",
            s(&out),
        ])
        .stdin(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(std::time::Duration::from_millis(400));
    assert!(
        child.try_wait().unwrap().is_none(),
        "finished before the file grew"
    );
    let mut file = fs::OpenOptions::new().append(true).open(&path).unwrap();
    file.write_all(&bytes[2 * 4096..]).unwrap();
    drop(file);
    let status = child.wait().unwrap();
    let mut err = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    assert!(status.success(), "{err}");
    // The same as the first 4 segments of the whole record read at once.
    let whole = dir.path().join("whole.f32");
    fs::write(&whole, &bytes[..4 * 4096]).unwrap();
    let reference = dir.path().join("whole.csv");
    assert_success(
        &run(&[
            "spectrum",
            s(&whole),
            "--sample-format",
            "f32",
            "--rate",
            "1000",
            "--segment",
            "1024",
            "--overlap",
            "0",
            "-o",
            s(&reference),
        ]),
        "whole",
    );
    assert_eq!(fs::read(&out).unwrap(), fs::read(&reference).unwrap());
}

#[test]
fn monitor_rejects_bad_options_before_opening_a_window() {
    for args in [
        &["monitor", "-", "--rate", "1e3"][..],
        &["monitor", "x.bin", "--sample-format", "f32"][..],
        &["monitor", "x.wav", "--carrier", "1e5"][..],
        &["monitor", "x.wav", "--overlap", "1.5"][..],
    ] {
        let output = run(args);
        assert_clean_failure(&output, 2, &format!("{args:?}"), None);
    }
}

/// `--lo-side` decides which electronic line is the optical red one (METHODS.md §6): on the
/// synthesised heterodyne record (LO above the laser, n̄ = 2) `above` recovers n̄ within 4σ,
/// `below` swaps the lines (R → 1/R) and so finds no occupancy (R < 1).
#[test]
fn lo_side_picks_the_red_sideband() {
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("het.wav");
    assert_success(
        &run(&[
            "synth",
            "heterodyne",
            "--seed",
            "2",
            "--duration",
            "1",
            "-o",
            s(&wav),
        ]),
        "synth heterodyne",
    );
    let truth = read_json(&dir.path().join("het.truth.json"));
    assert_eq!(truth["sidebands"]["lo_side"], "above");
    let n_true = truth["sidebands"]["occupancy"].as_f64().unwrap();
    let carrier = truth["sidebands"]["carrier_hz"]
        .as_f64()
        .unwrap()
        .to_string();
    let f_m = truth["sidebands"]["mechanical_frequency_hz"]
        .as_f64()
        .unwrap();
    let band = format!("{}:{}", f_m - 1500.0, f_m + 1500.0);
    let mut ratios = Vec::new();
    for side in ["above", "below"] {
        let out = dir.path().join(format!("{side}.json"));
        let output = run(&[
            "analyze",
            s(&wav),
            "--segment",
            "16384",
            "--carrier",
            &carrier,
            "--lo-side",
            side,
            "--mode-band",
            &band,
            "--quiet",
            "-o",
            s(&out),
        ]);
        assert_success(&output, side);
        let report = read_json(&out);
        let sidebands = &report["sidebands"];
        ratios.push(sidebands["ratio"].as_f64().unwrap());
        if side == "above" {
            let n = sidebands["occupancy"].as_f64().unwrap();
            let sigma = sidebands["occupancy_uncertainty"].as_f64().unwrap();
            assert!(
                (n - n_true).abs() <= 4.0 * sigma,
                "n = {n} ± {sigma}, truth {n_true}"
            );
            assert!(sigma < 0.5 * n_true, "σ = {sigma}");
        } else {
            assert!(sidebands["occupancy"].is_null());
        }
    }
    assert!((ratios[0] * ratios[1] - 1.0).abs() < 1e-9, "{ratios:?}");
}

#[test]
fn clipping_is_reported_once() {
    let dir = tempfile::tempdir().unwrap();
    let mut samples = integer_noise(8192, 4);
    samples[100..110].fill(i16::MAX);
    samples[200] = i16::MIN;
    let wav = dir.path().join("clip.wav");
    write_wav_i16(&wav, 10_000, &samples);
    let out = dir.path().join("clip.csv");
    let output = run(&["spectrum", s(&wav), "--segment", "1024", "-o", s(&out)]);
    assert_success(&output, "clipped");
    let err = stderr(&output);
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(
        err.contains("warning") && err.contains("11 samples") && err.contains("clipping"),
        "{err}"
    );
}

/// `--mass-uncertainty` and `--bath-temperature-uncertainty` enter the reported 1σ by
/// first-order propagation (common practice): with equipartition, (σ_c/c)² gains
/// ¼(σ_m/m)² + ¼(x/sinh x · σ_T/T)² (x/sinh x = 1 to 1e-10 at 86 kHz and 295 K) and σ_n̄²
/// gains (dn̄/dT · σ_T)² (= (n̄ σ_T/T)² classically); with a tone, m/V is unchanged and
/// σ_n̄² gains ((n̄ + ½) σ_m/m)². Values stay; only the uncertainties grow.
#[test]
fn mass_and_temperature_uncertainties_propagate() {
    let dir = tempfile::tempdir().unwrap();
    let wav = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-streams/thermal.wav");
    let analyze = |name: &str, extra: &[&str]| -> (serde_json::Value, String) {
        let out = dir.path().join(format!("{name}.json"));
        let mut args = vec![
            "analyze",
            s(&wav),
            "--segment",
            "16384",
            "--mode-band",
            "85000:87200",
            "--mass",
            "2e-12",
            "-o",
            s(&out),
        ];
        args.extend_from_slice(extra);
        let output = run(&args);
        assert_success(&output, name);
        (
            read_json(&out),
            String::from_utf8_lossy(&output.stderr).into_owned(),
        )
    };
    let num = |v: &serde_json::Value, key: &str| -> f64 {
        let (section, field) = key.split_once('.').unwrap();
        v[section][field]
            .as_f64()
            .unwrap_or_else(|| panic!("{key}: {v}"))
    };
    let (a, a_err) = analyze("equipartition", &["--bath-temperature", "295"]);
    let (b, b_err) = analyze(
        "equipartition-sigma",
        &[
            "--bath-temperature",
            "295",
            "--mass-uncertainty",
            "2e-13",
            "--bath-temperature-uncertainty",
            "2.95",
        ],
    );
    assert!(a_err.contains("leaves out the error"), "{a_err}");
    assert!(!b_err.contains("leaves out the error"), "{b_err}");
    // The report says what it assumed.
    assert_eq!(num(&b, "quantum.mass_kg"), 2e-12);
    assert_eq!(num(&b, "quantum.mass_kg_uncertainty"), 2e-13);
    assert_eq!(num(&b, "quantum.bath_temperature_k"), 295.0);
    assert_eq!(num(&b, "quantum.bath_temperature_k_uncertainty"), 2.95);
    assert!(a["quantum"]["mass_kg_uncertainty"].is_null());
    let c = num(&a, "calibration.m_per_v");
    assert_eq!(num(&b, "calibration.m_per_v"), c);
    let rel = |v: &serde_json::Value| num(v, "calibration.m_per_v_uncertainty") / c;
    let gained = rel(&b).powi(2) - rel(&a).powi(2);
    let expected = 0.25 * (0.1f64.powi(2) + 0.01f64.powi(2));
    assert!(
        (gained / expected - 1.0).abs() < 1e-6,
        "{gained} vs {expected}"
    );
    let n = num(&a, "quantum.occupancy");
    assert_eq!(num(&b, "quantum.occupancy"), n);
    let gained = num(&b, "quantum.occupancy_uncertainty").powi(2)
        - num(&a, "quantum.occupancy_uncertainty").powi(2);
    let expected = (n * 0.01).powi(2);
    assert!(
        (gained / expected - 1.0).abs() < 1e-4,
        "{gained} vs {expected}"
    );

    let tone = ["--tone-freq", "89000", "--tone-rms-m", "2e-12"];
    let (t, _) = analyze("tone", &tone);
    let (u, _) = analyze(
        "tone-sigma",
        &[&tone[..], &["--mass-uncertainty", "2e-13"]].concat(),
    );
    assert_eq!(
        num(&t, "calibration.m_per_v_uncertainty"),
        num(&u, "calibration.m_per_v_uncertainty")
    );
    let n = num(&t, "quantum.occupancy");
    let gained = num(&u, "quantum.occupancy_uncertainty").powi(2)
        - num(&t, "quantum.occupancy_uncertainty").powi(2);
    let expected = ((n + 0.5) * 0.1).powi(2);
    assert!(
        (gained / expected - 1.0).abs() < 1e-6,
        "{gained} vs {expected}"
    );

    // Bad values are usage errors.
    let bad_out = dir.path().join("bad.json");
    for bad in [
        &["--bath-temperature", "295", "--mass-uncertainty", "-1"][..],
        &[
            "--bath-temperature",
            "295",
            "--bath-temperature-uncertainty",
            "nan",
        ][..],
        &[
            "--tone-freq",
            "89000",
            "--tone-rms-m",
            "2e-12",
            "--bath-temperature-uncertainty",
            "1",
        ][..],
    ] {
        let mut args = vec![
            "analyze",
            s(&wav),
            "--mode-band",
            "85000:87200",
            "--mass",
            "2e-12",
        ];
        args.extend_from_slice(bad);
        args.extend(["-o", s(&bad_out)]);
        let output = run(&args);
        assert_eq!(output.status.code(), Some(2), "{bad:?}");
        assert!(!bad_out.exists());
    }
}

/// A stream that ends before `--averages K` is reached still gives its spectrum, with one
/// warning that says how many of the K averages it holds (stdin closed early).
#[test]
fn a_source_that_ends_before_k_averages_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("short.csv");
    // 10 240 f32 samples: 9 segments of 2048 at 50 % overlap.
    let output = run_with_stdin(
        &[
            "spectrum",
            "-",
            "--sample-format",
            "f32",
            "--rate",
            "1e4",
            "--segment",
            "2048",
            "--averages",
            "100",
            "-o",
            s(&out),
        ],
        &f32_le_bytes(&noise_f32(10_240, 0.5, 3)),
    );
    let stderr = stderr(&output);
    assert_success(&output, "short stdin");
    assert!(
        stderr.contains("the source ended after 10240 samples: 9 of the 100 averages asked for"),
        "{stderr}"
    );
    // …and a status line that the live stream closed.
    assert!(
        stderr.contains("stillpoint: note: stdin closed after 10240 samples (1.024 s at 10000 Hz)"),
        "{stderr}"
    );
    assert_eq!(stderr.lines().count(), 2, "{stderr}");
    assert_eq!(read_csv(&out).rows.len(), 1025);
}

/// Issue 10: G is often quoted signed. `--freq-pull -G` (both `--freq-pull -1e18` and
/// `--freq-pull=-1e18`) calibrates exactly as `+G`, because x_cal,pk = β f_mod/|G/2π|
/// (METHODS.md §5b; Gorodetsky et al., Opt. Express 18, 23236 (2010)); 0 and non-finite
/// values stay one-line errors with exit status 2.
#[test]
fn a_negative_freq_pull_calibrates_as_its_absolute_value() {
    let dir = tempfile::tempdir().unwrap();
    let wav = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-streams/thermal.wav");
    let out = dir.path().join("pull.json");
    let common = [
        "analyze",
        s(&wav),
        "--segment",
        "16384",
        "--mode-band",
        "85000:87200",
        "--tone-freq",
        "89000",
        "--pm-depth",
        "1e-3",
    ];
    let m_per_v = |pull: &[&str]| -> f64 {
        let mut args = common.to_vec();
        args.extend_from_slice(pull);
        args.extend_from_slice(&["-q", "-o", s(&out)]);
        let output = run(&args);
        assert_success(&output, &format!("{pull:?}"));
        let v = read_json(&out);
        assert_eq!(v["calibration"]["method"], "tone", "{v}");
        v["calibration"]["m_per_v"].as_f64().unwrap()
    };
    let plus = m_per_v(&["--freq-pull", "1e18"]);
    assert!(plus.is_finite() && plus > 0.0);
    assert_eq!(m_per_v(&["--freq-pull", "-1e18"]), plus);
    assert_eq!(m_per_v(&["--freq-pull=-1e18"]), plus);
    // The help says how a signed G is read.
    let help = stdout(&run(&["analyze", "--help"]));
    assert!(help.contains("|G|"), "{help}");
    for bad in ["0", "-0", "nan", "inf", "-inf", "fast"] {
        fs::write(&out, PRECIOUS).unwrap();
        let mut args = common.to_vec();
        let flag = format!("--freq-pull={bad}");
        args.extend_from_slice(&[&flag, "-o", s(&out)]);
        let output = run(&args);
        assert_clean_failure(&output, 2, &flag, Some((&out, PRECIOUS)));
    }
}

// ---------------------------------------------------------------- band and cumulative rms

/// tests/data/rms/rms_refs.json (tests/reference/make_rms_refs.py, numpy 2.4.6, scipy 1.17.1).
fn rms_refs() -> serde_json::Value {
    read_json(&Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/rms/rms_refs.json"))
}

/// The Welch test record, with the Welch options of one reference case.
fn rms_case_args(case: &serde_json::Value) -> Vec<String> {
    let input = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/welch/input.f64");
    vec![
        s(&input).to_string(),
        "--sample-format".into(),
        "f64".into(),
        "--rate".into(),
        "2000".into(),
        "--segment".into(),
        case["segment"].to_string(),
        "--overlap".into(),
        case["overlap"].to_string(),
        "--window".into(),
        case["window"].as_str().expect("window name").into(),
        "--detrend".into(),
        case["detrend"].as_str().expect("detrend name").into(),
    ]
}

fn assert_rel(a: f64, b: f64, rel: f64, what: &str) {
    assert!(
        (a - b).abs() <= rel * b.abs(),
        "{what}: {a:e} vs {b:e} (rel {:.2e})",
        ((a - b) / b).abs()
    );
}

/// Issue 10 / BRIEF "units": `spectrum --cumulative-rms` adds cumulative_rms_v (and, when
/// calibrated, cumulative_rms_m) after the contract's columns, √(Σ_{j≤k} PSD_j Δf) rising from
/// DC; checked against numpy's sqrt(cumsum(psd)·df) on scipy.signal.welch of the committed
/// Welch record to ≤ 1e-9 relative. The last value is the total rms (Parseval, METHODS §1).
#[test]
fn rms_cumulative_column_matches_numpy() {
    let dir = tempfile::tempdir().unwrap();
    let refs = rms_refs();
    for case in refs["cases"].as_array().unwrap() {
        let out = dir.path().join("cum.csv");
        let mut args: Vec<String> = vec!["spectrum".into()];
        args.extend(rms_case_args(case));
        args.extend(["--cumulative-rms".into(), "-o".into(), s(&out).into()]);
        let argv: Vec<&str> = args.iter().map(String::as_str).collect();
        assert_success(&run(&argv), "spectrum --cumulative-rms");
        let csv = read_csv(&out);
        assert_eq!(
            csv.headers,
            ["frequency_hz", "psd_v2_per_hz", "cumulative_rms_v"]
        );
        let want: Vec<f64> = case["cumulative_rms_v"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let got = csv.column("cumulative_rms_v");
        assert_eq!(got.len(), want.len());
        for (k, (a, b)) in got.iter().zip(&want).enumerate() {
            assert_rel(*a, *b, 1e-9, &format!("{} bin {k}", case["window"]));
        }
        assert!(got.windows(2).all(|w| w[1] >= w[0]), "rising");
        // Calibrated: the contract columns keep their names and order; the rms in metres
        // is m/V × the rms in volts.
        let c = 2.5e-9;
        let mut cal = argv.clone();
        cal.extend(["--m-per-v", "2.5e-9"]);
        assert_success(&run(&cal), "spectrum --cumulative-rms --m-per-v");
        let csv = read_csv(&out);
        assert_eq!(
            csv.headers,
            [
                "frequency_hz",
                "psd_v2_per_hz",
                "psd_m2_per_hz",
                "cumulative_rms_v",
                "cumulative_rms_m"
            ]
        );
        for (m, b) in csv.column("cumulative_rms_m").iter().zip(&want) {
            assert_rel(*m, c * b, 1e-9, "cumulative_rms_m");
        }
    }
}

/// `analyze --rms-band LO:HI`: rms.v = √(Σ PSD_k Δf) over the bins with LO ≤ f_k ≤ HI against
/// numpy on scipy's Welch PSD (≤ 1e-9 relative), the bin count, rms.m = m/V × rms.v; without
/// the option the rms is over --mode-band (rms.source = "mode-band"). The 100–150 Hz band
/// holds the record's tone of amplitude 2 (rms √2) over unit-variance white noise
/// (2 × 50 Hz / 2000 Hz of it): 1.43 V, as Parseval says (common practice).
#[test]
fn rms_band_matches_numpy() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("rms.json");
    let refs = rms_refs();
    for case in refs["cases"].as_array().unwrap() {
        for band in case["bands"].as_array().unwrap() {
            let lo = band["band_hz"][0].as_f64().unwrap();
            let hi = band["band_hz"][1].as_f64().unwrap();
            let want = band["rms_v"].as_f64().unwrap();
            let text = format!("{lo:?}:{hi:?}");
            let mut args: Vec<String> = vec!["analyze".into()];
            args.extend(rms_case_args(case));
            args.extend([
                "--rms-band".into(),
                text.clone(),
                "--m-per-v".into(),
                "2.5e-9".into(),
                "-q".into(),
                "-o".into(),
                s(&out).into(),
            ]);
            let argv: Vec<&str> = args.iter().map(String::as_str).collect();
            assert_success(&run(&argv), &text);
            let v = read_json(&out);
            let r = &v["rms"];
            assert_rel(r["v"].as_f64().unwrap(), want, 1e-9, &text);
            assert_rel(r["m"].as_f64().unwrap(), 2.5e-9 * want, 1e-9, &text);
            assert_eq!(r["bins"], band["bins"], "{text}");
            assert_eq!(r["band_hz"][0].as_f64(), Some(lo));
            assert_eq!(r["band_hz"][1].as_f64(), Some(hi));
            assert_eq!(r["source"], "rms-band");
        }
    }
    let case = &refs["cases"][0];
    let want = case["bands"][0]["rms_v"].as_f64().unwrap();
    assert!((want - 2.05f64.sqrt()).abs() < 0.02, "{want}");
    // Uncalibrated, over the mode band.
    let mut args: Vec<String> = vec!["analyze".into()];
    args.extend(rms_case_args(case));
    args.extend(["--mode-band".into(), "100:150".into()]);
    args.extend(["-q".into(), "-o".into(), s(&out).into()]);
    let argv: Vec<&str> = args.iter().map(String::as_str).collect();
    assert_success(&run(&argv), "mode band rms");
    let v = read_json(&out);
    assert_eq!(v["rms"]["source"], "mode-band", "{v}");
    assert_rel(v["rms"]["v"].as_f64().unwrap(), want, 1e-9, "mode band");
    assert!(v["rms"]["m"].is_null(), "{v}");
    // Heterodyne: the mode band holds offsets, so the rms is over both sideband bands,
    // carrier ± [100, 150] = 350–400 Hz and 600–650 Hz (numpy: the two band sums added).
    let band_v = |lo: f64| {
        case["bands"]
            .as_array()
            .unwrap()
            .iter()
            .find(|b| b["band_hz"][0].as_f64() == Some(lo))
            .unwrap()["rms_v"]
            .as_f64()
            .unwrap()
    };
    let both = band_v(350.0).hypot(band_v(600.0));
    let mut het = argv.clone();
    het.extend(["--carrier", "500", "--lo-side", "above"]);
    assert_success(&run(&het), "heterodyne band rms");
    let v = read_json(&out);
    assert_eq!(v["rms"]["source"], "sideband-bands", "{v}");
    assert_eq!(v["rms"]["bins"], 52, "{v}");
    assert_rel(
        v["rms"]["v"].as_f64().unwrap(),
        both,
        1e-9,
        "sideband bands",
    );
    // Neither band: no rms section.
    let argv: Vec<&str> = argv
        .iter()
        .copied()
        .filter(|a| *a != "--mode-band" && *a != "100:150")
        .collect();
    assert_success(&run(&argv), "no band");
    assert!(read_json(&out).get("rms").is_none());
}

/// Bad bands and unsupported combinations: one error line, exit 2, the output kept.
#[test]
fn rms_bad_input_fails_cleanly() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("rms.json");
    let refs = rms_refs();
    let base = rms_case_args(&refs["cases"][0]);
    let bad = [
        "150:100",
        "100:100",
        "-1:10",
        "100:2000",
        "abc:10",
        "10",
        "100:150:200",
        "nan:10",
        "0.1:0.2",
        ":",
    ];
    for band in bad {
        fs::write(&out, PRECIOUS).unwrap();
        let mut args: Vec<String> = vec!["analyze".into()];
        args.extend(base.iter().cloned());
        args.extend([format!("--rms-band={band}"), "-o".into(), s(&out).into()]);
        let argv: Vec<&str> = args.iter().map(String::as_str).collect();
        assert_clean_failure(&run(&argv), 2, band, Some((&out, PRECIOUS)));
    }
    let mut args: Vec<&str> = vec!["analyze"];
    args.extend(base.iter().map(String::as_str));
    args.extend([
        "--channels",
        "2",
        "--cross-channel",
        "1",
        "--rms-band",
        "100:150",
        "-o",
        s(&out),
    ]);
    fs::write(&out, PRECIOUS).unwrap();
    assert_clean_failure(&run(&args), 2, "rms with cross", Some((&out, PRECIOUS)));
    let csv = dir.path().join("cum.csv");
    fs::write(&csv, PRECIOUS).unwrap();
    let mut args: Vec<&str> = vec!["spectrum"];
    args.extend(base.iter().map(String::as_str));
    args.extend([
        "--channels",
        "2",
        "--cross-channel",
        "1",
        "--cumulative-rms",
        "-o",
        s(&csv),
    ]);
    assert_clean_failure(
        &run(&args),
        2,
        "cumulative with cross",
        Some((&csv, PRECIOUS)),
    );
}
