//! Physics formulas against their published sources, with check values computed independently
//! by tests/reference/physics_checks.py (numpy 2.4.6, scipy 1.17.1; output committed in
//! tests/data/physics/physics_checks.json), and parameter recovery from synthetic spectra of
//! known truth (mode fit, calibration, sidebands, stray peaks, the whole `analyze`).

#![allow(clippy::unwrap_used)] // test helpers outside #[test] functions

use std::f64::consts::PI;
use stillpoint::synth::rng::splitmix64;

use stillpoint::dsp::{Averaging, Detrend, Spectrum, WindowKind};
use stillpoint::physics::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};
use stillpoint::physics::oscillator::{self, Oscillator};
use stillpoint::physics::{Estimate, calibration, fit, occupancy, quantum, window_stats};

/// Rows of a reference table that has `frequency_hz` and `temperature_k`: (f, T, row).
fn f_t_rows(c: &serde_json::Value, key: &str) -> Vec<(f64, f64, serde_json::Value)> {
    c[key]
        .as_array()
        .unwrap()
        .iter()
        .map(|row| {
            let f = row["frequency_hz"].as_f64().unwrap();
            let t = row["temperature_k"].as_f64().unwrap();
            (f, t, row.clone())
        })
        .collect()
}

fn checks() -> serde_json::Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/data/physics/physics_checks.json"
    );
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

fn num(v: &serde_json::Value, path: &str) -> f64 {
    let mut cur = v;
    for key in path.split('.') {
        cur = &cur[key];
    }
    cur.as_f64()
        .unwrap_or_else(|| panic!("no number at {path}"))
}

fn close(a: f64, b: f64, rel: f64, what: &str) {
    assert!(
        ((a - b) / b).abs() <= rel,
        "{what}: {a:e} vs {b:e} (rel {:.3e} > {rel:e})",
        ((a - b) / b).abs()
    );
}

/// Four significant figures, as METHODS.md §9 T5 asks of the §7 table.
fn sig4(a: f64, b: f64, what: &str) {
    assert_eq!(
        format!("{a:.3e}"),
        format!("{b:.3e}"),
        "{what} to 4 significant figures"
    );
}

fn example() -> Oscillator {
    Oscillator::with_quality_factor(1.0e-13, 1.0e6, 1.0e5).unwrap()
}

// ---------- random numbers (splitmix64) ----------

pub struct Rng(u64);
impl Rng {
    pub fn new(seed: u64) -> Self {
        Self(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ 0xD1B5_4A32_D192_ED03)
    }
    pub fn next_u64(&mut self) -> u64 {
        splitmix64(&mut self.0)
    }
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    pub fn gauss(&mut self) -> f64 {
        let u1 = self.uniform();
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
    }
    /// Gamma(shape, 1) by Marsaglia & Tsang (2000).
    pub fn gamma(&mut self, shape: f64) -> f64 {
        if shape < 1.0 {
            let u = self.uniform();
            return self.gamma(shape + 1.0) * u.powf(1.0 / shape);
        }
        let d = shape - 1.0 / 3.0;
        let c = 1.0 / (9.0 * d).sqrt();
        loop {
            let x = self.gauss();
            let v = (1.0 + c * x).powi(3);
            if v <= 0.0 {
                continue;
            }
            let u = self.uniform();
            if u.ln() < 0.5 * x * x + d - d * v + d * v.ln() {
                return d * v;
            }
        }
    }
    /// χ²_ν/ν with ν = 2 k_eff (mean 1, relative s.d. 1/√k_eff).
    pub fn chi2_over_nu(&mut self, k_eff: f64) -> f64 {
        self.gamma(k_eff) / k_eff
    }
}

/// A spectrum of independent bins (rectangular window: ρ_bin = 0): model × χ²_ν/ν.
fn synthetic_spectrum(
    fs: f64,
    n: usize,
    k_eff: f64,
    rng: &mut Rng,
    model: impl Fn(f64) -> f64,
) -> Spectrum {
    let df = fs / n as f64;
    let psd = (0..=n / 2)
        .map(|k| model(k as f64 * df) * rng.chi2_over_nu(k_eff))
        .collect();
    Spectrum {
        sample_rate_hz: fs,
        segment: n,
        overlap: 0.0,
        window: WindowKind::Rectangular,
        detrend: Detrend::Mean,
        averaging: Averaging::Linear,
        averages: k_eff.round() as usize,
        k_eff,
        resolution_hz: df,
        enbw_hz: df,
        psd_v2_per_hz: psd,
    }
}

// ---------- METHODS.md §7 table (T5, T6) ----------

/// x_zpf = √(ħ/2mΩ) [Aspelmeyer, Kippenberg & Marquardt, RMP 86, 1391 (2014)]; §7 table.
#[test]
fn table_x_zpf_and_occupancy() {
    let c = checks();
    let o = example();
    sig4(o.x_zpf_m(), num(&c, "example.x_zpf_m"), "x_zpf");
    close(o.x_zpf_m(), 9.161e-15, 5e-4, "x_zpf vs METHODS §7 (4 s.f.)");
    close(
        o.damping_rad_s(),
        num(&c, "example.damping_rad_s"),
        1e-12,
        "Γ",
    );
    // Bose–Einstein n̄ (standard) and the high-T limit k_BT/ħΩ.
    let n = occupancy::bose_einstein(1e6, 4.0);
    close(n, num(&c, "example.occupancy_be"), 1e-9, "n̄ BE");
    close(n, 83_345.98, 1e-7, "n̄ vs METHODS §7");
    let nh = occupancy::classical_occupancy(1e6, 4.0);
    close(nh, num(&c, "example.occupancy_high_t"), 1e-9, "n̄ high T");
    assert!(
        (nh - n - 0.5).abs() < 1e-3,
        "high-T minus BE = ½ (METHODS §4)"
    );
    // ⟨x²⟩ = k_BT/mΩ² = x_zpf²(2n̄+1) (METHODS §4 consistency, 6 digits at 4 K).
    let v = o.classical_variance_m2(4.0);
    close(v, num(&c, "example.variance_th_m2"), 1e-12, "⟨x²⟩");
    close(
        occupancy::quantum_variance_m2(o.x_zpf_m(), 1e6, 4.0),
        v,
        1e-6,
        "x_zpf²(2n̄+1)",
    );
    sig4(v.sqrt(), 3.740e-12, "x_rms");
}

/// Thermal, zero-point and SQL levels [A14; Clerk et al., RMP 82, 1155 (2010)], single-sided.
#[test]
fn table_peaks_zero_point_and_sql() {
    let c = checks();
    let o = example();
    // The §7 table's thermal peak is the classical 4k_BTQ/(mΩ³); at 4 K and 1 MHz the
    // reported (quantum, METHODS §2b) peak differs from it by (x coth x − 1) ≈ x²/3 ≈ 1e-5,
    // x = ħΩ/2k_BT.
    let th = quantum::classical_thermal_peak_psd(&o, 4.0);
    close(
        th,
        num(&c, "example.thermal_peak_m2_per_hz"),
        1e-12,
        "thermal peak",
    );
    close(
        quantum::thermal_peak_psd(&o, 4.0),
        th,
        2e-5,
        "quantum vs classical at 4 K",
    );
    sig4(th, 8.906e-25, "thermal peak vs METHODS §7");
    let formula = 4.0 * BOLTZMANN_J_PER_K * 4.0 * 1e5 / (1e-13 * o.omega_rad_s().powi(3));
    close(th, formula, 1e-12, "4k_BTQ/(mΩ³)");
    let zp = quantum::zero_point_peak_psd(&o);
    close(
        zp,
        num(&c, "example.zero_point_peak_m2_per_hz"),
        1e-12,
        "zero-point peak",
    );
    sig4(zp, 5.343e-30, "zero-point peak vs METHODS §7");
    close(
        zp,
        4.0 * o.x_zpf_m().powi(2) / o.damping_rad_s(),
        1e-12,
        "4x_zpf²/Γ",
    );
    // T6: 2ħ|χ(Ω_m)| / S_zp(f_m) = 1 within 1e-9, and S_imp·S_FF = ħ² at the SQL point.
    let sql = quantum::sql_psd_at_resonance(&o);
    assert!(
        (sql / zp - 1.0).abs() < 1e-9,
        "SQL/zero-point = {}",
        sql / zp
    );
    let (s_imp, s_ff) = quantum::sql_split_at(&o, 1e6);
    close(
        s_imp,
        num(&c, "example.sql_imprecision_m2_per_hz"),
        1e-12,
        "S_imp",
    );
    close(
        s_ff,
        num(&c, "example.sql_backaction_n2_per_hz"),
        1e-12,
        "S_FF",
    );
    close(s_imp * s_ff, HBAR_J_S * HBAR_J_S, 1e-12, "S_imp S_FF = ħ²");
    sig4(s_imp * s_ff, 1.112e-68, "ħ² vs METHODS §7");
    sig4(th / zp, 166_693.0, "thermal/zero-point = 2n̄+1");
    // T_eff for n̄ = 2 at 1 MHz: 118.4 µK.
    let t = occupancy::effective_temperature_k(1e6, 2.0).unwrap();
    close(t, num(&c, "example.t_eff_for_n2_k"), 1e-10, "T_eff(n̄=2)");
    sig4(t, 118.4e-6, "T_eff vs METHODS §7");
}

/// "Thermal at T" is the symmetrised quantum form (METHODS.md §2b, binding): the peak
/// 2ħ coth(ħΩ_m/2k_BT) Im χ(Ω_m) equals 4 x_zpf²(2n̄+1)/Γ_m exactly, because
/// Im χ(Ω_m) = 1/(mΓ_mΩ_m) (§2) and x_zpf² = ħ/(2mΩ_m) (§3), with n̄ = 1/(e^{ħΩ/k_BT} − 1)
/// (Bose–Einstein, §4). Checked against that closed form, written here from the constants, at
/// 30 µK and 600 kHz (ħΩ ≈ k_BT: the classical 4k_BTQ/(mΩ³) is 7 % low there), in the
/// classical limit at 300 K, and at T → 0 (the zero-point peak 4 x_zpf²/Γ, §3). Then through
/// `analyze`: the key quantum.thermal_peak_psd_at_bath_m2_per_hz of a 600 kHz line.
#[test]
fn thermal_at_bath_is_the_symmetrised_quantum_form() {
    let (m, f, q) = (2e-14, 600e3, 1e5);
    let o = Oscillator::with_quality_factor(m, f, q).unwrap();
    let om = 2.0 * PI * f;
    let gamma = om / q;
    let x2 = HBAR_J_S / (2.0 * m * om);
    let n_be = |t: f64| 1.0 / (HBAR_J_S * om / (BOLTZMANN_J_PER_K * t)).exp_m1();
    let closed = |t: f64| 4.0 * x2 * (2.0 * n_be(t) + 1.0) / gamma;
    for t in [30e-6, 1e-3, 4.0, 300.0] {
        close(
            quantum::thermal_peak_psd(&o, t),
            closed(t),
            1e-12,
            "4x_zpf²(2n̄+1)/Γ",
        );
    }
    // 30 µK, 600 kHz: ħΩ/k_BT = 0.960; classical/quantum = (2k_BT/ħΩ)/coth(ħΩ/2k_BT).
    let t = 30e-6;
    let ratio = quantum::classical_thermal_peak_psd(&o, t) / quantum::thermal_peak_psd(&o, t);
    let y = HBAR_J_S * om / (2.0 * BOLTZMANN_J_PER_K * t);
    close(ratio, y.tanh() / y, 1e-12, "classical/quantum");
    assert!((0.92..0.94).contains(&ratio), "classical/quantum {ratio}");
    // High T: the classical 4k_BTQ/(mΩ³) (Saulson 1990), to (x²/3) ≈ 8e-10 at 300 K.
    let classical = 4.0 * BOLTZMANN_J_PER_K * 300.0 * q / (m * om.powi(3));
    close(
        quantum::thermal_peak_psd(&o, 300.0),
        classical,
        2e-9,
        "classical limit",
    );
    // T → 0: the zero-point peak 4 x_zpf²/Γ = 2ħQ/(mΩ²).
    for t in [1e-9, 0.0] {
        close(
            quantum::thermal_peak_psd(&o, t),
            4.0 * x2 / gamma,
            1e-12,
            "T → 0",
        );
    }
    // The report key, on a noise-free 600 kHz line of the quantum area at 30 µK (given m/V).
    let area = x2 * (2.0 * n_be(t) + 1.0);
    let (fs, n) = (2.0 * 1_048_576.0, 1usize << 20);
    let df = fs / n as f64;
    let psd = (0..=n / 2)
        .map(|k| 1e-32 + oscillator::oscillator_psd(k as f64 * df, area, f, 60.0))
        .collect();
    let s = Spectrum {
        sample_rate_hz: fs,
        segment: n,
        overlap: 0.0,
        window: WindowKind::Rectangular,
        detrend: Detrend::Mean,
        averaging: Averaging::Linear,
        averages: 1_000_000,
        k_eff: 1e12,
        resolution_hz: df,
        enbw_hz: df,
        psd_v2_per_hz: psd,
    };
    let opts = stillpoint::analysis::AnalysisOptions {
        m_per_v: Some(1.0),
        mass_kg: Some(m),
        bath_temperature_k: Some(t),
        mode_band_hz: Some((f - 600.0, f + 600.0)),
        ..Default::default()
    };
    let r = stillpoint::analysis::analyze(&s, &opts).unwrap();
    let fm = r.mode.frequency_hz.unwrap();
    let g = 2.0 * PI * r.mode.linewidth_hz.unwrap();
    let om_fit = 2.0 * PI * fm;
    let n_fit = 1.0 / (HBAR_J_S * om_fit / (BOLTZMANN_J_PER_K * t)).exp_m1();
    let expected = 4.0 * HBAR_J_S / (2.0 * m * om_fit) * (2.0 * n_fit + 1.0) / g;
    let reported = r.quantum.thermal_peak_psd_at_bath_m2_per_hz.unwrap();
    close(
        reported,
        expected,
        1e-9,
        "quantum.thermal_peak_psd_at_bath_m2_per_hz",
    );
    // …and it is the level of the line itself (peak 2A/πγ of the quantum area, §2).
    close(
        reported,
        r.mode.peak_psd_m2_per_hz.unwrap(),
        1e-3,
        "thermal peak = line peak",
    );
}

/// Curves against scipy at DC, off resonance, near resonance and far above.
#[test]
fn curves_match_reference() {
    let c = checks();
    let o = example();
    for row in c["curves"].as_array().unwrap() {
        let f = row["frequency_hz"].as_f64().unwrap();
        let get = |k: &str| row[k].as_f64().unwrap();
        close(
            quantum::classical_thermal_psd(&[f], &o, 4.0)[0],
            get("classical_thermal"),
            1e-9,
            "classical",
        );
        close(
            quantum::quantum_thermal_psd(&[f], &o, 4.0)[0],
            get("quantum_thermal"),
            1e-9,
            "quantum",
        );
        close(quantum::sql_psd(&[f], &o)[0], get("sql"), 1e-9, "sql");
        let zp = quantum::zero_point_psd(&[f], &o)[0];
        if f > 0.0 {
            close(zp, get("zero_point"), 1e-9, "zero point");
        } else {
            assert_eq!(zp, 0.0);
        }
    }
}

/// T5: ∫₀^∞ S_xx df of the HO form = k_BT/(mΩ²) within 1e-4 (equipartition; Saulson 1990),
/// here by our own trapezoid integration on a refined grid, and scipy's quad in the JSON.
#[test]
fn t5_area_of_the_oscillator_form() {
    let c = checks();
    let o = example();
    close(
        num(&c, "t5.numerical_area_m2"),
        o.classical_variance_m2(4.0),
        1e-6,
        "scipy quad",
    );
    // Integrate in u = atan(2(f − f_m)/γ) (Lorentzian substitution), which maps 0…∞ to a
    // finite range and makes the integrand smooth.
    let g = o.linewidth_hz;
    let fm = o.frequency_hz;
    let u0 = (2.0 * (0.0 - fm) / g).atan();
    let u1 = PI / 2.0;
    let steps = 200_000;
    let h = (u1 - u0) / steps as f64;
    let mut sum = 0.0;
    for i in 0..=steps {
        let u = u0 + i as f64 * h;
        let wgt = if i == 0 || i == steps { 0.5 } else { 1.0 };
        if (u - u1).abs() < 1e-15 {
            continue;
        }
        let f = fm + 0.5 * g * u.tan();
        let dfdu = 0.5 * g / u.cos().powi(2);
        sum += wgt * quantum::classical_thermal_psd_at(&o, 4.0, f) * dfdu;
    }
    close(
        sum * h,
        o.classical_variance_m2(4.0),
        1e-4,
        "T5 numerical area",
    );
    // The Hz form with area A integrates to A (also at Q = 10).
    close(num(&c, "hz_form_area_q10"), 1.0, 1e-9, "scipy Hz-form area");
    let peak = oscillator::oscillator_psd(fm, 1.0, fm, g);
    close(peak, 2.0 / (PI * g), 1e-12, "peak 2A/πγ");
    // Same line in Hz form and via 4k_BT Im χ/Ω.
    let f = fm + 3.0;
    close(
        oscillator::oscillator_psd(f, o.classical_variance_m2(4.0), fm, g),
        quantum::classical_thermal_psd_at(&o, 4.0, f),
        1e-10,
        "Hz form = FDT form",
    );
}

/// The equipartition error budget: d ln⟨x²⟩/d ln T = x/sinh x and dn̄/dT against central
/// differences in numpy (tests/reference/physics_checks.py), from the classical limit to deep
/// in the ground state; and σ_c/c = ½ √((σ_A/A)² + (σ_m/m)² + (x/sinh x · σ_T/T)²)
/// (first-order propagation of c² = x_zpf²(2n̄+1)/A with x_zpf² ∝ 1/m; common practice).
#[test]
fn equipartition_error_budget() {
    for (f, t, row) in f_t_rows(&checks(), "temperature_sensitivity") {
        close(
            occupancy::variance_temperature_sensitivity(f, t),
            row["dlnvar_dlnT"].as_f64().unwrap(),
            1e-6,
            "d ln var / d ln T",
        );
        close(
            occupancy::bose_einstein_dn_dt(f, t),
            row["dn_dT"].as_f64().unwrap(),
            1e-6,
            "dn/dT",
        );
    }
    // Classical regime (sensitivity 1): 2 % area, 10 % mass, 1 % temperature.
    let area = Estimate::new(4.0e-6, 0.02 * 4.0e-6);
    let exact = calibration::equipartition(
        area,
        86.1e3,
        Estimate::new(2e-12, 0.0),
        Estimate::new(295.0, 0.0),
    )
    .unwrap();
    let full = calibration::equipartition(
        area,
        86.1e3,
        Estimate::new(2e-12, 0.2e-12),
        Estimate::new(295.0, 2.95),
    )
    .unwrap();
    assert_eq!(full.m_per_v.value, exact.m_per_v.value);
    close(
        exact.m_per_v.sigma / exact.m_per_v.value,
        0.01,
        1e-9,
        "area only",
    );
    close(
        full.m_per_v.sigma / full.m_per_v.value,
        0.5 * (0.02f64.powi(2) + 0.1f64.powi(2) + 0.01f64.powi(2)).sqrt(),
        1e-6,
        "area, mass and temperature",
    );
    // Deep in the ground state (5 GHz at 20 mK) the bath temperature hardly matters.
    let cold = calibration::equipartition(
        Estimate::new(1e-6, 0.0),
        5e9,
        Estimate::new(1e-15, 0.0),
        Estimate::new(0.02, 0.01),
    )
    .unwrap();
    assert!(cold.m_per_v.sigma / cold.m_per_v.value < 1e-4);
    // Nonsense uncertainties are refused.
    assert!(
        calibration::equipartition(
            area,
            86.1e3,
            Estimate::new(2e-12, -1.0),
            Estimate::new(295.0, 0.0)
        )
        .is_err()
    );
}

/// Bose–Einstein values and the exact inversion T_eff = ħΩ/(k_B ln(1+1/n̄)).
#[test]
fn bose_einstein_round_trip() {
    for (f, t, row) in f_t_rows(&checks(), "bose_einstein") {
        let n = occupancy::bose_einstein(f, t);
        close(n, row["occupancy"].as_f64().unwrap(), 1e-9, "BE");
        close(
            occupancy::effective_temperature_k(f, n).unwrap(),
            t,
            1e-9,
            "inversion",
        );
    }
    // Propagated σ_T: finite-difference check.
    let e = occupancy::effective_temperature(1e6, Estimate::new(2.0, 0.01)).unwrap();
    let dt = (occupancy::effective_temperature_k(1e6, 2.01).unwrap()
        - occupancy::effective_temperature_k(1e6, 1.99).unwrap())
        / 2.0;
    close(e.sigma, dt, 1e-3, "σ_T");
    // 4 K bath at 1 MHz: n̄ ≈ 83 346; at 3.7 GHz, 4 K: ≈ 22 (BE).
    assert!(
        occupancy::bose_einstein(3.7e9, 4.0) > 21.0 && occupancy::bose_einstein(3.7e9, 4.0) < 23.0
    );
}

/// Nanobeam: x_zpf ≈ 2.75 fm for 300 fg at 3.7 GHz (common practice: femtometre range,
/// Chan et al., Nature 478, 89 (2011), from memory); 1–5 GHz gives 5.3–2.4 fm.
#[test]
fn nanobeam_zero_point_amplitude() {
    let c = checks();
    let x = oscillator::x_zpf_m(300e-18, 3.7e9);
    close(x, num(&c, "nanobeam.x_zpf_m"), 1e-12, "nanobeam");
    assert!((x - 2.75e-15).abs() < 0.01e-15, "{x:e}");
    close(
        oscillator::x_zpf_m(300e-18, 1e9),
        num(&c, "nanobeam.x_zpf_1ghz_m"),
        1e-12,
        "1 GHz",
    );
    sig4(
        oscillator::x_zpf_m(300e-18, 5e9),
        num(&c, "nanobeam.x_zpf_5ghz_m"),
        "5 GHz",
    );
    // Mass-unit slip (METHODS §8.9): grams as kilograms shifts x_zpf by √1000.
    close(
        oscillator::x_zpf_m(300e-15, 3.7e9) * 1000f64.sqrt(),
        x,
        1e-12,
        "√1000",
    );
}

/// ρ_bin(l) of the windows against numpy's direct DFT sums (METHODS.md §2).
#[test]
fn bin_correlation_matches_numpy() {
    let c = checks();
    for (name, w) in [
        ("hann", WindowKind::Hann),
        ("hamming", WindowKind::Hamming),
        ("blackman-harris", WindowKind::BlackmanHarris),
    ] {
        let r = window_stats::bin_correlation(w);
        for (l, v) in c["rho_bin"][name].as_array().unwrap().iter().enumerate() {
            let v = v.as_f64().unwrap();
            let ours = r.get(l).copied().unwrap_or(0.0);
            assert!(
                (ours - v).abs() < 1e-12,
                "{name} l={}: {ours} vs {v}",
                l + 1
            );
        }
    }
}

// ---------- mode fit ----------

/// Recovery of f_m, γ, Q, area and background from spectra of independent χ²_ν/ν bins, and
/// coverage of the reported 1σ over 240 seeds.
#[test]
fn mode_fit_recovery_and_coverage_independent_bins() {
    // γ = 6.8 ENBW: resolved, so independent bins of S(f_k) itself are a fair model of the
    // estimate (a narrower line's bins would hold S convolved with the kernel, METHODS §2c).
    let (fs, n, k_eff) = (20_000.0, 8192, 20.0);
    let (fm, g, area, bg) = (3_000.37, 25.0, 2.0e-3, 1.0e-7);
    let mut hits = [0usize; 4];
    let seeds = 240;
    let mut worst = [0.0f64; 2];
    let mut mean = [0.0f64; 2];
    for seed in 0..seeds {
        let mut rng = Rng::new(seed);
        let s = synthetic_spectrum(fs, n, k_eff, &mut rng, |f| {
            bg + oscillator::oscillator_psd(f, area, fm, g)
        });
        let r = fit::fit_mode(&s, (2_500.0, 3_500.0)).unwrap();
        // Pulls (error / reported σ): none beyond 4.5σ.
        worst[0] = worst[0].max(((r.frequency_hz.value - fm) / r.frequency_hz.sigma).abs());
        worst[1] = worst[1].max(((r.linewidth_hz.value - g) / r.linewidth_hz.sigma).abs());
        mean[0] += r.frequency_hz.value / seeds as f64;
        mean[1] += r.linewidth_hz.value / seeds as f64;
        for (i, (e, truth)) in [
            (r.frequency_hz, fm),
            (r.linewidth_hz, g),
            (r.area, area),
            (r.background_psd, bg),
        ]
        .iter()
        .enumerate()
        {
            if (e.value - truth).abs() <= e.sigma {
                hits[i] += 1;
            }
        }
    }
    let frac: Vec<f64> = hits.iter().map(|h| *h as f64 / seeds as f64).collect();
    println!(
        "independent-bin coverage (f_m, γ, A, B): {frac:?}; worst pulls f {:.2} γ {:.2}; mean γ {:.3}",
        worst[0], worst[1], mean[1]
    );
    assert!(worst[0] < 4.5 && worst[1] < 4.5, "pulls {worst:?}");
    // No bias beyond 3σ of the mean (the model-weighted fit is unbiased, METHODS §2).
    assert!((mean[0] - fm).abs() / fm < 5e-5, "mean f_m {}", mean[0]);
    assert!((mean[1] - g).abs() / g < 0.02, "mean γ {}", mean[1]);
    for (name, f) in ["f_m", "γ", "A", "B"].iter().zip(&frac) {
        assert!((0.58..=0.78).contains(f), "coverage of {name}: {f}");
    }
}

/// One typical spectrum (K_eff = 50): f_m within 5e-4 relative, γ and Q within 15 %, area and
/// background within 15 %, Lorentzian and sloped variants too.
#[test]
fn mode_fit_recovers_one_spectrum() {
    let (fm, g, area, bg) = (12_345.6, 10.0, 1.0e-6, 1.0e-10);
    let mut rng = Rng::new(7);
    let s = synthetic_spectrum(50_000.0, 32_768, 50.0, &mut rng, |f| {
        bg * (1.0 + 1e-5 * (f - fm)) + oscillator::oscillator_psd(f, area, fm, g)
    });
    for opts in [
        fit::FitOptions::default(),
        fit::FitOptions {
            line_shape: fit::LineShape::Lorentzian,
            ..Default::default()
        },
        fit::FitOptions {
            sloped_background: true,
            ..Default::default()
        },
    ] {
        let r = fit::fit_mode_with(&s, (12_200.0, 12_500.0), &opts).unwrap();
        close(r.frequency_hz.value, fm, 5e-4, "f_m");
        close(r.linewidth_hz.value, g, 0.15, "γ");
        close(r.quality_factor.value, fm / g, 0.15, "Q");
        close(r.area.value, area, 0.15, "A");
        close(r.background_psd.value, bg, 0.15, "B");
        close(r.peak_psd.value, 2.0 * area / (PI * g), 0.15, "peak");
        assert!(!r.resolution_limited);
        assert!(
            r.reduced_chi2 > 0.7 && r.reduced_chi2 < 1.3,
            "χ²_red {}",
            r.reduced_chi2
        );
        if opts.sloped_background {
            let sl = r.background_slope_per_hz.unwrap();
            assert!(
                (sl.value - bg * 1e-5).abs() < 4.0 * sl.sigma,
                "slope {sl:?}"
            );
        }
    }
}

/// No peak, a band outside the spectrum, LO ≥ HI → a clear error, never NaN.
#[test]
fn mode_fit_refuses_bad_bands_and_flat_noise() {
    let mut rng = Rng::new(3);
    let s = synthetic_spectrum(10_000.0, 2048, 20.0, &mut rng, |_| 1e-9);
    let e = fit::fit_mode(&s, (1_000.0, 2_000.0)).unwrap_err();
    assert!(
        matches!(e, stillpoint::physics::PhysicsError::NoMode(_)),
        "{e}"
    );
    for band in [
        (4_000.0, 6_000.0),
        (2_000.0, 1_000.0),
        (-5.0, 100.0),
        (f64::NAN, 1.0),
    ] {
        let e = fit::fit_mode(&s, band).unwrap_err();
        assert!(
            matches!(e, stillpoint::physics::PhysicsError::Input(_)),
            "{band:?}: {e}"
        );
    }
    // A band of three bins.
    assert!(fit::fit_mode(&s, (1_000.0, 1_012.0)).is_err());
}

// ---------- calibration (T7) ----------

/// T7 (METHODS.md §9): a noise-free synthetic voltage PSD (gain K, thermal mode of the §7
/// example at 4 K, PM tone β = 1e−3 at 1.05 MHz, bin-centred, Hann kernel; G/2π = 1 GHz/nm)
/// recovers ⟨x²⟩, c² and g₀/2π = 9160.79 Hz within 1e−6 through `analyze` (area form, the tone
/// read as Σ(PSD − B)Δf), and through the peak × ENBW form of Gorodetsky et al. (2010).
#[test]
fn t7_calibration_round_trip() {
    let c = checks();
    let gain = num(&c, "t7.gain_v_per_m");
    let beta = num(&c, "t7.beta_rad");
    let f_mod = num(&c, "t7.f_mod_hz");
    let pull = num(&c, "t7.freq_pull_hz_per_m");
    let o = example();
    let n_be = occupancy::bose_einstein(1e6, 4.0);
    let area_v = gain * gain * o.x_zpf_m().powi(2) * (2.0 * n_be + 1.0);
    // Bins fine enough that the line is resolved (γ ≥ 5 ENBW, METHODS §2 "Resolution"): the
    // noise-free PSD below is the line itself, not its convolution with the window's kernel,
    // which is what a Welch estimate of a narrower line would show (§2c).
    let df = 0.5;
    let n = 1usize << 23;
    let fs = df * n as f64;
    let enbw = 1.5 * df;
    assert!(o.linewidth_hz >= 5.0 * enbw);
    let floor = 1e-14;
    let tone_power = num(&c, "t7.tone_power_v2");
    let k_tone = (f_mod / df).round() as usize;
    let mut psd: Vec<f64> = (0..=n / 2)
        .map(|k| floor + oscillator::oscillator_psd(k as f64 * df, area_v, 1e6, o.linewidth_hz))
        .collect();
    // Hann, bin-centred: PS = P at k₀ and P/4 at k₀ ± 1 (PSD = PS/ENBW).
    psd[k_tone] += tone_power / enbw;
    psd[k_tone - 1] += 0.25 * tone_power / enbw;
    psd[k_tone + 1] += 0.25 * tone_power / enbw;
    let s = Spectrum {
        sample_rate_hz: fs,
        segment: n,
        overlap: 0.5,
        window: WindowKind::Hann,
        detrend: Detrend::Mean,
        averaging: Averaging::Linear,
        averages: 1_000_000_000,
        k_eff: 1e12, // noise-free: the χ² median bias of the floor → 1
        resolution_hz: df,
        enbw_hz: enbw,
        psd_v2_per_hz: psd,
    };
    let opts = stillpoint::analysis::AnalysisOptions {
        tone_frequency_hz: Some(f_mod),
        pm_depth_rad: Some(beta),
        freq_pull_hz_per_m: Some(pull),
        bath_temperature_k: Some(4.0),
        mass_kg: Some(1e-13),
        mode_band_hz: Some((1e6 - 500.0, 1e6 + 500.0)),
        ..Default::default()
    };
    let r = stillpoint::analysis::analyze(&s, &opts).unwrap();
    assert_eq!(r.calibration.method.as_deref(), Some("tone"));
    close(
        r.calibration.tone_power_v2.unwrap(),
        tone_power,
        1e-6,
        "tone power",
    );
    let m_per_v = r.calibration.m_per_v.unwrap();
    close(m_per_v * m_per_v, num(&c, "t7.c2_m2_per_v2"), 1e-6, "c²");
    close(
        r.mode.variance_m2.unwrap(),
        num(&c, "example.variance_quantum_m2"),
        1e-6,
        "⟨x²⟩",
    );
    close(
        r.calibration.g0_hz.unwrap(),
        num(&c, "t7.g0_over_2pi_hz"),
        1e-6,
        "g₀/2π (area form)",
    );
    close(
        r.calibration.g0_hz.unwrap(),
        9160.79,
        1e-6,
        "g₀/2π vs METHODS",
    );
    close(
        r.quantum.occupancy.unwrap(),
        n_be,
        1e-6,
        "n̄ from the calibrated area",
    );
    // G10's peak form: S_VV(f_m)Γ/4 over S_VV(f_mod)·ENBW (bin-centred tone).
    let peak_v = r.mode.peak_psd_v2_per_hz.unwrap();
    let a_peak = Estimate::new(peak_v * o.damping_rad_s() / 4.0, 0.0);
    let p_peak = Estimate::new(tone_power / enbw * enbw, 0.0);
    let g0 = stillpoint::physics::calibration::g0_hz(beta, f_mod, a_peak, p_peak, n_be).unwrap();
    close(g0.value, 9160.79, 1e-6, "g₀/2π (peak × ENBW form)");
    // The tone is read from the spectrum in the peak form too.
    let tr = stillpoint::physics::calibration::read_tone(
        &s,
        f_mod,
        &stillpoint::physics::calibration::ToneOptions::default(),
        None,
    )
    .unwrap();
    close(
        tr.peak_power,
        tone_power
            + (floor + oscillator::oscillator_psd(f_mod, area_v, 1e6, o.linewidth_hz)) * enbw,
        1e-6,
        "PS peak = P + floor·ENBW (bin-centred)",
    );
    // No stray peaks on a clean synthetic spectrum of 10⁶ bins.
    assert!(r.peaks.is_empty(), "{:?}", r.peaks);
}

/// T8 (METHODS.md §9): R = 1.5 with 2 % errors on each area → n̄ = 2.00, σ_n = 0.170; our Monte
/// Carlo s.d. agrees with the reference 0.173 (numpy, 4·10⁵ draws) within 3 %.
#[test]
fn t8_sideband_ratio() {
    use stillpoint::physics::sideband::occupancy_from_ratio;
    let c = checks();
    let n = occupancy_from_ratio(Estimate::new(1.5, 1.5 * 0.02 * 2f64.sqrt())).unwrap();
    close(n.value, num(&c, "t8.occupancy"), 1e-12, "n̄");
    close(n.sigma, num(&c, "t8.occupancy_sigma"), 1e-12, "σ_n");
    assert_eq!(format!("{:.3}", n.sigma), "0.170");
    let mut rng = Rng::new(8);
    let draws = 100_000;
    let mut sum = 0.0;
    let mut sum2 = 0.0;
    for _ in 0..draws {
        let r = 1.5 * (1.0 + 0.02 * rng.gauss()) / (1.0 + 0.02 * rng.gauss());
        let v = 1.0 / (r - 1.0);
        sum += v;
        sum2 += v * v;
    }
    let mean = sum / draws as f64;
    let sd = (sum2 / draws as f64 - mean * mean).sqrt();
    close(sd, num(&c, "t8.mc_sd"), 0.03, "Monte Carlo s.d.");
    close(
        mean,
        num(&c, "t8.mc_mean"),
        0.005,
        "Monte Carlo mean (nonlinearity bias)",
    );
    for row in c["t8"]["others"].as_array().unwrap() {
        let r = row["ratio"].as_f64().unwrap();
        close(
            occupancy_from_ratio(Estimate::new(r, 0.0)).unwrap().value,
            row["occupancy"].as_f64().unwrap(),
            1e-12,
            "R→n̄",
        );
    }
}

/// The χ²_ν/ν median ratio used by the robust floors, against scipy.stats.chi2.median.
#[test]
fn chi2_median_ratio_matches_scipy() {
    let c = checks();
    for row in c["chi2_median_over_mean"].as_array().unwrap() {
        let nu = row["nu"].as_f64().unwrap();
        let want = row["ratio"].as_f64().unwrap();
        let ours = stillpoint::physics::calibration::chi2_median_ratio(nu);
        assert!(
            (ours / want - 1.0).abs() < 0.015,
            "ν={nu}: {ours} vs {want}"
        );
    }
}

/// Our analytic ρ_bin agrees with the dsp module's direct sums (helper B's implementation).
/// ρ_bin(l) = |Σ_j w_j² e^{−2πijl/N}|² / (Σ_j w_j²)² summed directly over the window's
/// samples (METHODS.md §2): the naive reference for the exact cosine-sum values.
fn naive_bin_correlation(w: &[f64], lag: usize) -> f64 {
    let n = w.len();
    let (mut re, mut im, mut s2) = (0.0, 0.0, 0.0);
    for (j, &wj) in w.iter().enumerate() {
        let w2 = wj * wj;
        let phase = -2.0 * PI * ((j * lag) % n) as f64 / n as f64;
        re += w2 * phase.cos();
        im += w2 * phase.sin();
        s2 += w2;
    }
    (re * re + im * im) / (s2 * s2)
}

#[test]
fn bin_correlation_agrees_with_the_direct_sum() {
    for w in [
        WindowKind::Hann,
        WindowKind::Hamming,
        WindowKind::BlackmanHarris,
        WindowKind::FlatTop,
    ] {
        let samples = w.samples(4096);
        let ours = window_stats::bin_correlation(w);
        let mut sum = 0.0;
        for lag in 1..=10 {
            let direct = naive_bin_correlation(&samples, lag);
            sum += direct;
            let mine = ours.get(lag - 1).copied().unwrap_or(0.0);
            assert!(
                (mine - direct).abs() < 1e-9,
                "{w:?} lag {lag}: {mine} vs {direct}"
            );
        }
        close(
            window_stats::error_inflation(w),
            (1.0 + 2.0 * sum).sqrt(),
            1e-9,
            "inflation",
        );
    }
}

/// Bad physics input: NaN never reaches the report; impossible options are refused.
#[test]
fn bad_physics_input() {
    use stillpoint::analysis::{AnalysisError, AnalysisOptions, analyze};
    let mut rng = Rng::new(1);
    let s = synthetic_spectrum(10_000.0, 4096, 20.0, &mut rng, |f| {
        1e-9 + oscillator::oscillator_psd(f, 1e-6, 2_000.0, 10.0)
    });
    for o in [
        AnalysisOptions {
            mass_kg: Some(-1e-12),
            mode_band_hz: Some((1_900.0, 2_100.0)),
            ..Default::default()
        },
        AnalysisOptions {
            mass_kg: Some(0.0),
            ..Default::default()
        },
        AnalysisOptions {
            bath_temperature_k: Some(-4.0),
            mass_kg: Some(1e-12),
            ..Default::default()
        },
        AnalysisOptions {
            mode_band_hz: Some((4_000.0, 6_000.0)),
            ..Default::default()
        },
        AnalysisOptions {
            mode_band_hz: Some((2_100.0, 1_900.0)),
            ..Default::default()
        },
        AnalysisOptions {
            tone_frequency_hz: Some(9_000.0),
            tone_rms_m: Some(1e-12),
            ..Default::default()
        },
        AnalysisOptions {
            tone_frequency_hz: Some(1_000.0),
            ..Default::default()
        },
        AnalysisOptions {
            carrier_hz: Some(3_000.0),
            mode_band_hz: Some((100.0, 200.0)),
            ..Default::default()
        },
    ] {
        let e = analyze(&s, &o).unwrap_err();
        assert!(
            matches!(e, AnalysisError::Setting { .. }),
            "{e}: the setting at fault is named"
        );
        let msg = e.to_string();
        // The library names the quantity, not a command-line option (the window shows it).
        assert!(msg.starts_with("the ") || msg.starts_with("a "), "{msg}");
        assert!(!msg.contains("--"), "{msg}");
        assert!(!msg.contains('\n'), "one line: {msg}");
    }
    // No peak in band → null with a reason.
    let r = analyze(
        &s,
        &AnalysisOptions {
            mode_band_hz: Some((3_000.0, 3_500.0)),
            mass_kg: Some(1e-12),
            m_per_v: Some(1e-9),
            ..Default::default()
        },
    )
    .unwrap();
    assert!(r.mode.frequency_hz.is_none() && r.quantum.occupancy.is_none());
    assert!(
        r.notes.iter().any(|n| n.contains("no mode found")),
        "{:?}",
        r.notes
    );
    let json = serde_json::to_string(&r).unwrap();
    assert!(!json.contains("NaN") && !json.contains("Infinity"));
    // With the mode: quantum keys present, SQL = zero-point peak.
    let r = analyze(
        &s,
        &AnalysisOptions {
            mode_band_hz: Some((1_800.0, 2_200.0)),
            mass_kg: Some(1e-12),
            m_per_v: Some(1e-9),
            ..Default::default()
        },
    )
    .unwrap();
    let zp = r.quantum.zero_point_peak_psd_m2_per_hz.unwrap();
    close(
        r.quantum.sql_psd_at_resonance_m2_per_hz.unwrap(),
        zp,
        1e-9,
        "SQL = zero point",
    );
    assert!(r.quantum.occupancy.is_some() && r.quantum.effective_temperature_k.is_some());
}

/// Small K_eff (= 2, ν = 4): the model-weighted fit iterated to convergence is the Gamma
/// (χ²_ν) maximum-likelihood fit (Percival & Walden 1993, from memory), so it stays unbiased
/// and its 1σ still covers ~68 % where data-weighted least squares would be biased low.
#[test]
fn mode_fit_coverage_at_small_k_eff() {
    let (fs, n, k_eff) = (20_000.0, 8192, 2.0);
    let (fm, g, area, bg) = (3_000.37, 25.0, 2.0e-3, 1.0e-7);
    let seeds = 200;
    let mut hits = [0usize; 2];
    let mut mean_area = 0.0;
    for seed in 0..seeds {
        let mut rng = Rng::new(10_000 + seed);
        let s = synthetic_spectrum(fs, n, k_eff, &mut rng, |f| {
            bg + oscillator::oscillator_psd(f, area, fm, g)
        });
        let r = fit::fit_mode(&s, (2_500.0, 3_500.0)).unwrap();
        hits[0] += usize::from((r.frequency_hz.value - fm).abs() <= r.frequency_hz.sigma);
        hits[1] += usize::from((r.linewidth_hz.value - g).abs() <= r.linewidth_hz.sigma);
        mean_area += r.area.value / seeds as f64;
    }
    let frac: Vec<f64> = hits.iter().map(|h| *h as f64 / seeds as f64).collect();
    println!(
        "K_eff = 2 coverage (f_m, γ): {frac:?}; mean area / truth {:.4}",
        mean_area / area
    );
    for f in &frac {
        assert!((0.58..=0.78).contains(f), "{frac:?}");
    }
    assert!(
        (mean_area / area - 1.0).abs() < 0.03,
        "area bias {}",
        mean_area / area
    );
}

/// Regression: a line that drifted by many linewidths during the average (as in a cooldown)
/// is wider and flatter than the model. The fit used to drive the background negative, the
/// model weights then diverged and it reported "did not converge". It must give a fit whose
/// misfit shows in χ²_red and in the uncertainties, with a non-negative background.
/// (Check values: the smeared line's area is the sum of the areas put in — exact by
/// construction, METHODS.md §2 Hz-form area.)
#[test]
fn fit_of_a_line_smeared_by_drift_converges_with_honest_misfit() {
    let mut rng = Rng::new(7);
    let (fs, n) = (250_000.0, 1 << 17);
    let (b, area, gamma) = (1e-10, 1e-4, 8.0);
    let centres: Vec<f64> = (0..30).map(|j| 86_000.0 + 10.0 * j as f64).collect();
    let s = synthetic_spectrum(fs, n, 20.0, &mut rng, |f| {
        b + centres
            .iter()
            .map(|c| {
                (area / centres.len() as f64) * (2.0 / std::f64::consts::PI) * c * c * gamma
                    / ((c * c - f * f).powi(2) + gamma * gamma * f * f)
            })
            .sum::<f64>()
    });
    let fit = stillpoint::physics::fit::fit_mode(&s, (85_500.0, 87_000.0))
        .expect("a drifted line is still a line");
    assert!(fit.background_psd.value >= 0.0);
    assert!(fit.frequency_hz.value > 86_000.0 && fit.frequency_hz.value < 86_300.0);
    assert!(
        fit.reduced_chi2 > 1.5,
        "misfit must show: χ²_red = {}",
        fit.reduced_chi2
    );
    assert!(
        (fit.area.value / area - 1.0).abs() < 0.3,
        "area {} vs {area}",
        fit.area.value
    );
}
