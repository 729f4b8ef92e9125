//! Persisted settings of the window ([`AppState`], serde with `#[serde(default)]`, so a file
//! written by an older version still loads), kept apart from runtime handles, and their
//! translation into the engine's [`WelchConfig`] and [`AnalysisOptions`]. Also the display
//! unit conversion of a one-sided PSD.

use std::path::PathBuf;

use serde::{Deserialize, Serialize};

use crate::dsp::units::DensityUnit;
use crate::dsp::{Averaging, Detrend, WelchConfig, WindowKind};
use crate::report::AnalysisOptions;

/// Display units in the order the unit button cycles through them.
pub const UNIT_CYCLE: [DensityUnit; 6] = [
    DensityUnit::V2PerHz,
    DensityUnit::VPerRtHz,
    DensityUnit::DbV2PerHz,
    DensityUnit::M2PerHz,
    DensityUnit::MPerRtHz,
    DensityUnit::DbM2PerHz,
];

/// Axis label of a display unit ("PSD (m²/Hz)").
pub fn unit_label(unit: DensityUnit) -> &'static str {
    match unit {
        DensityUnit::V2PerHz => "PSD (V²/Hz)",
        DensityUnit::VPerRtHz => "ASD (V/√Hz)",
        DensityUnit::M2PerHz => "displacement PSD (m²/Hz)",
        DensityUnit::MPerRtHz => "displacement ASD (m/√Hz)",
        DensityUnit::DbV2PerHz => "PSD (dB re 1 V²/Hz)",
        DensityUnit::DbM2PerHz => "displacement PSD (dB re 1 m²/Hz)",
    }
}

/// Short unit name for buttons and read-outs.
pub fn unit_short(unit: DensityUnit) -> &'static str {
    match unit {
        DensityUnit::V2PerHz => "V²/Hz",
        DensityUnit::VPerRtHz => "V/√Hz",
        DensityUnit::M2PerHz => "m²/Hz",
        DensityUnit::MPerRtHz => "m/√Hz",
        DensityUnit::DbV2PerHz => "dB V²/Hz",
        DensityUnit::DbM2PerHz => "dB m²/Hz",
    }
}

/// True for units that need a calibration (metres).
pub fn unit_is_displacement(unit: DensityUnit) -> bool {
    matches!(
        unit,
        DensityUnit::M2PerHz | DensityUnit::MPerRtHz | DensityUnit::DbM2PerHz
    )
}

/// True for the dB units (linear y axis); the others are drawn on a log10 y axis.
pub fn unit_is_db(unit: DensityUnit) -> bool {
    matches!(unit, DensityUnit::DbV2PerHz | DensityUnit::DbM2PerHz)
}

/// The y coordinate the plot uses for a PSD value: log10 of the displayed quantity (V²/Hz,
/// V/√Hz, m²/Hz, m/√Hz) or the dB value itself. `m_per_v` converts V to m (S_xx = c² S_VV);
/// a displacement unit without a calibration, a non-positive PSD or a non-finite input
/// gives `None`.
pub fn plot_y(psd_v2_per_hz: f64, unit: DensityUnit, m_per_v: Option<f64>) -> Option<f64> {
    if !(psd_v2_per_hz.is_finite() && psd_v2_per_hz > 0.0) {
        return None;
    }
    let log_v2 = psd_v2_per_hz.log10();
    let log_c2 = match m_per_v {
        Some(c) if c.is_finite() && c > 0.0 => Some(2.0 * c.log10()),
        _ => None,
    };
    let y = match unit {
        DensityUnit::V2PerHz => log_v2,
        DensityUnit::VPerRtHz => 0.5 * log_v2,
        DensityUnit::DbV2PerHz => 10.0 * log_v2,
        DensityUnit::M2PerHz => log_v2 + log_c2?,
        DensityUnit::MPerRtHz => 0.5 * (log_v2 + log_c2?),
        DensityUnit::DbM2PerHz => 10.0 * (log_v2 + log_c2?),
    };
    y.is_finite().then_some(y)
}

/// The plot's y as an affine function of log10(PSD / (V²/Hz)): `y = a·log10(S) + b` with
/// a > 0 (so min/max decimation commutes with it). `None` for a displacement unit without a
/// calibration. Agrees with [`plot_y`].
pub fn unit_affine(unit: DensityUnit, m_per_v: Option<f64>) -> Option<(f64, f64)> {
    let log_c2 = match m_per_v {
        Some(c) if c.is_finite() && c > 0.0 => Some(2.0 * c.log10()),
        _ => None,
    };
    Some(match unit {
        DensityUnit::V2PerHz => (1.0, 0.0),
        DensityUnit::VPerRtHz => (0.5, 0.0),
        DensityUnit::DbV2PerHz => (10.0, 0.0),
        DensityUnit::M2PerHz => (1.0, log_c2?),
        DensityUnit::MPerRtHz => (0.5, 0.5 * log_c2?),
        DensityUnit::DbM2PerHz => (10.0, 10.0 * log_c2?),
    })
}

/// Same as [`plot_y`] for a value already in m²/Hz (quantum reference curves): `None` for
/// a voltage unit unless `m_per_v` lets it be converted back to V²/Hz.
pub fn plot_y_from_m2(psd_m2_per_hz: f64, unit: DensityUnit, m_per_v: Option<f64>) -> Option<f64> {
    let c = m_per_v.filter(|c| c.is_finite() && *c > 0.0)?;
    plot_y(psd_m2_per_hz / (c * c), unit, Some(c))
}

/// Which averaging the Welch settings ask for (a flat enum for a combo box).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum AveragingChoice {
    /// Arithmetic mean of all (or the first K) segments.
    Linear,
    /// Running exponential average with time constant τ segments (the live default).
    #[default]
    Exponential,
    /// Bias-corrected median.
    Median,
    /// Bin-wise maximum.
    MaxHold,
}

impl AveragingChoice {
    /// All choices, in menu order.
    pub const ALL: [Self; 4] = [Self::Exponential, Self::Linear, Self::Median, Self::MaxHold];

    /// Menu name.
    pub fn name(self) -> &'static str {
        match self {
            Self::Linear => "linear",
            Self::Exponential => "exponential",
            Self::Median => "median",
            Self::MaxHold => "max-hold",
        }
    }
}

/// Welch settings as the user sets them (the sample rate comes from the source).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct WelchSettings {
    /// Segment length N, samples.
    pub segment: usize,
    /// Overlap fraction.
    pub overlap: f64,
    /// Window.
    pub window: WindowKind,
    /// Detrend.
    pub detrend: Detrend,
    /// Averaging kind.
    pub averaging: AveragingChoice,
    /// τ of the exponential average, segments.
    pub time_constant_segments: f64,
    /// At most this many segments (linear, median); `None` = all.
    pub max_averages: Option<usize>,
}

impl Default for WelchSettings {
    fn default() -> Self {
        Self {
            segment: 16_384,
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: Detrend::Mean,
            averaging: AveragingChoice::Exponential,
            time_constant_segments: 16.0,
            max_averages: None,
        }
    }
}

impl WelchSettings {
    /// Settings taken from a full configuration (as the command line gives it).
    pub fn from_config(config: &WelchConfig) -> Self {
        let (averaging, tau) = match config.averaging {
            Averaging::Linear => (AveragingChoice::Linear, 16.0),
            Averaging::Exponential {
                time_constant_segments,
            } => (AveragingChoice::Exponential, time_constant_segments),
            Averaging::Median => (AveragingChoice::Median, 16.0),
            Averaging::MaxHold => (AveragingChoice::MaxHold, 16.0),
        };
        Self {
            segment: config.segment,
            overlap: config.overlap,
            window: config.window,
            detrend: config.detrend,
            averaging,
            time_constant_segments: tau,
            max_averages: config.max_averages,
        }
    }

    /// The averager configuration at `sample_rate_hz`.
    pub fn to_config(&self, sample_rate_hz: f64) -> WelchConfig {
        let averaging = match self.averaging {
            AveragingChoice::Linear => Averaging::Linear,
            AveragingChoice::Exponential => Averaging::Exponential {
                time_constant_segments: self.time_constant_segments.max(1.0),
            },
            AveragingChoice::Median => Averaging::Median,
            AveragingChoice::MaxHold => Averaging::MaxHold,
        };
        WelchConfig {
            sample_rate_hz,
            segment: self.segment,
            overlap: self.overlap,
            window: self.window,
            detrend: self.detrend,
            averaging,
            max_averages: self.max_averages,
        }
    }
}

/// How volts become metres.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum CalibrationMethod {
    /// Uncalibrated: volts only.
    #[default]
    None,
    /// A given m/V.
    Given,
    /// A tone of known equivalent rms displacement.
    ToneDisplacement,
    /// A phase-modulation tone: depth β and frequency pull G/2π.
    TonePhaseModulation,
    /// Thermal equipartition of the mode at a known bath temperature (needs the mass).
    Equipartition,
}

impl CalibrationMethod {
    /// All methods, in menu order.
    pub const ALL: [Self; 5] = [
        Self::None,
        Self::Given,
        Self::ToneDisplacement,
        Self::TonePhaseModulation,
        Self::Equipartition,
    ];

    /// Menu name.
    pub fn name(self) -> &'static str {
        match self {
            Self::None => "none (volts)",
            Self::Given => "given m/V",
            Self::ToneDisplacement => "tone, known rms displacement",
            Self::TonePhaseModulation => "phase-modulation tone (β, G)",
            Self::Equipartition => "equipartition at bath T",
        }
    }
}

/// Calibration, mode and heterodyne inputs as the user sets them.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct CalibrationInputs {
    /// Method.
    pub method: CalibrationMethod,
    /// Given calibration, m/V.
    pub m_per_v: f64,
    /// Tone frequency, Hz.
    pub tone_frequency_hz: f64,
    /// Tone's equivalent rms displacement, m.
    pub tone_rms_m: f64,
    /// Phase-modulation depth β, rad.
    pub pm_depth_rad: f64,
    /// Frequency pull G/2π, Hz/m.
    pub freq_pull_hz_per_m: f64,
    /// Bath temperature, K (equipartition, and the thermal-expectation overlay).
    pub bath_temperature_k: f64,
    /// Effective mass, kg (`None`: quantum references off).
    pub mass_kg: Option<f64>,
    /// 1σ of the effective mass, kg (`None`: taken as exact).
    pub mass_uncertainty_kg: Option<f64>,
    /// 1σ of the bath temperature, K (`None`: taken as exact).
    pub bath_temperature_uncertainty_k: Option<f64>,
    /// Mode fit band, Hz (`None`: picked automatically around the strongest line).
    pub mode_band_hz: Option<(f64, f64)>,
    /// Let the band follow the fitted mode as it drifts.
    pub follow_mode: bool,
    /// Heterodyne carrier (IF), Hz; `None` for direct detection.
    pub carrier_hz: Option<f64>,
    /// LO above the laser (`Some(true)`) or below (`Some(false)`); `None` until the user
    /// chooses (never assumed: a wrong side swaps n̄ and n̄+1, METHODS §6).
    #[serde(default)]
    pub lo_above: Option<bool>,
    /// Stray-peak threshold over the floor, dB.
    pub peak_threshold_db: f64,
}

impl Default for CalibrationInputs {
    fn default() -> Self {
        Self {
            method: CalibrationMethod::None,
            m_per_v: 1e-9,
            tone_frequency_hz: 0.0,
            tone_rms_m: 1e-15,
            pm_depth_rad: 1e-3,
            freq_pull_hz_per_m: 1e18,
            bath_temperature_k: 4.0,
            mass_kg: None,
            mass_uncertainty_kg: None,
            bath_temperature_uncertainty_k: None,
            mode_band_hz: None,
            follow_mode: true,
            carrier_hz: None,
            lo_above: None,
            peak_threshold_db: 10.0,
        }
    }
}

impl CalibrationInputs {
    /// Inputs taken from the command-line analysis options.
    pub fn from_options(options: &AnalysisOptions) -> Self {
        let mut c = Self::default();
        if let Some(v) = options.m_per_v {
            c.method = CalibrationMethod::Given;
            c.m_per_v = v;
        }
        if let Some(f) = options.tone_frequency_hz {
            c.tone_frequency_hz = f;
            if let Some(x) = options.tone_rms_m {
                c.method = CalibrationMethod::ToneDisplacement;
                c.tone_rms_m = x;
            }
            if let (Some(b), Some(g)) = (options.pm_depth_rad, options.freq_pull_hz_per_m) {
                c.method = CalibrationMethod::TonePhaseModulation;
                c.pm_depth_rad = b;
                c.freq_pull_hz_per_m = g;
            }
        }
        if let Some(t) = options.bath_temperature_k {
            c.bath_temperature_k = t;
            if c.method == CalibrationMethod::None {
                c.method = CalibrationMethod::Equipartition;
            }
        }
        c.mass_kg = options.mass_kg;
        c.mass_uncertainty_kg = options.mass_uncertainty_kg;
        c.bath_temperature_uncertainty_k = options.bath_temperature_uncertainty_k;
        c.mode_band_hz = options.mode_band_hz;
        c.carrier_hz = options.carrier_hz;
        c.lo_above = options.lo_above;
        c.peak_threshold_db = options.peak_threshold_db.unwrap_or(10.0);
        c
    }

    /// The analysis options these inputs stand for (only the chosen method's fields set).
    pub fn to_options(&self) -> AnalysisOptions {
        let mut o = AnalysisOptions {
            mass_kg: self.mass_kg,
            mass_uncertainty_kg: self.mass_kg.and(self.mass_uncertainty_kg),
            mode_band_hz: self.mode_band_hz,
            carrier_hz: self.carrier_hz,
            lo_above: self.carrier_hz.and(self.lo_above),
            peak_threshold_db: Some(self.peak_threshold_db),
            ..AnalysisOptions::default()
        };
        match self.method {
            CalibrationMethod::None => {}
            CalibrationMethod::Given => o.m_per_v = Some(self.m_per_v),
            CalibrationMethod::ToneDisplacement => {
                o.tone_frequency_hz = Some(self.tone_frequency_hz);
                o.tone_rms_m = Some(self.tone_rms_m);
            }
            CalibrationMethod::TonePhaseModulation => {
                o.tone_frequency_hz = Some(self.tone_frequency_hz);
                o.pm_depth_rad = Some(self.pm_depth_rad);
                o.freq_pull_hz_per_m = Some(self.freq_pull_hz_per_m);
            }
            CalibrationMethod::Equipartition => {
                o.bath_temperature_k = Some(self.bath_temperature_k);
                o.bath_temperature_uncertainty_k = self.bath_temperature_uncertainty_k;
            }
        }
        o
    }
}

/// Which reference curves are drawn over the spectrum.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Overlays {
    /// Fitted mode curve (background + oscillator).
    pub fit: bool,
    /// Zero-point spectrum 2ħ Im χ and its peak level as a reference line.
    pub zero_point: bool,
    /// SQL of the added noise, 2ħ|χ|.
    pub sql: bool,
    /// Thermal expectation at the bath temperature.
    pub thermal: bool,
    /// Loaded snapshots.
    pub snapshots: bool,
    /// Shaded fit band.
    pub band: bool,
    /// Stray-resonance markers.
    pub peaks: bool,
}

impl Default for Overlays {
    fn default() -> Self {
        Self {
            fit: true,
            zero_point: true,
            sql: true,
            thermal: true,
            snapshots: true,
            band: true,
            peaks: true,
        }
    }
}

/// Everything the window remembers between runs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct AppState {
    /// Display unit of the spectrum.
    pub unit: DensityUnit,
    /// Overlays drawn.
    pub overlays: Overlays,
    /// Welch settings.
    pub welch: WelchSettings,
    /// Calibration, mode band, heterodyne inputs.
    pub calibration: CalibrationInputs,
    /// Playback speed of recordings (1 = real time).
    pub playback_speed: f64,
    /// Folder of the last snapshot saved or loaded.
    pub last_snapshot_dir: Option<PathBuf>,
    /// Last source file opened.
    pub last_source_path: Option<PathBuf>,
    /// Show the cooldown view (waterfall and trends).
    pub show_cooldown: bool,
}

impl Default for AppState {
    fn default() -> Self {
        Self {
            unit: DensityUnit::M2PerHz,
            overlays: Overlays::default(),
            welch: WelchSettings::default(),
            calibration: CalibrationInputs::default(),
            playback_speed: 1.0,
            last_snapshot_dir: None,
            last_source_path: None,
            show_cooldown: true,
        }
    }
}

impl AppState {
    /// The next display unit in [`UNIT_CYCLE`].
    pub fn cycle_unit(&mut self) {
        let i = UNIT_CYCLE.iter().position(|u| *u == self.unit).unwrap_or(0);
        self.unit = UNIT_CYCLE[(i + 1) % UNIT_CYCLE.len()];
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unit_conversions() {
        // 1e-12 V²/Hz with 1e-6 m/V → 1e-24 m²/Hz, 1e-12 m/√Hz, −240 dB re 1 m²/Hz.
        let s = 1e-12;
        let c = Some(1e-6);
        let close = |a: Option<f64>, b: f64| (a.unwrap() - b).abs() < 1e-9;
        assert!(close(plot_y(s, DensityUnit::V2PerHz, None), -12.0));
        assert!(close(plot_y(s, DensityUnit::VPerRtHz, None), -6.0));
        assert!(close(plot_y(s, DensityUnit::DbV2PerHz, None), -120.0));
        assert!(close(plot_y(s, DensityUnit::M2PerHz, c), -24.0));
        assert!(close(plot_y(s, DensityUnit::MPerRtHz, c), -12.0));
        assert!(close(plot_y(s, DensityUnit::DbM2PerHz, c), -240.0));
        assert!(plot_y(s, DensityUnit::M2PerHz, None).is_none());
        assert!(plot_y(0.0, DensityUnit::V2PerHz, None).is_none());
        assert!(plot_y(f64::NAN, DensityUnit::V2PerHz, None).is_none());
        assert!(close(plot_y_from_m2(1e-24, DensityUnit::V2PerHz, c), -12.0));
        for u in UNIT_CYCLE {
            let (a, b) = unit_affine(u, c).unwrap();
            assert!(close(plot_y(s, u, c), a * s.log10() + b), "{u:?}");
        }
        assert!(unit_affine(DensityUnit::MPerRtHz, None).is_none());
        assert!(plot_y_from_m2(1e-24, DensityUnit::M2PerHz, None).is_none());
    }

    #[test]
    fn state_roundtrip_and_defaults_for_missing_keys() {
        let mut s = AppState::default();
        s.cycle_unit();
        let text = serde_json::to_string(&s).unwrap();
        let back: AppState = serde_json::from_str(&text).unwrap();
        assert_eq!(back, s);
        let partial: AppState = serde_json::from_str(r#"{"playback_speed": 4.0}"#).unwrap();
        assert_eq!(partial.playback_speed, 4.0);
        assert_eq!(partial.welch, WelchSettings::default());
    }

    #[test]
    fn calibration_inputs_roundtrip_through_options() {
        let o = AnalysisOptions {
            tone_frequency_hz: Some(1.05e6),
            pm_depth_rad: Some(1e-3),
            freq_pull_hz_per_m: Some(1e18),
            mass_kg: Some(1e-13),
            mass_uncertainty_kg: Some(1e-14),
            mode_band_hz: Some((0.9e6, 1.1e6)),
            ..AnalysisOptions::default()
        };
        let c = CalibrationInputs::from_options(&o);
        assert_eq!(c.method, CalibrationMethod::TonePhaseModulation);
        let back = c.to_options();
        assert_eq!(back.tone_frequency_hz, o.tone_frequency_hz);
        assert_eq!(back.pm_depth_rad, o.pm_depth_rad);
        assert_eq!(back.mass_kg, o.mass_kg);
        assert_eq!(back.mass_uncertainty_kg, o.mass_uncertainty_kg);
        assert_eq!(back.mode_band_hz, o.mode_band_hz);
        assert_eq!(back.m_per_v, None);
        assert_eq!(back.bath_temperature_k, None);
    }

    #[test]
    fn welch_settings_roundtrip() {
        let mut cfg = WelchConfig::new(1e5, 4096);
        cfg.averaging = Averaging::Exponential {
            time_constant_segments: 8.0,
        };
        let s = WelchSettings::from_config(&cfg);
        assert_eq!(s.to_config(1e5), cfg);
    }
}
