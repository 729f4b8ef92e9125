//! Our own synthesiser of invented detector-voltage records (demo and tests), with fixed
//! seeds. Nothing here is real data.
//!
//! The invented device: a Si₃N₄ trampoline membrane whose fundamental mode (f_m ≈ 86 kHz,
//! m_eff = 2 ng) sits in a Fabry–Pérot cavity and is read out with a photodetector; a
//! cryostat cools it from room temperature to 4 K. The detector voltage is
//! `V(t) = x(t)/m_per_v + imprecision noise + tones + stray lines + mains pickup`, where x(t)
//! is the mode's thermal motion integrated *exactly* in discrete time ([`oscillator`]) with the
//! variance `x_zpf²(2n̄+1) = (ħ/2mΩ_m) coth(ħΩ_m/2k_BT)` (METHODS.md §2, §4; this equals
//! `k_BT/(mΩ_m²)` to better than 1e-9 at these temperatures).
//!
//! Scenarios ([`SCENARIOS`]):
//! - `thermal`: the mode at 295 K, a calibration tone of known equivalent rms displacement
//!   (equivalently a phase-modulation tone of depth β with frequency pull G/2π, METHODS §5b)
//!   and a white imprecision floor.
//! - `cooldown`: the bath falls from 295 K to 4 K (then holds, then the cycle repeats); the
//!   mode's frequency rises by 300 Hz and its Q grows from 2000 to 12 000, so the linewidth
//!   narrows and the area falls ~74×. Files compress the cycle to the record length; the live
//!   demo ([`generator`]) uses a 150 s cycle so a newcomer sees the mode cool within seconds.
//! - `heterodyne`: a carrier at the intermediate frequency with two motional sidebands at
//!   carrier ± f_m whose areas are x_zpf²(n̄+1) (optical red/Stokes) and x_zpf² n̄ (blue,
//!   anti-Stokes) in metres², n̄ = 2 under (invented) sideband cooling; which electronic line is
//!   red follows `lo_side` as in METHODS §6. A phase-modulation tone puts equal lines at
//!   carrier ± f_mod for the imbalance correction.
//! - `strays`: the cold mode plus mount and cryostat-stage resonances, turbo-pump lines, a
//!   higher membrane mode and 50 Hz mains harmonics.
//!
//! Every scenario has defaults ([`ScenarioConfig::defaults`]) and named options
//! ([`ScenarioConfig::knobs`], [`ScenarioConfig::set`]) for the command line. Records are
//! reproducible: see [`rng`] for what "the same on every platform" means.

pub mod oscillator;
pub mod quantum;
pub mod rng;
mod stream;
pub mod two_detector;
mod wav;

use std::path::PathBuf;

use serde::{Deserialize, Serialize};

use crate::physics::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};

pub use wav::{truth_path, write_wav};

/// A generator of one channel of detector voltage, block by block, without end.
pub trait Generator: Send {
    /// Sample rate of the generated stream.
    fn sample_rate_hz(&self) -> f64;
    /// Fills `out` with the next samples (volts). The stream does not depend on how it is cut
    /// into blocks.
    fn fill(&mut self, out: &mut [f64]);
}

/// Names of the scenarios `stillpoint synth` knows, in help order.
pub const SCENARIOS: &[&str] = &["thermal", "cooldown", "heterodyne", "strays", "quantum"];

/// One-line description of each scenario (same order as [`SCENARIOS`]).
pub const SCENARIO_HELP: &[(&str, &str)] = &[
    (
        "thermal",
        "trampoline mode at 295 K + calibration tone + white imprecision floor",
    ),
    (
        "cooldown",
        "bath 295 K -> 4 K: the mode shifts up 300 Hz, narrows and loses area (cycle repeats)",
    ),
    (
        "heterodyne",
        "carrier with red/blue motional sidebands (n+1 : n, n = 2) and a PM calibration tone",
    ),
    (
        "strays",
        "cold mode + mount/stage resonances, pump lines, a higher mode, 50 Hz mains harmonics",
    ),
    (
        "two-detector",
        "one mode read by two detectors (2-channel WAV), 6 dB below each detector's floor",
    ),
    (
        "quantum",
        "heterodyne: cryostat 295 K -> 4 K, then sideband laser cooling to n ~ 2 (the demo; files: the few-phonon end)",
    ),
];

/// Length of the live demo's cooldown cycle (cooling, then holding at base temperature).
pub const LIVE_CYCLE_SECS: f64 = 150.0;

/// A live generator for `scenario` with `seed`, or `None` for an unknown scenario.
/// Used by the acquisition layer for [`crate::acquire::SourceSpec::Demo`]; `cooldown` runs
/// its [`LIVE_CYCLE_SECS`] cycle unless configured otherwise.
/// `quantum@SECS` starts the `quantum` cycle SECS seconds in.
pub fn generator(scenario: &str, seed: u64) -> Option<Box<dyn Generator>> {
    let (name, start) = match scenario.split_once('@') {
        Some((n, t)) => (n, Some(t.trim().parse::<f64>().ok()?)),
        None => (scenario, None),
    };
    let mut config = ScenarioConfig::defaults(name).ok()?;
    if let Some(t) = start {
        let q = config.quantum.as_mut()?;
        if !(t.is_finite() && t >= 0.0) {
            return None;
        }
        q.live_start_secs = t;
    }
    config.seed = seed;
    config.build_live().ok()
}

/// Result alias of the synthesiser.
pub type Result<T> = std::result::Result<T, SynthError>;

/// Why a scenario could not be built or written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SynthError {
    /// The scenario name is not one of [`SCENARIOS`].
    #[error("unknown scenario '{0}' (known: thermal, cooldown, heterodyne, strays, quantum)")]
    UnknownScenario(String),
    /// An option name that this scenario does not take.
    #[error("scenario '{scenario}' has no option '{key}' (it takes: {known})")]
    UnknownOption {
        /// Scenario.
        scenario: String,
        /// The option given.
        key: String,
        /// The options it takes, comma separated.
        known: String,
    },
    /// A value that is out of range or does not parse (message names it).
    #[error("{0}")]
    Parameter(String),
    /// An integer WAV would clip.
    #[error(
        "the signal exceeds the {format} full scale of ±1 V in {samples} samples (largest |v| = {max_abs_v:.3} V); lower the levels or write f32"
    )]
    Clipped {
        /// Sample format.
        format: &'static str,
        /// Samples beyond full scale.
        samples: u64,
        /// Largest magnitude seen.
        max_abs_v: f64,
    },
    /// A file-system error.
    #[error("cannot write {path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
    /// The WAV encoder failed.
    #[error("cannot write WAV {path}: {message}")]
    Wav {
        /// The file.
        path: PathBuf,
        /// hound's message.
        message: String,
    },
}

/// Sample format of a written WAV.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum WavFormat {
    /// IEEE float, volts as written.
    F32,
    /// 16-bit PCM, full scale ±1 V (counts / 2¹⁵).
    #[default]
    I16,
    /// 24-bit PCM, full scale ±1 V (counts / 2²³).
    I24,
}

impl WavFormat {
    /// Command-line spelling.
    pub fn name(self) -> &'static str {
        match self {
            Self::F32 => "f32",
            Self::I16 => "i16",
            Self::I24 => "i24",
        }
    }

    /// Parses the command-line spelling.
    pub fn parse(text: &str) -> Option<Self> {
        match text {
            "f32" => Some(Self::F32),
            "i16" => Some(Self::I16),
            "i24" => Some(Self::I24),
            _ => None,
        }
    }
}

/// The cooldown's schedule: the start values are the scenario's `temperature_k`,
/// `frequency_hz` and `quality_factor`; these are the values at base temperature.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CooldownParams {
    /// Bath temperature reached at the end of cooling (K).
    pub base_temperature_k: f64,
    /// Mode frequency at base temperature (Hz).
    pub base_frequency_hz: f64,
    /// Q at base temperature.
    pub base_quality_factor: f64,
    /// Cycle length (s); `None`: the record length for files, [`LIVE_CYCLE_SECS`] live.
    pub cycle_secs: Option<f64>,
    /// Fraction of the cycle spent holding at base temperature (0 ≤ h < 1).
    pub hold_fraction: f64,
    /// Shape constant k of the cooling curve w(u) = (e^{−ku} − e^{−k})/(1 − e^{−k}).
    pub shape_constant: f64,
}

/// Heterodyne detection settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HeterodyneParams {
    /// Intermediate frequency of the carrier (Hz); sidebands at carrier ± f_m.
    pub carrier_hz: f64,
    /// Carrier rms (V).
    pub carrier_rms_v: f64,
    /// Occupancy n̄ under the probe.
    pub occupancy: f64,
    /// Sideband linewidth γ_eff (FWHM, Hz), broadened by the cooling.
    pub linewidth_hz: f64,
    /// Local oscillator above (true) or below the laser.
    pub lo_above: bool,
    /// Detection power gain of the optical-blue electronic side relative to the red side
    /// (η_blue/η_red; 1 = balanced). Applies to the blue sideband and the blue-side PM line.
    pub blue_gain: f64,
}

/// A stray line in the `strays` scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum StrayLine {
    /// A noise-driven resonance (damped-oscillator line).
    Resonance {
        /// What it stands for.
        label: String,
        /// Centre frequency (Hz).
        frequency_hz: f64,
        /// FWHM (Hz).
        linewidth_hz: f64,
        /// Peak over the white floor, dB: 10 log10((B + peak)/B).
        height_over_floor_db: f64,
    },
    /// A pure tone.
    Tone {
        /// What it stands for.
        label: String,
        /// Frequency (Hz).
        frequency_hz: f64,
        /// rms (V).
        rms_v: f64,
    },
}

/// Everything a scenario needs. Start from [`ScenarioConfig::defaults`] and change fields or
/// use [`ScenarioConfig::set`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScenarioConfig {
    /// Scenario name (one of [`SCENARIOS`]).
    pub name: String,
    /// RNG seed.
    pub seed: u64,
    /// Record length for files (s).
    pub duration_secs: f64,
    /// Sample rate (Hz); an integer for WAV.
    pub sample_rate_hz: f64,
    /// WAV sample format.
    pub format: WavFormat,
    /// Effective mass of the mode (kg).
    pub mass_kg: f64,
    /// Mode frequency f_m (Hz) (cooldown: at the start).
    pub frequency_hz: f64,
    /// Mode Q = f_m/γ (cooldown: at the start).
    pub quality_factor: f64,
    /// Bath temperature (K) (cooldown: at the start).
    pub temperature_k: f64,
    /// Detector calibration: metres of displacement per volt.
    pub m_per_v: f64,
    /// White imprecision floor (shot + electronic), V²/Hz, single-sided.
    pub floor_v2_per_hz: f64,
    /// Calibration tone frequency (Hz); 0 = no tone.
    pub tone_frequency_hz: f64,
    /// Calibration tone equivalent rms displacement (m).
    pub tone_rms_m: f64,
    /// Frequency pull G/2π (Hz/m) used to express the tone as a PM depth β.
    pub freq_pull_hz_per_m: f64,
    /// Mains frequency (Hz).
    pub mains_hz: f64,
    /// Number of mains harmonics (0 = none).
    pub mains_harmonics: usize,
    /// rms of the mains fundamental (V); odd harmonic n has rms/n, even rms/(4n).
    pub mains_rms_v: f64,
    /// Cooldown schedule (scenario `cooldown`).
    pub cooldown: Option<CooldownParams>,
    /// Heterodyne detection (scenario `heterodyne`).
    pub heterodyne: Option<HeterodyneParams>,
    /// Stray lines (scenario `strays`).
    pub strays: Vec<StrayLine>,
    /// Cryostat + laser cooling in heterodyne (scenario `quantum`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub quantum: Option<quantum::QuantumParams>,
}

/// One named option of a scenario, for `stillpoint synth --help`-style listings.
#[derive(Debug, Clone, PartialEq)]
pub struct Knob {
    /// Name as [`ScenarioConfig::set`] takes it.
    pub name: &'static str,
    /// Current value as text.
    pub value: String,
    /// What it is, with its unit.
    pub help: &'static str,
}

impl ScenarioConfig {
    /// The defaults of a scenario.
    ///
    /// # Errors
    /// [`SynthError::UnknownScenario`].
    pub fn defaults(name: &str) -> Result<Self> {
        let base = Self {
            name: name.to_string(),
            seed: 1,
            duration_secs: 4.0,
            sample_rate_hz: 250_000.0,
            format: WavFormat::I16,
            mass_kg: 2.0e-12,
            frequency_hz: 86_100.0,
            quality_factor: 3_000.0,
            temperature_k: 295.0,
            m_per_v: 2.0e-9,
            floor_v2_per_hz: 2.5e-10,
            tone_frequency_hz: 89_000.0,
            tone_rms_m: 2.0e-12,
            freq_pull_hz_per_m: 1.0e15,
            mains_hz: 50.0,
            mains_harmonics: 0,
            mains_rms_v: 0.0,
            cooldown: None,
            heterodyne: None,
            strays: Vec::new(),
            quantum: None,
        };
        match name {
            "thermal" => Ok(base),
            "cooldown" => Ok(Self {
                duration_secs: 6.0,
                quality_factor: 2_000.0,
                cooldown: Some(CooldownParams {
                    base_temperature_k: 4.0,
                    base_frequency_hz: 86_400.0,
                    base_quality_factor: 12_000.0,
                    cycle_secs: None,
                    hold_fraction: 0.2,
                    shape_constant: 6.0,
                }),
                ..base
            }),
            "heterodyne" => Ok(Self {
                duration_secs: 3.0,
                sample_rate_hz: 500_000.0,
                frequency_hz: 86_400.0,
                quality_factor: 7.0e5,
                temperature_k: 0.02,
                m_per_v: 1.0e-12,
                floor_v2_per_hz: 1.5e-8,
                tone_frequency_hz: 92_400.0,
                tone_rms_m: 3.5e-14,
                heterodyne: Some(HeterodyneParams {
                    carrier_hz: 125_000.0,
                    carrier_rms_v: 0.1,
                    occupancy: 2.0,
                    linewidth_hz: 300.0,
                    lo_above: true,
                    blue_gain: 1.0,
                }),
                ..base
            }),
            "strays" => Ok(Self {
                frequency_hz: 86_400.0,
                quality_factor: 12_000.0,
                temperature_k: 4.0,
                mains_harmonics: 12,
                mains_rms_v: 3.0e-3,
                strays: default_strays(),
                ..base
            }),
            "quantum" => Ok(Self {
                duration_secs: 2.0,
                sample_rate_hz: 500_000.0,
                quality_factor: 5.0e4,
                m_per_v: 1.0e-12,
                floor_v2_per_hz: 1.2e-8,
                tone_frequency_hz: 98_000.0,
                tone_rms_m: 3.5e-14,
                quantum: Some(quantum::QuantumParams::default()),
                ..base
            }),
            other => Err(SynthError::UnknownScenario(other.to_string())),
        }
    }

    /// The options this scenario takes, with their current values (for help texts).
    pub fn knobs(&self) -> Vec<Knob> {
        let mut k = vec![
            knob("seed", self.seed, "RNG seed"),
            knob("duration_secs", self.duration_secs, "record length, s"),
            knob("sample_rate_hz", self.sample_rate_hz, "sample rate, Hz"),
            knob("format", self.format.name(), "WAV format f32|i16|i24"),
        ];
        if self.heterodyne.is_none() {
            k.push(knob("mass_kg", self.mass_kg, "effective mass, kg"));
        }
        k.extend([
            knob("frequency_hz", self.frequency_hz, "mode frequency f_m, Hz"),
            knob(
                "quality_factor",
                self.quality_factor,
                "mode Q = f_m/linewidth",
            ),
            knob("temperature_k", self.temperature_k, "bath temperature, K"),
            knob("m_per_v", self.m_per_v, "detector calibration, m/V"),
            knob(
                "floor_v2_per_hz",
                self.floor_v2_per_hz,
                "white imprecision floor, V^2/Hz",
            ),
            knob(
                "tone_frequency_hz",
                self.tone_frequency_hz,
                "calibration tone frequency, Hz (0 = none)",
            ),
            knob(
                "tone_rms_m",
                self.tone_rms_m,
                "calibration tone equivalent rms displacement, m",
            ),
            knob(
                "freq_pull_hz_per_m",
                self.freq_pull_hz_per_m,
                "frequency pull G/2pi, Hz/m (tone as PM depth)",
            ),
            knob("mains_hz", self.mains_hz, "mains frequency, Hz"),
            knob(
                "mains_harmonics",
                self.mains_harmonics,
                "number of mains harmonics",
            ),
            knob("mains_rms_v", self.mains_rms_v, "mains fundamental rms, V"),
        ]);
        if self.heterodyne.is_some() {
            k.push(knob("mass_kg", self.mass_kg, "effective mass, kg"));
        }
        if let Some(c) = &self.cooldown {
            k.extend([
                knob(
                    "base_temperature_k",
                    c.base_temperature_k,
                    "bath temperature at the end of cooling, K",
                ),
                knob(
                    "base_frequency_hz",
                    c.base_frequency_hz,
                    "mode frequency at base temperature, Hz",
                ),
                knob(
                    "base_quality_factor",
                    c.base_quality_factor,
                    "Q at base temperature",
                ),
                knob(
                    "cycle_secs",
                    c.cycle_secs
                        .map_or_else(|| "auto".to_string(), |v| v.to_string()),
                    "cycle length, s (auto: record length; live 150 s)",
                ),
                knob(
                    "hold_fraction",
                    c.hold_fraction,
                    "fraction of the cycle held at base temperature",
                ),
                knob(
                    "shape_constant",
                    c.shape_constant,
                    "steepness k of the cooling curve",
                ),
            ]);
        }
        if let Some(h) = &self.heterodyne {
            k.extend([
                knob("carrier_hz", h.carrier_hz, "intermediate frequency, Hz"),
                knob("carrier_rms_v", h.carrier_rms_v, "carrier rms, V"),
                knob(
                    "occupancy",
                    h.occupancy,
                    "phonon occupancy n under the probe",
                ),
                knob(
                    "linewidth_hz",
                    h.linewidth_hz,
                    "sideband linewidth (FWHM), Hz",
                ),
                knob(
                    "lo_side",
                    if h.lo_above { "above" } else { "below" },
                    "local oscillator above|below the laser",
                ),
                knob(
                    "blue_gain",
                    h.blue_gain,
                    "detection gain of the blue side / red side (power)",
                ),
            ]);
        }
        if let Some(q) = &self.quantum {
            k.extend([
                knob(
                    "base_temperature_k",
                    q.base_temperature_k,
                    "bath temperature reached by the cryostat, K",
                ),
                knob(
                    "base_frequency_hz",
                    q.base_frequency_hz,
                    "f_m at the bath temperature, Hz",
                ),
                knob(
                    "base_quality_factor",
                    q.base_quality_factor,
                    "intrinsic Q at the bath temperature",
                ),
                knob(
                    "cooling_damping_hz",
                    q.cooling_damping_hz,
                    "optical damping gamma_opt at full cooling power, Hz",
                ),
                knob(
                    "cavity_linewidth_hz",
                    q.cavity_linewidth_hz,
                    "cavity linewidth kappa/2pi, Hz (n_min = (kappa/4 Omega_m)^2)",
                ),
                knob("carrier_hz", q.carrier_hz, "intermediate frequency, Hz"),
                knob("carrier_rms_v", q.carrier_rms_v, "carrier rms, V"),
                knob(
                    "lo_side",
                    if q.lo_above { "above" } else { "below" },
                    "local oscillator above|below the laser",
                ),
                knob(
                    "file_start_secs",
                    q.file_start_secs
                        .map_or_else(|| "auto".to_string(), |v| v.to_string()),
                    "where in the cycle a file starts, s (auto: the few-phonon hold)",
                ),
            ]);
        }
        if !self.strays.is_empty() {
            k.push(knob(
                "strays_gain_db",
                0,
                "raise (+) or lower (-) every stray line by this many dB",
            ));
        }
        k
    }

    /// Sets one option by name from text (`seed`, `duration_secs`, `mass_kg`, …; see
    /// [`ScenarioConfig::knobs`]). Values are checked when the scenario is built.
    ///
    /// # Errors
    /// [`SynthError::UnknownOption`] or [`SynthError::Parameter`] (value does not parse).
    pub fn set(&mut self, key: &str, value: &str) -> Result<()> {
        let num = || -> Result<f64> {
            value.trim().parse::<f64>().map_err(|_| {
                SynthError::Parameter(format!("option {key}: '{value}' is not a number"))
            })
        };
        let int = || -> Result<u64> {
            value.trim().parse::<u64>().map_err(|_| {
                SynthError::Parameter(format!(
                    "option {key}: '{value}' is not a non-negative integer"
                ))
            })
        };
        let unknown = |cfg: &Self| SynthError::UnknownOption {
            scenario: cfg.name.clone(),
            key: key.to_string(),
            known: cfg
                .knobs()
                .iter()
                .map(|k| k.name)
                .collect::<Vec<_>>()
                .join(", "),
        };
        match key {
            "seed" => self.seed = int()?,
            "duration_secs" | "duration" => self.duration_secs = num()?,
            "sample_rate_hz" | "rate" => self.sample_rate_hz = num()?,
            "format" => {
                self.format = WavFormat::parse(value.trim()).ok_or_else(|| {
                    SynthError::Parameter(format!("format must be f32, i16 or i24, got '{value}'"))
                })?;
            }
            "mass_kg" => self.mass_kg = num()?,
            "frequency_hz" => self.frequency_hz = num()?,
            "quality_factor" => self.quality_factor = num()?,
            "temperature_k" => self.temperature_k = num()?,
            "m_per_v" => self.m_per_v = num()?,
            "floor_v2_per_hz" => self.floor_v2_per_hz = num()?,
            "tone_frequency_hz" => self.tone_frequency_hz = num()?,
            "tone_rms_m" => self.tone_rms_m = num()?,
            "freq_pull_hz_per_m" => self.freq_pull_hz_per_m = num()?,
            "mains_hz" => self.mains_hz = num()?,
            "mains_harmonics" => {
                self.mains_harmonics = usize::try_from(int()?).map_err(|_| {
                    SynthError::Parameter(format!("mains_harmonics too large: {value}"))
                })?;
            }
            "mains_rms_v" => self.mains_rms_v = num()?,
            "cooling_damping_hz"
            | "cavity_linewidth_hz"
            | "file_start_secs"
            | "carrier_hz"
            | "carrier_rms_v"
            | "lo_side"
            | "base_temperature_k"
            | "base_frequency_hz"
            | "base_quality_factor"
                if self.quantum.is_some() =>
            {
                let q = self
                    .quantum
                    .as_mut()
                    .ok_or_else(|| SynthError::Parameter(key.into()))?;
                if key == "lo_side" {
                    q.lo_above = match value.trim() {
                        "above" => true,
                        "below" => false,
                        _ => {
                            return Err(SynthError::Parameter(format!(
                                "lo_side must be above or below, got '{value}'"
                            )));
                        }
                    };
                } else if key == "file_start_secs" && value.trim() == "auto" {
                    q.file_start_secs = None;
                } else {
                    let v = num()?;
                    match key {
                        "cooling_damping_hz" => q.cooling_damping_hz = v,
                        "cavity_linewidth_hz" => q.cavity_linewidth_hz = v,
                        "file_start_secs" => q.file_start_secs = Some(v),
                        "carrier_hz" => q.carrier_hz = v,
                        "carrier_rms_v" => q.carrier_rms_v = v,
                        "base_temperature_k" => q.base_temperature_k = v,
                        "base_frequency_hz" => q.base_frequency_hz = v,
                        _ => q.base_quality_factor = v,
                    }
                }
            }
            "base_temperature_k"
            | "base_frequency_hz"
            | "base_quality_factor"
            | "cycle_secs"
            | "hold_fraction"
            | "shape_constant" => {
                let auto = value.trim() == "auto" && key == "cycle_secs";
                let v = if auto { 0.0 } else { num()? };
                let Some(c) = self.cooldown.as_mut() else {
                    return Err(unknown(self));
                };
                match key {
                    "base_temperature_k" => c.base_temperature_k = v,
                    "base_frequency_hz" => c.base_frequency_hz = v,
                    "base_quality_factor" => c.base_quality_factor = v,
                    "cycle_secs" => c.cycle_secs = if auto { None } else { Some(v) },
                    "hold_fraction" => c.hold_fraction = v,
                    _ => c.shape_constant = v,
                }
            }
            "carrier_hz" | "carrier_rms_v" | "occupancy" | "linewidth_hz" | "blue_gain" => {
                let v = num()?;
                let Some(h) = self.heterodyne.as_mut() else {
                    return Err(unknown(self));
                };
                match key {
                    "carrier_hz" => h.carrier_hz = v,
                    "carrier_rms_v" => h.carrier_rms_v = v,
                    "occupancy" => h.occupancy = v,
                    "linewidth_hz" => h.linewidth_hz = v,
                    _ => h.blue_gain = v,
                }
            }
            "lo_side" => {
                let above = match value.trim() {
                    "above" => true,
                    "below" => false,
                    _ => {
                        return Err(SynthError::Parameter(format!(
                            "lo_side must be above or below, got '{value}'"
                        )));
                    }
                };
                let Some(h) = self.heterodyne.as_mut() else {
                    return Err(unknown(self));
                };
                h.lo_above = above;
            }
            "strays_gain_db" => {
                let db = num()?;
                if self.strays.is_empty() {
                    return Err(unknown(self));
                }
                for s in &mut self.strays {
                    match s {
                        StrayLine::Resonance {
                            height_over_floor_db,
                            ..
                        } => *height_over_floor_db += db,
                        StrayLine::Tone { rms_v, .. } => *rms_v *= 10_f64.powf(db / 20.0),
                    }
                }
            }
            _ => return Err(unknown(self)),
        }
        Ok(())
    }

    /// Checks every value for range and physical sense.
    ///
    /// # Errors
    /// [`SynthError::UnknownScenario`] or [`SynthError::Parameter`] naming the bad value.
    pub fn validate(&self) -> Result<()> {
        if !SCENARIOS.contains(&self.name.as_str()) {
            return Err(SynthError::UnknownScenario(self.name.clone()));
        }
        let fs = self.sample_rate_hz;
        positive("sample_rate_hz", fs)?;
        positive("duration_secs", self.duration_secs)?;
        positive("mass_kg", self.mass_kg)?;
        positive("quality_factor", self.quality_factor)?;
        if self.quality_factor <= 0.5 {
            return Err(SynthError::Parameter(format!(
                "quality_factor must exceed 1/2 (under-damped), got {}",
                self.quality_factor
            )));
        }
        positive("temperature_k", self.temperature_k)?;
        positive("m_per_v", self.m_per_v)?;
        non_negative("floor_v2_per_hz", self.floor_v2_per_hz)?;
        non_negative("tone_frequency_hz", self.tone_frequency_hz)?;
        non_negative("tone_rms_m", self.tone_rms_m)?;
        positive("freq_pull_hz_per_m", self.freq_pull_hz_per_m)?;
        non_negative("mains_rms_v", self.mains_rms_v)?;
        below_nyquist("frequency_hz", self.frequency_hz, fs)?;
        if let Some(q) = &self.quantum {
            q.validate(self)?;
        }
        if self.tone_frequency_hz > 0.0 && self.heterodyne.is_none() && self.quantum.is_none() {
            below_nyquist("tone_frequency_hz", self.tone_frequency_hz, fs)?;
        }
        if self.mains_harmonics > 0 {
            below_nyquist(
                "mains_hz × mains_harmonics",
                self.mains_hz * self.mains_harmonics as f64,
                fs,
            )?;
        }
        if let Some(c) = &self.cooldown {
            positive("base_temperature_k", c.base_temperature_k)?;
            below_nyquist("base_frequency_hz", c.base_frequency_hz, fs)?;
            positive("base_quality_factor", c.base_quality_factor)?;
            if c.base_quality_factor <= 0.5 {
                return Err(SynthError::Parameter(
                    "base_quality_factor must exceed 1/2".to_string(),
                ));
            }
            if let Some(cy) = c.cycle_secs {
                positive("cycle_secs", cy)?;
            }
            if !(c.hold_fraction.is_finite() && (0.0..1.0).contains(&c.hold_fraction)) {
                return Err(SynthError::Parameter(format!(
                    "hold_fraction must be in [0, 1), got {}",
                    c.hold_fraction
                )));
            }
            positive("shape_constant", c.shape_constant)?;
        }
        if let Some(h) = &self.heterodyne {
            positive("carrier_hz", h.carrier_hz)?;
            non_negative("carrier_rms_v", h.carrier_rms_v)?;
            positive("occupancy", h.occupancy)?;
            positive("linewidth_hz", h.linewidth_hz)?;
            positive("blue_gain", h.blue_gain)?;
            let f_hi = self.frequency_hz.max(self.tone_frequency_hz);
            if h.carrier_hz <= f_hi + 5.0 * h.linewidth_hz {
                return Err(SynthError::Parameter(format!(
                    "carrier_hz ({} Hz) must exceed f_m and the tone frequency by several linewidths",
                    h.carrier_hz
                )));
            }
            below_nyquist("carrier_hz + f_m", h.carrier_hz + f_hi, fs)?;
        }
        for s in &self.strays {
            match s {
                StrayLine::Resonance {
                    label,
                    frequency_hz,
                    linewidth_hz,
                    height_over_floor_db,
                } => {
                    below_nyquist(label, *frequency_hz, fs)?;
                    positive(label, *linewidth_hz)?;
                    if !height_over_floor_db.is_finite() {
                        return Err(SynthError::Parameter(format!(
                            "{label}: height must be finite"
                        )));
                    }
                }
                StrayLine::Tone {
                    label,
                    frequency_hz,
                    rms_v,
                } => {
                    below_nyquist(label, *frequency_hz, fs)?;
                    non_negative(label, *rms_v)?;
                }
            }
        }
        Ok(())
    }

    /// A stream for a file of this configuration (cooldown cycle `auto` = the record length).
    ///
    /// # Errors
    /// Invalid configuration ([`ScenarioConfig::validate`]).
    pub fn build(&self) -> Result<Box<dyn Generator>> {
        if self.quantum.is_some() {
            return Ok(Box::new(quantum::QuantumStream::new(self, false)?));
        }
        Ok(Box::new(stream::Stream::new(self, false)?))
    }

    /// An endless live stream (cooldown cycle `auto` = [`LIVE_CYCLE_SECS`]).
    ///
    /// # Errors
    /// Invalid configuration.
    pub(crate) fn build_live(&self) -> Result<Box<dyn Generator>> {
        if self.quantum.is_some() {
            return Ok(Box::new(quantum::QuantumStream::new(self, true)?));
        }
        Ok(Box::new(stream::Stream::new(self, true)?))
    }

    /// Number of samples of a file: round(duration × rate).
    pub(crate) fn sample_count(&self) -> u64 {
        let n = (self.duration_secs * self.sample_rate_hz).round();
        if n.is_finite() && n > 0.0 {
            n as u64
        } else {
            0
        }
    }

    /// The whole record in memory (tests, small files).
    ///
    /// # Errors
    /// Invalid configuration, or more than 2²⁸ samples.
    pub fn samples(&self) -> Result<Vec<f64>> {
        let n = self.sample_count();
        if n > 1 << 28 {
            return Err(SynthError::Parameter(format!(
                "{n} samples is too many to hold in memory"
            )));
        }
        let mut g = self.build()?;
        let mut out = vec![0.0; n as usize];
        g.fill(&mut out);
        Ok(out)
    }

    /// The cooldown cycle length used for a file (`live = false`) or the live demo.
    pub fn cycle_secs(&self, live: bool) -> Option<f64> {
        self.cooldown.as_ref().map(|c| {
            c.cycle_secs.unwrap_or(if live {
                LIVE_CYCLE_SECS
            } else {
                self.duration_secs
            })
        })
    }

    /// The mode's true parameters at time `t_secs` of the record (constant except in
    /// `cooldown`); `None` for `heterodyne`, whose mode is seen only through its sidebands.
    pub fn mode_at(&self, t_secs: f64, live: bool) -> Option<ModeTruth> {
        if self.heterodyne.is_some() || self.quantum.is_some() {
            return None;
        }
        let (t, f, q) = self.schedule_at(t_secs, live);
        Some(mode_truth(self.mass_kg, f, q, t, self.m_per_v))
    }

    /// (temperature K, frequency Hz, Q) at `t_secs` (module docs of the cooldown schedule).
    pub(crate) fn schedule_at(&self, t_secs: f64, live: bool) -> (f64, f64, f64) {
        let start = (self.temperature_k, self.frequency_hz, self.quality_factor);
        let (Some(c), Some(cycle)) = (&self.cooldown, self.cycle_secs(live)) else {
            return start;
        };
        let w = cooling_weight(c, cycle, t_secs);
        let temperature = c.base_temperature_k + (start.0 - c.base_temperature_k) * w;
        let frequency = c.base_frequency_hz + (start.1 - c.base_frequency_hz) * w;
        let inv_q = 1.0 / c.base_quality_factor + (1.0 / start.2 - 1.0 / c.base_quality_factor) * w;
        (temperature, frequency, 1.0 / inv_q)
    }

    /// Every true value of this configuration (written as the `.truth.json` sidecar).
    ///
    /// # Errors
    /// Invalid configuration.
    pub fn truth(&self) -> Result<Truth> {
        self.validate()?;
        if let Some(q) = &self.quantum {
            return Ok(quantum::truth(self, q));
        }
        Ok(stream::truth(self))
    }
}

/// Weight w ∈ [0, 1] of the start values in the cooldown: 1 at the start of each cycle,
/// falling as (e^{−ku} − e^{−k})/(1 − e^{−k}) with u = t_in_cycle/t_cooling, 0 while holding.
fn cooling_weight(c: &CooldownParams, cycle_secs: f64, t_secs: f64) -> f64 {
    let cooling = cycle_secs * (1.0 - c.hold_fraction);
    let tc = t_secs.rem_euclid(cycle_secs);
    let u = if cooling > 0.0 {
        (tc / cooling).min(1.0)
    } else {
        1.0
    };
    let k = c.shape_constant;
    let end = (-k).exp();
    (((-k * u).exp() - end) / (1.0 - end)).clamp(0.0, 1.0)
}

/// The mode's true values for mass, frequency, Q, bath temperature and calibration.
pub(crate) fn mode_truth(
    mass_kg: f64,
    frequency_hz: f64,
    quality_factor: f64,
    temperature_k: f64,
    m_per_v: f64,
) -> ModeTruth {
    let omega = std::f64::consts::TAU * frequency_hz;
    let x_zpf2 = HBAR_J_S / (2.0 * mass_kg * omega);
    let ratio = HBAR_J_S * omega / (BOLTZMANN_J_PER_K * temperature_k);
    let occupancy = 1.0 / ratio.exp_m1();
    let variance_m2 = x_zpf2 * (2.0 * occupancy + 1.0);
    let linewidth_hz = frequency_hz / quality_factor;
    // Peak of the damped-oscillator PSD at f = f_m: 2A/(πγ) (METHODS §2).
    let peak = 2.0 * variance_m2 / (std::f64::consts::PI * linewidth_hz);
    ModeTruth {
        frequency_hz,
        linewidth_hz,
        damping_rate_rad_per_s: std::f64::consts::TAU * linewidth_hz,
        quality_factor,
        mass_kg,
        temperature_k,
        occupancy,
        x_zpf_m: x_zpf2.sqrt(),
        variance_m2,
        classical_variance_m2: BOLTZMANN_J_PER_K * temperature_k / (mass_kg * omega * omega),
        variance_v2: variance_m2 / (m_per_v * m_per_v),
        peak_psd_m2_per_hz: peak,
        peak_psd_v2_per_hz: peak / (m_per_v * m_per_v),
        zero_point_peak_psd_m2_per_hz: 4.0 * x_zpf2 / (std::f64::consts::TAU * linewidth_hz),
    }
}

fn default_strays() -> Vec<StrayLine> {
    let res = |label: &str, f: f64, g: f64, h: f64| StrayLine::Resonance {
        label: label.to_string(),
        frequency_hz: f,
        linewidth_hz: g,
        height_over_floor_db: h,
    };
    let tone = |label: &str, f: f64, rms_v: f64| StrayLine::Tone {
        label: label.to_string(),
        frequency_hz: f,
        rms_v,
    };
    vec![
        res(
            "cryostat stage mode (cryocooler-driven)",
            4_350.0,
            35.0,
            20.0,
        ),
        res("mount: clamp rocking mode", 23_400.0, 120.0, 24.0),
        res("mount: base-plate flexure", 61_700.0, 85.0, 17.0),
        res("membrane higher-order mode", 112_900.0, 12.0, 28.0),
        tone("turbo pump line", 1_230.0, 1.5e-3),
        tone("turbo pump line, 2nd harmonic", 2_460.0, 6.0e-4),
        tone("cryocooler drive pickup", 7_800.0, 4.0e-4),
    ]
}

fn knob(name: &'static str, value: impl ToString, help: &'static str) -> Knob {
    Knob {
        name,
        value: value.to_string(),
        help,
    }
}

fn positive(name: &str, v: f64) -> Result<()> {
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(SynthError::Parameter(format!(
            "{name} must be a positive number, got {v}"
        )))
    }
}

fn non_negative(name: &str, v: f64) -> Result<()> {
    if v.is_finite() && v >= 0.0 {
        Ok(())
    } else {
        Err(SynthError::Parameter(format!(
            "{name} must be a non-negative number, got {v}"
        )))
    }
}

fn below_nyquist(name: &str, f: f64, fs: f64) -> Result<()> {
    if f.is_finite() && f > 0.0 && f < 0.5 * fs {
        Ok(())
    } else {
        Err(SynthError::Parameter(format!(
            "{name} = {f} Hz must be positive and below Nyquist ({} Hz)",
            0.5 * fs
        )))
    }
}

/// The true values of a mode.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModeTruth {
    /// f_m (Hz), the Ω_m/2π of the susceptibility.
    pub frequency_hz: f64,
    /// γ = f_m/Q, FWHM (Hz).
    pub linewidth_hz: f64,
    /// Γ = 2πγ (rad/s).
    pub damping_rate_rad_per_s: f64,
    /// Q.
    pub quality_factor: f64,
    /// m_eff (kg).
    pub mass_kg: f64,
    /// Bath temperature (K).
    pub temperature_k: f64,
    /// Bose–Einstein occupancy n̄ = 1/(e^{ħΩ/k_BT} − 1).
    pub occupancy: f64,
    /// x_zpf = √(ħ/2mΩ_m) (m).
    pub x_zpf_m: f64,
    /// ⟨x²⟩ = x_zpf²(2n̄+1) (m²): the variance the oscillator is simulated with.
    pub variance_m2: f64,
    /// k_BT/(mΩ_m²) (m²), the classical equipartition value for comparison.
    pub classical_variance_m2: f64,
    /// ⟨x²⟩/m_per_v² (V²).
    pub variance_v2: f64,
    /// Peak of the displacement PSD 2⟨x²⟩/(πγ) (m²/Hz).
    pub peak_psd_m2_per_hz: f64,
    /// The same in V²/Hz.
    pub peak_psd_v2_per_hz: f64,
    /// Zero-point peak 4x_zpf²/Γ (m²/Hz).
    pub zero_point_peak_psd_m2_per_hz: f64,
}

/// The calibration tone.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ToneTruth {
    /// Frequency (Hz).
    pub frequency_hz: f64,
    /// Equivalent rms displacement (m).
    pub rms_m: f64,
    /// rms (V) in the detector signal (heterodyne: of each of the two lines before gain).
    pub rms_v: f64,
    /// Power (V²).
    pub power_v2: f64,
    /// Equivalent phase-modulation depth β = √2 x_rms |G/2π| / f_mod (rad), METHODS §5b.
    pub pm_depth_rad: f64,
    /// G/2π used for β (Hz/m).
    pub freq_pull_hz_per_m: f64,
}

/// One line in the record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PeakTruth {
    /// What it is.
    pub label: String,
    /// `mode`, `resonance`, `tone`, `mains`, `carrier`, `sideband` or `calibration`.
    pub kind: String,
    /// Centre frequency (Hz).
    pub frequency_hz: f64,
    /// FWHM (Hz); 0 for pure tones.
    pub linewidth_hz: f64,
    /// Area (resonances) or power (tones), V².
    pub area_v2: f64,
    /// Peak PSD of a resonance (V²/Hz, excluding the floor); `None` for tones.
    pub peak_psd_v2_per_hz: Option<f64>,
    /// 10 log10((floor + peak)/floor) for resonances; `None` for tones (their height
    /// depends on the ENBW: ≈ power/(ENBW·floor)).
    pub height_over_floor_db: Option<f64>,
}

/// Truth of the heterodyne scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SidebandTruth {
    /// Carrier (intermediate) frequency (Hz).
    pub carrier_hz: f64,
    /// Carrier rms (V).
    pub carrier_rms_v: f64,
    /// `above` or `below`: the LO relative to the laser.
    pub lo_side: String,
    /// f_m (Hz).
    pub mechanical_frequency_hz: f64,
    /// Electronic frequency of the optical red (Stokes, n̄+1) line.
    pub red_frequency_hz: f64,
    /// Electronic frequency of the optical blue (anti-Stokes, n̄) line.
    pub blue_frequency_hz: f64,
    /// n̄ under the probe.
    pub occupancy: f64,
    /// Sideband linewidth (FWHM, Hz).
    pub linewidth_hz: f64,
    /// x_zpf (m).
    pub x_zpf_m: f64,
    /// Calibrated red area x_zpf²(n̄+1) (m²).
    pub red_area_m2: f64,
    /// Calibrated blue area x_zpf² n̄ (m²).
    pub blue_area_m2: f64,
    /// Red area in the record, V².
    pub red_area_v2: f64,
    /// Blue area in the record (including `blue_gain`), V².
    pub blue_area_v2: f64,
    /// (n̄+1)/n̄.
    pub ratio: f64,
    /// The raw red/blue area ratio in the record, (n̄+1)/(n̄·blue_gain).
    pub raw_ratio: f64,
    /// η_blue/η_red (power).
    pub blue_gain: f64,
    /// PM calibration line on the red side: frequency (Hz).
    pub calibration_red_frequency_hz: f64,
    /// PM calibration line on the blue side: frequency (Hz).
    pub calibration_blue_frequency_hz: f64,
    /// Power of the red-side calibration line, V².
    pub calibration_red_power_v2: f64,
    /// Power of the blue-side calibration line (including `blue_gain`), V².
    pub calibration_blue_power_v2: f64,
    /// The convention in words.
    pub convention: String,
}

/// One row of the cooldown schedule.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SchedulePoint {
    /// Time since the start of the record (s).
    pub time_secs: f64,
    /// The mode at that time.
    #[serde(flatten)]
    pub mode: ModeTruth,
}

/// The cooldown schedule.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScheduleTruth {
    /// The formula in words.
    pub description: String,
    /// Cycle length (s).
    pub cycle_secs: f64,
    /// Cooling part of the cycle (s).
    pub cooling_secs: f64,
    /// Samples between parameter updates of the simulated mode.
    pub update_interval_samples: usize,
    /// The schedule sampled over the record.
    pub table: Vec<SchedulePoint>,
}

/// Every true value of a synthesised record (the `.truth.json` sidecar).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// Program and version.
    pub generator: String,
    /// Scenario.
    pub scenario: String,
    /// Seed.
    pub seed: u64,
    /// Sample rate (Hz).
    pub sample_rate_hz: f64,
    /// Record length (s).
    pub duration_secs: f64,
    /// Samples in the file.
    pub samples: u64,
    /// WAV format (`f32`, `i16`, `i24`).
    pub format: String,
    /// Full scale of integer formats (V): counts / 2^(b−1) × 1 V.
    pub full_scale_v: f64,
    /// The invented device in words.
    pub device: String,
    /// Metres per volt of the detector.
    pub m_per_v: f64,
    /// White imprecision floor (V²/Hz).
    pub floor_v2_per_hz: f64,
    /// The same in m²/Hz.
    pub floor_m2_per_hz: f64,
    /// The mode (cooldown: at t = 0; see `schedule`).
    pub mode: Option<ModeTruth>,
    /// The calibration tone.
    pub tone: Option<ToneTruth>,
    /// Every line in the record.
    pub peaks: Vec<PeakTruth>,
    /// Heterodyne truth.
    pub sidebands: Option<SidebandTruth>,
    /// Cooldown schedule.
    pub schedule: Option<ScheduleTruth>,
    /// The `quantum` scenario's cycle (cryostat, bath, laser cooling, few phonons).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub quantum: Option<quantum::QuantumTruth>,
    /// The configuration that made the record (every parameter verbatim).
    pub config: ScenarioConfig,
    /// Conventions and caveats.
    pub notes: Vec<String>,
}
