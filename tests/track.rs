//! `stillpoint track` (BRIEF.md "Time-resolved analysis", METHODS.md §11) on a cooldown record
//! made OUTSIDE our synthesiser: `tests/reference/make_track_refs.py` (numpy 2.4.6, scipy
//! 1.17.1) writes an exact discrete-time AR(2) oscillator plus a white floor with a known
//! schedule (frequency drift 1000 → 990 Hz, linewidth 20 → 3 Hz, variance 1 → 0.05 V²), the
//! per-interval truth (mean schedule frequency; the exact ensemble variance of the mode from
//! the AR(2) covariance recursion; the realised variance) and scipy.signal.welch of each
//! 1 s interval as reference rows for the waterfall.

#![allow(clippy::unwrap_used, clippy::needless_range_loop)]

mod util;

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use util::{assert_clean_failure, assert_success, run, stderr};

const HEADER: &str = "t_start_s,t_end_s,averages,frequency_hz,frequency_hz_uncertainty,linewidth_hz,linewidth_hz_uncertainty,quality_factor,quality_factor_uncertainty,variance_m2,variance_m2_uncertainty,m_per_v,m_per_v_uncertainty,occupancy,occupancy_uncertainty,effective_temperature_k,effective_temperature_k_uncertainty,sideband_occupancy,sideband_occupancy_uncertainty,band_low_hz,band_high_hz,status";

/// Calibration used on the reference record (so variance_m2 = C² × variance in V²).
const M_PER_V: f64 = 2e-12;

fn data(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/track")
        .join(name)
}

fn record() -> String {
    data("record.f32").to_string_lossy().into_owned()
}

/// The source and Welch options of every run on the reference record.
fn base(out: &Path) -> Vec<String> {
    [
        "track",
        &record(),
        "--sample-format",
        "f32",
        "--rate",
        "4096",
        "--segment",
        "1024",
        "-o",
        &out.to_string_lossy(),
    ]
    .iter()
    .map(|s| (*s).to_string())
    .collect()
}

fn run_vec(args: &[String]) -> std::process::Output {
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    run(&refs)
}

/// A track CSV, checked for the format pandas.read_csv and numpy.genfromtxt(names=True,
/// dtype=None, delimiter=",") read with no options: one header line of the contract's
/// columns, LF line ends, no comments or quotes, 22 fields on every row, numeric cells that
/// parse as finite numbers, a status of lowercase words and underscores.
struct TrackCsv {
    rows: Vec<Vec<String>>,
}

impl TrackCsv {
    fn read(path: &Path) -> Self {
        let text = fs::read_to_string(path).expect("read track csv");
        Self::parse(&text)
    }

    fn parse(text: &str) -> Self {
        assert!(text.ends_with('\n'), "no final newline");
        assert!(!text.contains('\r') && !text.contains('"') && !text.contains('#'));
        let mut lines = text.lines();
        assert_eq!(lines.next(), Some(HEADER), "header");
        let rows: Vec<Vec<String>> = lines
            .map(|l| l.split(',').map(str::to_string).collect())
            .collect();
        for (i, row) in rows.iter().enumerate() {
            assert_eq!(row.len(), 22, "row {i}: {row:?}");
            for (j, cell) in row.iter().enumerate().take(21) {
                if !cell.is_empty() {
                    let v: f64 = cell
                        .parse()
                        .unwrap_or_else(|_| panic!("row {i} col {j}: `{cell}`"));
                    assert!(v.is_finite(), "row {i} col {j}: {cell}");
                    assert_eq!(cell.trim(), cell, "spaces in row {i}");
                }
            }
            let status = &row[21];
            assert!(
                !status.is_empty() && status.chars().all(|c| c.is_ascii_lowercase() || c == '_'),
                "status `{status}`"
            );
            // The first three columns are always there.
            for j in 0..3 {
                assert!(!row[j].is_empty(), "row {i} col {j} empty");
            }
            assert!(!row[2].contains('.'), "averages is an integer: {}", row[2]);
        }
        Self { rows }
    }

    fn col(&self, name: &str) -> Vec<Option<f64>> {
        let j = HEADER
            .split(',')
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("no column {name}"));
        self.rows
            .iter()
            .map(|r| (!r[j].is_empty()).then(|| r[j].parse().expect("number")))
            .collect()
    }

    fn values(&self, name: &str) -> Vec<f64> {
        self.col(name)
            .into_iter()
            .map(|v| v.unwrap_or_else(|| panic!("empty {name}")))
            .collect()
    }

    fn status(&self) -> Vec<&str> {
        self.rows.iter().map(|r| r[21].as_str()).collect()
    }
}

/// truth.csv of the generator: name → column.
fn truth() -> Vec<Vec<f64>> {
    let text = fs::read_to_string(data("truth.csv")).expect("truth.csv");
    text.lines()
        .skip(1)
        .map(|l| l.split(',').map(|c| c.parse().expect("number")).collect())
        .collect()
}

fn rms(values: &[f64]) -> f64 {
    (values.iter().map(|v| v * v).sum::<f64>() / values.len() as f64).sqrt()
}

fn mean(values: &[f64]) -> f64 {
    values.iter().sum::<f64>() / values.len() as f64
}

/// Pulls (value − truth)/σ of frequency and variance over 64 one-second intervals, the
/// contract's columns, band following, and the waterfall against scipy.
#[test]
fn independent_record_pulls_columns_and_waterfall() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("trend.csv");
    let npy = dir.path().join("wf.npy");
    let mut args = base(&out);
    args.extend(
        [
            "--every",
            "1",
            "--mode-band",
            "880:1120",
            "--m-per-v",
            "2e-12",
            "--mass",
            "1e-12",
            "--waterfall",
            &npy.to_string_lossy(),
            "--waterfall-band",
            "960:1040",
        ]
        .iter()
        .map(|s| (*s).to_string()),
    );
    let output = run_vec(&args);
    assert_success(&output, "track on the reference record");
    let csv = TrackCsv::read(&out);
    let truth = truth();
    assert_eq!(csv.rows.len(), 64);
    assert_eq!(truth.len(), 64);
    // The whole record is used: no partial-interval note.
    assert!(!stderr(&output).contains("partial"), "{}", stderr(&output));
    let t0 = csv.values("t_start_s");
    let t1 = csv.values("t_end_s");
    for i in 0..64 {
        assert_eq!(t0[i], i as f64);
        assert_eq!(t1[i], (i + 1) as f64);
    }
    // Welch per interval: (4096 − 1024)/512 + 1 = 7 segments wholly inside each interval.
    assert!(csv.values("averages").iter().all(|&k| k == 7.0));
    // The mode fit of `analyze` does not converge on a few 7-segment intervals (a clear
    // line; the status says so and the cells are empty): at most 6 of 64.
    let status = csv.status();
    let ok: Vec<usize> = (0..64).filter(|&i| status[i] == "ok").collect();
    assert!(ok.len() >= 58, "{status:?}");
    assert!(status.iter().all(|s| *s == "ok" || *s == "mode_not_found"));
    assert!(csv.col("sideband_occupancy").iter().all(Option::is_none));
    assert!(csv.values("m_per_v").iter().all(|&c| c == M_PER_V));

    let f = csv.col("frequency_hz");
    let sf = csv.col("frequency_hz_uncertainty");
    let v = csv.col("variance_m2");
    let sv = csv.col("variance_m2_uncertainty");
    let c2 = M_PER_V * M_PER_V;
    let pull = |x: &[Option<f64>], s: &[Option<f64>], truth: &dyn Fn(usize) -> f64| -> Vec<f64> {
        ok.iter()
            .map(|&i| (x[i].unwrap() - truth(i)) / s[i].unwrap())
            .collect()
    };
    let pull_f = pull(&f, &sf, &|i| truth[i][2]);
    let pull_v = pull(&v, &sv, &|i| c2 * truth[i][4]);
    let pull_v_realised = pull(&v, &sv, &|i| c2 * truth[i][5]);
    eprintln!(
        "pulls over {} intervals: frequency rms {:.3} mean {:.3}; variance (vs expected) rms \
         {:.3} mean {:.3}; variance vs realised rms {:.3}",
        ok.len(),
        rms(&pull_f),
        mean(&pull_f),
        rms(&pull_v),
        mean(&pull_v),
        rms(&pull_v_realised)
    );
    // ~60 independent pulls: the rms of 60 unit normals has a standard deviation of
    // 1/√120 ≈ 0.09, so [0.7, 1.35] is a ±3.5σ acceptance (a little wider above, where the
    // non-Gaussian tails of a K = 7 fit land); the mean within ±0.45 (3.5/√60). The variance
    // is compared with the mode's expected variance: its σ includes the line's own energy
    // scatter √(2/(Γ T)) (METHODS §11), so against the realised variance the pulls are
    // smaller (printed, not asserted).
    for (name, pulls) in [("frequency", &pull_f), ("variance", &pull_v)] {
        let r = rms(pulls);
        assert!((0.7..1.35).contains(&r), "{name} pull rms {r}");
        let m = mean(pulls);
        assert!(m.abs() < 0.45, "{name} pull mean {m}");
    }
    // The band follows the fitted mode: each row's band is centred on the previous row's
    // frequency (kept where that row found none), width 240 Hz.
    let lo = csv.values("band_low_hz");
    let hi = csv.values("band_high_hz");
    assert_eq!((lo[0], hi[0]), (880.0, 1120.0));
    for i in 1..64 {
        assert!((hi[i] - lo[i] - 240.0).abs() < 1e-9);
        let centre = (lo[i] + hi[i]) / 2.0;
        match f[i - 1] {
            Some(prev) => assert!((centre - prev).abs() < 1e-9, "row {i}"),
            None => assert_eq!((lo[i], hi[i]), (lo[i - 1], hi[i - 1]), "row {i}"),
        }
    }
    // Occupancy with --mass: n̄ + ½ = ⟨x²⟩/(2 x_zpf²), x_zpf² = ħ/(2 m ω) (common practice).
    let hbar = 1.054_571_817e-34;
    let n = csv.col("occupancy");
    for &i in &ok {
        let (f, v) = (f[i].unwrap(), v[i].unwrap());
        let x_zpf2 = hbar / (2.0 * 1e-12 * 2.0 * std::f64::consts::PI * f);
        let expect = v / (2.0 * x_zpf2) - 0.5;
        let n = n[i].unwrap();
        assert!((n / expect - 1.0).abs() < 1e-6, "row {i}: {n} vs {expect}");
    }
    assert!(
        ok.iter()
            .all(|&i| csv.col("effective_temperature_k")[i].is_some())
    );

    // The waterfall against scipy.signal.welch of each interval, ×C² (m²/Hz), float32.
    let bytes = fs::read(&npy).unwrap();
    let (rows, columns, values) = stillpoint::npy_writer::read_f32_2d(&bytes).unwrap();
    let reference = fs::read_to_string(data("waterfall.csv")).unwrap();
    let mut lines = reference.lines();
    let freqs: Vec<f64> = lines
        .next()
        .unwrap()
        .split(',')
        .map(|c| c.parse().unwrap())
        .collect();
    assert_eq!((rows, columns), (64, freqs.len()));
    let mut worst = 0.0_f64;
    for (i, line) in lines.enumerate() {
        for (j, cell) in line.split(',').enumerate() {
            let want = c2 * cell.parse::<f64>().unwrap();
            let got = values[i * columns + j];
            worst = worst.max((got / want - 1.0).abs());
        }
    }
    eprintln!("waterfall vs scipy: worst relative difference {worst:.2e}");
    assert!(worst <= 1e-6, "waterfall vs scipy {worst}");
    let axes: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(dir.path().join("wf.json")).unwrap()).unwrap();
    assert_eq!(axes["unit"], "m^2/Hz");
    let fa: Vec<f64> = axes["frequency_hz"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect();
    assert_eq!(fa, freqs);
    assert_eq!(axes["t_start_s"].as_array().unwrap().len(), 64);
    assert_eq!(axes["t_end_s"][63].as_f64(), Some(64.0));
    // No temporary files left beside the outputs.
    let names: Vec<String> = fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), 3, "{names:?}");
}

/// A band started off the mode moves onto it; --fixed-band keeps it.
#[test]
fn band_follows_unless_fixed() {
    let dir = tempfile::tempdir().unwrap();
    let follow = dir.path().join("follow.csv");
    let fixed = dir.path().join("fixed.csv");
    for (out, extra) in [(&follow, None), (&fixed, Some("--fixed-band"))] {
        let mut args = base(out);
        args.extend(
            ["--every", "4", "--mode-band", "930:1130", "--m-per-v", "1"]
                .iter()
                .map(|s| (*s).to_string()),
        );
        args.extend(extra.map(str::to_string));
        assert_success(&run_vec(&args), "track band");
    }
    let a = TrackCsv::read(&follow);
    let b = TrackCsv::read(&fixed);
    assert_eq!(a.rows.len(), 16);
    let (lo, hi) = (a.values("band_low_hz"), a.values("band_high_hz"));
    assert_eq!((lo[0], hi[0]), (930.0, 1130.0));
    let truth = truth();
    let fitted = a.col("frequency_hz");
    for i in 1..16 {
        if fitted[i - 1].is_none() {
            continue;
        }
        let centre = (lo[i] + hi[i]) / 2.0;
        // The truth of the previous 4 s interval (mean of its four 1 s rows).
        let f_prev: f64 = (0..4).map(|k| truth[4 * (i - 1) + k][2]).sum::<f64>() / 4.0;
        assert!(
            (centre - f_prev).abs() < 2.0,
            "row {i}: centre {centre}, mode {f_prev}"
        );
    }
    assert!(b.values("band_low_hz").iter().all(|&x| x == 930.0));
    assert!(b.values("band_high_hz").iter().all(|&x| x == 1130.0));
    assert!(b.status().iter().filter(|s| **s == "ok").count() >= 14);
}

/// The last partial interval is dropped and said; --duration stops early.
#[test]
fn partial_interval_and_duration() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("p.csv");
    let mut args = base(&out);
    args.extend(
        ["--every", "1.5", "--mode-band", "880:1120"]
            .iter()
            .map(|s| (*s).to_string()),
    );
    let output = run_vec(&args);
    assert_success(&output, "partial");
    let csv = TrackCsv::read(&out);
    // 64 s = 42 × 1.5 s + 1 s: 42 rows, 4096 samples dropped and said.
    assert_eq!(csv.rows.len(), 42);
    let err = stderr(&output);
    assert!(
        err.contains("4096 samples") && err.contains("partial interval"),
        "{err}"
    );
    assert_eq!(csv.values("t_end_s")[41], 63.0);
    // Uncalibrated: the calibrated cells are empty, the mode cells are not.
    assert!(csv.col("variance_m2").iter().all(Option::is_none));
    assert!(csv.col("m_per_v").iter().all(Option::is_none));
    assert!(csv.col("occupancy").iter().all(Option::is_none));
    assert!(
        csv.col("frequency_hz")
            .iter()
            .filter(|f| f.is_some())
            .count()
            >= 38
    );

    let out2 = dir.path().join("d.csv");
    let mut args = base(&out2);
    args.extend(
        [
            "--every",
            "1",
            "--duration",
            "10.5",
            "--mode-band",
            "880:1120",
        ]
        .iter()
        .map(|s| (*s).to_string()),
    );
    let output = run_vec(&args);
    assert_success(&output, "duration");
    let csv = TrackCsv::read(&out2);
    assert_eq!(csv.rows.len(), 10);
    assert!(
        stderr(&output).contains("2048 samples"),
        "{}",
        stderr(&output)
    );
    // The same intervals as the full run give the same rows (each interval on its own).
    let full = dir.path().join("full.csv");
    let mut args = base(&full);
    args.extend(
        ["--every", "1", "--mode-band", "880:1120"]
            .iter()
            .map(|s| (*s).to_string()),
    );
    assert_success(&run_vec(&args), "full");
    let full = TrackCsv::read(&full);
    assert_eq!(&full.rows[..10], &csv.rows[..]);
}

/// Intervals shorter than a few 1/Γ (METHODS §11): a status that says so and no occupancy;
/// σ of the variance never below the line's own scatter.
#[test]
fn short_intervals_are_flagged() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("s.csv");
    let args: Vec<String> = [
        "track",
        &record(),
        "--sample-format",
        "f32",
        "--rate",
        "4096",
        "--segment",
        "1024",
        "--every",
        "0.5",
        "--mode-band",
        "880:1120",
        "--m-per-v",
        "1",
        "--mass",
        "1e-12",
        "-o",
        &out.to_string_lossy(),
    ]
    .iter()
    .map(|s| (*s).to_string())
    .collect();
    assert_success(&run_vec(&args), "short intervals");
    let csv = TrackCsv::read(&out);
    assert_eq!(csv.rows.len(), 128);
    let gamma = csv.col("linewidth_hz");
    let n = csv.col("occupancy");
    let v = csv.col("variance_m2");
    let sv = csv.col("variance_m2_uncertainty");
    let status = csv.status();
    let (mut short, mut ok) = (0, 0);
    for i in 0..128 {
        let Some(g) = gamma[i] else { continue };
        let gt = 2.0 * std::f64::consts::PI * g * 0.5;
        if status[i] == "short_for_linewidth" {
            short += 1;
            assert!(gt < 10.0, "row {i}: Γ T = {gt} flagged short");
            assert!(n[i].is_none(), "row {i}: occupancy reported");
        } else if status[i] == "ok" {
            ok += 1;
            assert!(gt >= 10.0, "row {i}: Γ T = {gt} not flagged");
            assert!(n[i].is_some());
        }
        // Honest σ: never below the line's own energy scatter √(2/(Γ T)).
        if let (Some(v), Some(s)) = (v[i], sv[i]) {
            assert!(s >= v * (2.0 / gt).sqrt() * (1.0 - 1e-12), "row {i}");
        }
    }
    // The rule itself is tested on constructed reports in src/model/trend.rs; here the rows
    // of a real run must obey it.
    eprintln!("short {short}, ok {ok}");
    assert!(ok > 30, "short {short}, ok {ok}");
}

/// stdin is live: rows are written and flushed as intervals complete, before stdin closes.
#[test]
fn stdin_rows_appear_before_the_stream_closes() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("live.csv");
    let npy = dir.path().join("live.npy");
    let mut child = Command::new(env!("CARGO_BIN_EXE_stillpoint"))
        .args([
            "track",
            "-",
            "--sample-format",
            "f32",
            "--rate",
            "4096",
            "--segment",
            "1024",
            "--every",
            "1",
            "--mode-band",
            "960:1040",
            "--m-per-v",
            "1",
            "--waterfall",
            &npy.to_string_lossy(),
            "-o",
            &out.to_string_lossy(),
        ])
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn");
    let record = fs::read(data("record.f32")).unwrap();
    let mut stdin = child.stdin.take().unwrap();
    // Three and a half intervals, then the pipe stays open.
    stdin.write_all(&record[..4 * 4096 * 7 / 2]).unwrap();
    stdin.flush().unwrap();
    let started = Instant::now();
    let rows_now = || {
        fs::read_to_string(&out)
            .map(|t| t.lines().count().saturating_sub(1))
            .unwrap_or(0)
    };
    while rows_now() < 3 {
        assert!(
            started.elapsed() < Duration::from_secs(120),
            "no rows while stdin is open"
        );
        assert!(child.try_wait().unwrap().is_none(), "exited early");
        std::thread::sleep(Duration::from_millis(20));
    }
    // Still running (stdin open), three complete rows and a valid waterfall of 3 rows.
    assert!(child.try_wait().unwrap().is_none());
    let partial = TrackCsv::read(&out);
    assert_eq!(partial.rows.len(), 3);
    let (rows, _, _) =
        stillpoint::npy_writer::read_f32_2d(&fs::read(&npy).unwrap()).expect("valid npy mid-run");
    assert_eq!(rows, 3);
    // The rest of 6 s, then close.
    stdin
        .write_all(&record[4 * 4096 * 7 / 2..4 * 4096 * 6])
        .unwrap();
    drop(stdin);
    let output = child.wait_with_output().unwrap();
    assert_success(&output, "stdin track");
    let csv = TrackCsv::read(&out);
    assert_eq!(csv.rows.len(), 6);
    assert!(
        stderr(&output).contains("stdin closed"),
        "{}",
        stderr(&output)
    );
    let (rows, _, _) = stillpoint::npy_writer::read_f32_2d(&fs::read(&npy).unwrap()).unwrap();
    assert_eq!(rows, 6);
    let axes: serde_json::Value =
        serde_json::from_str(&fs::read_to_string(dir.path().join("live.json")).unwrap()).unwrap();
    assert_eq!(axes["t_end_s"].as_array().unwrap().len(), 6);
    assert_eq!(axes["unit"], "m^2/Hz");
}

/// Bad input: one error line, exit 2, existing outputs untouched, no temporary files.
#[test]
fn bad_input_leaves_outputs_alone() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("old.csv");
    let npy = dir.path().join("old.npy");
    fs::write(&out, b"precious\n").unwrap();
    fs::write(&npy, b"precious npy").unwrap();
    let short = dir.path().join("short.f32");
    fs::write(&short, &fs::read(data("record.f32")).unwrap()[..4 * 3000]).unwrap();
    let nan = dir.path().join("nan.f32");
    fs::write(&nan, f32::NAN.to_le_bytes().repeat(8192)).unwrap();
    let out_s = out.to_string_lossy().into_owned();
    let npy_s = npy.to_string_lossy().into_owned();
    let rec = record();
    let short_s = short.to_string_lossy().into_owned();
    let cases: Vec<(&str, Vec<&str>)> = vec![
        (
            "missing source",
            vec![
                "track",
                "/nonexistent/x.f32",
                "--sample-format",
                "f32",
                "--rate",
                "4096",
            ],
        ),
        (
            "interval shorter than a segment",
            vec![
                "track",
                &rec,
                "--sample-format",
                "f32",
                "--rate",
                "4096",
                "--segment",
                "8192",
            ],
        ),
        (
            "record shorter than one interval",
            vec![
                "track",
                &short_s,
                "--sample-format",
                "f32",
                "--rate",
                "4096",
                "--segment",
                "1024",
            ],
        ),
        (
            "waterfall band beyond Nyquist",
            vec![
                "track",
                &rec,
                "--sample-format",
                "f32",
                "--rate",
                "4096",
                "--segment",
                "1024",
                "--waterfall",
                &npy_s,
                "--waterfall-band",
                "3000:4000",
            ],
        ),
        (
            "mode band beyond Nyquist",
            vec![
                "track",
                &rec,
                "--sample-format",
                "f32",
                "--rate",
                "4096",
                "--segment",
                "1024",
                "--mode-band",
                "2100:2200",
            ],
        ),
        (
            "no rate for raw",
            vec!["track", &rec, "--sample-format", "f32"],
        ),
    ];
    for (what, mut args) in cases {
        args.extend(["--every", "1", "-o", &out_s]);
        let output = run(&args);
        assert_clean_failure(&output, 2, what, Some((&out, b"precious\n")));
        assert_eq!(fs::read(&npy).unwrap(), b"precious npy", "{what}");
    }
    // A record of NaN only: every interval has no usable segment; rows say so.
    let nan_out = dir.path().join("nan.csv");
    let output = run(&[
        "track",
        &nan.to_string_lossy(),
        "--sample-format",
        "f32",
        "--rate",
        "4096",
        "--segment",
        "1024",
        "--every",
        "1",
        "-o",
        &nan_out.to_string_lossy(),
    ]);
    assert_success(&output, "NaN record");
    let csv = TrackCsv::read(&nan_out);
    assert_eq!(csv.status(), vec!["no_usable_segment"; 2]);
}

/// The window's history of a recording is `track`'s: the engine (the window's, no display)
/// plays the reference record and each history interval is the spectrum of the same
/// 1 s interval (the same 7 segments: 4096 samples are 8 hops of 512), analysed with the
/// same band that follows the mode by the same rule. Check values: `track`'s rows (inside
/// the project) and, outside it, the schedule frequency of `truth.csv` (numpy generator):
/// the window's frequency pulls meet the same acceptance as `track`'s above.
#[test]
fn the_windows_history_of_a_recording_is_tracks() {
    use std::sync::Arc;
    use stillpoint::acquire::{SampleFormat, SourceConfig, SourceSpec};
    use stillpoint::model::{Engine, EngineConfig, HistoryEntry, WelchSettings};

    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("trend.csv");
    let mut args = base(&out);
    args.extend(
        ["--every", "1", "--mode-band", "880:1120"]
            .iter()
            .map(|s| (*s).to_string()),
    );
    let output = run_vec(&args);
    assert_success(&output, "track on the reference record");
    let csv = TrackCsv::read(&out);
    assert_eq!(csv.rows.len(), 64);

    let mut source = SourceConfig::new(SourceSpec::Path(data("record.f32")));
    source.sample_format = Some(SampleFormat::F32);
    source.rate_hz = Some(4096.0);
    let mut cfg = EngineConfig::new(source);
    cfg.welch = WelchSettings {
        segment: 1024,
        segment_auto: false,
        ..WelchSettings::default()
    };
    cfg.analysis.mode_band_hz = Some((880.0, 1120.0));
    cfg.follow_mode = true;
    cfg.history_interval = Duration::from_secs(1);
    cfg.playback_speed = None;
    cfg.publish_interval = Duration::from_millis(50);
    let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
    let mut history: Vec<HistoryEntry> = Vec::new();
    let mut ended = false;
    let t0 = Instant::now();
    // A deadline against a hang, not a speed requirement.
    while t0.elapsed() < Duration::from_secs(300) && !ended {
        if let Some(f) = engine.recv_frame_timeout(Duration::from_millis(200)) {
            history.extend(f.history.iter().cloned());
            ended = f.status.ended.is_some() && f.status.samples == 262_144;
            assert_eq!(
                f.status.dropped_blocks, 0,
                "a recording is never dropped from"
            );
        }
    }
    // The frame after the end carries the last interval.
    while let Some(f) = engine.recv_frame_timeout(Duration::from_millis(500)) {
        history.extend(f.history.iter().cloned());
    }
    assert!(ended, "the recording did not end");
    assert_eq!(
        history.len(),
        64,
        "one history interval per second of record"
    );
    let t_start = csv.values("t_start_s");
    let t_end = csv.values("t_end_s");
    let averages = csv.values("averages");
    let f = csv.col("frequency_hz");
    let sf = csv.col("frequency_hz_uncertainty");
    let g = csv.col("linewidth_hz");
    let sg = csv.col("linewidth_hz_uncertainty");
    let lo = csv.values("band_low_hz");
    let hi = csv.values("band_high_hz");
    let truth = truth();
    let (mut both, mut worst_f, mut worst_g) = (0, 0.0f64, 0.0f64);
    let mut pulls = Vec::new();
    for (i, e) in history.iter().enumerate() {
        // Stream time: the record's own seconds, whatever the playback speed.
        assert_eq!(
            (e.t_start_s, e.t_end_s),
            (t_start[i], t_end[i]),
            "interval {i}"
        );
        let report: &Arc<_> = e.report.as_ref().unwrap();
        let r: &stillpoint::report::Report = report;
        assert_eq!(r.welch.averages as f64, averages[i], "interval {i}");
        let (blo, bhi) = e.band_hz.unwrap();
        assert!(
            (blo - lo[i]).abs() < 1e-6 && (bhi - hi[i]).abs() < 1e-6,
            "band {i}"
        );
        let point = e.trend.as_ref().unwrap();
        assert_eq!(point.time_s, e.t_end_s);
        match (r.mode.frequency_hz, f[i]) {
            (Some(fw), Some(ft)) => {
                both += 1;
                let (s_f, s_g) = (sf[i].unwrap(), sg[i].unwrap());
                let (gw, gt) = (r.mode.linewidth_hz.unwrap(), g[i].unwrap());
                worst_f = worst_f.max((fw - ft).abs() / s_f);
                worst_g = worst_g.max((gw - gt).abs() / s_g);
                assert_eq!(point.frequency_hz, Some(fw));
                pulls.push((fw - truth[i][2]) / r.mode.frequency_hz_uncertainty.unwrap());
            }
            (None, None) => {}
            (w, t) => panic!("interval {i}: window {w:?}, track {t:?}"),
        }
    }
    eprintln!(
        "window vs track over {both} fitted intervals: worst |Δf|/σ {worst_f:.2e}, worst \
         |Δγ|/σ {worst_g:.2e}; window frequency pulls vs truth rms {:.3} mean {:.3}",
        rms(&pulls),
        mean(&pulls)
    );
    assert!(both >= 58, "{both} intervals fitted by both");
    // The same periodograms summed in another order: equal far within their σ.
    assert!(worst_f < 1e-3 && worst_g < 1e-3, "{worst_f} {worst_g}");
    let r = rms(&pulls);
    assert!((0.7..1.35).contains(&r), "frequency pull rms {r}");
    assert!(mean(&pulls).abs() < 0.45);
}
