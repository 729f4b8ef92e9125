//! Quantum and thermal reference spectra of a mode, as curves on a frequency grid so the window
//! can overlay them (METHODS.md §2–§3). All single-sided in f: the two-sided symmetrised forms
//! of Clerk et al., RMP 82, 1155 (2010) \[C10\] and \[A14\] are doubled (S^(1)(f) = 2 S̄(Ω)).

use super::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};
use super::oscillator::Oscillator;

/// Classical thermal displacement PSD 4 k_B T Im χ(Ω)/Ω (m²/Hz) at one frequency
/// (fluctuation–dissipation theorem, single-sided). The ħΩ ≪ k_BT limit of
/// [`quantum_thermal_psd_at`]; what the program reports and draws is the quantum form.
pub fn classical_thermal_psd_at(osc: &Oscillator, temperature_k: f64, frequency_hz: f64) -> f64 {
    4.0 * BOLTZMANN_J_PER_K * temperature_k * osc.im_susceptibility_over_omega(frequency_hz)
}

/// Symmetrised quantum thermal PSD 2ħ coth(ħΩ/2k_BT) Im χ(Ω) = 2ħ(2n̄+1) Im χ (m²/Hz),
/// including the zero-point part (METHODS.md §2b: the binding form of "thermal at T").
/// T = 0 gives the zero-point spectrum 2ħ Im χ; ħΩ ≪ k_BT the classical 4k_BT Im χ/Ω.
/// Evaluated as 4 k_B T (Im χ/Ω)·x coth x for x = ħΩ/2k_BT < 1 (finite at DC) and as
/// 2ħΩ (Im χ/Ω)·coth x above (finite for any T > 0, however small).
pub(crate) fn quantum_thermal_psd_at(
    osc: &Oscillator,
    temperature_k: f64,
    frequency_hz: f64,
) -> f64 {
    if temperature_k <= 0.0 {
        return zero_point_psd_at(osc, frequency_hz);
    }
    let omega = 2.0 * std::f64::consts::PI * frequency_hz;
    let x = HBAR_J_S * omega / (2.0 * BOLTZMANN_J_PER_K * temperature_k);
    let im_over_omega = osc.im_susceptibility_over_omega(frequency_hz);
    if x.abs() < 1.0 {
        let x_coth_x = if x.abs() < 1e-8 { 1.0 } else { x / x.tanh() };
        4.0 * BOLTZMANN_J_PER_K * temperature_k * im_over_omega * x_coth_x
    } else {
        2.0 * HBAR_J_S * omega * im_over_omega / x.tanh()
    }
}

/// Zero-point displacement PSD 2ħ Im χ(Ω) (m²/Hz), symmetrised, single-sided.
pub(crate) fn zero_point_psd_at(osc: &Oscillator, frequency_hz: f64) -> f64 {
    let omega = 2.0 * std::f64::consts::PI * frequency_hz;
    2.0 * HBAR_J_S * omega * osc.im_susceptibility_over_omega(frequency_hz)
}

/// SQL of the added noise 2ħ|χ(Ω)| (m²/Hz), single-sided; an envelope, each frequency needing
/// its own probe strength. Does not include the zero-point motion itself.
pub(crate) fn sql_psd_at(osc: &Oscillator, frequency_hz: f64) -> f64 {
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

/// Thermal peak at bath temperature T, symmetrised quantum form (METHODS.md §2b):
/// 2ħ coth(ħΩ_m/2k_BT) Im χ(Ω_m) = 4 x_zpf²(2n̄+1)/Γ_m (m²/Hz), exactly, since
/// Im χ(Ω_m) = 1/(m Γ_m Ω_m). Tends to the classical 4 k_B T Q/(m Ω_m³)
/// ([`classical_thermal_peak_psd`]) for k_BT ≫ ħΩ_m and to the zero-point peak as T → 0.
pub fn thermal_peak_psd(osc: &Oscillator, temperature_k: f64) -> f64 {
    quantum_thermal_psd_at(osc, temperature_k, osc.frequency_hz)
}

/// Classical thermal peak 4 k_B T Q/(m Ω_m³) (m²/Hz): the high-temperature limit of
/// [`thermal_peak_psd`], not an alternative to it (METHODS.md §2b).
pub fn classical_thermal_peak_psd(osc: &Oscillator, temperature_k: f64) -> f64 {
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
