//! Reference curves drawn over the live spectrum, evaluated on a log-spaced frequency grid
//! from a fitted mode (METHODS.md §2–§3, all single-sided in f):
//! fitted model B + A·(2/π) f_m² γ / [(f_m² − f²)² + γ² f²] (V²/Hz),
//! zero-point spectrum 2ħ Im χ(Ω), SQL of the added noise 2ħ|χ(Ω)|, and the thermal
//! expectation at bath temperature T, 2ħ coth(ħΩ/2k_BT) Im χ(Ω) (m²/Hz, METHODS §2b), with
//! χ(Ω) = 1/[m_eff(Ω_m² − Ω² − iΓ_mΩ)], Γ_m = 2πγ.
//!
//! The formulas live in [`crate::physics::quantum`] and [`crate::physics::oscillator`]; this
//! module only evaluates them for drawing, so the window, `analyze` and the figure share one
//! formula each.

use crate::physics::oscillator::{self, Oscillator};
use crate::physics::quantum;

/// A mechanical mode as fitted, for drawing.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct ModeShape {
    /// Resonance frequency f_m, Hz.
    pub frequency_hz: f64,
    /// FWHM linewidth γ, Hz.
    pub linewidth_hz: f64,
}

impl ModeShape {
    /// The oscillator of this shape and mass (not validated: a drawing of a bad fit shows
    /// nothing rather than failing).
    fn oscillator(self, mass_kg: f64) -> Oscillator {
        Oscillator {
            mass_kg,
            frequency_hz: self.frequency_hz,
            linewidth_hz: self.linewidth_hz,
        }
    }

    /// The oscillator line of area `area` (any unit²) at f: A (2/π) f_m² γ / [(f_m² − f²)² +
    /// γ² f²] (per Hz).
    pub fn line(self, f_hz: f64, area: f64) -> f64 {
        oscillator::oscillator_psd(f_hz, area, self.frequency_hz, self.linewidth_hz)
    }

    /// Zero-point displacement spectrum 2ħ Im χ, m²/Hz.
    pub(crate) fn zero_point_m2_per_hz(self, f_hz: f64, mass_kg: f64) -> f64 {
        quantum::zero_point_psd_at(&self.oscillator(mass_kg), f_hz)
    }

    /// SQL of the added noise 2ħ|χ|, m²/Hz.
    pub(crate) fn sql_m2_per_hz(self, f_hz: f64, mass_kg: f64) -> f64 {
        quantum::sql_psd_at(&self.oscillator(mass_kg), f_hz)
    }

    /// Thermal (symmetrised, quantum) expectation 2ħ coth(ħΩ/2k_BT) Im χ at bath T, m²/Hz
    /// (METHODS.md §2b; [`quantum::quantum_thermal_psd_at`]).
    pub(crate) fn thermal_m2_per_hz(self, f_hz: f64, mass_kg: f64, temperature_k: f64) -> f64 {
        quantum::quantum_thermal_psd_at(&self.oscillator(mass_kg), temperature_k, f_hz)
    }
}

/// `points` frequencies log-spaced over `range_hz` (both ends included), plus f_m itself
/// when it lies inside, sorted ascending; empty for a bad range.
pub(crate) fn log_grid(range_hz: (f64, f64), points: usize, also_hz: Option<f64>) -> Vec<f64> {
    let (lo, hi) = range_hz;
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo) || points < 2 {
        return Vec::new();
    }
    let (a, b) = (lo.log10(), hi.log10());
    let mut v: Vec<f64> = (0..points)
        .map(|i| 10f64.powf(a + (b - a) * i as f64 / (points - 1) as f64))
        .collect();
    if let Some(f) = also_hz.filter(|f| *f > lo && *f < hi) {
        v.push(f);
        v.sort_by(f64::total_cmp);
    }
    v
}

/// A grid dense around a narrow line: `points` log-spaced over the range plus `points`
/// linearly spaced over f_m ± 20 γ (clipped to the range), sorted and de-duplicated, so a
/// line much narrower than one pixel column is still drawn with its true peak.
pub(crate) fn grid_around_mode(range_hz: (f64, f64), points: usize, mode: ModeShape) -> Vec<f64> {
    let mut v = log_grid(range_hz, points, Some(mode.frequency_hz));
    let (lo, hi) = range_hz;
    let half = 20.0 * mode.linewidth_hz;
    let a = (mode.frequency_hz - half).max(lo);
    let b = (mode.frequency_hz + half).min(hi);
    if b > a && points >= 2 {
        v.extend((0..points).map(|i| a + (b - a) * i as f64 / (points - 1) as f64));
        v.sort_by(f64::total_cmp);
        v.dedup();
    }
    v
}

#[cfg(test)]
mod tests {
    use std::f64::consts::PI;

    use super::*;
    use crate::physics::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};

    // METHODS.md §7 invented example (values computed there with numpy, [N]):
    // m = 1e-13 kg, f_m = 1 MHz, Q = 1e5 (γ = 10 Hz), T = 4 K.
    const MASS: f64 = 1e-13;
    const MODE: ModeShape = ModeShape {
        frequency_hz: 1e6,
        linewidth_hz: 10.0,
    };

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    #[test]
    fn zero_point_and_sql_peaks_match_methods_table() {
        // zero-point peak 2ħQ/(mΩ²) = 5.343e-30 m²/Hz; SQL at f_m equals it (Clerk et al.
        // 2010, single-sided per METHODS §0/§3).
        let zp = MODE.zero_point_m2_per_hz(1e6, MASS);
        assert!(rel(zp, 5.343e-30) < 1e-3, "{zp}");
        let sql = MODE.sql_m2_per_hz(1e6, MASS);
        assert!(rel(sql, zp) < 1e-9);
        let om = 2.0 * PI * 1e6;
        let exact = 2.0 * HBAR_J_S * 1e5 / (MASS * om * om);
        assert!(rel(zp, exact) < 1e-9);
    }

    #[test]
    fn thermal_peak_and_area_match_methods_table() {
        // thermal peak 4k_BTQ/(mΩ³) = 8.906e-25 m²/Hz at 4 K (Saulson 1990; METHODS §7).
        let th = MODE.thermal_m2_per_hz(1e6, MASS, 4.0);
        assert!(rel(th, 8.906e-25) < 1e-3, "{th}");
        // line() integrates to its area (METHODS §2): crude trapezoid over ±2000 γ.
        let n = 400_000;
        let (a, b) = (1e6 - 2e4, 1e6 + 2e4);
        let h = (b - a) / n as f64;
        let s: f64 = (0..=n)
            .map(|i| {
                let w = if i == 0 || i == n { 0.5 } else { 1.0 };
                w * MODE.line(a + h * i as f64, 1.0)
            })
            .sum::<f64>()
            * h;
        // tails beyond ±2000 γ hold 2/(π·4000) ≈ 1.6e-4 of the area
        assert!(rel(s, 1.0) < 3e-4, "{s}");
        // peak 2A/(πγ)
        assert!(rel(MODE.line(1e6, 1.0), 2.0 / (PI * 10.0)) < 1e-9);
    }

    #[test]
    fn drawn_thermal_is_the_symmetrised_quantum_form() {
        // METHODS.md §2b/§3/§4: at f_m, 2ħ coth(ħΩ/2k_BT) Im χ = 4 x_zpf²(2n̄+1)/Γ exactly
        // (Im χ(Ω_m) = 1/(mΓΩ_m), x_zpf² = ħ/2mΩ_m, n̄ Bose–Einstein). 30 µK, 600 kHz:
        // ħΩ ≈ k_BT, where the classical 4k_BT Im χ/Ω is ~7 % low.
        let mode = ModeShape {
            frequency_hz: 600e3,
            linewidth_hz: 6.0,
        };
        let (m, t) = (2e-14, 30e-6);
        let om = 2.0 * PI * 600e3;
        let n = 1.0 / (HBAR_J_S * om / (BOLTZMANN_J_PER_K * t)).exp_m1();
        let x2 = HBAR_J_S / (2.0 * m * om);
        let gamma = 2.0 * PI * 6.0;
        let expected = 4.0 * x2 * (2.0 * n + 1.0) / gamma;
        let drawn = mode.thermal_m2_per_hz(600e3, m, t);
        assert!(rel(drawn, expected) < 1e-12, "{drawn:e} vs {expected:e}");
        let classical = 4.0 * BOLTZMANN_J_PER_K * t / (om * m * gamma * om);
        assert!(classical / drawn < 0.94 && classical / drawn > 0.92);
    }

    #[test]
    fn grids() {
        let g = log_grid((10.0, 1e4), 4, Some(500.0));
        assert_eq!(g.len(), 5);
        assert!((g[0] - 10.0).abs() < 1e-9 && (g[4] - 1e4).abs() < 1e-6);
        assert!(log_grid((0.0, 1.0), 10, None).is_empty());
        let d = grid_around_mode((1e5, 1e7), 100, MODE);
        assert!(d.windows(2).all(|w| w[0] < w[1]));
        assert!(d.iter().filter(|f| (**f - 1e6).abs() < 200.0).count() >= 99);
    }
}
