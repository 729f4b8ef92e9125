//! The `analyze` report: the contract types whose dotted paths are the JSON keys of BRIEF.md
//! (`welch.*`, `calibration.*`, `mode.*`, `quantum.*`, `sidebands.*`, `peaks[]`, `rms.*`,
//! `cross.*`). All values are SI with unit-named keys; never NaN or Inf (the analysis nulls
//! non-finite numbers, `analysis/sanitize.rs`). Filled by [`crate::analysis::analyze`].
//!
//! A value that needs an input that was not given is `null`, and [`Report::notes`] says why.

pub mod cross;

use serde::{Deserialize, Serialize};

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
    /// 1σ of `g0_hz`.
    pub g0_hz_uncertainty: Option<f64>,
    /// 1σ of `tone_power_v2` (statistical).
    pub tone_power_v2_uncertainty: Option<f64>,
    /// Equivalent rms displacement of the tone (m).
    pub tone_rms_m: Option<f64>,
    /// Local floor under the tone, V²/Hz.
    pub tone_floor_psd_v2_per_hz: Option<f64>,
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
    /// Energy damping rate Γ_m = 2πγ (rad/s).
    pub damping_rad_s: Option<f64>,
    /// Line shape fitted (`oscillator` or `lorentzian`).
    pub line_shape: Option<String>,
    /// True when the line is narrower than the resolution: it was fitted convolved with the
    /// window's kernel (METHODS.md §2c), `linewidth_hz` is the upper bound γ + 2σ and
    /// `quality_factor` the matching lower bound; area, frequency, n̄ and T_eff are measured.
    pub resolution_limited: Option<bool>,
    /// The kernel-convolved fit's own linewidth (Hz) for a resolution-limited line.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub linewidth_kernel_fit_hz: Option<f64>,
    /// Its 1σ.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub linewidth_kernel_fit_hz_uncertainty: Option<f64>,
    /// √(1 + 2Σρ_bin) applied to the 1σ values for the window's bin correlation.
    pub error_inflation: Option<f64>,
    /// Bins used in the fit.
    pub bins: Option<usize>,
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
    /// Bose–Einstein occupancy of the bath at `--bath-temperature`.
    pub bath_occupancy: Option<f64>,
    /// Thermal peak at the bath temperature, symmetrised quantum form (METHODS.md §2b):
    /// 2ħ coth(ħΩ_m/2k_BT) Im χ(Ω_m) = 4 x_zpf²(2n̄+1)/Γ_m, m²/Hz (the classical
    /// 4k_BTQ/(mΩ_m³) is its k_BT ≫ ħΩ_m limit).
    pub thermal_peak_psd_at_bath_m2_per_hz: Option<f64>,
    /// The effective mass used (`--mass`), kg.
    pub mass_kg: Option<f64>,
    /// Its 1σ as given (`--mass-uncertainty`); null: taken as exact.
    pub mass_kg_uncertainty: Option<f64>,
    /// The bath temperature used (`--bath-temperature`), K.
    pub bath_temperature_k: Option<f64>,
    /// Its 1σ as given (`--bath-temperature-uncertainty`); null: taken as exact.
    pub bath_temperature_k_uncertainty: Option<f64>,
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
    /// Local background under the line, V²/Hz.
    pub background_psd_v2_per_hz: Option<f64>,
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
    /// 1σ of the linewidth.
    pub linewidth_hz_uncertainty: Option<f64>,
    /// 1σ of the mechanical frequency.
    pub mechanical_frequency_hz_uncertainty: Option<f64>,
    /// 1σ of the imbalance correction.
    pub imbalance_correction_uncertainty: Option<f64>,
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

/// Integrated rms over a band (BRIEF.md "units"): `√(Σ_{lo ≤ f_k ≤ hi} PSD_k Δf)`, every bin
/// whose centre lies in the closed band, the DC and Nyquist bins with their one-sided factor 1
/// (so the whole span gives the record's variance; [`crate::dsp::units::band_rms`]).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct RmsReport {
    /// The band [lo, hi] in Hz: `--rms-band`, else the mode band (with `--carrier`: offsets
    /// from the carrier, the rms then being over carrier ± [lo, hi]).
    pub band_hz: [f64; 2],
    /// Where the band came from: `"rms-band"`, `"mode-band"` or `"sideband-bands"`.
    pub source: String,
    /// Number of bins summed.
    pub bins: usize,
    /// Rms voltage in the band, V.
    pub v: f64,
    /// Rms displacement in the band, m (`calibration.m_per_v` × `v`); null uncalibrated.
    pub m: Option<f64>,
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
    /// Integrated rms over `--rms-band` or the mode band; absent without either.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rms: Option<RmsReport>,
    /// Why keys are null, and caveats (classical laser noise, resolution, …).
    pub notes: Vec<String>,
    /// Problems with the input (skipped segments, non-finite samples, truncation).
    pub warnings: Vec<String>,
    /// Two detectors (`--cross-channel`): the cross-spectrum keys; absent otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cross: Option<cross::CrossReport>,
}
