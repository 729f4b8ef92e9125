//! Persisted settings of the window ([`AppState`], serde with `#[serde(default)]`, so a file
//! written by an older version still loads), kept apart from runtime handles, and their
//! translation into the engine's [`WelchConfig`] and [`AnalysisOptions`]. Also the display
//! unit conversion of a one-sided PSD.

use std::path::PathBuf;

use serde::{Deserialize, Serialize};

use crate::analysis::AnalysisOptions;
use crate::dsp::units::DensityUnit;
use crate::dsp::{Averaging, Detrend, WelchConfig, WindowKind};

/// Display units in the order the unit button cycles through them.
pub(crate) const UNIT_CYCLE: [DensityUnit; 6] = [
    DensityUnit::V2PerHz,
    DensityUnit::VPerRtHz,
    DensityUnit::DbV2PerHz,
    DensityUnit::M2PerHz,
    DensityUnit::MPerRtHz,
    DensityUnit::DbM2PerHz,
];

/// Axis label of a display unit ("PSD (m²/Hz)").
pub(crate) fn unit_label(unit: DensityUnit) -> &'static str {
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
pub(crate) fn unit_short(unit: DensityUnit) -> &'static str {
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
pub(crate) fn unit_is_displacement(unit: DensityUnit) -> bool {
    matches!(
        unit,
        DensityUnit::M2PerHz | DensityUnit::MPerRtHz | DensityUnit::DbM2PerHz
    )
}

/// True for the dB units (linear y axis); the others are drawn on a log10 y axis.
pub(crate) fn unit_is_db(unit: DensityUnit) -> bool {
    matches!(unit, DensityUnit::DbV2PerHz | DensityUnit::DbM2PerHz)
}

/// The y coordinate the plot uses for a PSD value: log10 of the displayed quantity (V²/Hz,
/// V/√Hz, m²/Hz, m/√Hz) or the dB value itself. `m_per_v` converts V to m (S_xx = c² S_VV);
/// a displacement unit without a calibration, a non-positive PSD or a non-finite input
/// gives `None`.
pub(crate) fn plot_y(psd_v2_per_hz: f64, unit: DensityUnit, m_per_v: Option<f64>) -> Option<f64> {
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
pub(crate) fn unit_affine(unit: DensityUnit, m_per_v: Option<f64>) -> Option<(f64, f64)> {
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
pub(crate) fn plot_y_from_m2(
    psd_m2_per_hz: f64,
    unit: DensityUnit,
    m_per_v: Option<f64>,
) -> Option<f64> {
    let c = m_per_v.filter(|c| c.is_finite() && *c > 0.0)?;
    plot_y(psd_m2_per_hz / (c * c), unit, Some(c))
}

/// Which averaging the Welch settings ask for (a flat enum for a combo box).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum AveragingChoice {
    /// Chosen for the source: the mean of every segment on a recording (as the command line
    /// computes it), a running exponential average on a live source.
    #[default]
    Auto,
    /// Arithmetic mean of all (or the first K) segments.
    Linear,
    /// Running exponential average with time constant τ segments.
    Exponential,
    /// Bias-corrected median.
    Median,
    /// Bin-wise maximum.
    MaxHold,
}

impl AveragingChoice {
    /// All choices, in menu order.
    pub(crate) const ALL: [Self; 5] = [
        Self::Auto,
        Self::Linear,
        Self::Exponential,
        Self::Median,
        Self::MaxHold,
    ];

    /// Menu name.
    pub fn name(self) -> &'static str {
        match self {
            Self::Auto => "auto (mean on a recording, running on a live source)",
            Self::Linear => "mean",
            Self::Exponential => "running (exponential)",
            Self::Median => "median",
            Self::MaxHold => "max-hold",
        }
    }
}

/// Segment length of a live source when the segment is left to the window (2¹⁴: a new
/// spectrum several times a second at the usual digitiser rates).
pub(crate) const LIVE_SEGMENT: usize = 16_384;

/// What the source is, for settings chosen automatically.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SourceKind {
    /// A recording of known length (samples of the analysed channel).
    Recording(u64),
    /// A stream without a known end (stdin, TCP, a followed file, the demo generator).
    Live,
}

/// Welch settings as the user sets them (the sample rate comes from the source).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct WelchSettings {
    /// Segment length N, samples (used when `segment_auto` is off).
    pub segment: usize,
    /// Choose the segment for the source: as the command line does on a recording (2¹⁶, or
    /// the largest power of two ≤ a eighth of the record), [`LIVE_SEGMENT`] on a live source.
    pub segment_auto: bool,
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
    /// At most this many segments (mean, median); `None` = all.
    pub max_averages: Option<usize>,
}

impl Default for WelchSettings {
    fn default() -> Self {
        Self {
            segment: LIVE_SEGMENT,
            segment_auto: true,
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: Detrend::Mean,
            averaging: AveragingChoice::Auto,
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
            segment_auto: false,
            overlap: config.overlap,
            window: config.window,
            detrend: config.detrend,
            averaging,
            time_constant_segments: tau,
            max_averages: config.max_averages,
        }
    }

    /// The segment length used on `source`.
    pub(crate) fn segment_for(&self, source: SourceKind) -> usize {
        if !self.segment_auto {
            return self.segment;
        }
        match source {
            SourceKind::Recording(len) => crate::dsp::default_segment(Some(len)),
            SourceKind::Live => LIVE_SEGMENT,
        }
    }

    /// The averaging used on `source` (`Auto` resolved).
    pub(crate) fn averaging_for(&self, source: SourceKind) -> AveragingChoice {
        match (self.averaging, source) {
            (AveragingChoice::Auto, SourceKind::Recording(_)) => AveragingChoice::Linear,
            (AveragingChoice::Auto, SourceKind::Live) => AveragingChoice::Exponential,
            (a, _) => a,
        }
    }

    /// One line for the user: what averages on `source` ("mean of every segment (auto:
    /// a recording)").
    pub(crate) fn describe_for(&self, source: SourceKind) -> String {
        let what = match self.averaging_for(source) {
            AveragingChoice::Linear => match self.max_averages {
                Some(k) => format!("mean of the first {k} segments"),
                None => "mean of every segment".to_string(),
            },
            AveragingChoice::Exponential | AveragingChoice::Auto => format!(
                "running average, τ {} segments",
                self.time_constant_segments.max(1.0)
            ),
            AveragingChoice::Median => match self.max_averages {
                Some(k) => format!("median of the first {k} segments"),
                None => "median of every segment".to_string(),
            },
            AveragingChoice::MaxHold => "max-hold".to_string(),
        };
        if self.averaging == AveragingChoice::Auto {
            let kind = match source {
                SourceKind::Recording(_) => "a recording",
                SourceKind::Live => "a live source",
            };
            format!("{what} (auto: {kind})")
        } else {
            what
        }
    }

    /// The averager configuration at `sample_rate_hz` for `source`.
    pub(crate) fn to_config_for(&self, sample_rate_hz: f64, source: SourceKind) -> WelchConfig {
        let averaging = match self.averaging_for(source) {
            AveragingChoice::Linear => Averaging::Linear,
            AveragingChoice::Exponential | AveragingChoice::Auto => Averaging::Exponential {
                time_constant_segments: self.time_constant_segments.max(1.0),
            },
            AveragingChoice::Median => Averaging::Median,
            AveragingChoice::MaxHold => Averaging::MaxHold,
        };
        WelchConfig {
            sample_rate_hz,
            segment: self.segment_for(source),
            overlap: self.overlap,
            window: self.window,
            detrend: self.detrend,
            averaging,
            max_averages: self.max_averages,
        }
    }
}

/// The calibration method the analysis options ask for: the window's menu and the command
/// line's choice, read from (and written into) the one analysis-settings type,
/// [`AnalysisOptions`], so the menu is a view of those options, not a second copy of them.
/// (How a calibration was actually obtained, as the report states it, is
/// [`crate::physics::calibration::CalibrationMethod`].)
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
    pub(crate) const ALL: [Self; 5] = [
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

    /// The method `options` stand for (the same precedence as the analysis: a given m/V,
    /// then a tone, then equipartition).
    pub fn of(options: &AnalysisOptions) -> Self {
        if options.m_per_v.is_some() {
            Self::Given
        } else if options.tone_frequency_hz.is_some() && options.tone_rms_m.is_some() {
            Self::ToneDisplacement
        } else if options.tone_frequency_hz.is_some() && options.pm_depth_rad.is_some() {
            Self::TonePhaseModulation
        } else if options.bath_temperature_k.is_some() {
            Self::Equipartition
        } else {
            Self::None
        }
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
    /// Calibration, mode band, heterodyne and fit options: the same type the command line
    /// builds and the analysis takes, carried unchanged to the engine.
    pub analysis: AnalysisOptions,
    /// Let the fit band follow the fitted mode as it drifts (and pick one around the
    /// strongest line when none is given).
    pub follow_mode: bool,
    /// The source these settings were last used with (to say so when they are applied to
    /// another one).
    pub settings_source: Option<String>,
    /// Playback speed of recordings (1 = real time).
    pub playback_speed: f64,
    /// Folder of the last snapshot saved or loaded.
    pub last_snapshot_dir: Option<PathBuf>,
    /// Last source file opened.
    pub last_source_path: Option<PathBuf>,
    /// Show the cooldown view (waterfall and trends).
    pub show_cooldown: bool,
    /// Folder of the session journal chosen by the user (`None`: the default folder,
    /// [`crate::model::journal::default_folder`]).
    pub journal_folder: Option<PathBuf>,
}

impl Default for AppState {
    fn default() -> Self {
        Self {
            unit: DensityUnit::M2PerHz,
            overlays: Overlays::default(),
            welch: WelchSettings::default(),
            analysis: AnalysisOptions::default(),
            follow_mode: true,
            settings_source: None,
            playback_speed: 1.0,
            last_snapshot_dir: None,
            last_source_path: None,
            show_cooldown: true,
            journal_folder: None,
        }
    }
}

impl AppState {
    /// The next display unit in [`UNIT_CYCLE`].
    pub(crate) fn cycle_unit(&mut self) {
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
    fn calibration_method_is_read_from_the_options() {
        let mut o = AnalysisOptions::default();
        assert_eq!(CalibrationMethod::of(&o), CalibrationMethod::None);
        o.bath_temperature_k = Some(4.0);
        assert_eq!(CalibrationMethod::of(&o), CalibrationMethod::Equipartition);
        o.tone_frequency_hz = Some(1e5);
        o.pm_depth_rad = Some(1e-3);
        o.freq_pull_hz_per_m = Some(1e18);
        // a tone calibration with a bath temperature given beside it stays a tone calibration
        assert_eq!(
            CalibrationMethod::of(&o),
            CalibrationMethod::TonePhaseModulation
        );
        o.m_per_v = Some(1e-9);
        assert_eq!(CalibrationMethod::of(&o), CalibrationMethod::Given);
    }

    #[test]
    fn automatic_welch_settings_follow_the_source() {
        let w = WelchSettings::default();
        // A recording: the command line's rule (2^16, or ≤ a eighth of the record), mean.
        let rec = SourceKind::Recording(3_000_000);
        let c = w.to_config_for(1e5, rec);
        assert_eq!(c.segment, 65_536);
        assert_eq!(c.averaging, Averaging::Linear);
        assert_eq!(
            w.to_config_for(1e5, SourceKind::Recording(200_000)).segment,
            16_384
        );
        assert!(w.describe_for(rec).contains("mean of every segment"));
        // A live source: a short segment and a running average.
        let c = w.to_config_for(1e5, SourceKind::Live);
        assert_eq!(c.segment, LIVE_SEGMENT);
        assert!(matches!(c.averaging, Averaging::Exponential { .. }));
        assert!(w.describe_for(SourceKind::Live).contains("live source"));
        // Chosen by hand: used as given on both.
        let mut w = w;
        w.segment_auto = false;
        w.segment = 4096;
        w.averaging = AveragingChoice::Median;
        assert_eq!(w.to_config_for(1e5, rec).segment, 4096);
        assert_eq!(w.to_config_for(1e5, rec).averaging, Averaging::Median);
    }

    #[test]
    fn welch_settings_roundtrip() {
        let mut cfg = WelchConfig::new(1e5, 4096);
        cfg.averaging = Averaging::Exponential {
            time_constant_segments: 8.0,
        };
        let s = WelchSettings::from_config(&cfg);
        assert_eq!(s.to_config_for(1e5, SourceKind::Live), cfg);
    }
}
