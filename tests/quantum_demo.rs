//! The `quantum` scenario (the demo: cryostat to 4 K, then sideband laser cooling to a few
//! phonons, read out in heterodyne) against formulas from outside the project, and the
//! sideband analysis on its recording and on a record made by numpy.
//!
//! Outside references:
//! - `tests/data/quantum/quantum_refs.json`, made by `tests/reference/quantum_refs.py`
//!   (numpy 2.4.6, scipy 1.17.1; CODATA constants from scipy.constants), which re-implements
//!   from the sources: Bose–Einstein occupancy (METHODS §4); resolved-sideband cooling
//!   Γ_eff = Γ_m + Γ_opt and n̄ = (Γ_m n̄_bath + Γ_opt n̄_min)/Γ_eff with n̄_min = (κ/4Ω_m)²
//!   [Aspelmeyer, Kippenberg & Marquardt, RMP 86, 1391 (2014), §VII.A, from memory;
//!   Marquardt et al., PRL 99, 093902 (2007), from memory]; sideband areas x_zpf²(n̄+1) and
//!   x_zpf² n̄, R = (n̄+1)/n̄ (METHODS §6; Safavi-Naeini et al., PRL 108, 033602 (2012)).
//! - `tests/data/quantum/numpy_sidebands.wav`: an independent heterodyne record (numpy
//!   resonators, not our synthesiser) with n̄ = 2, from the same script.
//! - The area of a line of FWHM γ over a record of length T scatters by √(2/(ΓT)) (common
//!   practice; METHODS §11).
#![allow(clippy::unwrap_used)]

mod util;

use std::path::Path;

use stillpoint::synth::ScenarioConfig;
use stillpoint::synth::quantum::QuantumStage;
use util::*;

fn refs() -> serde_json::Value {
    read_json(&Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/quantum/quantum_refs.json"))
}

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

fn scenario() -> (ScenarioConfig, stillpoint::synth::quantum::QuantumParams) {
    let cfg = ScenarioConfig::defaults("quantum").unwrap();
    let q = cfg.quantum.clone().unwrap();
    (cfg, q)
}

/// Every scheduled value over the cycle agrees with the numpy re-implementation to 1e-9.
#[test]
fn schedule_matches_numpy_reference() {
    let (cfg, q) = scenario();
    let r = refs();
    let states = r["states"].as_array().unwrap();
    assert!(states.len() >= 10);
    for s in states {
        let t = s["time_secs"].as_f64().unwrap();
        let p = q.cycle_state(&cfg, t);
        for (name, got) in [
            ("bath_temperature_k", p.bath_temperature_k),
            ("frequency_hz", p.frequency_hz),
            ("intrinsic_linewidth_hz", p.intrinsic_linewidth_hz),
            ("optical_damping_hz", p.optical_damping_hz),
            ("linewidth_hz", p.linewidth_hz),
            ("bath_occupancy", p.bath_occupancy),
            ("minimum_occupancy", p.minimum_occupancy),
            ("occupancy", p.occupancy),
            ("x_zpf_m", p.x_zpf_m),
            ("red_area_m2", p.red_area_m2),
            ("blue_area_m2", p.blue_area_m2),
            ("ratio", p.ratio),
            ("effective_temperature_k", p.effective_temperature_k),
        ] {
            let want = s[name].as_f64().unwrap();
            if want == 0.0 {
                assert!(got.abs() < 1e-12, "t = {t}: {name} = {got}, want 0");
            } else {
                assert!(
                    rel(got, want) < 1e-9,
                    "t = {t}: {name} = {got}, numpy {want}"
                );
            }
        }
    }
}

/// The story the demo tells, in numbers: six decades of occupancy from the 4 K bath to the
/// few-phonon end, the line broadened by the optical damping, the asymmetry R = (n̄+1)/n̄.
#[test]
fn cooling_physics() {
    let (cfg, q) = scenario();
    let [s0, s1, s2, s3] = q.stage_secs;
    let start = q.cycle_state(&cfg, 0.0);
    let bath = q.cycle_state(&cfg, s0 + 0.5 * s1);
    let end = q.cycle_state(&cfg, s0 + s1 + s2 + 0.5 * s3);
    assert_eq!(start.stage, QuantumStage::Cryostat);
    assert_eq!(bath.stage, QuantumStage::Bath);
    assert_eq!(end.stage, QuantumStage::FewPhonons);
    // 295 K: n̄ ≈ k_BT/ħΩ − ½ (METHODS §4 high-T limit) = 7.14e7.
    assert!(rel(start.occupancy, 7.139e7) < 1e-3, "{}", start.occupancy);
    // 4 K bath: n̄_BE ≈ 9.65e5 (METHODS §4), no cooling beam: n̄ = n̄_bath, γ_eff = γ_m.
    assert!((bath.bath_temperature_k - 4.0).abs() < 1e-12);
    assert!(rel(bath.occupancy, bath.bath_occupancy) < 1e-12);
    assert!(rel(bath.linewidth_hz, bath.intrinsic_linewidth_hz) < 1e-12);
    assert!(rel(bath.occupancy, 9.647e5) < 1e-3, "{}", bath.occupancy);
    // Few phonons: the heating rate γ_m n̄_bath shared by γ_eff; n̄_min = (κ/4f_m)² ≈ 0.0134.
    let n_min = (q.cavity_linewidth_hz / (4.0 * end.frequency_hz)).powi(2);
    assert!(rel(end.minimum_occupancy, n_min) < 1e-12);
    assert!(
        end.occupancy > 1.0 && end.occupancy < 5.0,
        "{}",
        end.occupancy
    );
    assert!(
        (bath.occupancy / end.occupancy).log10() > 5.5,
        "only {:.2} decades",
        (bath.occupancy / end.occupancy).log10()
    );
    // Broadened line: γ_eff = γ_m + γ_opt, five decades wider than the intrinsic line.
    assert!(
        rel(
            end.linewidth_hz,
            end.intrinsic_linewidth_hz + q.cooling_damping_hz
        ) < 1e-12
    );
    assert!(end.linewidth_hz / end.intrinsic_linewidth_hz > 1e5);
    // Sideband asymmetry (METHODS §6): R = (n̄+1)/n̄, n̄ = 1/(R − 1) (R ≈ 1.48 here).
    assert!(rel(end.ratio, (end.occupancy + 1.0) / end.occupancy) < 1e-12);
    assert!(rel(1.0 / (end.ratio - 1.0), end.occupancy) < 1e-9);
    assert!(end.ratio > 1.4 && end.ratio < 1.6, "{}", end.ratio);
    // Limits of the cooling formula: no cooling beam → the bath; a strong beam → n̄_min.
    let strong = (bath.intrinsic_linewidth_hz * bath.bath_occupancy + 1e12 * n_min)
        / (bath.intrinsic_linewidth_hz + 1e12);
    assert!(rel(strong, n_min) < 1e-6);
    // The demo's cycle is a few minutes and restarts where it began.
    assert!(q.cycle_secs() <= 240.0);
    let again = q.state_at(&cfg, q.cycle_secs(), true);
    assert_eq!(again.stage, QuantumStage::Cryostat);
    assert!(rel(again.occupancy, start.occupancy) < 1e-12);
    // The occupancy never rises while cooling (monotonic on a fine grid).
    let mut last = f64::INFINITY;
    for i in 0..=2000 {
        let p = q.cycle_state(&cfg, (s0 + s1 + s2 + s3) * i as f64 / 2000.0);
        assert!(p.occupancy <= last * (1.0 + 1e-12), "rises at step {i}");
        last = p.occupancy;
    }
}

/// The synthesised few-phonon record: the two sideband areas (band sums around the lines,
/// our own Welch) against x_zpf²(n̄+1)/c² and x_zpf² n̄/c² within the scatter of a finite
/// record, and the live generator equals the file generator at the same cycle time.
#[test]
fn record_holds_the_true_sideband_areas() {
    let (mut cfg, q) = scenario();
    cfg.duration_secs = 1.0;
    let truth = cfg.truth().unwrap();
    let sb = truth.sidebands.clone().unwrap();
    let x = cfg.samples().unwrap();
    let fs = cfg.sample_rate_hz;
    let spectrum = {
        let mut w =
            stillpoint::dsp::Welch::new(stillpoint::dsp::WelchConfig::new(fs, 16_384)).unwrap();
        w.push(&x);
        w.flush();
        w.spectrum().unwrap()
    };
    let df = spectrum.resolution_hz;
    let psd = &spectrum.psd_v2_per_hz;
    let area = |f0: f64| {
        // ±5γ around the line (the PM lines sit 5.8γ away) minus the floor from a stretch
        // between line and carrier.
        let half = 5.0 * sb.linewidth_hz;
        let floor_band: Vec<f64> = psd
            .iter()
            .enumerate()
            .filter(|(k, _)| {
                let f = *k as f64 * df;
                (f - q.carrier_hz).abs() > 3_000.0 && (f - q.carrier_hz).abs() < 20_000.0
            })
            .map(|(_, p)| *p)
            .collect();
        let floor = floor_band.iter().sum::<f64>() / floor_band.len() as f64;
        let sum: f64 = psd
            .iter()
            .enumerate()
            .filter(|(k, _)| (*k as f64 * df - f0).abs() <= half)
            .map(|(_, p)| (p - floor) * df)
            .sum();
        // A Lorentzian holds (2/π)·atan(2·5) of its area within ±5γ.
        sum / ((2.0 / std::f64::consts::PI) * 10f64.atan())
    };
    let red = area(sb.red_frequency_hz);
    let blue = area(sb.blue_frequency_hz);
    // Scatter of a line's area over T = 1 s: √(2/(ΓT)) ≈ 0.9 %; allow 4σ plus floor noise.
    let tol =
        4.0 * (2.0 / (std::f64::consts::TAU * sb.linewidth_hz * cfg.duration_secs)).sqrt() + 0.01;
    assert!(
        rel(red, sb.red_area_v2) < tol,
        "red {red} vs {}",
        sb.red_area_v2
    );
    assert!(
        rel(blue, sb.blue_area_v2) < tol,
        "blue {blue} vs {}",
        sb.blue_area_v2
    );
    let r = red / blue;
    assert!(
        (r - sb.ratio).abs() < 2.0 * tol * sb.ratio,
        "R = {r}, truth {}",
        sb.ratio
    );
    assert!(r > 1.3, "asymmetry not visible: R = {r}");

    // Live generator at the same cycle time gives the same state (not the same noise).
    let live = q.state_at(&cfg, q.file_start() + 0.5, true);
    let file = q.state_at(&cfg, 0.5, false);
    assert_eq!(live.occupancy, file.occupancy);
    assert_eq!(live.linewidth_hz, file.linewidth_hz);
}

/// `stillpoint analyze` on the committed recording recovers n̄ (from R and from the
/// calibrated areas) and the broadened linewidth within their reported σ of the truth.
#[test]
fn analyze_recovers_occupancy_from_the_recording() {
    let dir = tempfile::tempdir().unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-streams");
    let wav = root.join("quantum.wav");
    let truth = read_json(&root.join("quantum.truth.json"));
    let sb = &truth["sidebands"];
    let n_true = sb["occupancy"].as_f64().unwrap();
    let g_true = sb["linewidth_hz"].as_f64().unwrap();
    let f_m = sb["mechanical_frequency_hz"].as_f64().unwrap();
    let carrier = sb["carrier_hz"].as_f64().unwrap().to_string();
    let tone = truth["tone"]["frequency_hz"].as_f64().unwrap().to_string();
    let tone_rms = truth["tone"]["rms_m"].as_f64().unwrap().to_string();
    let mass = truth["config"]["mass_kg"].as_f64().unwrap().to_string();
    let band = format!("{}:{}", f_m - 8000.0, f_m + 8000.0);
    let out = dir.path().join("q.json");
    let output = run(&[
        "analyze",
        s(&wav),
        "--segment",
        "32768",
        "--carrier",
        &carrier,
        "--lo-side",
        "above",
        "--mode-band",
        &band,
        "--tone-freq",
        &tone,
        "--tone-rms-m",
        &tone_rms,
        "--mass",
        &mass,
        "--quiet",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "analyze quantum.wav");
    let report = read_json(&out);
    let r = &report["sidebands"];
    let n = r["occupancy"].as_f64().unwrap();
    let sn = r["occupancy_uncertainty"].as_f64().unwrap();
    println!(
        "sidebands.occupancy = {n} ± {sn} (truth {n_true}): {:.2}σ",
        (n - n_true) / sn
    );
    assert!(
        (n - n_true).abs() <= 2.0 * sn,
        "n = {n} ± {sn}, truth {n_true}"
    );
    assert!(sn < 0.2 * n_true, "σ = {sn}");
    let g = r["linewidth_hz"].as_f64().unwrap();
    let sg = r["linewidth_hz_uncertainty"].as_f64().unwrap();
    println!("sidebands.linewidth_hz = {g} ± {sg} (truth {g_true})");
    assert!(
        (g - g_true).abs() <= 3.0 * sg + 0.01 * g_true,
        "γ = {g} ± {sg}"
    );
    // Calibrated by the PM lines: c = x_cal,rms/√(P_up + P_down) = m_per_v of the truth.
    let c = report["calibration"]["m_per_v"].as_f64().unwrap();
    let sc = report["calibration"]["m_per_v_uncertainty"]
        .as_f64()
        .unwrap();
    let c_true = truth["m_per_v"].as_f64().unwrap();
    println!("calibration.m_per_v = {c} ± {sc} (truth {c_true})");
    assert!((c - c_true).abs() <= 3.0 * sc, "m/V = {c} ± {sc}");
    // The occupancy from the calibrated areas (METHODS §4): c²(A_r + A_b) = x_zpf²(2n̄+1).
    let na = report["quantum"]["occupancy"].as_f64().unwrap();
    let sna = report["quantum"]["occupancy_uncertainty"].as_f64().unwrap();
    println!(
        "quantum.occupancy = {na} ± {sna} (truth {n_true}): {:.2}σ",
        (na - n_true) / sna
    );
    assert!((na - n_true).abs() <= 3.0 * sna, "n(areas) = {na} ± {sna}");
    let x_zpf = report["quantum"]["x_zpf_m"].as_f64().unwrap();
    assert!(rel(x_zpf, sb["x_zpf_m"].as_f64().unwrap()) < 1e-3);
}

/// The numpy record (not our synthesiser): R and n̄ within 3σ; with the LO side swapped
/// the ratio inverts (R < 1: no occupancy), which the window reports as a contradiction.
#[test]
fn analyze_numpy_record() {
    let r = refs();
    let rec = &r["numpy_record"];
    let wav = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/quantum/numpy_sidebands.wav");
    let fc = rec["carrier_hz"].as_f64().unwrap();
    let fm = rec["mechanical_frequency_hz"].as_f64().unwrap();
    let n_true = rec["occupancy"].as_f64().unwrap();
    let dir = tempfile::tempdir().unwrap();
    let band = format!("{}:{}", fm - 3000.0, fm + 3000.0);
    let mut ratios = Vec::new();
    for side in ["above", "below"] {
        let out = dir.path().join(format!("{side}.json"));
        let output = run(&[
            "analyze",
            s(&wav),
            "--segment",
            "4096",
            "--carrier",
            &fc.to_string(),
            "--lo-side",
            side,
            "--mode-band",
            &band,
            "--quiet",
            "-o",
            s(&out),
        ]);
        assert_success(&output, side);
        let rep = read_json(&out);
        let sb = &rep["sidebands"];
        let ratio = sb["ratio"].as_f64().unwrap();
        ratios.push(ratio);
        if side == "above" {
            let n = sb["occupancy"].as_f64().unwrap();
            let sn = sb["occupancy_uncertainty"].as_f64().unwrap();
            println!("numpy record: n = {n} ± {sn} (truth {n_true}), R = {ratio}");
            assert!((n - n_true).abs() <= 3.0 * sn, "n = {n} ± {sn}");
            let g = sb["linewidth_hz"].as_f64().unwrap();
            let g_true = rec["linewidth_hz"].as_f64().unwrap();
            assert!(rel(g, g_true) < 0.15, "γ = {g} vs {g_true}");
        } else {
            assert!(ratio < 1.0, "R = {ratio}");
            assert!(sb["occupancy"].is_null());
        }
    }
    assert!((ratios[0] * ratios[1] - 1.0).abs() < 1e-9);
}

/// A line narrower than the resolution (the 4 K bath stage: γ_m = 4 mHz) is still read:
/// areas by band sums (METHODS §2c), no linewidth claimed, f_m from the peaks.
#[test]
fn unresolved_sidebands_are_read_by_band_sums() {
    let (mut cfg, q) = scenario();
    let mut qp = q.clone();
    qp.file_start_secs = Some(q.stage_secs[0] + 0.5 * q.stage_secs[1]);
    cfg.quantum = Some(qp);
    cfg.duration_secs = 1.0;
    cfg.format = stillpoint::synth::WavFormat::F32;
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("bath.wav");
    let truth = stillpoint::synth::write_wav(&cfg, &wav).unwrap();
    let sb = truth.sidebands.unwrap();
    assert!(sb.linewidth_hz < 0.01);
    let out = dir.path().join("bath.json");
    let band = format!(
        "{}:{}",
        sb.mechanical_frequency_hz - 3000.0,
        sb.mechanical_frequency_hz + 3000.0
    );
    let output = run(&[
        "analyze",
        s(&wav),
        "--segment",
        "65536",
        "--carrier",
        &q.carrier_hz.to_string(),
        "--lo-side",
        "above",
        "--mode-band",
        &band,
        "--m-per-v",
        &cfg.m_per_v.to_string(),
        "--mass",
        &cfg.mass_kg.to_string(),
        "--quiet",
        "-o",
        s(&out),
    ]);
    assert_success(&output, "analyze bath stage");
    let rep = read_json(&out);
    let r = &rep["sidebands"];
    assert!(r["linewidth_hz"].is_null(), "{r}");
    let f = r["mechanical_frequency_hz"].as_f64().unwrap();
    assert!((f - sb.mechanical_frequency_hz).abs() < 8.0, "f_m = {f}");
    // A 4 mHz line's energy is correlated over 1/Γ ≈ 37 s: over 1 s the area is one draw of
    // a thermal energy (exponential-like), so only the order of magnitude is checked.
    let red = r["red"]["area_v2"].as_f64().unwrap();
    let ratio = red / sb.red_area_v2;
    assert!(
        ratio > 0.02 && ratio < 6.0,
        "red area {red} vs {}",
        sb.red_area_v2
    );
    // ... and the report says so: each area's σ is at least the area (METHODS §11, ΓT ≈ 0.03
    // here), while R = red/blue, where a common draw of the energy cancels, keeps a σ that
    // is a fraction of its value.
    let red_sigma = r["red"]["area_v2_uncertainty"].as_f64().unwrap();
    assert!(red_sigma >= red.abs(), "red area σ {red_sigma} < {red}");
    let blue = r["blue"]["area_v2"].as_f64().unwrap();
    let blue_sigma = r["blue"]["area_v2_uncertainty"].as_f64().unwrap();
    assert!(
        blue_sigma >= blue.abs(),
        "blue area σ {blue_sigma} < {blue}"
    );
    let (rr, rs) = (
        r["ratio"].as_f64().unwrap(),
        r["ratio_uncertainty"].as_f64().unwrap(),
    );
    assert!(rs < 0.5 * rr, "R = {rr} ± {rs}");
    let n = rep["quantum"]["occupancy"].as_f64().unwrap();
    assert!(n > 1e4, "n from areas = {n}");
    assert!(
        rep["notes"]
            .as_array()
            .unwrap()
            .iter()
            .any(|t| t.as_str().unwrap().contains("narrower than the resolution")),
        "{}",
        rep["notes"]
    );
}
