//! Real lines (issue "Real lines"): modes narrower than the resolution, stray lines on a
//! floor, on records made outside stillpoint's synthesiser.
//!
//! References: tests/reference/make_lines_refs.py (numpy 2.4.6, scipy 1.17.1) wrote
//! tests/data/lines/ (exact AR(2) oscillators + white floor, truth.json); the pull
//! statistics below use an AR(2) generator written here (not the synthesiser of src/).
//! Formulas: METHODS.md §2c (kernel), §11 (the area of a line over T scatters by
//! √(2(x − 1 + e^{−x}))/x, x = ΓT).

#![allow(clippy::unwrap_used)]

mod util;

use std::path::PathBuf;

use serde_json::Value;
use stillpoint::dsp::{Welch, WelchConfig};
use stillpoint::physics::fit;

fn data_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/data/lines")
}

fn truth() -> Value {
    serde_json::from_str(&std::fs::read_to_string(data_dir().join("truth.json")).unwrap()).unwrap()
}

fn num(v: &Value, path: &str) -> f64 {
    let mut cur = v;
    for key in path.split('.') {
        cur = &cur[key];
    }
    cur.as_f64()
        .unwrap_or_else(|| panic!("{path} is not a number: {cur}"))
}

fn analyze(args: &[&str]) -> Value {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("r.json");
    let out_s = out.to_str().unwrap();
    let mut all: Vec<&str> = vec!["analyze"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["-o", out_s]);
    let o = util::run(&all);
    util::assert_success(&o, "analyze");
    serde_json::from_str(&std::fs::read_to_string(&out).unwrap()).unwrap()
}

/// A Q = 10⁴ line 1/48 of the ENBW wide (numpy AR(2) record, 32 s at 8192 S/s, segment 1024):
/// every mode key is reported, the frequency and the area agree with the truth within their
/// σ (3σ), the linewidth is flagged resolution-limited and reported as an upper bound.
#[test]
fn a_line_narrower_than_a_bin_keeps_frequency_and_area() {
    let t = truth();
    let path = data_dir().join("narrow.f32");
    for segment in ["1024", "4096"] {
        let r = analyze(&[
            path.to_str().unwrap(),
            "--sample-format",
            "f32",
            "--rate",
            "8192",
            "--segment",
            segment,
            "--mode-band",
            "2400:2600",
        ]);
        let mode = &r["mode"];
        let f = num(mode, "frequency_hz");
        let sf = num(mode, "frequency_hz_uncertainty");
        let f_true = num(&t, "narrow.frequency_hz");
        assert!((f - f_true).abs() < 3.0 * sf, "seg {segment}: f {f} ± {sf}");
        assert!(sf < 1.0, "seg {segment}: σ_f {sf} Hz");
        let v = num(mode, "variance_v2");
        let sv = num(mode, "variance_v2_uncertainty");
        let v_true = num(&t, "narrow.variance_v2");
        assert!(
            (v - v_true).abs() < 3.0 * sv,
            "seg {segment}: A {v} ± {sv} vs {v_true}"
        );
        // The uncertainty includes the line's own scatter over T (ΓT = 50: ≥ 19 %).
        let x = num(&t, "narrow.gamma_t");
        let floor = (2.0 * (x - 1.0 + (-x).exp())).sqrt() / x;
        assert!(
            sv / v > 0.9 * floor,
            "seg {segment}: σ_A/A {} < {floor}",
            sv / v
        );
        assert_eq!(
            mode["resolution_limited"],
            Value::Bool(true),
            "seg {segment}"
        );
        let g = num(mode, "linewidth_hz");
        let enbw = num(&r["welch"], "enbw_hz");
        assert!(
            g >= num(&t, "narrow.linewidth_hz") && g < 1.5 * enbw,
            "seg {segment}: linewidth bound {g} (ENBW {enbw})"
        );
        let q = num(mode, "quality_factor");
        assert!((q - f / g).abs() < 1e-6 * q);
        assert!(num(mode, "peak_psd_v2_per_hz") > 0.0);
    }
}

/// Exact AR(2) oscillator (poles of the damped oscillator sampled at fs), started in its
/// stationary state, plus white floor of one-sided density `floor`.
fn ar2_record(
    seed: u64,
    fs: f64,
    n: usize,
    f_m: f64,
    gamma: f64,
    var: f64,
    floor: f64,
) -> Vec<f64> {
    ar2_record_with_energy(seed, fs, n, f_m, gamma, var, floor).0
}

/// As [`ar2_record`], also returning the realised variance of the line, mean of x².
fn ar2_record_with_energy(
    seed: u64,
    fs: f64,
    n: usize,
    f_m: f64,
    gamma: f64,
    var: f64,
    floor: f64,
) -> (Vec<f64>, f64) {
    let mut rng = util::SplitMix(seed.wrapping_mul(0x2545_F491_4F6C_DD1D));
    let r = (-std::f64::consts::PI * gamma / fs).exp();
    let w0 = 2.0 * std::f64::consts::PI * f_m;
    let theta = (w0 * w0 - (std::f64::consts::PI * gamma).powi(2)).sqrt() / fs;
    let (a1, a2) = (2.0 * r * theta.cos(), r * r);
    let unit_var = (1.0 + a2) / ((1.0 - a2) * ((1.0 + a2).powi(2) - a1 * a1));
    let s = (var / unit_var).sqrt();
    // Stationary start: (x0, x1) with covariance [[v, ρv], [ρv, v]], ρ = a1/(1 + a2).
    let rho = a1 / (1.0 + a2);
    let x0 = var.sqrt() * rng.normal();
    let x1 = rho * x0 + (var * (1.0 - rho * rho)).sqrt() * rng.normal();
    let sigma_w = (floor * fs / 2.0).sqrt();
    let mut out = Vec::with_capacity(n);
    let (mut xm2, mut xm1) = (x0, x1);
    let mut energy = x0 * x0 + x1 * x1;
    out.push(x0 + sigma_w * rng.normal());
    out.push(x1 + sigma_w * rng.normal());
    for _ in 2..n {
        let x = a1 * xm1 - a2 * xm2 + s * rng.normal();
        xm2 = xm1;
        xm1 = x;
        energy += x * x;
        out.push(x + sigma_w * rng.normal());
    }
    (out, energy / n as f64)
}

/// Pull statistics over 48 seeds for a line 1/60 of the ENBW (Q = 5000 at 1 kHz, fs 4096,
/// segment 512, 16 s so ΓT = 20). Against the ensemble truth: the area's pulls have an rms
/// within [0.7, 1.5] and none beyond 5σ (a single record cannot tell a high draw of the
/// line's energy from a narrow line, so the pulls are skewed: measured 1.24 rms); the
/// frequency's reported σ is not optimistic (rms pull ≤ 1.2; measured 0.39: the σ is the
/// larger of the fit's and the line's own √(γ/4πT), and the fit's weights overstate the
/// noise of bins that the line dominates). Every record is flagged resolution-limited.
#[test]
fn resolution_limited_pulls_are_honest() {
    let (fs, n, seg) = (4096.0, 1 << 16, 512);
    let (f_m, gamma) = (1000.2, 0.2);
    let floor = 1e-6;
    let enbw = 1.5 * fs / seg as f64;
    let var = floor * enbw * 10f64.powf(2.6);
    let seeds = 48;
    let (mut sf, mut sa) = (0.0, 0.0);
    let mut worst = 0.0f64;
    for seed in 0..seeds {
        let x = ar2_record(1000 + seed, fs, n, f_m, gamma, var, floor);
        let mut w = Welch::new(WelchConfig::new(fs, seg)).unwrap();
        w.push(&x);
        let s = w.spectrum().unwrap();
        let r = fit::fit_mode(&s, (900.0, 1100.0)).unwrap();
        assert!(r.resolution_limited, "seed {seed}");
        let pf = (r.frequency_hz.value - f_m) / r.frequency_hz.sigma;
        let pa = (r.area.value - var) / r.area.sigma;
        worst = worst.max(pf.abs()).max(pa.abs());

        sf += pf * pf;
        sa += pa * pa;
    }
    let (rf, ra) = ((sf / seeds as f64).sqrt(), (sa / seeds as f64).sqrt());
    println!("resolution-limited pulls: rms f {rf:.2}, rms A {ra:.2}, worst {worst:.2}");
    assert!((0.2..=1.2).contains(&rf), "rms pull f {rf}");
    assert!((0.7..=1.5).contains(&ra), "rms pull A {ra}");
    assert!(worst < 5.0, "worst pull {worst}");
}

/// Across the resolution boundary (γ from 10⁻⁴ to 20 ENBW, Q from 10⁶ down to 17 at fixed
/// segment) the fit always reports a mode and the area is right within 3σ; for the line
/// narrower than 1/T (ΓT = 0.1) against its realised energy (one draw), with σ ≈ 100 %.
#[test]
fn every_q_gives_a_mode() {
    let (fs, n, seg) = (4096.0, 1 << 16, 512);
    let f_m = 1000.2;
    let floor = 1e-6;
    let enbw = 1.5 * fs / seg as f64;
    for (i, gamma) in [0.001, 0.6, 3.0, 12.0, 60.0].into_iter().enumerate() {
        let var = floor * 10f64.powf(2.6) * (enbw.max(gamma));
        let (x, realised) = ar2_record_with_energy(7 + i as u64, fs, n, f_m, gamma, var, floor);
        let mut w = Welch::new(WelchConfig::new(fs, seg)).unwrap();
        w.push(&x);
        let s = w.spectrum().unwrap();
        let half = (10.0 * gamma).clamp(100.0, 900.0);
        let r = fit::fit_mode(&s, (f_m - half, f_m + half))
            .unwrap_or_else(|e| panic!("γ {gamma}: {e}"));
        let gamma_t = 2.0 * std::f64::consts::PI * gamma * n as f64 / fs;
        if gamma_t < 1.0 {
            assert!(
                r.area.sigma > 0.9 * r.area.value,
                "γ {gamma}: σ_A {}",
                r.area.sigma
            );
            assert!(
                (r.area.value / realised - 1.0).abs() < 0.1,
                "γ {gamma}: {} vs realised {realised}",
                r.area.value
            );
        } else {
            let pa = (r.area.value - var) / r.area.sigma;
            assert!(
                pa.abs() < 3.0,
                "γ {gamma}: area {} ± {} vs {var}",
                r.area.value,
                r.area.sigma
            );
        }
        let pf = (r.frequency_hz.value - f_m) / r.frequency_hz.sigma;
        assert!(
            pf.abs() < 4.0,
            "γ {gamma}: f {} ± {}",
            r.frequency_hz.value,
            r.frequency_hz.sigma
        );
        if gamma > 5.0 * enbw {
            assert!(!r.resolution_limited, "γ {gamma}");
            let pg = (r.linewidth_hz.value - gamma) / r.linewidth_hz.sigma;
            assert!(pg.abs() < 4.0, "γ {gamma}: fitted {}", r.linewidth_hz.value);
        }
        if gamma < 0.1 * enbw {
            assert!(r.resolution_limited, "γ {gamma}");
            assert!(
                r.linewidth_hz.value >= gamma,
                "γ {gamma}: bound {}",
                r.linewidth_hz.value
            );
        }
    }
}

/// The case as a lab meets it: Q = 10⁶ at 310 kHz (FWHM 0.31 Hz) sampled at 1.024 MS/s,
/// `--segment 16384` (62.5 Hz bins, ENBW 94 Hz: the line is 1/300 of it), smeared peak 26 dB
/// over the floor, 4 s (ΓT = 7.8). A mode is reported with every key; f_m within 3σ, area
/// within 3σ of the ensemble truth, linewidth flagged and bounded.
#[test]
fn q_of_a_million_at_coarse_resolution() {
    let (fs, n, seg) = (1.024e6, 1 << 22, 16_384);
    let (f_m, gamma) = (310_000.0, 0.31);
    let floor = 1e-12;
    let enbw = 1.5 * fs / seg as f64;
    let var = floor * enbw * 10f64.powf(2.6);
    for seed in [1u64, 2] {
        let x = ar2_record(seed, fs, n, f_m, gamma, var, floor);
        let mut w = Welch::new(WelchConfig::new(fs, seg)).unwrap();
        w.push(&x);
        let s = w.spectrum().unwrap();
        let r = fit::fit_mode(&s, (309_000.0, 311_000.0)).unwrap();
        assert!(r.resolution_limited);
        let pf = (r.frequency_hz.value - f_m) / r.frequency_hz.sigma;
        let pa = (r.area.value - var) / r.area.sigma;
        println!(
            "seed {seed}: f {:.3} ± {:.3}, A/A0 {:.3} ± {:.3}, γ bound {:.3}, kernel fit {:?}",
            r.frequency_hz.value - f_m,
            r.frequency_hz.sigma,
            r.area.value / var,
            r.area.sigma / var,
            r.linewidth_hz.value,
            r.linewidth_fit_hz
        );
        assert!(
            pf.abs() < 3.0 && pa.abs() < 3.0,
            "seed {seed}: pulls f {pf}, A {pa}"
        );
        assert!(r.linewidth_hz.value >= gamma && r.linewidth_hz.value <= 1.5 * enbw);
    }
}

/// Stray lines on a flat floor (numpy AR(2) lines, tests/data/lines/strays.f32, 262 144 S/s,
/// 2 s): at every segment each resolved line (FWHM ≥ 2 ENBW) is listed exactly once, its
/// height within 2 dB of the truth (10 log₁₀((floor + S_max)/floor), S_max the exact AR(2)
/// peak) and its width within 20 %; nothing else stands 10 dB over the floor.
#[test]
fn stray_lines_on_a_floor_are_listed_once_with_height_and_width() {
    let t = truth();
    let path = data_dir().join("strays.f32");
    let lines = t["strays"]["lines"].as_array().unwrap().clone();
    for segment in ["2048", "8192", "32768"] {
        let r = analyze(&[
            path.to_str().unwrap(),
            "--sample-format",
            "f32",
            "--rate",
            "262144",
            "--segment",
            segment,
        ]);
        let enbw = num(&r["welch"], "enbw_hz");
        let peaks = r["peaks"].as_array().unwrap();
        let listed: Vec<(f64, f64, f64)> = peaks
            .iter()
            .map(|p| {
                (
                    num(p, "frequency_hz"),
                    num(p, "height_over_floor_db"),
                    num(p, "linewidth_hz"),
                )
            })
            .collect();
        println!("segment {segment}: {listed:?}");
        let mut matched = vec![false; listed.len()];
        for line in &lines {
            let (f, g, h) = (
                num(line, "frequency_hz"),
                num(line, "linewidth_hz"),
                num(line, "height_over_floor_db"),
            );
            let near: Vec<usize> = (0..listed.len())
                .filter(|&i| (listed[i].0 - f).abs() <= (0.5 * g).max(2.0 * enbw))
                .collect();
            for &i in &near {
                matched[i] = true;
            }
            if g < 2.0 * enbw {
                continue;
            }
            assert_eq!(
                near.len(),
                1,
                "segment {segment}: line {f} Hz listed {} times",
                near.len()
            );
            let (_, hl, gl) = listed[near[0]];
            assert!(
                (hl - h).abs() <= 2.0,
                "segment {segment}: line {f} Hz height {hl} vs {h}"
            );
            assert!(
                (gl / g - 1.0).abs() <= 0.2,
                "segment {segment}: line {f} Hz width {gl} vs {g}"
            );
        }
        let extra: Vec<&(f64, f64, f64)> = listed
            .iter()
            .zip(&matched)
            .filter(|(_, m)| !**m)
            .map(|(l, _)| l)
            .collect();
        assert!(
            extra.is_empty(),
            "segment {segment}: lines that are not in the record: {extra:?}"
        );
    }
}

/// The bundled strays demo at N = 16384 (15 Hz bins, the mains comb 3.3 bins apart): the
/// 50, 150, 250, 350 and 450 Hz mains lines are listed, and each resonance of the truth
/// exactly once (a comb is no single broad line). Demo data: our own synthesiser, so this
/// checks the listing only; heights and widths are checked above on numpy records.
#[test]
fn strays_demo_lists_mains_and_each_resonance_once() {
    let wav = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("sample-streams/strays.wav");
    let r = analyze(&[wav.to_str().unwrap(), "--segment", "16384"]);
    let f: Vec<f64> = r["peaks"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| num(p, "frequency_hz"))
        .collect();
    for mains in [50.0, 150.0, 250.0, 350.0, 450.0] {
        assert!(
            f.iter().any(|x| (x - mains).abs() < 5.0),
            "{mains} Hz missing: {f:?}"
        );
    }
    for (res, width) in [
        (4350.0, 35.0),
        (23_400.0, 120.0),
        (61_700.0, 85.0),
        (112_900.0, 12.0),
    ] {
        let n = f
            .iter()
            .filter(|x| (*x - res).abs() < 3.0 * width + 30.0)
            .count();
        assert_eq!(n, 1, "{res} Hz listed {n} times: {f:?}");
    }
    assert!(
        f.iter().all(|x| *x < 100.0
            || *x > 160.0
            || (x - 150.0).abs() < 5.0
            || (x - 100.0).abs() < 5.0)
    );
}
