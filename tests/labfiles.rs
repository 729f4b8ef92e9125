//! Lab files (NumPy .npy, HDF5) as sources, and `analyze --figure`.
//!
//! The .npy and HDF5 files were written by numpy 2.4.6 and h5py 3.16.0 (HDF5 2.0.0), not by
//! us; the reference spectra are scipy.signal.welch (scipy 1.17.1) of the same samples:
//! `tests/reference/make_labfiles.py` → `tests/data/labfiles/`. Agreement: 1e-9 relative
//! (plus 1e-15 of the peak for bins near zero), as the Welch reference tests.

#![allow(clippy::unwrap_used)] // test helpers outside #[test] functions

mod util;

use std::fs;
use std::path::{Path, PathBuf};

use util::{assert_success, run, stderr};

fn data() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/labfiles")
}

fn data_str(name: &str) -> String {
    data().join(name).display().to_string()
}

fn sample_stream(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-streams")
        .join(name)
        .display()
        .to_string()
}

/// (frequency, psd) rows of a `spectrum` CSV.
fn read_csv(path: &Path) -> Vec<(f64, f64)> {
    let text = fs::read_to_string(path).expect("read csv");
    let mut lines = text.lines();
    assert!(
        lines
            .next()
            .expect("header")
            .starts_with("frequency_hz,psd_v2_per_hz")
    );
    lines
        .map(|l| {
            let mut cols = l.split(',');
            let f = cols.next().expect("f").parse().expect("f number");
            let p = cols.next().expect("p").parse().expect("p number");
            (f, p)
        })
        .collect()
}

fn reference() -> serde_json::Value {
    let text = fs::read_to_string(data().join("reference.json")).expect("reference.json");
    serde_json::from_str(&text).expect("reference json")
}

/// Every reference case: `stillpoint spectrum FILE ARGS` equals scipy.signal.welch of the
/// same samples to 1e-9 relative (npy of every dtype and byte order, HDF5 contiguous,
/// chunked + gzip + shuffle, gzip only, h5py's automatic chunks, big-endian, libver latest
/// with fixed- and extensible-array chunk indexes; rate from --rate or each attribute name).
#[test]
fn spectra_of_numpy_and_h5py_files_equal_scipy_welch() {
    let refs = reference();
    let versions = &refs["versions"];
    assert_eq!(versions["numpy"], "2.4.6");
    assert_eq!(versions["scipy"], "1.17.1");
    let dir = tempfile::tempdir().unwrap();
    let cases = refs["cases"].as_array().unwrap();
    assert!(cases.len() >= 10);
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let out = dir.path().join(format!("{name}.csv"));
        let file = data_str(case["file"].as_str().unwrap());
        let mut args = vec!["spectrum".to_string(), file];
        args.extend(
            case["args"]
                .as_array()
                .unwrap()
                .iter()
                .map(|a| a.as_str().unwrap().to_string()),
        );
        args.extend(["-o".to_string(), out.display().to_string()]);
        let argv: Vec<&str> = args.iter().map(String::as_str).collect();
        let output = run(&argv);
        assert_success(&output, name);
        let got = read_csv(&out);
        let f_ref = case["frequency_hz"].as_array().unwrap();
        let p_ref = case["psd"].as_array().unwrap();
        assert_eq!(got.len(), f_ref.len(), "{name}: bins");
        let peak = p_ref
            .iter()
            .map(|v| v.as_f64().unwrap())
            .fold(0.0, f64::max);
        for (k, ((f, p), (fr, pr))) in got.iter().zip(f_ref.iter().zip(p_ref)).enumerate() {
            let (fr, pr) = (fr.as_f64().unwrap(), pr.as_f64().unwrap());
            assert!(
                (f - fr).abs() <= 1e-12 * fr.abs().max(1.0),
                "{name} bin {k}: f {f} vs {fr}"
            );
            let tol = 1e-9 * pr.abs() + 1e-15 * peak;
            assert!((p - pr).abs() <= tol, "{name} bin {k}: {p} vs scipy {pr}");
        }
    }
}

fn spectrum_bytes(args: &[&str]) -> Vec<u8> {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("s.csv");
    let mut argv = vec!["spectrum"];
    argv.extend_from_slice(args);
    let out_s = out.display().to_string();
    argv.extend(["-o", &out_s]);
    let output = run(&argv);
    assert_success(&output, &format!("{args:?}"));
    fs::read(&out).unwrap()
}

/// The .npy reader is the raw reader after the header: the same counts give the same CSV
/// byte for byte as a raw file, in either byte order, and in every format version.
#[test]
fn npy_reads_exactly_like_the_raw_reader() {
    let raw = spectrum_bytes(&[
        &data_str("npy/i16_le_2d.raw"),
        "--sample-format",
        "i16",
        "--channels",
        "2",
        "--channel",
        "1",
        "--rate",
        "2000",
        "--segment",
        "128",
        "--volts-per-unit",
        "2e-4",
    ]);
    for file in ["npy/i16_le_2d.npy", "npy/i16_be_2d.npy"] {
        let npy = spectrum_bytes(&[
            &data_str(file),
            "--channel",
            "1",
            "--rate",
            "2000",
            "--segment",
            "128",
            "--volts-per-unit",
            "2e-4",
        ]);
        assert_eq!(npy, raw, "{file}");
    }
    let le = spectrum_bytes(&[
        &data_str("npy/i32_le_3ch.npy"),
        "--channel",
        "1",
        "--rate",
        "500",
    ]);
    let be = spectrum_bytes(&[
        &data_str("npy/i32_be_3ch.npy"),
        "--channel",
        "1",
        "--rate",
        "500",
    ]);
    assert_eq!(le, be);
    let v1 = spectrum_bytes(&[&data_str("npy/f32_v1.npy"), "--rate", "1000"]);
    for v in ["npy/f32_v2.npy", "npy/f32_v3.npy"] {
        assert_eq!(spectrum_bytes(&[&data_str(v), "--rate", "1000"]), v1, "{v}");
    }
}

/// A bad run: exit 2, one line on stderr containing `want`, the existing output untouched.
fn assert_refused(args: &[&str], want: &str) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("keep.csv");
    fs::write(&out, "precious\n").unwrap();
    let out_s = out.display().to_string();
    let mut argv = vec!["spectrum"];
    argv.extend_from_slice(args);
    argv.extend(["-o", &out_s]);
    let output = run(&argv);
    let err = stderr(&output);
    assert_eq!(output.status.code(), Some(2), "{args:?}: {err}");
    assert!(err.contains(want), "{args:?}: {err:?} should say {want:?}");
    assert_eq!(
        err.trim_end().lines().count(),
        1,
        "{args:?}: one line: {err:?}"
    );
    assert!(!err.contains("panicked"), "{err}");
    assert_eq!(fs::read_to_string(&out).unwrap(), "precious\n", "{args:?}");
}

#[test]
fn bad_npy_files_are_refused_with_one_clear_line() {
    for (file, want) in [
        ("npy/fortran.npy", "Fortran-order"),
        ("npy/object.npy", "object arrays"),
        ("npy/structured.npy", "structured"),
        ("npy/u16.npy", "dtype '<u2' is not supported"),
        ("npy/i64.npy", "dtype '<i8'"),
        ("npy/c64.npy", "dtype '<c8'"),
        ("npy/three_d.npy", "3-D"),
        ("npy/empty.npy", "empty"),
        ("npy/corrupt_header.npy", "corrupt header"),
        ("npy/not_numpy.npy", "not a .npy file"),
        ("npy/missing.npy", "missing.npy"),
    ] {
        assert_refused(&[&data_str(file), "--rate", "1000"], want);
    }
    assert_refused(&[&data_str("npy/f32_le_1d.npy")], "--rate");
    assert_refused(
        &[
            &data_str("npy/i16_le_2d.npy"),
            "--rate",
            "1000",
            "--channel",
            "2",
        ],
        "--channel 2 is out of range: the array has 2 channels",
    );
    assert_refused(
        &[
            &data_str("npy/f32_le_1d.npy"),
            "--rate",
            "1000",
            "--dataset",
            "/x",
        ],
        "--dataset applies to an HDF5 file",
    );
}

/// np.save interrupted mid-body: the samples present are analysed, with one warning.
#[test]
fn truncated_npy_is_analysed_with_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("t.csv");
    let output = run(&[
        "spectrum",
        &data_str("npy/truncated.npy"),
        "--rate",
        "1000",
        "--segment",
        "256",
        "-o",
        &out.display().to_string(),
    ]);
    assert_success(&output, "truncated npy");
    let err = stderr(&output);
    assert!(err.contains("ends before the file's header says"), "{err}");
    assert!(err.contains("1000 samples"), "{err}");
    assert_eq!(read_csv(&out).len(), 129);
}

#[test]
fn bad_hdf5_inputs_are_refused_with_one_clear_line() {
    let lab = data_str("lab.h5");
    for (args, want) in [
        (vec![lab.as_str()], "say which dataset with --dataset"),
        (
            vec![lab.as_str(), "--dataset", "/raw/nope"],
            "no dataset /raw/nope",
        ),
        (
            vec![lab.as_str(), "--dataset", "/raw/nope"],
            "/raw/contiguous_f32",
        ),
        (
            vec![lab.as_str(), "--dataset", "/labels"],
            "holds strings, not numbers",
        ),
        (vec![lab.as_str(), "--dataset", "/notes"], "not numbers"),
        (
            vec![lab.as_str(), "--dataset", "/raw/no_rate"],
            "no sample rate",
        ),
        (
            vec![lab.as_str(), "--dataset", "/raw/text_rate"],
            "attribute sample_rate_hz is not a number",
        ),
        (
            vec![lab.as_str(), "--dataset", "/raw/negative_rate"],
            "not a positive sample rate",
        ),
        (
            vec![lab.as_str(), "--dataset", "/raw/u16"],
            "unsigned 16-bit integers are not supported",
        ),
        (vec![lab.as_str(), "--dataset", "/raw/three_d"], "3-D"),
        (vec![lab.as_str(), "--dataset", "/raw"], "/raw"),
        (
            vec![
                lab.as_str(),
                "--dataset",
                "/raw/chunked_i16",
                "--channel",
                "5",
            ],
            "--channel 5 is out of range",
        ),
    ] {
        assert_refused(&args, want);
    }
    let corrupt = data_str("corrupt.h5");
    assert_refused(
        &[&corrupt, "--dataset", "/raw/contiguous_f32"],
        "not a readable HDF5 file",
    );
    assert_refused(
        &[&data_str("v200.h5"), "--dataset", "/fixed"],
        "libver='v112'",
    );
    let missing = data_str("missing.h5");
    assert_refused(&[&missing, "--dataset", "/x"], "missing.h5");
    // a .npy renamed .h5 is not HDF5
    let dir = tempfile::tempdir().unwrap();
    let fake = dir.path().join("fake.hdf5");
    fs::copy(data().join("npy/f32_le_1d.npy"), &fake).unwrap();
    assert_refused(
        &[&fake.display().to_string(), "--dataset", "/x"],
        "not a readable HDF5 file",
    );
}

/// --rate overrides the attribute; the attribute order is sample_rate_hz, fs, rate.
#[test]
fn hdf5_rate_comes_from_the_option_or_the_first_attribute() {
    let lab = data_str("lab.h5");
    let with_attr = spectrum_bytes(&[&lab, "--dataset", "/raw/gzip_i32", "--segment", "256"]);
    let given = spectrum_bytes(&[
        &lab,
        "--dataset",
        "/raw/gzip_i32",
        "--segment",
        "256",
        "--rate",
        "4000",
    ]);
    assert_eq!(with_attr, given, "sample_rate_hz = 4000 wins over fs = 1");
    let other = spectrum_bytes(&[
        &lab,
        "--dataset",
        "/raw/gzip_i32",
        "--segment",
        "256",
        "--rate",
        "8000",
    ]);
    assert_ne!(other, given);
    // an unusable attribute does not matter when --rate is given
    spectrum_bytes(&[
        &lab,
        "--dataset",
        "/raw/text_rate",
        "--rate",
        "1000",
        "--segment",
        "64",
    ]);
    let text = String::from_utf8(other).unwrap();
    let last = text.lines().last().unwrap();
    let nyquist: f64 = last.split(',').next().unwrap().parse().unwrap();
    assert_eq!(nyquist, 4000.0, "Nyquist at 8000/2: {last}");
}

fn analyze(args: &[&str]) -> (std::process::Output, serde_json::Value, tempfile::TempDir) {
    let dir = tempfile::tempdir().unwrap();
    let json = dir.path().join("r.json");
    let mut argv = vec!["analyze"];
    argv.extend_from_slice(args);
    let json_s = json.display().to_string();
    argv.extend(["-o", &json_s, "-q"]);
    let output = run(&argv);
    assert_success(&output, &format!("{args:?}"));
    let report = serde_json::from_str(&fs::read_to_string(&json).unwrap()).unwrap();
    (output, report, dir)
}

fn num(v: &serde_json::Value, path: &str) -> f64 {
    path.split('.')
        .fold(v, |v, k| &v[k])
        .as_f64()
        .unwrap_or_else(|| panic!("{path} missing"))
}

/// Parses "a ± b", "(a ± b)×10ⁿ" or "a" (typographic minus) into (value, sigma, decimals of
/// the printed numbers, power of ten).
fn parse_pm(text: &str) -> (f64, Option<f64>, i32) {
    let text = text.replace('−', "-");
    let (body, power) = match text.split_once(")×10") {
        Some((b, p)) => {
            let digits: String = p
                .chars()
                .map(|c| match c {
                    '⁻' => '-',
                    '⁰' => '0',
                    '¹' => '1',
                    '²' => '2',
                    '³' => '3',
                    '⁴' => '4',
                    '⁵' => '5',
                    '⁶' => '6',
                    '⁷' => '7',
                    '⁸' => '8',
                    '⁹' => '9',
                    other => other,
                })
                .collect();
            (
                b.trim_start_matches('(').to_string(),
                digits.parse::<i32>().unwrap(),
            )
        }
        None => (text.clone(), 0),
    };
    let scale = 10_f64.powi(power);
    let (v, s) = match body.split_once(" ± ") {
        Some((v, s)) => (v.to_string(), Some(s.to_string())),
        None => (body, None),
    };
    let decimals = v.split_once('.').map_or(0, |(_, d)| d.len() as i32) - power;
    (
        v.parse::<f64>().unwrap() * scale,
        s.map(|s| s.parse::<f64>().unwrap() * scale),
        decimals,
    )
}

/// σ rounded to two significant digits.
fn two_digits(sigma: f64) -> f64 {
    let place = sigma.log10().floor() as i32 - 1;
    (sigma / 10_f64.powi(place)).round() * 10_f64.powi(place)
}

/// The SVG: well-formed XML, SI axis labels, every series, and a caption whose numbers are
/// the report's, σ to two significant digits and the value to the same place.
#[test]
fn svg_figure_has_axes_series_and_the_reports_numbers() {
    let dir = tempfile::tempdir().unwrap();
    let svg_path = dir.path().join("fig.svg");
    let svg_s = svg_path.display().to_string();
    let (_, report, _keep) = analyze(&[
        &sample_stream("thermal.wav"),
        "--segment",
        "16384",
        "--mode-band",
        "85000:87200",
        "--tone-freq",
        "89000",
        "--tone-rms-m",
        "2e-12",
        "--mass",
        "2e-12",
        "--bath-temperature",
        "295",
        "--figure",
        &svg_s,
    ]);
    let text = fs::read_to_string(&svg_path).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("the SVG is well-formed XML");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(
        root.attribute("width"),
        Some("244.8pt"),
        "one journal column, 3.4 in"
    );
    let texts = |class: &str| -> Vec<String> {
        doc.descendants()
            .filter(|n| n.has_tag_name("text"))
            .filter(|n| {
                n.attribute("class")
                    .is_some_and(|c| c.split(' ').any(|w| w == class))
            })
            .map(|n| n.text().unwrap_or_default().to_string())
            .collect()
    };
    let axes = texts("axis-label");
    assert!(axes.iter().any(|t| t == "Frequency (kHz)"), "{axes:?}");
    assert!(
        axes.iter().any(|t| t == "Displacement PSD Sₓₓ (m²/Hz)"),
        "{axes:?}"
    );
    let y_ticks = texts("y");
    assert!(
        y_ticks.iter().filter(|t| t.starts_with("10")).count() >= 3,
        "{y_ticks:?}"
    );
    for class in ["measured", "fit", "zero-point", "sql", "thermal"] {
        let line = doc
            .descendants()
            .find(|n| {
                n.has_tag_name("polyline")
                    && n.attribute("class") == Some(&format!("series {class}"))
            })
            .unwrap_or_else(|| panic!("no {class} series"));
        let points = line.attribute("points").unwrap().split(' ').count();
        assert!(points > 20, "{class}: {points} points");
    }
    let legend = texts("legend");
    assert_eq!(legend.len(), 5, "{legend:?}");
    assert!(
        legend.iter().any(|t| t.contains("thermal at 295 K")),
        "{legend:?}"
    );
    let caption = texts("caption");
    assert_eq!(caption.len(), 4, "{caption:?}");
    for (prefix, key, unit) in [
        ("fₘ = ", "mode.frequency_hz", " Hz"),
        ("γ = ", "mode.linewidth_hz", " Hz"),
        ("Q = ", "mode.quality_factor", ""),
        ("n̄ = ", "quantum.occupancy", ""),
    ] {
        let line = caption
            .iter()
            .find(|l| l.starts_with(prefix))
            .unwrap_or_else(|| panic!("{prefix}"));
        let body = line
            .strip_prefix(prefix)
            .unwrap()
            .strip_suffix(unit)
            .unwrap();
        let (value, sigma, decimals) = parse_pm(body);
        let want = num(&report, key);
        let want_sigma = num(&report, &format!("{key}_uncertainty"));
        let sigma = sigma.unwrap_or_else(|| panic!("{line}: no ±"));
        assert!(
            (sigma - two_digits(want_sigma)).abs() <= 1e-9 * want_sigma,
            "{line}: σ {sigma} vs report {want_sigma}"
        );
        // The value is rounded at σ's second significant digit, no finer and no coarser.
        let step = 10_f64.powi(two_digits(want_sigma).log10().floor() as i32 - 1);
        assert!(
            decimals <= (-step.log10().round() as i32).max(0),
            "{line}: more digits than σ supports"
        );
        assert!(
            (value - want).abs() <= 0.5 * step * (1.0 + 1e-9),
            "{line}: {value} vs report {want}"
        );
        assert!(
            ((value / step).round() - value / step).abs() < 1e-6,
            "{line}: {value} is not rounded at σ's second digit ({step})"
        );
    }
}

/// The PNG decodes to the column size at 600 dpi (and the slide size), with ink on it.
#[test]
fn png_figure_decodes_to_the_stated_size() {
    let dir = tempfile::tempdir().unwrap();
    for (size, w, h) in [("column", 2040, 1560), ("slide", 1920, 1080)] {
        let png = dir.path().join(format!("{size}.png"));
        let png_s = png.display().to_string();
        analyze(&[
            &data_str("npy/f32_le_1d.npy"),
            "--rate",
            "1000",
            "--segment",
            "256",
            "--figure",
            &png_s,
            "--figure-size",
            size,
        ]);
        let img = image::open(&png).expect("decodes").to_rgba8();
        assert_eq!((img.width(), img.height()), (w, h), "{size}");
        let dark = img
            .pixels()
            .filter(|p| p.0[0] < 100 && p.0[1] < 100 && p.0[2] < 100)
            .count();
        let white = img.pixels().filter(|p| p.0[..3] == [255, 255, 255]).count();
        let total = (w * h) as usize;
        assert!(
            dark > total / 1000,
            "{size}: text and frame drawn ({dark} dark pixels)"
        );
        assert!(
            white > total / 2,
            "{size}: mostly background ({white} white)"
        );
    }
}

/// Uncalibrated: volts on the axis, no quantum curves (they need metres and a mass).
#[test]
fn uncalibrated_figure_is_in_volts_without_quantum_curves() {
    let dir = tempfile::tempdir().unwrap();
    let svg_path = dir.path().join("v.svg");
    let svg_s = svg_path.display().to_string();
    analyze(&[
        &sample_stream("thermal.wav"),
        "--mode-band",
        "85000:87200",
        "--figure",
        &svg_s,
    ]);
    let text = fs::read_to_string(&svg_path).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let all: Vec<&str> = doc.descendants().filter_map(|n| n.text()).collect();
    assert!(all.contains(&"Voltage PSD (V²/Hz)"), "{all:?}");
    assert!(!text.contains("series zero-point") && !text.contains("series sql"));
    assert!(text.contains("series fit"));
}

/// A figure name that is not .svg/.png is refused before any work; nothing is written.
#[test]
fn bad_figure_extension_is_refused_and_nothing_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let json = dir.path().join("r.json");
    fs::write(&json, "old\n").unwrap();
    let output = run(&[
        "analyze",
        &data_str("npy/f32_le_1d.npy"),
        "--rate",
        "1000",
        "-o",
        &json.display().to_string(),
        "--figure",
        &dir.path().join("fig.pdf").display().to_string(),
    ]);
    let err = stderr(&output);
    assert_eq!(output.status.code(), Some(2), "{err}");
    assert!(err.contains(".svg or .png"), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
    assert_eq!(fs::read_to_string(&json).unwrap(), "old\n");
    assert!(!dir.path().join("fig.pdf").exists());
}
