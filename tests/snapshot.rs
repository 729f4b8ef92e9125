//! Snapshots: exact round trip (bit-identical f64 through the CSV), refusal to overwrite,
//! one-line errors for damaged files, crash safety (a save stopped after each step in
//! process; under SIGKILL a child process — this test binary re-invoked — saving in a loop,
//! and once killed deliberately between its two renames), comparison helpers, and a
//! property test that arbitrary bytes never make the loader panic.
#![allow(clippy::unwrap_used)] // helpers outside #[test] functions unwrap too

use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use proptest::prelude::*;
use stillpoint::dsp::{Averaging, Detrend, Spectrum, WindowKind};
use stillpoint::report::{PeakReport, Report};
use stillpoint::snapshot::{
    self, SaveStep, SnapshotCalibration, SnapshotError, SnapshotInfo, compare, excess_bands, load,
    mark_new_peaks, read_spectrum_csv, save, snapshot_paths, write_spectrum_csv,
};
use stillpoint::synth::rng::Rng;

/// A spectrum whose values use every bit of the mantissa and a wide exponent range.
fn spectrum(bins: usize, seed: u64) -> Spectrum {
    let mut rng = Rng::new(seed);
    let fs = 250_000.0;
    let segment = 2 * (bins - 1);
    let psd = (0..bins)
        .map(|k| {
            if k == 0 {
                0.0
            } else {
                let mantissa = 1.0 + rng.uniform();
                let exponent = -30.0 + 25.0 * rng.uniform();
                mantissa * 10_f64.powf(exponent)
            }
        })
        .collect();
    Spectrum {
        sample_rate_hz: fs,
        segment,
        overlap: 0.5,
        window: WindowKind::Hann,
        detrend: Detrend::Mean,
        averaging: Averaging::Exponential {
            time_constant_segments: 7.5,
        },
        averages: 123,
        k_eff: 116.7,
        resolution_hz: fs / segment as f64,
        enbw_hz: 1.5 * fs / segment as f64,
        psd_v2_per_hz: psd,
    }
}

fn info(calibrated: bool) -> SnapshotInfo {
    SnapshotInfo {
        label: "4 K, 20 µW, \"quoted\"".to_string(),
        notes: "line one\nline two, with comma".to_string(),
        source: "demo:cooldown seed 1".to_string(),
        calibration: calibrated.then(|| SnapshotCalibration {
            m_per_v: 2.0e-9 * (1.0 + 1e-15),
            method: "tone".to_string(),
            m_per_v_uncertainty: Some(3.1e-11),
        }),
        report: calibrated.then(|| Report {
            generator: "stillpoint test".to_string(),
            notes: vec!["a note".to_string()],
            ..Report::default()
        }),
    }
}

fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

#[test]
fn round_trip_is_bit_exact() {
    let dir = tempfile::tempdir().unwrap();
    for calibrated in [false, true] {
        let s = spectrum(4097, 11);
        let path = dir.path().join(format!("snap_{calibrated}"));
        let saved = save(&path, &s, &info(calibrated), false).unwrap();
        let loaded = load(&path).unwrap();
        assert_eq!(bits(&loaded.spectrum.psd_v2_per_hz), bits(&s.psd_v2_per_hz));
        assert_eq!(loaded.spectrum, s);
        assert_eq!(loaded.meta, saved.meta);
        assert!(loaded.warnings.is_empty());
        assert_eq!(loaded.meta.label, info(calibrated).label);
        assert_eq!(loaded.meta.report, info(calibrated).report);
        assert_eq!(loaded.meta.saved_utc.len(), 20);
        assert!(loaded.meta.saved_utc.ends_with('Z'));
        if calibrated {
            let m = loaded.psd_m2_per_hz.unwrap();
            assert_eq!(bits(&m), bits(saved.psd_m2_per_hz.as_ref().unwrap()));
        } else {
            assert!(loaded.psd_m2_per_hz.is_none());
        }
        // Loading by either file name works.
        let (json, csv) = snapshot_paths(&path);
        assert_eq!(load(&json).unwrap().spectrum, s);
        assert_eq!(load(&csv).unwrap().spectrum, s);
    }
}

/// The CSV is the `stillpoint spectrum` format: header, DC..Nyquist, shortest round trip.
#[test]
fn csv_writer_format_and_reader() {
    let s = spectrum(5, 3);
    let mut out = Vec::new();
    write_spectrum_csv(&mut out, &s, Some(1e-9)).unwrap();
    let text = String::from_utf8(out.clone()).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "frequency_hz,psd_v2_per_hz,psd_m2_per_hz"
    );
    assert_eq!(lines.clone().count(), 5);
    assert!(lines.next().unwrap().starts_with("0.0,0.0,0.0"));
    let t = read_spectrum_csv(out.as_slice()).unwrap();
    assert_eq!(bits(&t.psd_v2_per_hz), bits(&s.psd_v2_per_hz));
    assert_eq!(bits(&t.frequency_hz), bits(&s.frequencies_hz()));
    let m: Vec<f64> = s.psd_v2_per_hz.iter().map(|p| p * (1e-9 * 1e-9)).collect();
    assert_eq!(bits(t.psd_m2_per_hz.as_ref().unwrap()), bits(&m));
    // Non-finite data is refused, never written.
    let mut bad = s.clone();
    bad.psd_v2_per_hz[2] = f64::NAN;
    assert!(write_spectrum_csv(Vec::new(), &bad, None).is_err());
    assert!(write_spectrum_csv(Vec::new(), &s, Some(-1.0)).is_err());
}

#[test]
fn refuses_to_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ref.json");
    let a = spectrum(513, 1);
    let b = spectrum(513, 2);
    save(&path, &a, &info(false), false).unwrap();
    let err = save(&path, &b, &info(false), false).unwrap_err();
    assert!(matches!(err, SnapshotError::Exists { .. }), "{err}");
    assert_eq!(load(&path).unwrap().spectrum, a);
    // Even if only the CSV exists.
    std::fs::remove_file(dir.path().join("ref.json")).unwrap();
    assert!(matches!(
        save(&path, &b, &info(false), false),
        Err(SnapshotError::Exists { .. })
    ));
    // With permission it is replaced.
    save(&path, &b, &info(true), true).unwrap();
    assert_eq!(load(&path).unwrap().spectrum, b);
    // No temporary files remain after successful saves.
    let tmp = std::fs::read_dir(dir.path())
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .unwrap()
                .file_name()
                .to_string_lossy()
                .ends_with(".tmp")
        })
        .count();
    assert_eq!(tmp, 0);
    // Unusable spectra are refused before anything is written.
    let mut nan = a.clone();
    nan.psd_v2_per_hz[7] = f64::INFINITY;
    let p2 = dir.path().join("nan");
    assert!(matches!(
        save(&p2, &nan, &info(false), false),
        Err(SnapshotError::Invalid(_))
    ));
    assert!(!dir.path().join("nan.json").exists());
    assert!(!dir.path().join("nan.csv").exists());
}

fn one_line(e: &SnapshotError) -> String {
    let s = e.to_string();
    assert!(!s.contains('\n'), "multi-line error: {s}");
    s
}

#[test]
fn damaged_files_give_clear_errors() {
    let dir = tempfile::tempdir().unwrap();
    let base = dir.path().join("d");
    let s = spectrum(65, 5);
    save(&base, &s, &info(true), false).unwrap();
    let (json, csv) = snapshot_paths(&base);
    let good_json = std::fs::read_to_string(&json).unwrap();
    let good_csv = std::fs::read_to_string(&csv).unwrap();
    let restore = || {
        std::fs::write(&json, &good_json).unwrap();
        std::fs::write(&csv, &good_csv).unwrap();
    };
    let check = |needle: &str| {
        let e = load(&base).unwrap_err();
        let msg = one_line(&e);
        assert!(msg.contains(needle), "wanted '{needle}' in: {msg}");
    };

    std::fs::write(&json, &good_json[..good_json.len() / 2]).unwrap();
    check("not a usable snapshot");
    std::fs::write(&json, "{\"hello\": 1}").unwrap();
    check("not a usable snapshot");
    std::fs::write(&json, good_json.replace("stillpoint-snapshot", "other")).unwrap();
    check("format is 'other'");
    std::fs::write(
        &json,
        good_json.replace("\"format_version\": 1", "\"format_version\": 99"),
    )
    .unwrap();
    check("newer");
    std::fs::write(&json, good_json.replace("\"d.csv\"", "\"../d.csv\"")).unwrap();
    check("data_file");
    restore();

    std::fs::remove_file(&csv).unwrap();
    check("cannot read");
    restore();

    let lines: Vec<&str> = good_csv.lines().collect();
    // Missing column.
    let no_col: String = lines
        .iter()
        .map(|l| l.split(',').take(1).collect::<Vec<_>>().join(","))
        .collect::<Vec<_>>()
        .join("\n");
    std::fs::write(&csv, no_col).unwrap();
    check("header must name");
    // Wrong row count.
    std::fs::write(&csv, lines[..lines.len() - 1].join("\n")).unwrap();
    check("64 rows, but the metadata says 65 bins");
    // Non-numeric and non-finite.
    let mut bad = lines.clone();
    let row = bad[10].replacen(',', ",oops", 1);
    bad[10] = &row;
    std::fs::write(&csv, bad.join("\n")).unwrap();
    check("line 11");
    let mut bad = lines.clone();
    let row = format!("{},NaN,1e-20", lines[10].split(',').next().unwrap());
    bad[10] = &row;
    std::fs::write(&csv, bad.join("\n")).unwrap();
    check("not finite");
    // Frequency grid not matching the metadata's resolution.
    let mut bad = lines.clone();
    let fields: Vec<&str> = lines[20].split(',').collect();
    let f: f64 = fields[0].parse().unwrap();
    let row = format!("{:?},{},{}", f + 0.5, fields[1], fields[2]);
    bad[20] = &row;
    std::fs::write(&csv, bad.join("\n")).unwrap();
    check("grid");
    // Calibration present but the column missing (metadata edited).
    restore();
    let two_col: String = lines
        .iter()
        .map(|l| l.split(',').take(2).collect::<Vec<_>>().join(","))
        .collect::<Vec<_>>()
        .join("\n");
    std::fs::write(&csv, two_col).unwrap();
    check("psd_m2_per_hz column");
    // A hand edit that keeps the format loads, with a warning.
    restore();
    std::fs::write(&csv, good_csv.replace('\n', "\r\n")).unwrap();
    let l = load(&base).unwrap();
    assert_eq!(l.spectrum, s);
    assert_eq!(l.warnings.len(), 1, "{:?}", l.warnings);
}

#[test]
fn compare_and_new_since_reference() {
    let reference = spectrum(1025, 7);
    let mut current = reference.clone();
    for k in 500..505 {
        current.psd_v2_per_hz[k] *= 100.0;
    }
    let c = compare(&current, &reference).unwrap();
    assert!(!c.interpolated);
    assert_eq!(c.bins_left_out, 1); // the DC bin of the reference is zero
    assert!(c.ratio.iter().enumerate().all(|(i, r)| {
        let k = i + 1;
        if (500..505).contains(&k) {
            (r - 100.0).abs() < 1e-12
        } else {
            (r - 1.0).abs() < 1e-15
        }
    }));
    let bands = excess_bands(&c, 6.0);
    assert_eq!(bands.len(), 1);
    assert_eq!(bands[0].bins, 5);
    assert!((bands[0].start_hz - current.frequency_hz(500)).abs() < 1e-9);
    assert!((bands[0].peak_ratio_db - 20.0).abs() < 1e-9);
    // Different grids: a reference at half the resolution is interpolated.
    let mut coarse = spectrum(513, 8);
    coarse.segment = reference.segment / 2;
    coarse.resolution_hz = reference.resolution_hz * 2.0;
    for (k, p) in coarse.psd_v2_per_hz.iter_mut().enumerate() {
        *p = 1.0 + k as f64; // linear in f, so interpolation is exact
    }
    let mut fine = reference.clone();
    for (k, p) in fine.psd_v2_per_hz.iter_mut().enumerate() {
        *p = 2.0 * (1.0 + k as f64 / 2.0);
    }
    let c = compare(&fine, &coarse).unwrap();
    assert!(c.interpolated);
    assert!(c.ratio.iter().all(|r| (r - 2.0).abs() < 1e-12));
    // Peaks.
    let peak = |f: f64| PeakReport {
        frequency_hz: f,
        height_over_floor_db: 20.0,
        linewidth_hz: 10.0,
        new_since_reference: None,
    };
    let mut now = vec![peak(1_000.0), peak(23_400.0), peak(50_000.0)];
    let before = vec![peak(1_004.0), peak(50_000.0)];
    assert_eq!(mark_new_peaks(&mut now, &before, 2.0), 1);
    assert_eq!(now[0].new_since_reference, Some(false));
    assert_eq!(now[1].new_since_reference, Some(true));
}

/// The state a save leaves when killed between its two renames (new CSV in place, new JSON
/// still in its temporary file) loads as the new snapshot, with a warning.
#[test]
fn interrupted_save_is_recovered_from_temporary_metadata() {
    let dir = tempfile::tempdir().unwrap();
    let other = tempfile::tempdir().unwrap();
    let path = dir.path().join("s");
    let old = spectrum(257, 1);
    let new = spectrum(257, 2);
    save(&path, &old, &info(false), false).unwrap();
    let mut new_info = info(false);
    new_info.label = "new".to_string();
    save(&other.path().join("s"), &new, &new_info, false).unwrap();
    std::fs::copy(other.path().join("s.csv"), dir.path().join("s.csv")).unwrap();
    std::fs::copy(
        other.path().join("s.json"),
        dir.path().join(".s.json.4242.0.17.tmp"),
    )
    .unwrap();
    let l = load(&path).unwrap();
    assert_eq!(l.spectrum, new);
    assert_eq!(l.meta.label, "new");
    assert!(l.warnings[0].contains("interrupted"), "{:?}", l.warnings);
    assert_eq!(
        stillpoint::io::atomic::remove_stale_temp_files(&dir.path().join("s.json")).unwrap(),
        1
    );
    // Without the temporary file: the data still load, flagged as modified.
    let l = load(&path).unwrap();
    assert_eq!(l.spectrum.psd_v2_per_hz, new.psd_v2_per_hz);
    assert!(l.warnings[0].contains("modified"), "{:?}", l.warnings);
}

const CHILD_ENV: &str = "STILLPOINT_SNAPSHOT_CRASH_DIR";
/// Set for the child of the deliberate round (see [`crash_child`]).
const STOP_ENV: &str = "STILLPOINT_SNAPSHOT_CRASH_STOP";
const CRASH_BINS: usize = 200_001;

/// The child: save large snapshots over one name in a loop until killed. Each version's data
/// encode its version number, so the parent can check that data and metadata belong together.
#[test]
#[ignore = "helper process for kill_mid_save_leaves_a_complete_snapshot"]
fn crash_child() {
    let Ok(dir) = std::env::var(CHILD_ENV) else {
        return;
    };
    let path = PathBuf::from(&dir).join("big");
    let mut s = spectrum(CRASH_BINS, 99);
    if std::env::var(STOP_ENV).is_ok() {
        // The deliberate round: two whole saves, then a third stopped with its CSV in place
        // and its JSON still in the temporary file; wait there to be killed.
        for version in 1_u64..=3 {
            for p in s.psd_v2_per_hz.iter_mut().skip(1) {
                *p = version as f64;
            }
            let mut i = info(version % 2 == 0);
            i.label = version.to_string();
            if version < 3 {
                save(&path, &s, &i, true).unwrap();
            } else {
                snapshot::save_killed_after(&path, &s, &i, SaveStep::DataInPlace).unwrap();
            }
        }
        std::fs::write(Path::new(&dir).join("stopped"), b"").unwrap();
        loop {
            std::thread::sleep(Duration::from_millis(50));
        }
    }
    for version in 1_u64.. {
        for p in s.psd_v2_per_hz.iter_mut().skip(1) {
            *p = version as f64;
        }
        let mut i = info(version % 2 == 0);
        i.label = version.to_string();
        save(&path, &s, &i, true).unwrap();
        if version == 1 {
            std::fs::write(
                Path::new(&std::env::var(CHILD_ENV).unwrap()).join("started"),
                b"",
            )
            .unwrap();
        }
    }
}

/// Crash safety: kill the saving child at varied moments; the snapshot must always load
/// completely, with data from the version its label names. Temporary files may remain
/// (they are removed at the end with `remove_stale_temp_files`).
#[test]
fn kill_mid_save_leaves_a_complete_snapshot() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("big");
    let mut s = spectrum(CRASH_BINS, 99);
    for p in s.psd_v2_per_hz.iter_mut().skip(1) {
        *p = 0.5;
    }
    let mut i = info(false);
    i.label = "0".to_string();
    let t_save = Instant::now();
    save(&path, &s, &i, false).unwrap();
    let save_time = t_save.elapsed();
    let exe = std::env::current_exe().unwrap();
    let mut versions_seen = Vec::new();
    // Rounds whose kill left temporary files, i.e. landed inside a save's write/rename.
    let mut killed_mid_save = 0;
    let rounds = 12_u32;
    for round in 0..rounds {
        let _ = std::fs::remove_file(dir.path().join("started"));
        let mut child = std::process::Command::new(&exe)
            .args([
                "crash_child",
                "--exact",
                "--ignored",
                "--nocapture",
                "--test-threads=1",
            ])
            .env(CHILD_ENV, dir.path())
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        let t0 = Instant::now();
        while !dir.path().join("started").exists() {
            assert!(
                t0.elapsed() < Duration::from_secs(60),
                "child never started"
            );
            std::thread::sleep(Duration::from_millis(2));
        }
        // Kill at a different point of the save cycle each round (spread over ~6 saves).
        std::thread::sleep(save_time * (12 * round + 6) / (2 * rounds));
        child.kill().unwrap();
        child.wait().unwrap();
        let loaded = load(&path).unwrap_or_else(|e| panic!("round {round}: {e}"));
        let version: f64 = loaded.meta.label.parse().unwrap();
        assert_eq!(loaded.spectrum.len(), CRASH_BINS);
        let want = if version == 0.0 { 0.5 } else { version };
        assert!(
            loaded.spectrum.psd_v2_per_hz[1..]
                .iter()
                .all(|p| *p == want),
            "round {round}: data do not belong to version {version}"
        );
        versions_seen.push(version);
        let temps = std::fs::read_dir(dir.path())
            .unwrap()
            .filter(|e| {
                e.as_ref()
                    .unwrap()
                    .file_name()
                    .to_string_lossy()
                    .ends_with(".tmp")
            })
            .count();
        if temps > 0 {
            killed_mid_save += 1;
        }
    }
    assert!(versions_seen.iter().any(|v| *v > 0.0), "{versions_seen:?}");
    // Cleaning finishes a save killed between its renames before deleting its journal: the
    // snapshot still loads, as the same version.
    let before = load(&path).unwrap().meta.label;
    let removed = snapshot::remove_stale_temp_files(&path).unwrap();
    let after = load(&path).unwrap();
    assert_eq!(after.meta.label, before);
    assert!(after.warnings.is_empty(), "{:?}", after.warnings);

    // The deliberate round: a child killed while its new CSV sits beside the old JSON
    // (version 3, uncalibrated, over version 2, calibrated: a mixed pair would not load).
    let _ = std::fs::remove_file(dir.path().join("stopped"));
    let mut child = std::process::Command::new(&exe)
        .args([
            "crash_child",
            "--exact",
            "--ignored",
            "--nocapture",
            "--test-threads=1",
        ])
        .env(CHILD_ENV, dir.path())
        .env(STOP_ENV, "1")
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let t0 = Instant::now();
    while !dir.path().join("stopped").exists() {
        assert!(
            t0.elapsed() < Duration::from_secs(120),
            "child never stopped"
        );
        std::thread::sleep(Duration::from_millis(5));
    }
    child.kill().unwrap();
    child.wait().unwrap();
    let loaded = load(&path).unwrap();
    assert_eq!(loaded.meta.label, "3");
    assert!(loaded.psd_m2_per_hz.is_none());
    assert!(loaded.spectrum.psd_v2_per_hz[1..].iter().all(|p| *p == 3.0));
    assert!(
        loaded.warnings[0].contains("interrupted"),
        "{:?}",
        loaded.warnings
    );
    snapshot::remove_stale_temp_files(&path).unwrap();
    let loaded = load(&path).unwrap();
    assert_eq!(loaded.meta.label, "3");
    assert!(loaded.warnings.is_empty(), "{:?}", loaded.warnings);
    println!(
        "save {save_time:?}; versions {versions_seen:?}; rounds killed mid-write: \
         {killed_mid_save}; temporary files removed: {removed}"
    );
}

/// A save stopped after each of its steps (as by a kill there) leaves a whole pair: the old
/// one before the CSV rename, the new one after it (its JSON then taken from the journal);
/// cleaning the temporary files keeps that same pair and leaves no mixed one behind.
#[test]
fn a_save_stopped_at_any_step_leaves_a_whole_pair() {
    let steps = [
        (Some(SaveStep::BothPrepared), "old"),
        (Some(SaveStep::DataInPlace), "new"),
        (None, "new"),
    ];
    for (step, want) in steps {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("pair");
        let mut old = spectrum(513, 5);
        old.psd_v2_per_hz.iter_mut().skip(1).for_each(|p| *p = 0.5);
        let mut new = old.clone();
        new.psd_v2_per_hz.iter_mut().skip(1).for_each(|p| *p = 7.0);
        let mut old_info = info(false);
        old_info.label = "old".to_string();
        let mut new_info = info(true);
        new_info.label = "new".to_string();
        save(&path, &old, &old_info, false).unwrap();
        match step {
            Some(s) => snapshot::save_killed_after(&path, &new, &new_info, s).unwrap(),
            None => {
                save(&path, &new, &new_info, true).unwrap();
            }
        }
        let check = |cleaned: bool| {
            let l = load(&path).unwrap_or_else(|e| panic!("{step:?} cleaned {cleaned}: {e}"));
            assert_eq!(l.meta.label, want, "{step:?} cleaned {cleaned}");
            let (value, calibrated) = if want == "new" {
                (7.0, true)
            } else {
                (0.5, false)
            };
            assert!(l.spectrum.psd_v2_per_hz[1..].iter().all(|p| *p == value));
            assert_eq!(l.psd_m2_per_hz.is_some(), calibrated);
            assert_eq!(l.meta.calibration.is_some(), calibrated);
            if cleaned {
                assert!(l.warnings.is_empty(), "{step:?}: {:?}", l.warnings);
            }
        };
        check(false);
        snapshot::remove_stale_temp_files(&path).unwrap();
        check(true);
        let temps = std::fs::read_dir(dir.path())
            .unwrap()
            .filter(|e| {
                e.as_ref()
                    .unwrap()
                    .file_name()
                    .to_string_lossy()
                    .ends_with(".tmp")
            })
            .count();
        assert_eq!(temps, 0, "{step:?}");
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// Arbitrary bytes as metadata never panic the loader.
    #[test]
    fn arbitrary_metadata_never_panics(bytes in proptest::collection::vec(any::<u8>(), 0..2048)) {
        let dir = tempfile::tempdir().unwrap();
        let base = dir.path().join("p");
        std::fs::write(dir.path().join("p.json"), &bytes).unwrap();
        std::fs::write(dir.path().join("p.csv"), b"frequency_hz,psd_v2_per_hz\n0,1\n").unwrap();
        if let Err(e) = load(&base) { one_line(&e); }
    }

    /// Arbitrary bytes as data beside valid metadata never panic, and CSV parsing of
    /// arbitrary text never panics.
    #[test]
    fn arbitrary_data_never_panics(bytes in proptest::collection::vec(any::<u8>(), 0..2048),
                                   text in "[0-9a-z_.,eE+\\-\n\r ]{0,400}") {
        let dir = tempfile::tempdir().unwrap();
        let base = dir.path().join("q");
        save(&base, &spectrum(9, 1), &info(true), false).unwrap();
        std::fs::write(dir.path().join("q.csv"), &bytes).unwrap();
        if let Err(e) = load(&base) { one_line(&e); }
        let with_header = format!("frequency_hz,psd_v2_per_hz\n{text}");
        let _ = read_spectrum_csv(with_header.as_bytes());
        let _ = read_spectrum_csv(bytes.as_slice());
    }
}

/// Seeds of the `snapshot_load` fuzz target (`tests/fuzz/seeds/snapshot_load/`): real saved
/// snapshots as `JSON \0 CSV`, the split the target makes. They must stay loadable as the
/// format evolves, or the fuzzer starts from nothing again.
fn snapshot_seeds(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut seeds = Vec::new();
    for (name, bins, calibrated) in [("plain", 5, false), ("calibrated", 9, true)] {
        let path = dir.join(name);
        save(&path, &spectrum(bins, 3), &info(calibrated), true).unwrap();
        let (json, csv) = snapshot_paths(&path);
        let mut bytes = std::fs::read(json).unwrap();
        bytes.push(0);
        bytes.extend(std::fs::read(csv).unwrap());
        seeds.push((format!("{name}.seed"), bytes));
    }
    seeds
}

fn seed_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fuzz/seeds/snapshot_load")
}

#[test]
fn fuzz_seeds_are_loadable_snapshots() {
    let mut found = 0;
    for entry in std::fs::read_dir(seed_dir()).unwrap() {
        let bytes = std::fs::read(entry.unwrap().path()).unwrap();
        let split = bytes.iter().position(|b| *b == 0).unwrap();
        let s = snapshot::from_bytes(&bytes[..split], &bytes[split + 1..]).unwrap();
        assert_eq!(s.spectrum.len(), s.meta.bins);
        found += 1;
    }
    assert_eq!(found, 2);
}

/// Rewrites the fuzz seeds: `cargo test --test snapshot -- --ignored regenerate_fuzz_seeds`.
#[test]
#[ignore = "rewrites tests/fuzz/seeds/snapshot_load"]
fn regenerate_fuzz_seeds() {
    let tmp = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(seed_dir()).unwrap();
    for (name, bytes) in snapshot_seeds(tmp.path()) {
        std::fs::write(seed_dir().join(name), bytes).unwrap();
    }
}

/// Regression (found by the seeded `snapshot_load` fuzz target): a value with an escaped line
/// break where serde expects a name (`"detrend": "mea\n…"`) made serde's message, which quotes
/// the value, two lines long. Every loader error is one line.
#[test]
fn a_line_break_inside_a_bad_value_stays_out_of_the_message() {
    let tmp = tempfile::tempdir().unwrap();
    let (_, seed) = snapshot_seeds(tmp.path()).remove(0);
    let split = seed.iter().position(|b| *b == 0).unwrap();
    let json = String::from_utf8(seed[..split].to_vec()).unwrap();
    assert!(json.contains("\"detrend\": \"mean\""));
    let bad = json.replace(
        "\"detrend\": \"mean\"",
        "\"detrend\": \"mea one\\nline two\"",
    );
    let err = snapshot::from_bytes(bad.as_bytes(), &seed[split + 1..]).unwrap_err();
    let text = err.to_string();
    assert!(!text.contains('\n'), "{text:?}");
    assert!(text.contains("mea one\\nline two"), "{text:?}");
}
