//! Phonon occupancy (METHODS.md §4): Bose–Einstein n̄(f, T), its exact inversion to a mode
//! temperature, and n̄ from a calibrated symmetrised area ⟨x²⟩ = x_zpf²(2n̄+1) [A14, C10].

use super::Estimate;
use super::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};

/// ħΩ/k_B (K) of a frequency (Hz).
fn quantum_temperature_k(frequency_hz: f64) -> f64 {
    HBAR_J_S * 2.0 * std::f64::consts::PI * frequency_hz / BOLTZMANN_J_PER_K
}

/// Bose–Einstein occupancy n̄ = 1/(exp(ħΩ/k_BT) − 1); 0 at T = 0.
pub fn bose_einstein(frequency_hz: f64, temperature_k: f64) -> f64 {
    if temperature_k <= 0.0 {
        return 0.0;
    }
    1.0 / (quantum_temperature_k(frequency_hz) / temperature_k).exp_m1()
}

/// High-temperature approximation k_BT/ħΩ (= n̄ + ½ + O(ħΩ/k_BT)).
pub fn classical_occupancy(frequency_hz: f64, temperature_k: f64) -> f64 {
    temperature_k / quantum_temperature_k(frequency_hz)
}

/// Exact inversion T_eff = ħΩ/[k_B ln(1 + 1/n̄)] (K); `None` for n̄ ≤ 0 or non-finite.
pub fn effective_temperature_k(frequency_hz: f64, occupancy: f64) -> Option<f64> {
    if !(occupancy.is_finite() && occupancy > 0.0 && frequency_hz > 0.0) {
        return None;
    }
    let t = quantum_temperature_k(frequency_hz) / (1.0 / occupancy).ln_1p();
    t.is_finite().then_some(t)
}

/// T_eff with its 1σ propagated from σ_n̄: dT/dn̄ = T²/(T_q n̄(n̄+1)), T_q = ħΩ/k_B.
pub fn effective_temperature(frequency_hz: f64, occupancy: Estimate) -> Option<Estimate> {
    let t = effective_temperature_k(frequency_hz, occupancy.value)?;
    let n = occupancy.value;
    let slope = t * t / (quantum_temperature_k(frequency_hz) * n * (n + 1.0));
    let sigma = (slope * occupancy.sigma).abs();
    sigma.is_finite().then_some(Estimate::new(t, sigma))
}

/// n̄ = (⟨x²⟩/x_zpf² − 1)/2 from a calibrated symmetrised area, with σ_n̄ = σ_⟨x²⟩/(2 x_zpf²).
/// May be negative when the area is below the zero-point level (noise or a bad calibration).
pub(crate) fn occupancy_from_variance(variance_m2: Estimate, x_zpf_m: f64) -> Estimate {
    let z2 = x_zpf_m * x_zpf_m;
    Estimate::new(
        (variance_m2.value / z2 - 1.0) / 2.0,
        variance_m2.sigma / (2.0 * z2),
    )
}

/// Symmetrised thermal variance x_zpf²(2n̄_BE+1) = x_zpf² coth(ħΩ/2k_BT) (m²).
pub fn quantum_variance_m2(x_zpf_m: f64, frequency_hz: f64, temperature_k: f64) -> f64 {
    x_zpf_m * x_zpf_m * (2.0 * bose_einstein(frequency_hz, temperature_k) + 1.0)
}

/// d n̄_BE/dT (1/K) = (x/T) eˣ/(eˣ − 1)², x = ħΩ/k_BT; 0 at T = 0. Propagates a bath-temperature
/// error into the occupancy that equipartition assigns.
pub fn bose_einstein_dn_dt(frequency_hz: f64, temperature_k: f64) -> f64 {
    if temperature_k <= 0.0 {
        return 0.0;
    }
    let x = quantum_temperature_k(frequency_hz) / temperature_k;
    let em1 = x.exp_m1();
    if !em1.is_finite() {
        return 0.0;
    }
    // eˣ/(eˣ − 1)² = 1/(em1 (1 − e^{−x})), stable for small and large x.
    (x / temperature_k) / (em1 * (-(-x).exp_m1()))
}

/// d ln⟨x²⟩ / d ln T of the symmetrised thermal variance x_zpf² coth(x/2) at fixed x_zpf:
/// x/sinh x (→ 1 in the classical limit, → 0 deep in the ground state). A relative
/// bath-temperature error σ_T/T becomes (x/sinh x)·σ_T/T in ⟨x²⟩.
pub fn variance_temperature_sensitivity(frequency_hz: f64, temperature_k: f64) -> f64 {
    if temperature_k <= 0.0 {
        return 0.0;
    }
    let x = quantum_temperature_k(frequency_hz) / temperature_k;
    if x < 1e-8 {
        return 1.0;
    }
    let s = x / x.sinh();
    if s.is_finite() { s } else { 0.0 }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inversion_round_trips() {
        for &t in &[1e-4, 0.01, 4.0, 300.0] {
            let n = bose_einstein(1e6, t);
            let back = effective_temperature_k(1e6, n).unwrap();
            assert!((back / t - 1.0).abs() < 1e-9, "{t} -> {n} -> {back}");
        }
        assert!(effective_temperature_k(1e6, 0.0).is_none());
        assert!(effective_temperature_k(1e6, -1.0).is_none());
    }
}
