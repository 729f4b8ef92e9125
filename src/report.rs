//! The `analyze` report: spectrum → calibration → mode fit → quantum references → sidebands →
//! stray peaks, as one serde structure whose dotted paths are the JSON contract of BRIEF.md.
//! Used by `stillpoint analyze` and by the window. SKELETON: the struct is the agreed
//! interface; [`analyze`] is being filled in.
//!
//! A value that needs an input that was not given is `null`, and [`Report::notes`] says why.

use serde::{Deserialize, Serialize};

use crate::dsp::Spectrum;

/// Everything `analyze` needs besides the spectrum (the calibration/mode/heterodyne options).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct AnalysisOptions {
    /// `--m-per-v`: a given calibration.
    pub m_per_v: Option<f64>,
    /// `--tone-freq`: calibration tone frequency.
    pub tone_frequency_hz: Option<f64>,
    /// `--tone-rms-m`: the tone's equivalent rms displacement.
    pub tone_rms_m: Option<f64>,
    /// `--pm-depth`: phase-modulation depth β (rad).
    pub pm_depth_rad: Option<f64>,
    /// `--freq-pull`: frequency pull G/2π (Hz/m).
    pub freq_pull_hz_per_m: Option<f64>,
    /// `--bath-temperature`: for equipartition calibration (K).
    pub bath_temperature_k: Option<f64>,
    /// `--mode-band LO:HI` (Hz). With a carrier: band of f_m itself.
    pub mode_band_hz: Option<(f64, f64)>,
    /// `--mass`: effective mass (kg).
    pub mass_kg: Option<f64>,
    /// `--carrier`: heterodyne intermediate frequency (Hz).
    pub carrier_hz: Option<f64>,
    /// `--lo-side`: true if the local oscillator is above the laser.
    pub lo_above: Option<bool>,
    /// Stray-peak threshold over the floor (dB); default 10 dB when `None`.
    pub peak_threshold_db: Option<f64>,
}

/// Welch settings as reported.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct WelchReport {
    /// Segment length N.
    pub segment: usize,
    /// Window name (`hann`, …).
    pub window: String,
    /// Overlap fraction.
    pub overlap: f64,
    /// Segments averaged.
    pub averages: usize,
    /// Δf = f_s/N.
    pub resolution_hz: f64,
    /// ENBW = f_s S₂/S₁².
    pub enbw_hz: f64,
    /// Sample rate.
    pub sample_rate_hz: f64,
    /// Detrend name.
    pub detrend: String,
    /// Overlap-corrected number of independent averages.
    pub k_eff: f64,
}

/// The calibration used.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct CalibrationReport {
    /// `"tone"`, `"equipartition"` or `"given"`; `None` when uncalibrated.
    pub method: Option<String>,
    /// Metres per volt.
    pub m_per_v: Option<f64>,
    /// 1σ of `m_per_v`.
    pub m_per_v_uncertainty: Option<f64>,
    /// Located tone frequency (tone method).
    pub tone_frequency_hz: Option<f64>,
    /// Tone power read from the PSD, V² (floor subtracted).
    pub tone_power_v2: Option<f64>,
    /// Vacuum coupling rate g₀/2π (Hz) when computable (tone + pull + mode + temperature).
    pub g0_hz: Option<f64>,
}

/// A value with its 1σ uncertainty, flattened as `name` and `name_uncertainty` by the
/// report structs below.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct ModeReport {
    /// Fitted resonance frequency.
    pub frequency_hz: Option<f64>,
    /// 1σ.
    pub frequency_hz_uncertainty: Option<f64>,
    /// FWHM linewidth γ in Hz.
    pub linewidth_hz: Option<f64>,
    /// 1σ.
    pub linewidth_hz_uncertainty: Option<f64>,
    /// Q = f_m/γ.
    pub quality_factor: Option<f64>,
    /// 1σ.
    pub quality_factor_uncertainty: Option<f64>,
    /// Mode area ⟨x²⟩ (m²), calibrated.
    pub variance_m2: Option<f64>,
    /// 1σ.
    pub variance_m2_uncertainty: Option<f64>,
    /// Peak PSD of the mode (background excluded), m²/Hz.
    pub peak_psd_m2_per_hz: Option<f64>,
    /// 1σ.
    pub peak_psd_m2_per_hz_uncertainty: Option<f64>,
    /// Flat background under the mode, m²/Hz.
    pub background_psd_m2_per_hz: Option<f64>,
    /// 1σ.
    pub background_psd_m2_per_hz_uncertainty: Option<f64>,
    /// Mode area in V² (always available when a mode was fitted).
    pub variance_v2: Option<f64>,
    /// 1σ.
    pub variance_v2_uncertainty: Option<f64>,
    /// Peak in V²/Hz.
    pub peak_psd_v2_per_hz: Option<f64>,
    /// Background in V²/Hz.
    pub background_psd_v2_per_hz: Option<f64>,
    /// Fit band used (Hz).
    pub fit_band_hz: Option<(f64, f64)>,
    /// Reduced χ² of the fit.
    pub reduced_chi2: Option<f64>,
}

/// Quantum references for the fitted mode.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct QuantumReport {
    /// x_zpf = √(ħ / 2 m Ω_m).
    pub x_zpf_m: Option<f64>,
    /// n̄ from the calibrated area: (⟨x²⟩/x_zpf² − 1)/2.
    pub occupancy: Option<f64>,
    /// 1σ of n̄.
    pub occupancy_uncertainty: Option<f64>,
    /// T_eff = ħΩ_m / (k_B ln(1 + 1/n̄)).
    pub effective_temperature_k: Option<f64>,
    /// 1σ.
    pub effective_temperature_k_uncertainty: Option<f64>,
    /// Zero-point peak 2ħQ/(m Ω_m²), m²/Hz.
    pub zero_point_peak_psd_m2_per_hz: Option<f64>,
    /// SQL of the added noise on resonance 2ħ|χ(Ω_m)|, m²/Hz.
    pub sql_psd_at_resonance_m2_per_hz: Option<f64>,
}

/// One fitted motional sideband.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct SidebandLine {
    /// Electronic (heterodyne) frequency of the line.
    pub frequency_hz: Option<f64>,
    /// Area, V² (background subtracted), before imbalance correction.
    pub area_v2: Option<f64>,
    /// 1σ.
    pub area_v2_uncertainty: Option<f64>,
}

/// Sideband-asymmetry thermometry.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct SidebandReport {
    /// The optical red (Stokes) line, carrying n̄+1.
    pub red: SidebandLine,
    /// The optical blue (anti-Stokes) line, carrying n̄.
    pub blue: SidebandLine,
    /// R = red/blue (imbalance-corrected when a correction was available).
    pub ratio: Option<f64>,
    /// 1σ of R.
    pub ratio_uncertainty: Option<f64>,
    /// n̄ = 1/(R − 1).
    pub occupancy: Option<f64>,
    /// 1σ of n̄.
    pub occupancy_uncertainty: Option<f64>,
    /// Shared fitted linewidth (Hz).
    pub linewidth_hz: Option<f64>,
    /// Mechanical frequency f_m from the sideband split (Hz).
    pub mechanical_frequency_hz: Option<f64>,
    /// Applied η_blue/η_red correction factor (1 when none).
    pub imbalance_correction: Option<f64>,
    /// Which side the LO is on, and which electronic line was taken as red.
    pub convention: Option<String>,
}

/// One stray resonance.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct PeakReport {
    /// Peak frequency (interpolated).
    pub frequency_hz: f64,
    /// Height over the robust floor, dB.
    pub height_over_floor_db: f64,
    /// FWHM (Hz), at least the resolution.
    pub linewidth_hz: f64,
    /// True if not in the reference list.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub new_since_reference: Option<bool>,
}

/// The whole `analyze` output.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Report {
    /// Program name and version that wrote it.
    pub generator: String,
    /// Welch settings.
    pub welch: WelchReport,
    /// Calibration.
    pub calibration: CalibrationReport,
    /// Mode fit (null fields when no mode band or no mode found).
    pub mode: ModeReport,
    /// Quantum references (need `--mass` and a calibration).
    pub quantum: QuantumReport,
    /// Sideband thermometry (needs `--carrier` and `--lo-side`), else null.
    pub sidebands: Option<SidebandReport>,
    /// Stray resonances.
    pub peaks: Vec<PeakReport>,
    /// Why keys are null, and caveats (classical laser noise, resolution, …).
    pub notes: Vec<String>,
    /// Problems with the input (skipped segments, non-finite samples, truncation).
    pub warnings: Vec<String>,
}

/// Why an analysis could not run at all.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum AnalysisError {
    /// A physically impossible or inconsistent option (message names it).
    #[error("{0}")]
    Input(String),
}

/// Runs the whole analysis on one spectrum.
///
/// # Errors
/// [`AnalysisError::Input`] for impossible inputs (negative mass or temperature, a band
/// outside the spectrum, a tone outside the spectrum, `--carrier` without `--lo-side`).
/// A mode that is simply not found is *not* an error: its keys are null with a note.
pub fn analyze(spectrum: &Spectrum, options: &AnalysisOptions) -> Result<Report, AnalysisError> {
    let _ = options;
    Ok(Report {
        generator: format!("stillpoint {}", env!("CARGO_PKG_VERSION")),
        welch: WelchReport {
            segment: spectrum.segment,
            window: spectrum.window.name().to_string(),
            overlap: spectrum.overlap,
            averages: spectrum.averages,
            resolution_hz: spectrum.resolution_hz,
            enbw_hz: spectrum.enbw_hz,
            sample_rate_hz: spectrum.sample_rate_hz,
            detrend: spectrum.detrend.name().to_string(),
            k_eff: spectrum.k_eff,
        },
        ..Report::default()
    })
}
