//! Display units of spectral densities, integrated rms over a band and cumulative rms. (The
//! robust reading of a tone's power, METHODS.md §1, is `physics::calibration::read_tone`.)
//!
//! Every input is a one-sided PSD in V²/Hz as [`Spectrum`] holds it. A calibration is given as
//! metres per volt `c`; displacement densities are `c² S_VV` (m²/Hz) and `c √S_VV` (m/√Hz).
//! dB values are `10 log10` of the PSD re 1 V²/Hz or 1 m²/Hz; a PSD of exactly 0 is shown at
//! the dB value of the smallest positive f64 (≈ −3077 dB), never −∞.
//!
//! **Integration.** Each bin contributes `PSD_k Δf`. The DC and (even N) Nyquist bins already
//! carry the one-sided factor 1 instead of 2, so with this rule `Σ_k PSD_k Δf` over all bins
//! equals the windowed signal's variance exactly (Parseval; Heinzel et al. 2002 §9). A bin
//! belongs to a band `[lo, hi]` when its centre frequency `f_k = k Δf` does.

use super::{DspError, Result, Spectrum};

/// A unit in which a spectral density is shown or written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
pub enum DensityUnit {
    /// Power spectral density of the detector voltage, V²/Hz.
    #[default]
    V2PerHz,
    /// Amplitude spectral density, V/√Hz.
    VPerRtHz,
    /// Calibrated displacement PSD, m²/Hz.
    M2PerHz,
    /// Calibrated displacement ASD, m/√Hz.
    MPerRtHz,
    /// 10·log10 of the PSD in V²/Hz (dB re 1 V²/Hz).
    DbV2PerHz,
    /// 10·log10 of the PSD in m²/Hz (dB re 1 m²/Hz).
    DbM2PerHz,
}

/// Bin range `[first, last]` whose centre frequencies lie in `[lo_hz, hi_hz]`
/// (first = ⌈lo/Δf⌉, last = ⌊hi/Δf⌋, clipped to the spectrum).
///
/// # Errors
/// [`DspError::Band`] if the band is not two finite frequencies with lo ≤ hi, or holds no bin.
pub fn band_bins(spectrum: &Spectrum, lo_hz: f64, hi_hz: f64) -> Result<(usize, usize)> {
    if !(lo_hz.is_finite() && hi_hz.is_finite() && lo_hz <= hi_hz) {
        return Err(DspError::Band(format!(
            "band must be two finite frequencies LO <= HI, got {lo_hz} Hz to {hi_hz} Hz"
        )));
    }
    let df = spectrum.resolution_hz;
    let last_bin = spectrum.len().saturating_sub(1);
    if spectrum.is_empty() || df.is_nan() || df <= 0.0 {
        return Err(DspError::Band("the spectrum is empty".to_string()));
    }
    let first = (lo_hz / df).ceil().max(0.0);
    let last = (hi_hz / df).floor().min(last_bin as f64);
    if first > last {
        return Err(DspError::Band(format!(
            "no bin of the spectrum (0 to {} Hz, spacing {df} Hz) lies in {lo_hz} Hz to {hi_hz} Hz",
            spectrum.frequency_hz(last_bin)
        )));
    }
    Ok((first as usize, last as usize))
}

/// Variance in a band: `Σ_{lo ≤ f_k ≤ hi} PSD_k Δf` (V²).
///
/// # Errors
/// [`DspError::Band`] if the band is not two finite frequencies with lo ≤ hi, or holds no bin.
pub(crate) fn band_variance(spectrum: &Spectrum, lo_hz: f64, hi_hz: f64) -> Result<f64> {
    let (first, last) = band_bins(spectrum, lo_hz, hi_hz)?;
    let sum: f64 = spectrum
        .psd_v2_per_hz
        .get(first..=last)
        .unwrap_or(&[])
        .iter()
        .sum();
    Ok(sum * spectrum.resolution_hz)
}

/// Rms in a band, `√(band_variance)` (V).
///
/// # Errors
/// As [`band_variance`].
pub(crate) fn band_rms(spectrum: &Spectrum, lo_hz: f64, hi_hz: f64) -> Result<f64> {
    Ok(band_variance(spectrum, lo_hz, hi_hz)?.max(0.0).sqrt())
}

/// Direction of a cumulative rms.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
pub(crate) enum Cumulation {
    /// `rms_k = √(Σ_{j ≥ k} PSD_j Δf)`: rms of everything at and above f_k (falls with
    /// frequency; common practice in vibration and displacement-noise plots).
    #[default]
    FromHighFrequency,
    /// `rms_k = √(Σ_{j ≤ k} PSD_j Δf)`: rms of everything at and below f_k (rises).
    FromLowFrequency,
}

/// Cumulative rms per bin (V), in the given direction (see [`Cumulation`]). Same length as
/// the spectrum; the first (from-high) or last (from-low) value is the total rms.
pub(crate) fn cumulative_rms(spectrum: &Spectrum, direction: Cumulation) -> Vec<f64> {
    let df = spectrum.resolution_hz;
    let mut out = vec![0.0; spectrum.len()];
    let mut acc = 0.0;
    let mut step = |o: &mut f64, p: &f64| {
        acc += p * df;
        *o = acc.max(0.0).sqrt();
    };
    match direction {
        Cumulation::FromLowFrequency => out
            .iter_mut()
            .zip(&spectrum.psd_v2_per_hz)
            .for_each(|(o, p)| step(o, p)),
        Cumulation::FromHighFrequency => out
            .iter_mut()
            .zip(&spectrum.psd_v2_per_hz)
            .rev()
            .for_each(|(o, p)| step(o, p)),
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::welch::welch;
    use crate::dsp::{WelchConfig, WindowKind};

    fn flat(level: f64, bins: usize, df: f64) -> Spectrum {
        Spectrum {
            sample_rate_hz: 2.0 * df * (bins - 1) as f64,
            segment: 2 * (bins - 1),
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: crate::dsp::Detrend::Mean,
            averaging: crate::dsp::Averaging::Linear,
            averages: 1,
            k_eff: 1.0,
            resolution_hz: df,
            enbw_hz: 1.5 * df,
            psd_v2_per_hz: vec![level; bins],
        }
    }

    #[test]
    fn band_and_cumulative_rms_of_a_flat_spectrum() {
        let s = flat(2.0, 101, 0.5); // 0 … 50 Hz
        // Bins 10 … 20 (f = 5 … 10 Hz): 11 bins × 2 × 0.5 = 11 V².
        assert!((band_variance(&s, 5.0, 10.0).unwrap() - 11.0).abs() < 1e-12);
        assert!((band_rms(&s, 5.0, 10.0).unwrap() - 11f64.sqrt()).abs() < 1e-12);
        assert!((band_variance(&s, 4.9, 10.1).unwrap() - 11.0).abs() < 1e-12);
        assert!(band_variance(&s, 10.1, 10.2).is_err());
        assert!(band_variance(&s, 20.0, 10.0).is_err());
        assert!(band_variance(&s, f64::NAN, 10.0).is_err());
        let down = cumulative_rms(&s, Cumulation::FromHighFrequency);
        let up = cumulative_rms(&s, Cumulation::FromLowFrequency);
        assert!((down[0] - 101f64.sqrt()).abs() < 1e-12);
        assert!((up[100] - 101f64.sqrt()).abs() < 1e-12);
        assert!((down[100] - 1.0).abs() < 1e-12 && (up[0] - 1.0).abs() < 1e-12);
    }

    #[test]
    fn parseval_over_the_whole_band() {
        // Σ PSD Δf over DC … Nyquist equals the windowed variance Σ(w x)²/S₂ (Heinzel 2002 §9).
        let x: Vec<f64> = (0..512)
            .map(|i| ((i * 37 % 101) as f64 - 50.0) / 30.0)
            .collect();
        let mut c = WelchConfig::new(100.0, 512);
        c.detrend = crate::dsp::Detrend::None;
        let s = welch(&x, &c).unwrap();
        let w = WindowKind::Hann.samples(512);
        let s2: f64 = w.iter().map(|v| v * v).sum();
        let var: f64 = x.iter().zip(&w).map(|(a, b)| (a * b).powi(2)).sum::<f64>() / s2;
        let total = band_variance(&s, 0.0, 50.0).unwrap();
        assert!((total - var).abs() < 1e-12 * var, "{total} vs {var}");
    }
}
