//! The `two-detector` scenario: our invented device read by two detectors at once.
//!
//! An invented silicon-nitride string mode (f_m = 5 kHz, Q = 50, m_eff = 50 pg, at 295 K) is
//! read by two photodetectors of the same beam after a 50:50 split: both see the same motion
//! x(t) (the exact discrete-time oscillator of [`super::oscillator`]) with their own gains
//! (`m_per_v_a`, `m_per_v_b`; b inverted) and their own white imprecision floors, each
//! `floor_over_peak_db` above the mode's peak in that channel — the mode is *below* either
//! detector's floor and shows only in the cross-spectrum (METHODS.md §10). A calibration tone
//! of known equivalent rms displacement (`tone_rms_m` at `tone_frequency_hz`) reaches both
//! detectors like the motion, so each channel can be calibrated on its own. The record is a
//! 2-channel WAV (a = channel 0, b = channel 1) with a `.truth.json` sidecar.

use std::io::{self, Write};
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::oscillator::{OscillatorParams, ThermalOscillator};
use super::rng::Rng;
use super::{Result, SynthError};
use crate::physics::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};

/// Settings of the two-detector scenario (defaults: [`TwoDetectorConfig::default`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub(crate) struct TwoDetectorConfig {
    /// RNG seed.
    pub seed: u64,
    /// Samples per second per channel.
    pub sample_rate_hz: f64,
    /// Record length.
    pub duration_secs: f64,
    /// Mode frequency f_m (Hz).
    pub frequency_hz: f64,
    /// Mode linewidth γ (FWHM, Hz).
    pub linewidth_hz: f64,
    /// Effective mass (kg).
    pub mass_kg: f64,
    /// Bath temperature (K).
    pub temperature_k: f64,
    /// Metres per volt of detector a.
    pub m_per_v_a: f64,
    /// Metres per volt of detector b (negative: an inverted detector).
    pub m_per_v_b: f64,
    /// Each detector's white floor over the mode's peak in its channel (dB).
    pub floor_over_peak_db: f64,
    /// Calibration tone frequency (Hz), seen by both detectors.
    pub tone_frequency_hz: f64,
    /// The tone's equivalent rms displacement (m); 0 for no tone.
    pub tone_rms_m: f64,
}

impl Default for TwoDetectorConfig {
    fn default() -> Self {
        Self {
            seed: 1,
            sample_rate_hz: 25_000.0,
            duration_secs: 10.0,
            frequency_hz: 5_000.0,
            linewidth_hz: 100.0,
            mass_kg: 50e-15,
            temperature_k: 295.0,
            m_per_v_a: 2e-9,
            m_per_v_b: -5e-9,
            floor_over_peak_db: 6.0,
            tone_frequency_hz: 5_800.0,
            tone_rms_m: 3e-8,
        }
    }
}

/// What the record holds, written beside it as JSON.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub(crate) struct TwoDetectorTruth {
    /// `two-detector`.
    pub scenario: String,
    /// The settings used.
    pub config: TwoDetectorConfig,
    /// Frames (samples per channel).
    pub samples: u64,
    /// ⟨x²⟩ of the mode, x_zpf²(2n̄+1) (m²).
    pub variance_m2: f64,
    /// Peak of the mode's displacement PSD 2⟨x²⟩/(πγ) (m²/Hz).
    pub peak_psd_m2_per_hz: f64,
    /// Channel a's white floor (V²/Hz).
    pub floor_a_v2_per_hz: f64,
    /// Channel b's white floor (V²/Hz).
    pub floor_b_v2_per_hz: f64,
    /// The mode's area in the cross-spectrum, ⟨x²⟩/(m_per_v_a · m_per_v_b) (V², signed).
    pub cross_variance_v2: f64,
    /// Bose–Einstein occupancy at the bath temperature.
    pub occupancy: f64,
    /// Volts per full scale of the 16-bit WAV (channel values are code/2^15 × this).
    pub volts_full_scale: f64,
    /// How to analyse it.
    pub command: String,
}

impl TwoDetectorConfig {
    /// ⟨x²⟩ = x_zpf²(2n̄+1) = (ħ/2mΩ) coth(ħΩ/2k_BT).
    fn variance_m2(&self) -> f64 {
        let omega = std::f64::consts::TAU * self.frequency_hz;
        let x = HBAR_J_S * omega / (2.0 * BOLTZMANN_J_PER_K * self.temperature_k);
        HBAR_J_S / (2.0 * self.mass_kg * omega) / x.tanh()
    }

    fn check(&self) -> Result<()> {
        let positive = [
            ("sample_rate_hz", self.sample_rate_hz),
            ("duration_secs", self.duration_secs),
            ("mass_kg", self.mass_kg),
            ("temperature_k", self.temperature_k),
        ];
        for (name, v) in positive {
            if !(v.is_finite() && v > 0.0) {
                return Err(SynthError::Parameter(format!(
                    "{name} must be a positive number, got {v}"
                )));
            }
        }
        for (name, v) in [("m_per_v_a", self.m_per_v_a), ("m_per_v_b", self.m_per_v_b)] {
            if !(v.is_finite() && v != 0.0) {
                return Err(SynthError::Parameter(format!(
                    "{name} must be a finite, non-zero number, got {v}"
                )));
            }
        }
        if !(self.tone_frequency_hz.is_finite()
            && self.tone_frequency_hz > 0.0
            && self.tone_frequency_hz < 0.5 * self.sample_rate_hz
            && self.tone_rms_m.is_finite()
            && self.tone_rms_m >= 0.0)
        {
            return Err(SynthError::Parameter(
                "tone_frequency_hz must lie between 0 and Nyquist and tone_rms_m must be ≥ 0"
                    .into(),
            ));
        }
        if !self.floor_over_peak_db.is_finite() {
            return Err(SynthError::Parameter(
                "floor_over_peak_db must be finite".into(),
            ));
        }
        Ok(())
    }

    /// The two channels (volts) and the truth.
    ///
    /// # Errors
    /// [`SynthError::Parameter`] for invalid settings.
    pub fn record(&self) -> Result<(Vec<f64>, Vec<f64>, TwoDetectorTruth)> {
        self.check()?;
        let n = (self.duration_secs * self.sample_rate_hz).round() as usize;
        let variance = self.variance_m2();
        let params = OscillatorParams {
            frequency_hz: self.frequency_hz,
            linewidth_hz: self.linewidth_hz,
            variance,
        };
        let mut motion_rng = Rng::stream(self.seed, 1);
        let mut osc = ThermalOscillator::new(params, self.sample_rate_hz, &mut motion_rng)?;
        let peak = 2.0 * variance / (std::f64::consts::PI * self.linewidth_hz);
        let ratio = 10f64.powf(self.floor_over_peak_db / 10.0);
        let floor_a = ratio * peak / (self.m_per_v_a * self.m_per_v_a);
        let floor_b = ratio * peak / (self.m_per_v_b * self.m_per_v_b);
        // White noise of variance σ² has the one-sided level 2σ²/f_s.
        let sigma_a = (floor_a * self.sample_rate_hz / 2.0).sqrt();
        let sigma_b = (floor_b * self.sample_rate_hz / 2.0).sqrt();
        let mut noise_a = Rng::stream(self.seed, 2);
        let mut noise_b = Rng::stream(self.seed, 3);
        let mut a = Vec::with_capacity(n);
        let mut b = Vec::with_capacity(n);
        let tone_peak = std::f64::consts::SQRT_2 * self.tone_rms_m;
        let tone_step = std::f64::consts::TAU * self.tone_frequency_hz / self.sample_rate_hz;
        for i in 0..n {
            // The tone is an equivalent displacement: both detectors see it like the motion.
            let x = osc.next_sample(&mut motion_rng) + tone_peak * (tone_step * i as f64).sin();
            a.push(x / self.m_per_v_a + sigma_a * noise_a.normal());
            b.push(x / self.m_per_v_b + sigma_b * noise_b.normal());
        }
        let omega = std::f64::consts::TAU * self.frequency_hz;
        let z = HBAR_J_S * omega / (BOLTZMANN_J_PER_K * self.temperature_k);
        let truth = TwoDetectorTruth {
            scenario: "two-detector".into(),
            config: self.clone(),
            samples: n as u64,
            variance_m2: variance,
            peak_psd_m2_per_hz: peak,
            floor_a_v2_per_hz: floor_a,
            floor_b_v2_per_hz: floor_b,
            cross_variance_v2: variance / (self.m_per_v_a * self.m_per_v_b),
            occupancy: 1.0 / z.exp_m1(),
            volts_full_scale: 0.0,
            command: String::new(),
        };
        Ok((a, b, truth))
    }
}

/// Writes the scenario as a 2-channel 16-bit WAV (full scale = 6 × the larger rms, so no
/// code clips in practice) and its `.truth.json`, both atomically (a temporary file renamed).
///
/// # Errors
/// [`SynthError::Parameter`] for invalid settings or a rate that is no integer; I/O errors.
pub(crate) fn write_two_detector_wav(
    config: &TwoDetectorConfig,
    path: &Path,
) -> Result<TwoDetectorTruth> {
    let (a, b, mut truth) = config.record()?;
    let fs = config.sample_rate_hz;
    if fs.fract() != 0.0 || fs > f64::from(u32::MAX) {
        return Err(SynthError::Parameter(format!(
            "a WAV needs an integer sample rate, got {fs}"
        )));
    }
    let rms = |v: &[f64]| (v.iter().map(|x| x * x).sum::<f64>() / v.len().max(1) as f64).sqrt();
    let full_scale = 6.0 * rms(&a).max(rms(&b));
    if !(full_scale.is_finite() && full_scale > 0.0) || a.len() * 4 > (u32::MAX as usize) - 1024 {
        return Err(SynthError::Parameter(
            "the record is empty or too long for a WAV".into(),
        ));
    }
    let code =
        |v: f64| -> i16 { (v / full_scale * 32768.0).round().clamp(-32767.0, 32767.0) as i16 };
    let data_bytes = (a.len() * 4) as u32;
    let mut bytes = Vec::with_capacity(44 + a.len() * 4);
    bytes.extend_from_slice(b"RIFF");
    bytes.extend_from_slice(&(36 + data_bytes).to_le_bytes());
    bytes.extend_from_slice(b"WAVEfmt ");
    bytes.extend_from_slice(&16u32.to_le_bytes());
    bytes.extend_from_slice(&1u16.to_le_bytes()); // PCM
    bytes.extend_from_slice(&2u16.to_le_bytes()); // channels
    bytes.extend_from_slice(&(fs as u32).to_le_bytes());
    bytes.extend_from_slice(&(fs as u32 * 4).to_le_bytes());
    bytes.extend_from_slice(&4u16.to_le_bytes());
    bytes.extend_from_slice(&16u16.to_le_bytes());
    bytes.extend_from_slice(b"data");
    bytes.extend_from_slice(&data_bytes.to_le_bytes());
    for (x, y) in a.iter().zip(&b) {
        bytes.extend_from_slice(&code(*x).to_le_bytes());
        bytes.extend_from_slice(&code(*y).to_le_bytes());
    }
    truth.volts_full_scale = full_scale;
    let band = (
        config.frequency_hz - 6.0 * config.linewidth_hz,
        config.frequency_hz + 6.0 * config.linewidth_hz,
    );
    truth.command = format!(
        "stillpoint analyze {} --volts-per-unit {full_scale} --channel 0 --cross-channel 1 --segment 1024 --mode-band {}:{} --tone-freq {} --tone-rms-m {} --mass {} -o report.json",
        path.display(),
        band.0,
        band.1,
        config.tone_frequency_hz,
        config.tone_rms_m,
        config.mass_kg
    );
    let json = serde_json::to_vec_pretty(&truth)
        .map_err(|e| SynthError::Parameter(format!("cannot encode the truth: {e}")))?;
    let io = |path: &Path| {
        let path = path.to_path_buf();
        move |source| SynthError::Io { path, source }
    };
    atomic_write(path, &bytes).map_err(io(path))?;
    let sidecar = super::truth_path(path);
    atomic_write(&sidecar, &json).map_err(io(&sidecar))?;
    Ok(truth)
}

fn atomic_write(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let mut tmp = path.as_os_str().to_owned();
    tmp.push(".partial");
    let tmp = std::path::PathBuf::from(tmp);
    {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
    }
    std::fs::rename(&tmp, path)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floors_and_gains_are_as_asked() {
        let config = TwoDetectorConfig {
            duration_secs: 4.0,
            ..TwoDetectorConfig::default()
        };
        let (a, b, truth) = config.record().unwrap();
        assert_eq!(a.len(), 100_000);
        // The motion dominates nothing: each channel's variance ≈ floor·f_s/2 + ⟨x²⟩/c².
        let var = |v: &[f64]| v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64;
        let want_a = truth.floor_a_v2_per_hz * 12_500.0 + (truth.variance_m2 + 9e-16) / 4e-18;
        assert!(
            (var(&a) / want_a - 1.0).abs() < 0.05,
            "{} vs {want_a}",
            var(&a)
        );
        // Opposite gains: the channels are anti-correlated.
        let cov: f64 = a.iter().zip(&b).map(|(x, y)| x * y).sum::<f64>() / a.len() as f64;
        assert!(cov < 0.0);
        assert!(
            (truth.cross_variance_v2 - truth.variance_m2 / (2e-9 * -5e-9)).abs()
                < 1e-9 * truth.cross_variance_v2.abs()
        );
    }
}
