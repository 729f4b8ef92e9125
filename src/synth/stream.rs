//! The sample stream of a scenario (the [`Generator`] behind [`ScenarioConfig::build`]) and
//! the truth that describes it. Every component has its own random stream
//! ([`Rng::stream`]), and every time-dependent parameter changes at fixed sample indices, so
//! the samples do not depend on how [`Generator::fill`] is called.

use std::f64::consts::{PI, SQRT_2, TAU};

use super::oscillator::{OscillatorParams, ThermalOscillator};
use super::rng::Rng;
use super::{
    Generator, PeakTruth, Result, ScenarioConfig, SchedulePoint, ScheduleTruth, SidebandTruth,
    StrayLine, ToneTruth, Truth, mode_truth,
};

/// Samples between updates of a scheduled (cooldown) mode: 256 samples ≈ 1 ms at 250 kHz,
/// far shorter than any change of the schedule and than the mode's 1/Γ.
pub(crate) const UPDATE_INTERVAL_SAMPLES: usize = 256;

/// RNG stream indices (fixed, so adding a component does not disturb the others).
const STREAM_MODE: u64 = 1;
const STREAM_FLOOR: u64 = 2;
const STREAM_PHASES: u64 = 3;
const STREAM_RED: u64 = 4;
const STREAM_BLUE: u64 = 5;
const STREAM_STRAYS: u64 = 100;

/// A sine of fixed frequency and rms with a random start phase (carrier, calibration tones,
/// mains lines); also the `quantum` scenario's carrier and PM lines.
pub(crate) struct Tone {
    step_cycles: f64,
    phase_cycles: f64,
    amplitude_v: f64,
}

impl Tone {
    pub(crate) fn new(
        frequency_hz: f64,
        rms_v: f64,
        sample_rate_hz: f64,
        phases: &mut Rng,
    ) -> Self {
        Self {
            step_cycles: frequency_hz / sample_rate_hz,
            phase_cycles: phases.uniform(),
            amplitude_v: SQRT_2 * rms_v,
        }
    }

    pub(crate) fn next_sample(&mut self) -> f64 {
        let v = self.amplitude_v * (TAU * self.phase_cycles).sin();
        self.phase_cycles += self.step_cycles;
        if self.phase_cycles >= 1.0 {
            self.phase_cycles -= 1.0;
        }
        v
    }
}

struct Line {
    osc: ThermalOscillator,
    rng: Rng,
}

/// The mode of a cooldown, whose parameters follow the schedule.
struct Scheduled {
    config: ScenarioConfig,
    live: bool,
}

pub(crate) struct Stream {
    sample_rate_hz: f64,
    n: u64,
    mode: Option<Line>,
    schedule: Option<Scheduled>,
    lines: Vec<Line>,
    tones: Vec<Tone>,
    floor_sd_v: f64,
    floor_rng: Rng,
}

/// Oscillator parameters (in volts) of the mode at time t.
fn mode_params(config: &ScenarioConfig, t_secs: f64, live: bool) -> OscillatorParams {
    let (temperature, frequency, q) = config.schedule_at(t_secs, live);
    let m = mode_truth(config.mass_kg, frequency, q, temperature, config.m_per_v);
    OscillatorParams {
        frequency_hz: m.frequency_hz,
        linewidth_hz: m.linewidth_hz,
        variance: m.variance_v2,
    }
}

/// Area (V²) of a stray resonance of the given height over the floor.
fn stray_area_v2(floor_v2_per_hz: f64, linewidth_hz: f64, height_db: f64) -> f64 {
    let peak = floor_v2_per_hz * (10_f64.powf(height_db / 10.0) - 1.0);
    peak.max(0.0) * PI * linewidth_hz / 2.0
}

/// rms (V) of mains harmonic n: fundamental/n for odd n, fundamental/(4n) for even n.
fn mains_rms_v(fundamental_rms_v: f64, n: usize) -> f64 {
    let n_f = n as f64;
    if n % 2 == 1 {
        fundamental_rms_v / n_f
    } else {
        fundamental_rms_v / (4.0 * n_f)
    }
}

/// Electronic frequencies (red, blue) of a pair of lines offset ± `offset_hz` from the
/// carrier: LO above the laser → red (Stokes) at carrier + offset (METHODS §6).
fn red_blue(carrier_hz: f64, offset_hz: f64, lo_above: bool) -> (f64, f64) {
    if lo_above {
        (carrier_hz + offset_hz, carrier_hz - offset_hz)
    } else {
        (carrier_hz - offset_hz, carrier_hz + offset_hz)
    }
}

/// The truth of a Lorentzian line of FWHM `g` and area `area` (V²) over a floor (V²/Hz):
/// its peak 2·area/(πg) and height over the floor.
pub(crate) fn resonance_truth(
    label: &str,
    kind: &str,
    frequency_hz: f64,
    g: f64,
    area: f64,
    floor: f64,
) -> PeakTruth {
    let peak = 2.0 * area / (PI * g);
    PeakTruth {
        label: label.to_string(),
        kind: kind.to_string(),
        frequency_hz,
        linewidth_hz: g,
        area_v2: area,
        peak_psd_v2_per_hz: Some(peak),
        height_over_floor_db: (floor > 0.0).then(|| 10.0 * ((floor + peak) / floor).log10()),
    }
}

/// The truth of a pure tone of power `power` (V²).
pub(crate) fn tone_truth(label: &str, kind: &str, frequency_hz: f64, power: f64) -> PeakTruth {
    PeakTruth {
        label: label.to_string(),
        kind: kind.to_string(),
        frequency_hz,
        linewidth_hz: 0.0,
        area_v2: power,
        peak_psd_v2_per_hz: None,
        height_over_floor_db: None,
    }
}

impl Stream {
    pub(crate) fn new(config: &ScenarioConfig, live: bool) -> Result<Self> {
        config.validate()?;
        let fs = config.sample_rate_hz;
        let seed = config.seed;
        let mut phases = Rng::stream(seed, STREAM_PHASES);
        let mut mode = None;
        let mut schedule = None;
        let mut lines = Vec::new();
        let mut tones = Vec::new();
        let tone_v = config.tone_rms_m / config.m_per_v;
        if let Some(h) = &config.heterodyne {
            tones.push(Tone::new(h.carrier_hz, h.carrier_rms_v, fs, &mut phases));
            let m = mode_truth(
                config.mass_kg,
                config.frequency_hz,
                config.quality_factor,
                config.temperature_k,
                config.m_per_v,
            );
            let x_zpf2_v2 = (m.x_zpf_m / config.m_per_v).powi(2);
            let (red_hz, blue_hz) = red_blue(h.carrier_hz, config.frequency_hz, h.lo_above);
            for (index, f, area) in [
                (STREAM_RED, red_hz, x_zpf2_v2 * (h.occupancy + 1.0)),
                (STREAM_BLUE, blue_hz, x_zpf2_v2 * h.occupancy * h.blue_gain),
            ] {
                let mut rng = Rng::stream(seed, index);
                let osc = ThermalOscillator::new(
                    OscillatorParams {
                        frequency_hz: f,
                        linewidth_hz: h.linewidth_hz,
                        variance: area,
                    },
                    fs,
                    &mut rng,
                )?;
                lines.push(Line { osc, rng });
            }
            if config.tone_frequency_hz > 0.0 && config.tone_rms_m > 0.0 {
                let (red_hz, blue_hz) =
                    red_blue(h.carrier_hz, config.tone_frequency_hz, h.lo_above);
                let rms_each = tone_v / SQRT_2;
                tones.push(Tone::new(red_hz, rms_each, fs, &mut phases));
                tones.push(Tone::new(
                    blue_hz,
                    rms_each * h.blue_gain.sqrt(),
                    fs,
                    &mut phases,
                ));
            }
        } else {
            let mut rng = Rng::stream(seed, STREAM_MODE);
            let osc = ThermalOscillator::new(mode_params(config, 0.0, live), fs, &mut rng)?;
            mode = Some(Line { osc, rng });
            if config.cooldown.is_some() {
                schedule = Some(Scheduled {
                    config: config.clone(),
                    live,
                });
            }
            if config.tone_frequency_hz > 0.0 && config.tone_rms_m > 0.0 {
                tones.push(Tone::new(config.tone_frequency_hz, tone_v, fs, &mut phases));
            }
        }
        for n in 1..=config.mains_harmonics {
            let rms = mains_rms_v(config.mains_rms_v, n);
            if rms > 0.0 {
                tones.push(Tone::new(config.mains_hz * n as f64, rms, fs, &mut phases));
            }
        }
        for (i, s) in config.strays.iter().enumerate() {
            match s {
                StrayLine::Resonance {
                    frequency_hz,
                    linewidth_hz,
                    height_over_floor_db,
                    ..
                } => {
                    let mut rng = Rng::stream(seed, STREAM_STRAYS + i as u64);
                    let area =
                        stray_area_v2(config.floor_v2_per_hz, *linewidth_hz, *height_over_floor_db);
                    let osc = ThermalOscillator::new(
                        OscillatorParams {
                            frequency_hz: *frequency_hz,
                            linewidth_hz: *linewidth_hz,
                            variance: area,
                        },
                        fs,
                        &mut rng,
                    )?;
                    lines.push(Line { osc, rng });
                }
                StrayLine::Tone {
                    frequency_hz,
                    rms_v,
                    ..
                } => tones.push(Tone::new(*frequency_hz, *rms_v, fs, &mut phases)),
            }
        }
        Ok(Self {
            sample_rate_hz: fs,
            n: 0,
            mode,
            schedule,
            lines,
            tones,
            // White noise of one-sided density B sampled at f_s has variance B f_s / 2.
            floor_sd_v: (config.floor_v2_per_hz * fs / 2.0).sqrt(),
            floor_rng: Rng::stream(seed, STREAM_FLOOR),
        })
    }
}

impl Generator for Stream {
    fn sample_rate_hz(&self) -> f64 {
        self.sample_rate_hz
    }

    fn fill(&mut self, out: &mut [f64]) {
        for sample in out.iter_mut() {
            if let (Some(s), Some(m)) = (&self.schedule, &mut self.mode)
                && self.n > 0
                && self.n.is_multiple_of(UPDATE_INTERVAL_SAMPLES as u64)
            {
                let t = self.n as f64 / self.sample_rate_hz;
                // The schedule was validated at construction; a failure here is impossible in
                // practice and would keep the previous parameters.
                let _ = m.osc.set_params(mode_params(&s.config, t, s.live));
            }
            let mut v = 0.0;
            if let Some(m) = &mut self.mode {
                v += m.osc.next_sample(&mut m.rng);
            }
            for l in &mut self.lines {
                v += l.osc.next_sample(&mut l.rng);
            }
            for t in &mut self.tones {
                v += t.next_sample();
            }
            v += self.floor_sd_v * self.floor_rng.normal();
            *sample = v;
            self.n += 1;
        }
    }
}

/// Builds the truth of a (validated) configuration.
pub(crate) fn truth(config: &ScenarioConfig) -> Truth {
    let m_per_v = config.m_per_v;
    let floor = config.floor_v2_per_hz;
    let mut peaks = Vec::new();
    let mut notes = vec![
        "all spectral densities are single-sided in ordinary frequency (integral over f >= 0 = variance)".to_string(),
        "integer WAV: volts = counts / 2^(bits-1) (full scale +-1 V); f32 WAV: volts as written".to_string(),
        format!(
            "white imprecision floor: Gaussian, variance = floor * f_s / 2 = {:e} V^2",
            floor * config.sample_rate_hz / 2.0
        ),
        "the mode is a damped oscillator integrated exactly (2-D Ornstein-Uhlenbeck update) with variance x_zpf^2 (2n+1)".to_string(),
    ];
    let resonance = |label: &str, kind: &str, f: f64, g: f64, area: f64| {
        resonance_truth(label, kind, f, g, area, floor)
    };
    let tone_peak = tone_truth;
    let has_tone = config.tone_frequency_hz > 0.0 && config.tone_rms_m > 0.0;
    let tone = has_tone.then(|| {
        let rms_v = config.tone_rms_m / m_per_v;
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
    let mut mode = None;
    let mut sidebands = None;
    let mut schedule = None;
    let device;
    if let Some(h) = &config.heterodyne {
        device = format!(
            "invented Si3N4 trampoline mode (m_eff = {:e} kg, f_m = {} Hz, intrinsic Q = {:e}) \
             in a dilution refrigerator at {} K, sideband-cooled to n = {} (linewidth {} Hz), \
             read out in heterodyne: the photocurrent beat note sits at {} Hz",
            config.mass_kg,
            config.frequency_hz,
            config.quality_factor,
            config.temperature_k,
            h.occupancy,
            h.linewidth_hz,
            h.carrier_hz
        );
        let m = mode_truth(
            config.mass_kg,
            config.frequency_hz,
            config.quality_factor,
            config.temperature_k,
            m_per_v,
        );
        let x_zpf2 = m.x_zpf_m * m.x_zpf_m;
        let (red_hz, blue_hz) = red_blue(h.carrier_hz, config.frequency_hz, h.lo_above);
        let red_area_m2 = x_zpf2 * (h.occupancy + 1.0);
        let blue_area_m2 = x_zpf2 * h.occupancy;
        let red_area_v2 = red_area_m2 / (m_per_v * m_per_v);
        let blue_area_v2 = blue_area_m2 / (m_per_v * m_per_v) * h.blue_gain;
        let (cal_red_hz, cal_blue_hz) =
            red_blue(h.carrier_hz, config.tone_frequency_hz, h.lo_above);
        let cal_each = if has_tone {
            (config.tone_rms_m / m_per_v).powi(2) / 2.0
        } else {
            0.0
        };
        let side = if h.lo_above { "above" } else { "below" };
        let convention = format!(
            "LO {side} the laser: the optical red (Stokes) sideband, carrying n+1, is the electronic \
             line at carrier {} f_m = {red_hz} Hz; the blue (anti-Stokes, n) line is at {blue_hz} Hz \
             (METHODS.md section 6)",
            if h.lo_above { "+" } else { "-" }
        );
        peaks.push(tone_peak(
            "heterodyne carrier",
            "carrier",
            h.carrier_hz,
            h.carrier_rms_v.powi(2),
        ));
        peaks.push(resonance(
            "red (Stokes) motional sideband",
            "sideband",
            red_hz,
            h.linewidth_hz,
            red_area_v2,
        ));
        peaks.push(resonance(
            "blue (anti-Stokes) motional sideband",
            "sideband",
            blue_hz,
            h.linewidth_hz,
            blue_area_v2,
        ));
        if has_tone {
            peaks.push(tone_peak(
                "PM calibration line, red side",
                "calibration",
                cal_red_hz,
                cal_each,
            ));
            peaks.push(tone_peak(
                "PM calibration line, blue side",
                "calibration",
                cal_blue_hz,
                cal_each * h.blue_gain,
            ));
        }
        notes.push(
            "sideband areas in m^2 are x_zpf^2 (n+1) (red) and x_zpf^2 n (blue): a classical \
             displacement of variance <x^2> would put <x^2>/2 in each; the PM tone of equivalent \
             rms displacement tone.rms_m puts tone.power_v2/2 in each calibration line"
                .to_string(),
        );
        notes.push(
            "the sidebands are simulated as two independent damped-oscillator lines at their \
             electronic frequencies (no classical laser noise, no interference term)"
                .to_string(),
        );
        sidebands = Some(SidebandTruth {
            carrier_hz: h.carrier_hz,
            carrier_rms_v: h.carrier_rms_v,
            lo_side: side.to_string(),
            mechanical_frequency_hz: config.frequency_hz,
            red_frequency_hz: red_hz,
            blue_frequency_hz: blue_hz,
            occupancy: h.occupancy,
            linewidth_hz: h.linewidth_hz,
            x_zpf_m: m.x_zpf_m,
            red_area_m2,
            blue_area_m2,
            red_area_v2,
            blue_area_v2,
            ratio: (h.occupancy + 1.0) / h.occupancy,
            raw_ratio: (h.occupancy + 1.0) / (h.occupancy * h.blue_gain),
            blue_gain: h.blue_gain,
            calibration_red_frequency_hz: cal_red_hz,
            calibration_blue_frequency_hz: cal_blue_hz,
            calibration_red_power_v2: cal_each,
            calibration_blue_power_v2: cal_each * h.blue_gain,
            convention,
        });
    } else {
        let m0 = config.mode_at(0.0, false);
        device = match config.name.as_str() {
            "cooldown" => format!(
                "invented Si3N4 trampoline fundamental mode (m_eff = {:e} kg) in a Fabry-Perot \
                 cavity, read out with a photodetector, while the cryostat cools from {} K",
                config.mass_kg, config.temperature_k
            ),
            _ => format!(
                "invented Si3N4 trampoline fundamental mode (m_eff = {:e} kg, f_m = {} Hz, Q = {}) \
                 at {} K in a Fabry-Perot cavity, read out with a photodetector",
                config.mass_kg, config.frequency_hz, config.quality_factor, config.temperature_k
            ),
        };
        if let Some(m) = &m0 {
            peaks.push(resonance(
                "mechanical mode",
                "mode",
                m.frequency_hz,
                m.linewidth_hz,
                m.variance_v2,
            ));
        }
        mode = m0;
        if let (Some(c), Some(cycle)) = (&config.cooldown, config.cycle_secs(false)) {
            let rows = 200_usize;
            let step = config.duration_secs / rows as f64;
            let table = (0..=rows)
                .filter_map(|i| {
                    let t = step * i as f64;
                    config
                        .mode_at(t, false)
                        .map(|mode| SchedulePoint { time_secs: t, mode })
                })
                .collect();
            schedule = Some(ScheduleTruth {
                description: format!(
                    "t_c = t mod {cycle} s; u = min(t_c / {cooling} s, 1); \
                     w = (exp(-k u) - exp(-k)) / (1 - exp(-k)) with k = {k}; \
                     T = {tb} + ({ts} - {tb}) w K; f_m = {fb} + ({fs} - {fb}) w Hz; \
                     1/Q = 1/{qb} + (1/{qs} - 1/{qb}) w; <x^2> = x_zpf^2 (2n+1) at (T, f_m). \
                     The simulated mode takes these values every {UPDATE_INTERVAL_SAMPLES} \
                     samples and relaxes to them at its damping rate.",
                    cooling = cycle * (1.0 - c.hold_fraction),
                    k = c.shape_constant,
                    tb = c.base_temperature_k,
                    ts = config.temperature_k,
                    fb = c.base_frequency_hz,
                    fs = config.frequency_hz,
                    qb = c.base_quality_factor,
                    qs = config.quality_factor,
                ),
                cycle_secs: cycle,
                cooling_secs: cycle * (1.0 - c.hold_fraction),
                update_interval_samples: UPDATE_INTERVAL_SAMPLES,
                table,
            });
            notes.push(
                "cooldown: `mode` gives the values at t = 0; `schedule.table` the true values over the record"
                    .to_string(),
            );
        }
        if let Some(t) = &tone {
            peaks.push(tone_peak(
                "calibration tone",
                "calibration",
                t.frequency_hz,
                t.power_v2,
            ));
            notes.push(format!(
                "calibration tone: equivalent rms displacement {:e} m, i.e. a phase-modulation \
                 tone of depth beta = {:e} rad for G/2pi = {:e} Hz/m (x_cal,pk = beta f_mod / |G/2pi|, METHODS.md 5b)",
                t.rms_m, t.pm_depth_rad, t.freq_pull_hz_per_m
            ));
        }
    }
    for n in 1..=config.mains_harmonics {
        let rms = mains_rms_v(config.mains_rms_v, n);
        if rms > 0.0 {
            peaks.push(tone_peak(
                &format!("mains harmonic {n}"),
                "mains",
                config.mains_hz * n as f64,
                rms * rms,
            ));
        }
    }
    for s in &config.strays {
        match s {
            StrayLine::Resonance {
                label,
                frequency_hz,
                linewidth_hz,
                height_over_floor_db,
            } => peaks.push(resonance(
                label,
                "resonance",
                *frequency_hz,
                *linewidth_hz,
                stray_area_v2(floor, *linewidth_hz, *height_over_floor_db),
            )),
            StrayLine::Tone {
                label,
                frequency_hz,
                rms_v,
            } => peaks.push(tone_peak(label, "tone", *frequency_hz, rms_v * rms_v)),
        }
    }
    peaks.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    Truth {
        generator: format!("stillpoint {} synth", env!("CARGO_PKG_VERSION")),
        scenario: config.name.clone(),
        seed: config.seed,
        sample_rate_hz: config.sample_rate_hz,
        duration_secs: config.duration_secs,
        samples: config.sample_count(),
        format: config.format.name().to_string(),
        full_scale_v: 1.0,
        device,
        m_per_v,
        floor_v2_per_hz: floor,
        floor_m2_per_hz: floor * m_per_v * m_per_v,
        mode,
        tone,
        peaks,
        sidebands,
        schedule,
        quantum: None,
        config: config.clone(),
        notes,
    }
}
