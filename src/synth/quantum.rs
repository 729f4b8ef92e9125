//! The `quantum` scenario: the invented trampoline mode of the demo, read out in heterodyne,
//! first cooled by the cryostat (295 K → 4 K), then held at the 4 K bath, then laser-cooled
//! (resolved-sideband cooling) to a few phonons, then held there; the cycle repeats.
//!
//! Physics (every formula is checked in `tests/quantum_demo.rs` against its source):
//! - Bath occupancy n̄_bath = 1/(e^{ħΩ_m/k_BT} − 1) (Bose–Einstein, METHODS §4).
//! - Sideband cooling with a red-detuned cooling beam (Δ = −Ω_m, resolved sidebands κ < Ω_m):
//!   the optical damping Γ_opt adds to the intrinsic damping, Γ_eff = Γ_m + Γ_opt (the line
//!   broadens as it cools), and the occupancy settles at
//!   `n̄ = (Γ_m n̄_bath + Γ_opt n̄_min)/(Γ_m + Γ_opt)` with the quantum back-action limit
//!   `n̄_min = (κ/4Ω_m)²` [Aspelmeyer, Kippenberg & Marquardt, Rev. Mod. Phys. 86, 1391
//!   (2014), §VII.A (from memory); Marquardt, Chen, Clerk & Girvin, PRL 99, 093902 (2007) and
//!   Wilson-Rae, Nooshi, Zwerger & Kippenberg, PRL 99, 093901 (2007), from memory]. At
//!   Δ = −Ω_m the optical spring vanishes, so f_m does not move with the cooling power.
//! - Readout: a separate weak probe on cavity resonance (no dynamical back-action of its
//!   own) beats with a local oscillator; the photocurrent holds a carrier at the intermediate
//!   frequency and two motional sidebands at carrier ± f_m whose calibrated areas are
//!   x_zpf²(n̄+1) (optical red, Stokes) and x_zpf² n̄ (optical blue, anti-Stokes), each a
//!   Lorentzian of FWHM γ_eff = Γ_eff/2π (METHODS §2, §6). Which electronic line is red
//!   follows the LO side (METHODS §6). A phase-modulation tone of equivalent rms displacement
//!   `tone_rms_m` at f_mod puts x_cal,rms²/2 (in m², ÷ m_per_v² in V²) at carrier ± f_mod.
//! - The cooling power is raised geometrically during the laser-cooling stage,
//!   Γ_opt(u) = Γ_m ((1 + Γ_opt,final/Γ_m)^u − 1), u ∈ [0, 1], so the occupancy falls evenly
//!   on a log scale.
//!
//! Simulation: each sideband is a unit-variance damped oscillator (exact discrete-time update,
//! [`super::oscillator`]) at its electronic frequency with linewidth γ_eff, scaled by the
//! square root of its area; the parameters are updated every
//! `UPDATE_INTERVAL_SAMPLES` (256) samples. The occupancy therefore follows the
//! schedule adiabatically: right for the laser-cooling stages (1/Γ_eff ≲ 1 ms) and for a real
//! cryostat (hours, ≫ 1/Γ_m); the demo's cryostat stage is a time-lapse
//! ([`QuantumParams::cryostat_lab_hours`] of lab time shown in `cryostat_secs`).

use std::f64::consts::{SQRT_2, TAU};

use serde::{Deserialize, Serialize};

use super::oscillator::{OscillatorParams, ThermalOscillator};
use super::rng::Rng;
use super::stream::{Tone, resonance_truth, tone_truth};
use super::{Generator, Result, ScenarioConfig, SynthError};
use crate::physics::constants::{BOLTZMANN_J_PER_K, HBAR_J_S};

const STREAM_FLOOR: u64 = 2;
const STREAM_PHASES: u64 = 3;
const STREAM_RED: u64 = 4;
const STREAM_BLUE: u64 = 5;

/// Settings of the `quantum` scenario beyond the common ones (the common `temperature_k`,
/// `frequency_hz` and `quality_factor` are the values at the start of the cryostat stage).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct QuantumParams {
    /// Bath temperature reached by the cryostat (K).
    pub base_temperature_k: f64,
    /// f_m at the bath temperature (Hz).
    pub base_frequency_hz: f64,
    /// Intrinsic Q at the bath temperature.
    pub base_quality_factor: f64,
    /// Optical damping γ_opt = Γ_opt/2π at full cooling power (Hz).
    pub cooling_damping_hz: f64,
    /// Cavity linewidth κ/2π (Hz), which sets n̄_min = (κ/4Ω_m)².
    pub cavity_linewidth_hz: f64,
    /// Heterodyne intermediate frequency (Hz).
    pub carrier_hz: f64,
    /// Carrier rms (V).
    pub carrier_rms_v: f64,
    /// Local oscillator above (true) or below the laser.
    pub lo_above: bool,
    /// Stage lengths (s): cryostat cooldown, hold at the bath, laser cooling, hold at the end.
    pub stage_secs: [f64; 4],
    /// Lab time the cryostat stage stands for (hours), shown on screen (time-lapse).
    pub cryostat_lab_hours: f64,
    /// Where in the cycle a file starts (s); `None`: at the few-phonon hold.
    pub file_start_secs: Option<f64>,
    /// Where in the cycle the live stream starts (s; the demo source `quantum@SECS`, used
    /// for screenshots of the later stages). Not part of a file's configuration.
    #[serde(skip)]
    pub live_start_secs: f64,
}

impl Default for QuantumParams {
    fn default() -> Self {
        Self {
            base_temperature_k: 4.0,
            base_frequency_hz: 86_400.0,
            base_quality_factor: 2.0e7,
            cooling_damping_hz: 2_000.0,
            cavity_linewidth_hz: 40_000.0,
            carrier_hz: 125_000.0,
            carrier_rms_v: 0.1,
            lo_above: true,
            stage_secs: [60.0, 20.0, 60.0, 60.0],
            cryostat_lab_hours: 10.0,
            file_start_secs: None,
            live_start_secs: 0.0,
        }
    }
}

/// Stage of the cycle.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum QuantumStage {
    /// The cryostat cools the bath (time-lapse).
    Cryostat,
    /// The bath holds at its base temperature; no cooling beam.
    Bath,
    /// The cooling beam's power rises.
    LaserCooling,
    /// Full cooling power: a few phonons.
    FewPhonons,
}

impl QuantumStage {
    /// Plain words for the screen.
    pub fn describe(self) -> &'static str {
        match self {
            Self::Cryostat => "cryostat cooldown (time-lapse)",
            Self::Bath => "at the bath temperature, cooling beam off",
            Self::LaserCooling => "laser cooling: cooling-beam power rising",
            Self::FewPhonons => "laser-cooled: a few phonons",
        }
    }
}

/// The true state of the mode at one time of the `quantum` scenario.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct QuantumPoint {
    /// Time (s) since the start of the record (or of the live stream).
    pub time_secs: f64,
    /// Stage.
    pub stage: QuantumStage,
    /// Bath temperature (K).
    pub bath_temperature_k: f64,
    /// f_m (Hz).
    pub frequency_hz: f64,
    /// Intrinsic linewidth γ_m = f_m/Q (Hz).
    pub intrinsic_linewidth_hz: f64,
    /// Optical damping γ_opt (Hz).
    pub optical_damping_hz: f64,
    /// γ_eff = γ_m + γ_opt (Hz): the FWHM of each sideband.
    pub linewidth_hz: f64,
    /// Bose–Einstein occupancy of the bath at f_m.
    pub bath_occupancy: f64,
    /// n̄_min = (κ/4Ω_m)².
    pub minimum_occupancy: f64,
    /// n̄ = (γ_m n̄_bath + γ_opt n̄_min)/γ_eff.
    pub occupancy: f64,
    /// x_zpf = √(ħ/2mΩ_m) (m).
    pub x_zpf_m: f64,
    /// Red (Stokes) area x_zpf²(n̄+1) (m²).
    pub red_area_m2: f64,
    /// Blue (anti-Stokes) area x_zpf² n̄ (m²).
    pub blue_area_m2: f64,
    /// (n̄+1)/n̄.
    pub ratio: f64,
    /// Effective temperature ħΩ_m/(k_B ln(1 + 1/n̄)) (K).
    pub effective_temperature_k: f64,
}

/// The schedule's truth written to the sidecar.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct QuantumTruth {
    /// The formulas in words.
    pub description: String,
    /// Cycle length (s).
    pub cycle_secs: f64,
    /// Stage lengths (s).
    pub stage_secs: [f64; 4],
    /// Where in the cycle the record starts (s).
    pub record_start_secs: f64,
    /// The state at the start of the record.
    pub at_record_start: QuantumPoint,
    /// The state at the end of the record.
    pub at_record_end: QuantumPoint,
    /// One cycle, 201 rows (time from the start of the cycle).
    pub cycle_table: Vec<QuantumPoint>,
}

/// Bose–Einstein occupancy at f (Hz) and T (K).
fn bose_einstein(f_hz: f64, t_k: f64) -> f64 {
    1.0 / (HBAR_J_S * TAU * f_hz / (BOLTZMANN_J_PER_K * t_k)).exp_m1()
}

impl QuantumParams {
    /// Cycle length (s).
    pub fn cycle_secs(&self) -> f64 {
        self.stage_secs.iter().sum()
    }

    /// Where a file starts in the cycle (s).
    pub fn file_start(&self) -> f64 {
        self.file_start_secs
            .unwrap_or(self.stage_secs[0] + self.stage_secs[1] + self.stage_secs[2])
    }

    pub(crate) fn validate(&self, config: &ScenarioConfig) -> Result<()> {
        let pos = |name: &str, v: f64| super::positive(name, v);
        pos("base_temperature_k", self.base_temperature_k)?;
        pos("base_quality_factor", self.base_quality_factor)?;
        pos("cooling_damping_hz", self.cooling_damping_hz)?;
        pos("cavity_linewidth_hz", self.cavity_linewidth_hz)?;
        pos("carrier_hz", self.carrier_hz)?;
        super::non_negative("carrier_rms_v", self.carrier_rms_v)?;
        pos("cryostat_lab_hours", self.cryostat_lab_hours)?;
        for (name, v) in ["cryostat_secs", "bath_secs", "cooling_secs", "end_secs"]
            .iter()
            .zip(self.stage_secs)
        {
            pos(name, v)?;
        }
        if let Some(s) = self.file_start_secs {
            super::non_negative("file_start_secs", s)?;
        }
        let fs = config.sample_rate_hz;
        let f_hi = config.frequency_hz.max(self.base_frequency_hz);
        let f_lo = config.frequency_hz.min(self.base_frequency_hz);
        let widest =
            self.cooling_damping_hz + f_hi / self.base_quality_factor.min(config.quality_factor);
        if self.carrier_hz <= f_hi.max(config.tone_frequency_hz) + 5.0 * widest {
            return Err(SynthError::Parameter(format!(
                "carrier_hz ({} Hz) must exceed f_m and the tone frequency by several linewidths",
                self.carrier_hz
            )));
        }
        super::below_nyquist(
            "carrier_hz + f_m",
            self.carrier_hz + f_hi.max(config.tone_frequency_hz),
            fs,
        )?;
        super::below_nyquist("base_frequency_hz", self.base_frequency_hz, fs)?;
        if f_lo <= 0.0 || widest >= f_lo {
            return Err(SynthError::Parameter(format!(
                "the cooled linewidth {widest} Hz must stay below f_m ({f_lo} Hz)"
            )));
        }
        Ok(())
    }

    /// The true state at `t_secs` after the start of the record (`live`: the cycle starts
    /// at 0; a file starts at [`QuantumParams::file_start`]).
    pub fn state_at(&self, config: &ScenarioConfig, t_secs: f64, live: bool) -> QuantumPoint {
        let offset = if live {
            self.live_start_secs
        } else {
            self.file_start()
        };
        let mut p = self.cycle_state(config, (t_secs + offset).rem_euclid(self.cycle_secs()));
        p.time_secs = t_secs;
        p
    }

    /// The state at time `tc` within one cycle.
    pub fn cycle_state(&self, config: &ScenarioConfig, tc: f64) -> QuantumPoint {
        let [s0, s1, s2, _] = self.stage_secs;
        // Cryostat: w = (e^{−ku} − e^{−k})/(1 − e^{−k}), k = 6 (the cooldown scenario's shape).
        let k = 6.0_f64;
        let u_cryo = (tc / s0).clamp(0.0, 1.0);
        let w = (((-k * u_cryo).exp() - (-k).exp()) / (1.0 - (-k).exp())).clamp(0.0, 1.0);
        let t_bath = self.base_temperature_k + (config.temperature_k - self.base_temperature_k) * w;
        let f_m = self.base_frequency_hz + (config.frequency_hz - self.base_frequency_hz) * w;
        let inv_q = 1.0 / self.base_quality_factor
            + (1.0 / config.quality_factor - 1.0 / self.base_quality_factor) * w;
        let gamma_m = f_m * inv_q;
        let (stage, u_cool) = if tc < s0 {
            (QuantumStage::Cryostat, 0.0)
        } else if tc < s0 + s1 {
            (QuantumStage::Bath, 0.0)
        } else if tc < s0 + s1 + s2 {
            (QuantumStage::LaserCooling, (tc - s0 - s1) / s2)
        } else {
            (QuantumStage::FewPhonons, 1.0)
        };
        let gamma_opt = gamma_m * ((1.0 + self.cooling_damping_hz / gamma_m).powf(u_cool) - 1.0);
        let gamma_eff = gamma_m + gamma_opt;
        let n_bath = bose_einstein(f_m, t_bath);
        let n_min = (self.cavity_linewidth_hz / (4.0 * f_m)).powi(2);
        let n = (gamma_m * n_bath + gamma_opt * n_min) / gamma_eff;
        let omega = TAU * f_m;
        let x_zpf2 = HBAR_J_S / (2.0 * config.mass_kg * omega);
        QuantumPoint {
            time_secs: tc,
            stage,
            bath_temperature_k: t_bath,
            frequency_hz: f_m,
            intrinsic_linewidth_hz: gamma_m,
            optical_damping_hz: gamma_opt,
            linewidth_hz: gamma_eff,
            bath_occupancy: n_bath,
            minimum_occupancy: n_min,
            occupancy: n,
            x_zpf_m: x_zpf2.sqrt(),
            red_area_m2: x_zpf2 * (n + 1.0),
            blue_area_m2: x_zpf2 * n,
            ratio: (n + 1.0) / n,
            effective_temperature_k: HBAR_J_S * omega / (BOLTZMANN_J_PER_K * (1.0 / n).ln_1p()),
        }
    }

    /// Electronic frequencies (red, blue) of lines offset ± `offset_hz` from the carrier.
    pub(crate) fn red_blue_hz(&self, offset_hz: f64) -> (f64, f64) {
        if self.lo_above {
            (self.carrier_hz + offset_hz, self.carrier_hz - offset_hz)
        } else {
            (self.carrier_hz - offset_hz, self.carrier_hz + offset_hz)
        }
    }

    pub(crate) fn truth(&self, config: &ScenarioConfig) -> QuantumTruth {
        let cycle = self.cycle_secs();
        let rows = 200;
        QuantumTruth {
            description: format!(
                "stages (s): cryostat {s0}, bath {s1}, laser cooling {s2}, few phonons {s3} \
                 (cycle {cycle} s). Cryostat: w = (exp(-6u) - exp(-6))/(1 - exp(-6)), \
                 u = t/{s0}; T = {tb} + ({ts} - {tb}) w K; f_m = {fb} + ({fs} - {fb}) w Hz; \
                 1/Q = 1/{qb} + (1/{qs} - 1/{qb}) w; gamma_m = f_m/Q. Laser cooling: \
                 gamma_opt = gamma_m ((1 + {go}/gamma_m)^u - 1), u = (t - {c1})/{s2}, \
                 then {go} Hz; gamma_eff = gamma_m + gamma_opt; n_bath = 1/(exp(h f_m/k_B T) - 1); \
                 n_min = (kappa/4 Omega_m)^2 with kappa/2pi = {kappa} Hz; \
                 n = (gamma_m n_bath + gamma_opt n_min)/gamma_eff (Aspelmeyer, Kippenberg & \
                 Marquardt, RMP 86, 1391 (2014), from memory); sideband areas x_zpf^2 (n+1) (red) \
                 and x_zpf^2 n (blue), FWHM gamma_eff. The cryostat stage stands for {lab} h of \
                 lab time (time-lapse).",
                s0 = self.stage_secs[0],
                s1 = self.stage_secs[1],
                s2 = self.stage_secs[2],
                s3 = self.stage_secs[3],
                tb = self.base_temperature_k,
                ts = config.temperature_k,
                fb = self.base_frequency_hz,
                fs = config.frequency_hz,
                qb = self.base_quality_factor,
                qs = config.quality_factor,
                go = self.cooling_damping_hz,
                c1 = self.stage_secs[0] + self.stage_secs[1],
                kappa = self.cavity_linewidth_hz,
                lab = self.cryostat_lab_hours,
            ),
            cycle_secs: cycle,
            stage_secs: self.stage_secs,
            record_start_secs: self.file_start(),
            at_record_start: self.state_at(config, 0.0, false),
            at_record_end: self.state_at(config, config.duration_secs, false),
            cycle_table: (0..=rows)
                .map(|i| self.cycle_state(config, cycle * i as f64 / rows as f64))
                .collect(),
        }
    }
}

/// The `quantum` scenario's sample stream.
pub(crate) struct QuantumStream {
    config: ScenarioConfig,
    params: QuantumParams,
    live: bool,
    fs: f64,
    n: u64,
    red: ThermalOscillator,
    blue: ThermalOscillator,
    red_rng: Rng,
    blue_rng: Rng,
    red_amp: f64,
    blue_amp: f64,
    tones: Vec<Tone>,
    floor_sd_v: f64,
    floor_rng: Rng,
}

impl QuantumStream {
    pub(crate) fn new(config: &ScenarioConfig, live: bool) -> Result<Self> {
        config.validate()?;
        let Some(params) = config.quantum.clone() else {
            return Err(SynthError::Parameter("not a quantum scenario".into()));
        };
        let fs = config.sample_rate_hz;
        let mut phases = Rng::stream(config.seed, STREAM_PHASES);
        let mut tones = vec![Tone::new(
            params.carrier_hz,
            params.carrier_rms_v,
            fs,
            &mut phases,
        )];
        if config.tone_frequency_hz > 0.0 && config.tone_rms_m > 0.0 {
            // Each PM line carries half the tone's equivalent power (module docs).
            let line_rms_v = config.tone_rms_m / config.m_per_v / SQRT_2;
            let (a, b) = params.red_blue_hz(config.tone_frequency_hz);
            tones.push(Tone::new(a, line_rms_v, fs, &mut phases));
            tones.push(Tone::new(b, line_rms_v, fs, &mut phases));
        }
        let p0 = params.state_at(config, 0.0, live);
        let (fr, fb) = params.red_blue_hz(p0.frequency_hz);
        let unit = |f: f64| OscillatorParams {
            frequency_hz: f,
            linewidth_hz: p0.linewidth_hz,
            variance: 1.0,
        };
        let mut red_rng = Rng::stream(config.seed, STREAM_RED);
        let mut blue_rng = Rng::stream(config.seed, STREAM_BLUE);
        let red = ThermalOscillator::new(unit(fr), fs, &mut red_rng)?;
        let blue = ThermalOscillator::new(unit(fb), fs, &mut blue_rng)?;
        let m2 = config.m_per_v * config.m_per_v;
        Ok(Self {
            config: config.clone(),
            live,
            fs,
            n: 0,
            red,
            blue,
            red_rng,
            blue_rng,
            red_amp: (p0.red_area_m2 / m2).sqrt(),
            blue_amp: (p0.blue_area_m2 / m2).sqrt(),
            tones,
            floor_sd_v: (config.floor_v2_per_hz * fs / 2.0).sqrt(),
            floor_rng: Rng::stream(config.seed, STREAM_FLOOR),
            params,
        })
    }

    fn update(&mut self) {
        let t = self.n as f64 / self.fs;
        let p = self.params.state_at(&self.config, t, self.live);
        let (fr, fb) = self.params.red_blue_hz(p.frequency_hz);
        let unit = |f: f64| OscillatorParams {
            frequency_hz: f,
            linewidth_hz: p.linewidth_hz,
            variance: 1.0,
        };
        // Validated at construction; a failure keeps the previous parameters.
        let _ = self.red.set_params(unit(fr));
        let _ = self.blue.set_params(unit(fb));
        let m2 = self.config.m_per_v * self.config.m_per_v;
        self.red_amp = (p.red_area_m2 / m2).sqrt();
        self.blue_amp = (p.blue_area_m2 / m2).sqrt();
    }
}

impl Generator for QuantumStream {
    fn sample_rate_hz(&self) -> f64 {
        self.fs
    }

    fn fill(&mut self, out: &mut [f64]) {
        for sample in out.iter_mut() {
            if self.n > 0
                && self
                    .n
                    .is_multiple_of(super::stream::UPDATE_INTERVAL_SAMPLES as u64)
            {
                self.update();
            }
            let mut v = self.red_amp * self.red.next_sample(&mut self.red_rng)
                + self.blue_amp * self.blue.next_sample(&mut self.blue_rng);
            for t in &mut self.tones {
                v += t.next_sample();
            }
            v += self.floor_sd_v * self.floor_rng.normal();
            *sample = v;
            self.n += 1;
        }
    }
}

/// Every true value of a `quantum` record (validated configuration).
pub(crate) fn truth(config: &ScenarioConfig, q: &QuantumParams) -> super::Truth {
    use super::{SidebandTruth, ToneTruth};
    let m2 = config.m_per_v * config.m_per_v;
    let floor = config.floor_v2_per_hz;
    let qt = q.truth(config);
    let p = qt.at_record_start;
    let side = if q.lo_above { "above" } else { "below" };
    let (red_hz, blue_hz) = q.red_blue_hz(p.frequency_hz);
    let has_tone = config.tone_frequency_hz > 0.0 && config.tone_rms_m > 0.0;
    let (cal_red_hz, cal_blue_hz) = q.red_blue_hz(config.tone_frequency_hz);
    let cal_each = if has_tone {
        (config.tone_rms_m / config.m_per_v).powi(2) / 2.0
    } else {
        0.0
    };
    let line = |label: &str, f: f64, area: f64| {
        resonance_truth(label, "sideband", f, p.linewidth_hz, area, floor)
    };
    let tone_line = tone_truth;
    let mut peaks = vec![
        tone_line(
            "heterodyne carrier",
            "carrier",
            q.carrier_hz,
            q.carrier_rms_v.powi(2),
        ),
        line("red (Stokes) motional sideband", red_hz, p.red_area_m2 / m2),
        line(
            "blue (anti-Stokes) motional sideband",
            blue_hz,
            p.blue_area_m2 / m2,
        ),
    ];
    if has_tone {
        peaks.push(tone_line(
            "PM calibration line, red side",
            "calibration",
            cal_red_hz,
            cal_each,
        ));
        peaks.push(tone_line(
            "PM calibration line, blue side",
            "calibration",
            cal_blue_hz,
            cal_each,
        ));
    }
    peaks.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    let tone = has_tone.then(|| {
        let rms_v = config.tone_rms_m / config.m_per_v;
        ToneTruth {
            frequency_hz: config.tone_frequency_hz,
            rms_m: config.tone_rms_m,
            rms_v,
            power_v2: rms_v * rms_v,
            pm_depth_rad: SQRT_2 * config.tone_rms_m * config.freq_pull_hz_per_m
                / config.tone_frequency_hz,
            freq_pull_hz_per_m: config.freq_pull_hz_per_m,
        }
    });
    let convention = format!(
        "LO {side} the laser: the optical red (Stokes) sideband, carrying n+1, is the electronic \
         line at carrier {} f_m = {red_hz} Hz; the blue (anti-Stokes, n) line is at {blue_hz} Hz \
         (METHODS.md section 6)",
        if q.lo_above { "+" } else { "-" }
    );
    let sidebands = SidebandTruth {
        carrier_hz: q.carrier_hz,
        carrier_rms_v: q.carrier_rms_v,
        lo_side: side.to_string(),
        mechanical_frequency_hz: p.frequency_hz,
        red_frequency_hz: red_hz,
        blue_frequency_hz: blue_hz,
        occupancy: p.occupancy,
        linewidth_hz: p.linewidth_hz,
        x_zpf_m: p.x_zpf_m,
        red_area_m2: p.red_area_m2,
        blue_area_m2: p.blue_area_m2,
        red_area_v2: p.red_area_m2 / m2,
        blue_area_v2: p.blue_area_m2 / m2,
        ratio: p.ratio,
        raw_ratio: p.ratio,
        blue_gain: 1.0,
        calibration_red_frequency_hz: cal_red_hz,
        calibration_blue_frequency_hz: cal_blue_hz,
        calibration_red_power_v2: cal_each,
        calibration_blue_power_v2: cal_each,
        convention,
    };
    let notes = vec![
        "all spectral densities are single-sided in ordinary frequency (integral over f >= 0 = variance)".to_string(),
        "integer WAV: volts = counts / 2^(bits-1) (full scale +-1 V); f32 WAV: volts as written".to_string(),
        format!(
            "white imprecision floor: Gaussian, variance = floor * f_s / 2 = {:e} V^2",
            floor * config.sample_rate_hz / 2.0
        ),
        "each sideband is a unit-variance damped oscillator (exact update) at its electronic frequency, FWHM gamma_eff, scaled by the square root of its area; the two are independent (no classical laser noise, no interference term)".to_string(),
        "sideband areas in m^2 are x_zpf^2 (n+1) (red) and x_zpf^2 n (blue); the PM tone of equivalent rms displacement tone.rms_m puts tone.power_v2/2 in each calibration line at carrier +- f_mod, so m/V = tone.rms_m / sqrt(P_red_cal + P_blue_cal)".to_string(),
        "`sidebands` holds the state at the start of the record; `quantum` the whole cycle".to_string(),
    ];
    super::Truth {
        generator: format!("stillpoint {} synth", env!("CARGO_PKG_VERSION")),
        scenario: config.name.clone(),
        seed: config.seed,
        sample_rate_hz: config.sample_rate_hz,
        duration_secs: config.duration_secs,
        samples: config.sample_count(),
        format: config.format.name().to_string(),
        full_scale_v: 1.0,
        device: format!(
            "invented Si3N4 trampoline mode (m_eff = {:e} kg) in a Fabry-Perot cavity (kappa/2pi = {} Hz): \
             cryostat {} K -> {} K, then resolved-sideband laser cooling (gamma_opt up to {} Hz), \
             read out in heterodyne with the carrier at {} Hz",
            config.mass_kg,
            q.cavity_linewidth_hz,
            config.temperature_k,
            q.base_temperature_k,
            q.cooling_damping_hz,
            q.carrier_hz
        ),
        m_per_v: config.m_per_v,
        floor_v2_per_hz: floor,
        floor_m2_per_hz: floor * m2,
        mode: None,
        tone,
        peaks,
        sidebands: Some(sidebands),
        schedule: None,
        quantum: Some(qt),
        config: config.clone(),
        notes,
    }
}
