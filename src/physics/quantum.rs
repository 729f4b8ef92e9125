//! Quantum and thermal reference spectra of a mode, as curves on a frequency grid so the window
//! can overlay them (METHODS.md §2–§3). All single-sided in f: the two-sided symmetrised forms
//! of Clerk et al., RMP 82, 1155 (2010) [C10] and [A14] are doubled (S^(1)(f) = 2 S̄(Ω)).

use super::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};
use super::oscillator::Oscillator;

/// Classical thermal displacement PSD 4 k_B T Im χ(Ω)/Ω (m²/Hz) at one frequency
/// (fluctuation–dissipation theorem, single-sided).
pub fn classical_thermal_psd_at(osc: &Oscillator, temperature_k: f64, frequency_hz: f64) -> f64 {
    4.0 * BOLTZMANN_J_PER_K * temperature_k * osc.im_susceptibility_over_omega(frequency_hz)
}

/// Symmetrised quantum thermal PSD 2ħ coth(ħΩ/2k_BT) Im χ(Ω) = 2ħ(2n̄+1) Im χ (m²/Hz),
/// including the zero-point part. T = 0 gives the zero-point spectrum; Ω → 0 the classical
/// limit (evaluated as 4 k_B T (Im χ/Ω)·x coth x with x = ħΩ/2k_BT, so it is finite at DC).
pub fn quantum_thermal_psd_at(osc: &Oscillator, temperature_k: f64, frequency_hz: f64) -> f64 {
    if temperature_k <= 0.0 {
        return zero_point_psd_at(osc, frequency_hz);
    }
    let omega = 2.0 * std::f64::consts::PI * frequency_hz;
    let x = HBAR_J_S * omega / (2.0 * BOLTZMANN_J_PER_K * temperature_k);
    let x_coth_x = if x.abs() < 1e-8 { 1.0 } else { x / x.tanh() };
    4.0 * BOLTZMANN_J_PER_K
        * temperature_k
        * osc.im_susceptibility_over_omega(frequency_hz)
        * x_coth_x
}

/// Zero-point displacement PSD 2ħ Im χ(Ω) (m²/Hz), symmetrised, single-sided.
pub fn zero_point_psd_at(osc: &Oscillator, frequency_hz: f64) -> f64 {
    let omega = 2.0 * std::f64::consts::PI * frequency_hz;
    2.0 * HBAR_J_S * omega * osc.im_susceptibility_over_omega(frequency_hz)
}

/// SQL of the added noise 2ħ|χ(Ω)| (m²/Hz), single-sided; an envelope, each frequency needing
/// its own probe strength. Does not include the zero-point motion itself.
pub fn sql_psd_at(osc: &Oscillator, frequency_hz: f64) -> f64 {
    2.0 * HBAR_J_S * osc.susceptibility_abs2(frequency_hz).sqrt()
}

/// The imprecision S_imp = ħ|χ| (m²/Hz) and back-action force S_FF = ħ/|χ| (N²/Hz) that reach
/// the SQL at one frequency; their product is ħ² (single-sided bound).
pub fn sql_split_at(osc: &Oscillator, frequency_hz: f64) -> (f64, f64) {
    let chi = osc.susceptibility_abs2(frequency_hz).sqrt();
    (HBAR_J_S * chi, HBAR_J_S / chi)
}

/// Zero-point peak 2ħQ/(m Ω_m²) = 4 x_zpf²/Γ_m (m²/Hz).
pub fn zero_point_peak_psd(osc: &Oscillator) -> f64 {
    zero_point_psd_at(osc, osc.frequency_hz)
}

/// SQL at resonance 2ħ|χ(Ω_m)| (m²/Hz); equals the zero-point peak.
pub fn sql_psd_at_resonance(osc: &Oscillator) -> f64 {
    sql_psd_at(osc, osc.frequency_hz)
}

/// Classical thermal peak 4 k_B T Q/(m Ω_m³) (m²/Hz).
pub fn thermal_peak_psd(osc: &Oscillator, temperature_k: f64) -> f64 {
    classical_thermal_psd_at(osc, temperature_k, osc.frequency_hz)
}

/// [`zero_point_psd_at`] on a grid.
pub fn zero_point_psd(frequencies_hz: &[f64], osc: &Oscillator) -> Vec<f64> {
    frequencies_hz
        .iter()
        .map(|&f| zero_point_psd_at(osc, f))
        .collect()
}

/// [`sql_psd_at`] on a grid.
pub fn sql_psd(frequencies_hz: &[f64], osc: &Oscillator) -> Vec<f64> {
    frequencies_hz.iter().map(|&f| sql_psd_at(osc, f)).collect()
}

/// [`classical_thermal_psd_at`] on a grid.
pub fn classical_thermal_psd(
    frequencies_hz: &[f64],
    osc: &Oscillator,
    temperature_k: f64,
) -> Vec<f64> {
    frequencies_hz
        .iter()
        .map(|&f| classical_thermal_psd_at(osc, temperature_k, f))
        .collect()
}

/// [`quantum_thermal_psd_at`] on a grid.
pub fn quantum_thermal_psd(
    frequencies_hz: &[f64],
    osc: &Oscillator,
    temperature_k: f64,
) -> Vec<f64> {
    frequencies_hz
        .iter()
        .map(|&f| quantum_thermal_psd_at(osc, temperature_k, f))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantum_form_reduces_to_classical_at_high_temperature() {
        // METHODS.md §2: coth(x) → 1/x for k_BT ≫ ħΩ.
        let o = Oscillator::with_quality_factor(1e-13, 1e6, 1e5).unwrap();
        let c = classical_thermal_psd_at(&o, 300.0, 1e6);
        let q = quantum_thermal_psd_at(&o, 300.0, 1e6);
        assert!((q / c - 1.0).abs() < 1e-9);
        assert_eq!(
            quantum_thermal_psd_at(&o, 0.0, 1e6),
            zero_point_psd_at(&o, 1e6)
        );
        assert!(quantum_thermal_psd_at(&o, 4.0, 0.0).is_finite());
    }
}
