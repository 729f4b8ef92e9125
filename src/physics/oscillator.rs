//! The damped harmonic oscillator of one mechanical mode (METHODS.md §2): susceptibility χ(Ω),
//! the Hz-form displacement PSD used for fitting, its Lorentzian core, and the zero-point
//! amplitude x_zpf. Sources: Aspelmeyer, Kippenberg & Marquardt, RMP 86, 1391 (2014) \[A14\];
//! Saulson, PRD 42, 2437 (1990).

use std::f64::consts::PI;

use super::constants::HBAR_J_S;
use super::{Result, require_positive};

/// One mechanical mode: effective mass, resonance frequency and FWHM linewidth.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Oscillator {
    /// Effective mass m_eff (kg) at the readout point and direction.
    pub mass_kg: f64,
    /// Resonance frequency f_m (Hz).
    pub frequency_hz: f64,
    /// Linewidth γ_m = Γ_m/2π (Hz): FWHM of the displacement PSD.
    pub linewidth_hz: f64,
}

impl Oscillator {
    /// A mode from mass, frequency and linewidth (all positive and finite).
    ///
    /// # Errors
    /// [`super::PhysicsError::Input`] naming the first non-positive or non-finite argument.
    pub fn new(mass_kg: f64, frequency_hz: f64, linewidth_hz: f64) -> Result<Self> {
        Ok(Self {
            mass_kg: require_positive("mass (kg)", mass_kg)?,
            frequency_hz: require_positive("mode frequency (Hz)", frequency_hz)?,
            linewidth_hz: require_positive("linewidth (Hz)", linewidth_hz)?,
        })
    }

    /// A mode from mass, frequency and quality factor Q = f_m/γ_m.
    ///
    /// # Errors
    /// As [`Oscillator::new`], also for a non-positive Q.
    pub fn with_quality_factor(
        mass_kg: f64,
        frequency_hz: f64,
        quality_factor: f64,
    ) -> Result<Self> {
        let q = require_positive("quality factor", quality_factor)?;
        let f = require_positive("mode frequency (Hz)", frequency_hz)?;
        Self::new(mass_kg, f, f / q)
    }

    /// Ω_m = 2π f_m (rad/s).
    pub fn omega_rad_s(&self) -> f64 {
        2.0 * PI * self.frequency_hz
    }

    /// Energy damping rate Γ_m = 2π γ_m (rad/s).
    pub fn damping_rad_s(&self) -> f64 {
        2.0 * PI * self.linewidth_hz
    }

    /// Q = Ω_m/Γ_m = f_m/γ_m.
    pub fn quality_factor(&self) -> f64 {
        self.frequency_hz / self.linewidth_hz
    }

    /// Spring constant k = m_eff Ω_m² (N/m).
    pub(crate) fn spring_constant_n_per_m(&self) -> f64 {
        self.mass_kg * self.omega_rad_s().powi(2)
    }

    /// |χ(Ω)|² = 1/{m²[(Ω_m²−Ω²)² + Γ²Ω²]} (m²/N²).
    pub(crate) fn susceptibility_abs2(&self, frequency_hz: f64) -> f64 {
        let w = 2.0 * PI * frequency_hz;
        let wm = self.omega_rad_s();
        let g = self.damping_rad_s();
        1.0 / (self.mass_kg.powi(2) * ((wm * wm - w * w).powi(2) + g * g * w * w))
    }

    /// Im χ(Ω)/Ω = Γ_m/{m[(Ω_m²−Ω²)² + Γ²Ω²]} (m s/N), finite at Ω = 0.
    pub(crate) fn im_susceptibility_over_omega(&self, frequency_hz: f64) -> f64 {
        let w = 2.0 * PI * frequency_hz;
        let wm = self.omega_rad_s();
        let g = self.damping_rad_s();
        g / (self.mass_kg * ((wm * wm - w * w).powi(2) + g * g * w * w))
    }

    /// Zero-point amplitude x_zpf = √(ħ / 2 m_eff Ω_m) (m) \[A14\].
    pub fn x_zpf_m(&self) -> f64 {
        x_zpf_m(self.mass_kg, self.frequency_hz)
    }

    /// Classical thermal variance ⟨x²⟩ = k_B T/(m_eff Ω_m²) (m²), equipartition.
    pub fn classical_variance_m2(&self, temperature_k: f64) -> f64 {
        super::constants::BOLTZMANN_J_PER_K * temperature_k / self.spring_constant_n_per_m()
    }
}

/// x_zpf = √(ħ / 2 m Ω) (m) for a mass (kg) and frequency (Hz) \[A14\]. Non-positive inputs
/// give NaN; validate them first (e.g. with [`Oscillator::new`]).
pub fn x_zpf_m(mass_kg: f64, frequency_hz: f64) -> f64 {
    (HBAR_J_S / (2.0 * mass_kg * 2.0 * PI * frequency_hz)).sqrt()
}

/// The Hz-form oscillator PSD with area A (METHODS.md §2):
/// `S(f) = A (2/π) f_m² γ / [(f_m² − f²)² + γ² f²]`, with ∫₀^∞ S df = A exactly.
pub fn oscillator_psd(frequency_hz: f64, area: f64, center_hz: f64, linewidth_hz: f64) -> f64 {
    let f2 = frequency_hz * frequency_hz;
    let m2 = center_hz * center_hz;
    let d = m2 - f2;
    area * (2.0 / PI) * m2 * linewidth_hz / (d * d + linewidth_hz * linewidth_hz * f2)
}

/// The Lorentzian core `S(f) = A (γ/2π) / [(f − f_m)² + (γ/2)²]`, same peak 2A/(πγ) and
/// (over the whole real line) the same area A as the oscillator form (METHODS.md §2).
pub fn lorentzian_psd(frequency_hz: f64, area: f64, center_hz: f64, linewidth_hz: f64) -> f64 {
    let d = frequency_hz - center_hz;
    area * (linewidth_hz / (2.0 * PI)) / (d * d + 0.25 * linewidth_hz * linewidth_hz)
}

/// Peak value 2A/(πγ) of either line shape at f = f_m.
pub fn peak_psd(area: f64, linewidth_hz: f64) -> f64 {
    2.0 * area / (PI * linewidth_hz)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn on_resonance_susceptibility_is_imaginary() {
        // χ(Ω_m) = i/(m Γ Ω_m) (METHODS.md §3).
        let o = Oscillator::with_quality_factor(1e-13, 1e6, 1e5).unwrap();
        let expect = 1.0 / (o.mass_kg * o.damping_rad_s() * o.omega_rad_s());
        let im_chi = o.im_susceptibility_over_omega(1e6) * o.omega_rad_s();
        assert!((im_chi / expect - 1.0).abs() < 1e-12);
        // |χ|² = (Im χ)²: the real part vanishes on resonance.
        assert!((o.susceptibility_abs2(1e6) / (im_chi * im_chi) - 1.0).abs() < 1e-9);
    }

    #[test]
    fn lorentzian_and_oscillator_share_the_peak() {
        let p = peak_psd(2.0, 3.0);
        assert!((oscillator_psd(1000.0, 2.0, 1000.0, 3.0) / p - 1.0).abs() < 1e-12);
        assert!((lorentzian_psd(1000.0, 2.0, 1000.0, 3.0) / p - 1.0).abs() < 1e-12);
    }

    #[test]
    fn bad_inputs_are_refused() {
        assert!(Oscillator::new(-1.0, 1e6, 1.0).is_err());
        assert!(Oscillator::new(1.0, 0.0, 1.0).is_err());
        assert!(Oscillator::new(1.0, 1e6, f64::NAN).is_err());
    }
}
