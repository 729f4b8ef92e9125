//! Volts → metres (METHODS.md §5): a tone of known equivalent rms displacement, a
//! phase-modulation tone of known depth β and frequency pull G/2π (Gorodetsky et al., Opt.
//! Express 18, 23236 (2010) \[G10\]), thermal equipartition at a known bath temperature, or a
//! given m/V; the vacuum coupling rate g₀/2π; and a bounded history of the tone for drift.
//!
//! Tone power is read robustly as P = Σ_{|k−k₀|≤M} (PSD_k − B_k) Δf (METHODS.md §1, Heinzel et
//! al. 2002 §9), never as peak × Δf; B is the local floor from bias-corrected medians of the
//! bins on either side of the tone, interpolated linearly across it.

use std::f64::consts::PI;

use super::occupancy::{bose_einstein, quantum_variance_m2, variance_temperature_sensitivity};
use super::oscillator::x_zpf_m;
use super::{Estimate, PhysicsError, Result, require_positive, window_stats};
use crate::dsp::Spectrum;

/// How the calibration was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum CalibrationMethod {
    /// From a tone (known rms displacement, or phase modulation of known β and G).
    Tone,
    /// From the thermal area at a known bath temperature and mass.
    Equipartition,
    /// Given by the user.
    Given,
}

impl CalibrationMethod {
    /// The report spelling: `tone`, `equipartition`, `given`.
    pub fn name(self) -> &'static str {
        match self {
            Self::Tone => "tone",
            Self::Equipartition => "equipartition",
            Self::Given => "given",
        }
    }
}

/// A calibration: metres per volt with its 1σ.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Calibration {
    /// Method.
    pub method: CalibrationMethod,
    /// c = m/V.
    pub m_per_v: Estimate,
    /// The tone reading it came from (tone method).
    pub tone: Option<ToneReading>,
}

impl Calibration {
    /// c² (m²/V²) with its 1σ (relative σ doubles).
    pub(crate) fn m2_per_v2(&self) -> Estimate {
        let c = self.m_per_v.value;
        Estimate::new(c * c, 2.0 * c.abs() * self.m_per_v.sigma)
    }
}

/// A given m/V (no uncertainty).
///
/// # Errors
/// [`PhysicsError::Input`] for a non-positive or non-finite value.
pub fn given(m_per_v: f64) -> Result<Calibration> {
    Ok(Calibration {
        method: CalibrationMethod::Given,
        m_per_v: Estimate::new(require_positive("the calibration (m/V)", m_per_v)?, 0.0),
        tone: None,
    })
}

/// The tone read from a spectrum.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ToneReading {
    /// Frequency of the tone, by parabolic interpolation of the peak bins (Hz).
    pub frequency_hz: f64,
    /// Peak bin.
    pub bin: usize,
    /// Tone power P = Σ(PSD − B)Δf (V² for a voltage PSD) with its statistical 1σ.
    pub power: Estimate,
    /// Peak reading PSD_peak × ENBW (scallop-biased unless the tone is bin-centred).
    pub peak_power: f64,
    /// Local floor under the tone (PSD unit).
    pub floor_psd: f64,
    /// Half-width M of the summed bins.
    pub half_width_bins: usize,
}

/// Where and how to look for a tone.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ToneOptions {
    /// Search ± this many bins around the nominal frequency for the peak (default 5).
    pub search_bins: usize,
    /// Floor from this many bins on each side beyond the summed lobe (default 24).
    pub floor_bins: usize,
}

impl Default for ToneOptions {
    fn default() -> Self {
        Self {
            search_bins: 5,
            floor_bins: 24,
        }
    }
}

/// Ratio median/mean of χ²_ν/ν by the Wilson–Hilferty approximation (1 − 2/9ν)³
/// (within 1.3 % of the exact value at ν = 2, 0.1 % at ν ≥ 10; scipy values in the tests).
pub fn chi2_median_ratio(nu: f64) -> f64 {
    let nu = nu.max(1.0);
    (1.0 - 2.0 / (9.0 * nu)).powi(3)
}

/// Reads the power of a tone near `frequency_hz`. `baseline` (PSD unit, e.g. a fitted mode's
/// line) is subtracted before the floor is estimated, so a nearby mode's wing does not count.
///
/// # Errors
/// [`PhysicsError::Input`] when the frequency lies outside the spectrum;
/// [`PhysicsError::NoTone`] when there is no tone above the floor.
pub fn read_tone(
    spectrum: &Spectrum,
    frequency_hz: f64,
    options: &ToneOptions,
    baseline: Option<&dyn Fn(f64) -> f64>,
) -> Result<ToneReading> {
    let n = spectrum.len();
    let df = spectrum.resolution_hz;
    let nyquist = df * n.saturating_sub(1) as f64;
    if !(frequency_hz.is_finite() && frequency_hz > 0.0 && frequency_hz <= nyquist) {
        return Err(PhysicsError::Input(format!(
            "the tone frequency {frequency_hz} Hz lies outside the spectrum (0 to {nyquist} Hz)"
        )));
    }
    let base = |k: usize| baseline.map_or(0.0, |b| b(k as f64 * df));
    let psd = |k: usize| spectrum.psd_v2_per_hz.get(k).copied().unwrap_or(0.0);
    let resid = |k: usize| psd(k) - base(k);
    let k0 = spectrum.bin_of(frequency_hz);
    let lo = k0.saturating_sub(options.search_bins).max(1);
    let hi = (k0 + options.search_bins).min(n.saturating_sub(1));
    let kp = (lo..=hi)
        .max_by(|&a, &b| resid(a).total_cmp(&resid(b)))
        .ok_or_else(|| PhysicsError::NoTone("empty search range".into()))?;
    let m = spectrum.window.tone_half_width_bins();
    let k_eff = spectrum.k_eff.max(1.0);
    let bias = chi2_median_ratio(2.0 * k_eff);
    // Flank medians (bias-corrected) left and right of the summed lobe.
    let left: Vec<f64> = (kp.saturating_sub(m + options.floor_bins)..kp.saturating_sub(m))
        .filter(|&k| k >= 1)
        .map(resid)
        .collect();
    let right: Vec<f64> = (kp + m + 1..=(kp + m + options.floor_bins).min(n.saturating_sub(1)))
        .map(resid)
        .collect();
    let med = |v: &[f64]| super::fit::median(v) / bias;
    let centre_l = kp as f64 - m as f64 - 0.5 * (left.len() as f64 + 1.0);
    let centre_r = kp as f64 + m as f64 + 0.5 * (right.len() as f64 + 1.0);
    let floor_at: Box<dyn Fn(usize) -> f64> = match (left.len() >= 3, right.len() >= 3) {
        (true, true) => {
            let (bl, br) = (med(&left), med(&right));
            Box::new(move |k: usize| bl + (br - bl) * (k as f64 - centre_l) / (centre_r - centre_l))
        }
        (true, false) => {
            let b = med(&left);
            Box::new(move |_| b)
        }
        (false, true) => {
            let b = med(&right);
            Box::new(move |_| b)
        }
        (false, false) => {
            return Err(PhysicsError::NoTone(
                "too few bins around the tone to estimate the floor".into(),
            ));
        }
    };
    let n_floor = (left.len() + right.len()) as f64;
    let s_lo = kp.saturating_sub(m).max(1);
    let s_hi = (kp + m).min(n.saturating_sub(1));
    let mut power = 0.0;
    let mut noise_psd = 0.0;
    for k in s_lo..=s_hi {
        let b = floor_at(k);
        power += (resid(k) - b) * df;
        noise_psd += (b + base(k)).max(0.0);
    }
    let bins = (s_hi + 1 - s_lo) as f64;
    noise_psd /= bins;
    let floor_psd = floor_at(kp);
    // Statistical 1σ: noise in the summed bins (correlated by the window), the floor estimate
    // (median efficiency √(π/2)), and the tone × noise cross term 2 P S_n ENBW / K_eff.
    let corr = window_stats::error_inflation(spectrum.window).powi(2);
    let var_noise = (df * noise_psd).powi(2) * bins * corr / k_eff;
    let var_floor = (bins * df).powi(2) * (PI / 2.0) * (floor_psd.max(0.0)).powi(2)
        / (k_eff * n_floor.max(1.0))
        * corr;
    let var_cross = 2.0 * power.max(0.0) * noise_psd * spectrum.enbw_hz / k_eff;
    let sigma = (var_noise + var_floor + var_cross).sqrt();
    if !(power.is_finite() && sigma.is_finite()) {
        return Err(PhysicsError::NoTone("non-finite tone power".into()));
    }
    if power <= 3.0 * sigma {
        return Err(PhysicsError::NoTone(format!(
            "no tone above the floor near {frequency_hz} Hz (power {power:.3e} ± {sigma:.3e})"
        )));
    }
    // Parabolic interpolation of the peak position in log power.
    let ln = |k: usize| resid(k).max(1e-300).ln();
    let mut frequency_hz_fit = kp as f64 * df;
    if kp >= 1 && kp + 1 < n {
        let (a, b, c) = (ln(kp - 1), ln(kp), ln(kp + 1));
        let den = a - 2.0 * b + c;
        if den < 0.0 {
            let delta = (0.5 * (a - c) / den).clamp(-0.5, 0.5);
            frequency_hz_fit = (kp as f64 + delta) * df;
        }
    }
    Ok(ToneReading {
        frequency_hz: frequency_hz_fit,
        bin: kp,
        power: Estimate::new(power, sigma),
        peak_power: psd(kp) * spectrum.enbw_hz,
        floor_psd,
        half_width_bins: m,
    })
}

/// Equivalent rms displacement of a phase-modulation tone \[G10\]:
/// x_cal,pk = β f_mod/|G/2π|, x_rms = x_pk/√2.
///
/// # Errors
/// [`PhysicsError::Input`] for a non-positive depth, frequency or pull.
pub(crate) fn pm_tone_rms_m(
    pm_depth_rad: f64,
    tone_frequency_hz: f64,
    freq_pull_hz_per_m: f64,
) -> Result<f64> {
    let beta = require_positive("the phase-modulation depth", pm_depth_rad)?;
    let f = require_positive("the tone frequency", tone_frequency_hz)?;
    let g = require_positive(
        "the frequency pull (absolute value)",
        freq_pull_hz_per_m.abs(),
    )?;
    Ok(beta * f / g / std::f64::consts::SQRT_2)
}

/// Tone calibration: c² = x_rms²/P_V, c = x_rms/√P_V, σ_c/c = ½ σ_P/P.
///
/// # Errors
/// [`PhysicsError::Input`] for a non-positive rms displacement or tone power.
pub(crate) fn from_tone(reading: &ToneReading, tone_rms_m: f64) -> Result<Calibration> {
    let x = require_positive("the tone's rms displacement", tone_rms_m)?;
    let p = require_positive("tone power", reading.power.value)?;
    let c = x / p.sqrt();
    Ok(Calibration {
        method: CalibrationMethod::Tone,
        m_per_v: Estimate::new(c, 0.5 * c * reading.power.sigma / p),
        tone: Some(reading.clone()),
    })
}

/// Thermal equipartition (METHODS.md §5a): c² = x_zpf²(2n̄_BE+1)/A_V (= k_BT/(mΩ²A_V) in the
/// classical limit). 1σ by first-order propagation (x_zpf² ∝ 1/m; d ln(2n̄+1)/d ln T =
/// x/sinh x, x = ħΩ/k_BT):
/// σ_c/c = ½ √((σ_A/A)² + (σ_m/m)² + (x/sinh x · σ_T/T)²). Give σ = 0 for a mass or a
/// temperature taken as exact.
///
/// # Errors
/// [`PhysicsError::Input`] for non-positive area, frequency, mass or temperature, or a
/// negative or non-finite uncertainty.
pub fn equipartition(
    mode_area_v2: Estimate,
    mode_frequency_hz: f64,
    mass_kg: Estimate,
    bath_temperature_k: Estimate,
) -> Result<Calibration> {
    let a = require_positive("mode area (V²)", mode_area_v2.value)?;
    let f = require_positive("mode frequency (Hz)", mode_frequency_hz)?;
    let m = require_positive("the effective mass", mass_kg.value)?;
    let t = require_positive("the bath temperature", bath_temperature_k.value)?;
    for (name, sigma) in [
        ("the 1σ of the effective mass", mass_kg.sigma),
        ("the 1σ of the bath temperature", bath_temperature_k.sigma),
    ] {
        if !(sigma.is_finite() && sigma >= 0.0) {
            return Err(PhysicsError::Input(format!(
                "{name} must be a finite number ≥ 0, got {sigma}"
            )));
        }
    }
    let var = quantum_variance_m2(x_zpf_m(m, f), f, t);
    let c = (var / a).sqrt();
    let rel_t = variance_temperature_sensitivity(f, t) * bath_temperature_k.sigma / t;
    let rel =
        ((mode_area_v2.sigma / a).powi(2) + (mass_kg.sigma / m).powi(2) + rel_t.powi(2)).sqrt();
    Ok(Calibration {
        method: CalibrationMethod::Equipartition,
        m_per_v: Estimate::new(c, 0.5 * c * rel),
        tone: None,
    })
}

/// Vacuum coupling rate g₀/2π (Hz) from a phase-modulation tone \[G10\], in the general form
/// g₀² = (β²Ω_mod²/2)(A_mech/P_tone)/(2n̄+1) (METHODS.md §5b), with 1σ from the two powers.
///
/// # Errors
/// [`PhysicsError::Input`] for non-positive inputs or a negative occupancy.
pub fn g0_hz(
    pm_depth_rad: f64,
    tone_frequency_hz: f64,
    mode_area: Estimate,
    tone_power: Estimate,
    occupancy: f64,
) -> Result<Estimate> {
    let beta = require_positive("the phase-modulation depth", pm_depth_rad)?;
    let f = require_positive("the tone frequency", tone_frequency_hz)?;
    let a = require_positive("mode area", mode_area.value)?;
    let p = require_positive("tone power", tone_power.value)?;
    if !(occupancy.is_finite() && occupancy >= 0.0) {
        return Err(PhysicsError::Input(format!(
            "occupancy must be ≥ 0, got {occupancy}"
        )));
    }
    let w = 2.0 * PI * f;
    let g0 = ((beta * beta * w * w / 2.0) * (a / p) / (2.0 * occupancy + 1.0)).sqrt();
    let rel = 0.5 * ((mode_area.sigma / a).powi(2) + (tone_power.sigma / p).powi(2)).sqrt();
    Ok(Estimate::new(g0 / (2.0 * PI), g0 / (2.0 * PI) * rel))
}

/// g₀/2π with n̄ from Bose–Einstein at the bath temperature (the mode must be thermalised).
///
/// # Errors
/// As [`g0_hz`], and for a non-positive temperature.
pub(crate) fn g0_hz_at_temperature(
    pm_depth_rad: f64,
    tone_frequency_hz: f64,
    mode_area: Estimate,
    tone_power: Estimate,
    mode_frequency_hz: f64,
    bath_temperature_k: f64,
) -> Result<Estimate> {
    let t = require_positive("the bath temperature", bath_temperature_k)?;
    let f = require_positive("mode frequency (Hz)", mode_frequency_hz)?;
    g0_hz(
        pm_depth_rad,
        tone_frequency_hz,
        mode_area,
        tone_power,
        bose_einstein(f, t),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pm_tone_example() {
        // METHODS.md §5b invented example: β = 1e−3, f_mod = 1.05 MHz, G/2π = 1 GHz/nm →
        // x_cal,pk = 1.05e−15 m.
        let x = pm_tone_rms_m(1e-3, 1.05e6, 1e18).unwrap();
        assert!((x * std::f64::consts::SQRT_2 / 1.05e-15 - 1.0).abs() < 1e-12);
        assert!(pm_tone_rms_m(-1e-3, 1.05e6, 1e18).is_err());
    }
}
