//! The sideband view of a heterodyne source: both motional sidebands on one axis of
//! frequency offset from the carrier (optical red = Stokes, n̄+1; optical blue = anti-Stokes,
//! n̄; METHODS §6), their fits, the zero-point level of the red line, the areas with 1σ, R and
//! n̄ ± σ, the trend of the occupancy from the calibrated areas next to the one from the
//! asymmetry, and the heterodyne set-up (carrier, LO side, band) in one place. The side of the
//! local oscillator is never assumed: until the user chooses it the analysis waits and says so.
//!
//! Also the demo's settings ([`demo_settings`]): the `quantum` scenario of the synthesiser
//! (cryostat to 4 K, then sideband laser cooling to a few phonons).

use eframe::egui::{self, RichText, Ui, Vec2b};
use egui_plot::{Corner, Legend, Line, LineStyle, Plot, PlotPoints};

use super::axes::{format_hz, format_sig, log_spacer, power_tick};
use super::theme;
use crate::acquire::{SourceConfig, SourceSpec};
use crate::analysis::AnalysisOptions;
use crate::dsp::{Averaging, WelchConfig};
use crate::model::engine::Frame;
use crate::model::{AppState, LiveState};
use crate::synth::ScenarioConfig;
use crate::synth::quantum::QuantumPoint;

/// The scenario the demo runs.
pub const DEMO_SCENARIO: &str = "quantum";

/// Shown while a carrier is set and the LO side is not.
pub const LO_SIDE_PROMPT: &str = "Choose the side of the local oscillator (above or below the \
     laser): it decides which sideband is the optical red one, carrying n+1. The sideband \
     analysis waits for this choice.";

/// Half-width of the demo's band of f_m (Hz): ±4 cooled linewidths, clear of the PM lines.
const DEMO_BAND_HALF_HZ: f64 = 8_000.0;

/// Welch settings and calibration of the demo, all from the scenario's definition.
pub fn demo_settings() -> (Option<WelchConfig>, AnalysisOptions) {
    let mut a = AnalysisOptions::default();
    let Ok(s) = ScenarioConfig::defaults(DEMO_SCENARIO) else {
        return (None, a);
    };
    let Some(q) = &s.quantum else {
        return (None, a);
    };
    a.carrier_hz = Some(q.carrier_hz);
    a.lo_above = Some(q.lo_above);
    a.tone_frequency_hz = Some(s.tone_frequency_hz);
    a.tone_rms_m = Some(s.tone_rms_m);
    a.mass_kg = Some(s.mass_kg);
    a.bath_temperature_k = Some(q.base_temperature_k);
    a.mode_band_hz = Some((
        q.base_frequency_hz - DEMO_BAND_HALF_HZ,
        q.base_frequency_hz + DEMO_BAND_HALF_HZ,
    ));
    // 3.8 Hz bins, 0.26 s segments, exponential averaging over ~8 segments (~1 s): quick to
    // follow the cooling; the cold intrinsic line (mHz) is read by band sums (METHODS §2c).
    let mut w = WelchConfig::new(s.sample_rate_hz, 131_072);
    w.averaging = Averaging::Exponential {
        time_constant_segments: 8.0,
    };
    (Some(w), a)
}

/// The demo's source name: `quantum`, or `quantum@SECS` when the environment variable
/// `STILLPOINT_DEMO_AT` asks to start SECS seconds into the cycle (screenshots of the later
/// stages; the screen says where in the cycle it is).
pub fn demo_scenario_name() -> String {
    match std::env::var("STILLPOINT_DEMO_AT")
        .ok()
        .and_then(|v| v.trim().parse::<f64>().ok())
        .filter(|t| t.is_finite() && *t > 0.0)
    {
        Some(t) => format!("{DEMO_SCENARIO}@{t}"),
        None => DEMO_SCENARIO.to_string(),
    }
}

/// The demo's true state at `t_secs` of its stream (for the on-screen comparison), for a
/// source named `quantum` or `quantum@START`.
pub fn demo_truth_at(scenario: &str, t_secs: f64) -> Option<(QuantumPoint, ScenarioConfig)> {
    let start = match scenario.split_once('@') {
        Some((DEMO_SCENARIO, t)) => t.trim().parse::<f64>().ok()?,
        None if scenario == DEMO_SCENARIO => 0.0,
        _ => return None,
    };
    let s = ScenarioConfig::defaults(DEMO_SCENARIO).ok()?;
    let mut q = s.quantum.clone()?;
    q.live_start_secs = start;
    let mut p = q.state_at(&s, t_secs, true);
    p.time_secs = t_secs + start;
    Some((p, s))
}

/// One point of the sideband trend.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SidebandPoint {
    /// Seconds since the engine started.
    pub time_s: f64,
    /// R = red/blue (imbalance-corrected).
    pub ratio: Option<(f64, f64)>,
    /// n̄ = 1/(R − 1) with σ.
    pub from_ratio: Option<(f64, f64)>,
    /// n̄ from the calibrated areas with σ.
    pub from_areas: Option<(f64, f64)>,
}

/// State of the sideband view: its trend history.
#[derive(Debug, Default)]
pub struct SidebandViewState {
    generation: u64,
    history: Vec<SidebandPoint>,
}

/// At most this many trend points; when full every other one is dropped.
const HISTORY_CAPACITY: usize = 4096;

impl SidebandViewState {
    /// Takes the sideband numbers of a frame that carries a new trend point.
    pub fn observe(&mut self, frame: &Frame) {
        if frame.generation != self.generation {
            self.generation = frame.generation;
            self.history.clear();
        }
        let pair = |v: Option<f64>, s: Option<f64>| {
            v.filter(|x| x.is_finite())
                .map(|x| (x, s.filter(|y| y.is_finite()).unwrap_or(0.0)))
        };
        // Each history interval's own analysis (the same intervals as the trend strips).
        for entry in &frame.history {
            let (Some(tp), Some(r)) = (&entry.trend, &entry.report) else {
                continue;
            };
            let Some(sb) = &r.sidebands else {
                continue;
            };
            self.history.push(SidebandPoint {
                time_s: tp.time_s,
                ratio: pair(sb.ratio, sb.ratio_uncertainty),
                from_ratio: pair(sb.occupancy, sb.occupancy_uncertainty),
                from_areas: pair(r.quantum.occupancy, r.quantum.occupancy_uncertainty),
            });
        }
        if self.history.len() > HISTORY_CAPACITY {
            let mut keep = false;
            self.history.retain(|_| {
                keep = !keep;
                keep
            });
        }
    }

    /// The trend points held (tests read them).
    pub fn history(&self) -> &[SidebandPoint] {
        &self.history
    }

    /// Draws the view `height` points tall.
    pub fn ui(
        &mut self,
        ui: &mut Ui,
        height: f32,
        live: &LiveState,
        state: &AppState,
        source: &SourceConfig,
    ) {
        let top = ui.cursor().top();
        let cal = &state.analysis;
        let frame = live.frame.as_ref();
        let report = frame.and_then(|f| f.report.clone());
        let sb = report.as_ref().and_then(|r| r.sidebands.clone());
        ui.horizontal_wrapped(|ui| {
            ui.label(RichText::new("Sidebands").strong().size(15.0));
            ui.label(RichText::new(setup_text(state, frame)).color(theme::PENCIL));
        });
        if cal.carrier_hz.is_some() && cal.lo_above.is_none() {
            ui.label(RichText::new(LO_SIDE_PROMPT).color(theme::WARN).strong());
        }
        if let Some(text) = demo_stage_text(source, frame) {
            ui.label(RichText::new(text).color(theme::PENCIL));
        }
        if let Some(sb) = &sb
            && let (Some(r), Some(s)) = (sb.ratio, sb.ratio_uncertainty)
            && r < 1.0
            && r + s < 1.0
        {
            let (red, blue) = if cal.lo_above == Some(false) {
                ("lower", "upper")
            } else {
                ("upper", "lower")
            };
            ui.label(
                RichText::new(format!(
                    "The data contradict the chosen LO side: the {red} line, taken as the optical \
                     red (Stokes) one that carries n+1, is weaker than the {blue} line \
                     (R = {} ± {}, {:.1}σ below 1). Check which side of the laser the local \
                     oscillator is on, and the detection balance of the two sides.",
                    format_sig(r, 4),
                    format_sig(s, 2),
                    (1.0 - r) / s
                ))
                .color(theme::ERROR)
                .strong(),
            );
        }
        // The plots take what the lines above left of `height` (they never push the views
        // below out of the window).
        let used = ui.cursor().top() - top;
        let h = (height - used).max(110.0);
        ui.horizontal_top(|ui| {
            let w = (ui.available_width() * 0.42).max(240.0);
            ui.vertical(|ui| {
                ui.set_width(w);
                overlay_plot(ui, h, live, state);
            });
            let w2 = (ui.available_width() * 0.55).max(200.0);
            ui.vertical(|ui| {
                ui.set_width(w2);
                self.trend_plot(ui, h);
            });
            ui.vertical(|ui| numbers_ui(ui, live));
        });
    }

    fn trend_plot(&self, ui: &mut Ui, height: f32) {
        ui.label(RichText::new("occupancy n over time (log scale)").small());
        let series = |pick: &dyn Fn(&SidebandPoint) -> Option<(f64, f64)>| -> Vec<[f64; 2]> {
            self.history
                .iter()
                .filter_map(|p| {
                    let (v, _) = pick(p)?;
                    (v > 0.0).then(|| [p.time_s, v.log10()])
                })
                .collect()
        };
        let areas = series(&|p| p.from_areas);
        let ratio = series(&|p| p.from_ratio);
        Plot::new("sideband_trend")
            .height(height - 18.0)
            .legend(Legend::default().position(Corner::RightTop))
            .x_axis_label("time (s)")
            .y_axis_label("n")
            .y_grid_spacer(log_spacer)
            .y_axis_formatter(power_tick)
            .auto_bounds(Vec2b::new(true, true))
            .allow_drag(false)
            .allow_scroll(false)
            .show(ui, |pui| {
                pui.line(
                    Line::new("n from calibrated areas", PlotPoints::new(areas))
                        .color(theme::OCCUPANCY_AREA)
                        .width(1.8),
                );
                pui.line(
                    Line::new("n = 1/(R−1), asymmetry", PlotPoints::new(ratio))
                        .color(theme::OCCUPANCY_RATIO)
                        .style(LineStyle::Dashed { length: 6.0 })
                        .width(1.8),
                );
            });
    }
}

/// Carrier, LO side and band in one line.
fn setup_text(state: &AppState, frame: Option<&Frame>) -> String {
    let cal = &state.analysis;
    let carrier = cal.carrier_hz.map_or("carrier —".to_string(), |c| {
        format!("carrier {}", format_hz(c, 1.0))
    });
    let lo = match cal.lo_above {
        Some(true) => "LO above the laser: red (Stokes, n+1) = carrier + f_m".to_string(),
        Some(false) => "LO below the laser: red (Stokes, n+1) = carrier − f_m".to_string(),
        None => "LO side not chosen".to_string(),
    };
    let band = frame
        .and_then(|f| f.band_hz)
        .or(cal.mode_band_hz)
        .map_or("band of f_m —".to_string(), |(a, b)| {
            format!("band of f_m {} – {}", format_hz(a, 1.0), format_hz(b, 1.0))
        });
    format!("{carrier} · {lo} · {band}")
}

/// "Demo stage …" with the scenario's truth, for the built-in demo.
fn demo_stage_text(source: &SourceConfig, frame: Option<&Frame>) -> Option<String> {
    let SourceSpec::Demo { scenario, .. } = &source.spec else {
        return None;
    };
    let status = &frame?.status;
    if status.sample_rate_hz.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return None;
    }
    let t = status.samples as f64 / status.sample_rate_hz;
    let (p, s) = demo_truth_at(scenario, t)?;
    let q = s.quantum?;
    Some(format!(
        "Demo (invented device), {:.0} s into a {:.0} s cycle: {}. Truth: bath {} K, f_m {}, \
         γ_eff {} Hz (γ_m {} Hz + γ_opt {} Hz), n = {}. The cryostat stage is a time-lapse: \
         its {:.0} s stand for {} h of lab time.",
        p.time_secs.rem_euclid(q.cycle_secs()),
        q.cycle_secs(),
        p.stage.describe(),
        format_sig(p.bath_temperature_k, 3),
        format_hz(p.frequency_hz, 1.0),
        format_sig(p.linewidth_hz, 3),
        format_sig(p.intrinsic_linewidth_hz, 2),
        format_sig(p.optical_damping_hz, 3),
        format_sig(p.occupancy, 3),
        q.stage_secs[0],
        q.cryostat_lab_hours
    ))
}

fn pm(v: Option<f64>, s: Option<f64>, digits: usize) -> String {
    match (v, s) {
        (Some(v), Some(s)) if s.is_finite() && s > 0.0 => {
            format!("{} ± {}", format_sig(v, digits), format_sig(s, 2))
        }
        (Some(v), _) => format_sig(v, digits),
        _ => "—".into(),
    }
}

/// Areas, R, n̄ (both ways), γ.
fn numbers_ui(ui: &mut Ui, live: &LiveState) {
    let report = live.frame.as_ref().and_then(|f| f.report.clone());
    let Some(r) = report else {
        ui.label("waiting for an analysis…");
        return;
    };
    let Some(sb) = &r.sidebands else {
        ui.label("no sideband fit");
        return;
    };
    let c2 = r
        .calibration
        .m_per_v
        .filter(|c| c.is_finite() && *c > 0.0)
        .map(|c| c * c);
    let area = |v: Option<f64>, s: Option<f64>| match c2 {
        Some(c2) => format!("{} m²", pm(v.map(|x| x * c2), s.map(|x| x * c2), 3)),
        None => format!("{} V²", pm(v, s, 3)),
    };
    egui::Grid::new("sideband_numbers")
        .num_columns(2)
        .striped(true)
        .show(ui, |ui| {
            let mut row = |name: &str, value: String, colour: egui::Color32| {
                ui.label(RichText::new(name).color(colour));
                ui.label(RichText::new(value).monospace());
                ui.end_row();
            };
            row(
                "red area (n+1)",
                area(sb.red.area_v2, sb.red.area_v2_uncertainty),
                theme::SIDEBAND_RED,
            );
            row(
                "blue area (n)",
                area(sb.blue.area_v2, sb.blue.area_v2_uncertainty),
                theme::SIDEBAND_BLUE,
            );
            row(
                "R = red/blue",
                pm(sb.ratio, sb.ratio_uncertainty, 4),
                theme::INK,
            );
            row(
                "n = 1/(R−1)",
                pm(sb.occupancy, sb.occupancy_uncertainty, 3),
                theme::OCCUPANCY_RATIO,
            );
            row(
                "n from areas",
                pm(r.quantum.occupancy, r.quantum.occupancy_uncertainty, 3),
                theme::OCCUPANCY_AREA,
            );
            row(
                "γ_eff (FWHM)",
                match sb.linewidth_hz {
                    Some(g) => format!("{} Hz", pm(Some(g), sb.linewidth_hz_uncertainty, 4)),
                    None => "< ENBW (not resolved)".into(),
                },
                theme::INK,
            );
            row(
                "f_m",
                sb.mechanical_frequency_hz
                    .map_or("—".into(), |f| format_hz(f, 0.1)),
                theme::INK,
            );
            if let Some(x) = r.quantum.x_zpf_m {
                row("x_zpf", format!("{} m", format_sig(x, 3)), theme::INK);
            }
        });
}

/// Both sidebands against their offset from the carrier, with fits and the red line's
/// zero-point level (area x_zpf², the same width): y in m²/Hz when calibrated, else V²/Hz.
fn overlay_plot(ui: &mut Ui, height: f32, live: &LiveState, state: &AppState) {
    let cal = &state.analysis;
    let frame = live.frame.as_ref();
    let spectrum = frame.and_then(|f| f.spectrum.clone());
    let report = frame.and_then(|f| f.report.clone());
    let (Some(fc), Some(spec)) = (cal.carrier_hz, spectrum) else {
        ui.label("no spectrum yet");
        return;
    };
    let band = frame
        .and_then(|f| f.band_hz)
        .or(cal.mode_band_hz)
        .filter(|(a, b)| *a >= 0.0 && b > a);
    let Some((lo, hi)) = band else {
        ui.label("set a band of f_m to see the sidebands");
        return;
    };
    let m_per_v = report
        .as_ref()
        .and_then(|r| r.calibration.m_per_v)
        .filter(|c| c.is_finite() && *c > 0.0);
    let c2 = m_per_v.map_or(1.0, |c| c * c);
    let unit = if m_per_v.is_some() {
        "m²/Hz"
    } else {
        "V²/Hz"
    };
    let df = spec.resolution_hz;
    let psd = &spec.psd_v2_per_hz;
    // upper = carrier + offset, lower = carrier − offset.
    let side = |sign: f64| -> Vec<[f64; 2]> {
        let mut pts: Vec<[f64; 2]> = psd
            .iter()
            .enumerate()
            .filter_map(|(k, &p)| {
                let off = sign * (k as f64 * df - fc);
                (off >= lo && off <= hi && p > 0.0 && p.is_finite())
                    .then(|| [off, (p * c2).log10()])
            })
            .collect();
        pts.sort_by(|a, b| a[0].total_cmp(&b[0]));
        pts
    };
    let (red_sign, blue_sign) = match cal.lo_above {
        Some(false) => (-1.0, 1.0),
        _ => (1.0, -1.0),
    };
    let chosen = cal.lo_above.is_some();
    let red_pts = side(red_sign);
    let blue_pts = side(blue_sign);
    let sb = report.as_ref().and_then(|r| r.sidebands.clone());
    let x_zpf = report.as_ref().and_then(|r| r.quantum.x_zpf_m);
    let grid: Vec<f64> = (0..=400)
        .map(|i| lo + (hi - lo) * i as f64 / 400.0)
        .collect();
    let lorentz = |area: f64, centre: f64, fwhm: f64, off: f64| {
        area * (fwhm / (2.0 * std::f64::consts::PI))
            / ((off - centre).powi(2) + (fwhm / 2.0).powi(2))
    };
    let fit_curve = |line: &crate::report::SidebandLine, g: f64| -> Option<Vec<[f64; 2]>> {
        let (a, f, b) = (
            line.area_v2?,
            line.frequency_hz?,
            line.background_psd_v2_per_hz?,
        );
        let centre = (f - fc).abs();
        Some(
            grid.iter()
                .filter_map(|&o| {
                    let y = (b + lorentz(a, centre, g, o)) * c2;
                    (y > 0.0).then(|| [o, y.log10()])
                })
                .collect(),
        )
    };
    ui.label(
        RichText::new(format!(
            "both sidebands vs offset from the carrier ({unit}); upper = carrier + offset"
        ))
        .small(),
    );
    Plot::new("sideband_overlay")
        .height(height - 18.0)
        .legend(
            Legend::default()
                .position(Corner::LeftTop)
                .follow_insertion_order(true)
                .background_alpha(0.85),
        )
        .x_axis_label("offset from carrier (Hz)")
        .y_axis_label(unit)
        .y_grid_spacer(log_spacer)
        .y_axis_formatter(power_tick)
        .auto_bounds(Vec2b::new(true, true))
        .allow_drag(false)
        .allow_scroll(false)
        .show(ui, |pui| {
            let (red_name, blue_name) = if chosen {
                ("red (Stokes, n+1)", "blue (anti-Stokes, n)")
            } else {
                (
                    "upper line (LO side not chosen)",
                    "lower line (LO side not chosen)",
                )
            };
            pui.line(
                Line::new(red_name, PlotPoints::new(red_pts))
                    .color(theme::SIDEBAND_RED)
                    .width(1.2),
            );
            pui.line(
                Line::new(blue_name, PlotPoints::new(blue_pts))
                    .color(theme::SIDEBAND_BLUE)
                    .width(1.2),
            );
            if let Some(sb) = &sb
                && let Some(g) = sb.linewidth_hz.filter(|g| *g > 0.0)
            {
                if let Some(pts) = fit_curve(&sb.red, g) {
                    pui.line(
                        Line::new("red fit", PlotPoints::new(pts))
                            .color(theme::SIDEBAND_RED_FIT)
                            .style(LineStyle::Dashed { length: 10.0 })
                            .width(2.0),
                    );
                }
                if let Some(pts) = fit_curve(&sb.blue, g) {
                    pui.line(
                        Line::new("blue fit", PlotPoints::new(pts))
                            .color(theme::SIDEBAND_BLUE_FIT)
                            .style(LineStyle::Dashed { length: 4.0 })
                            .width(2.0),
                    );
                }
                // The red line at n = 0 (area x_zpf², METHODS §4/§6) over the red background.
                if let (Some(x), Some(m), Some(b), Some(f)) = (
                    x_zpf,
                    m_per_v,
                    sb.red.background_psd_v2_per_hz,
                    sb.red.frequency_hz,
                ) {
                    let centre = (f - fc).abs();
                    let a_v2 = x * x / (m * m);
                    let pts: Vec<[f64; 2]> = grid
                        .iter()
                        .filter_map(|&o| {
                            let y = (b + lorentz(a_v2, centre, g, o)) * c2;
                            (y > 0.0).then(|| [o, y.log10()])
                        })
                        .collect();
                    let peak = 2.0 * x * x / (std::f64::consts::PI * g);
                    pui.line(
                        Line::new(
                            format!(
                                "zero-point: red line at n = 0 (peak {} m²/Hz over the floor)",
                                format_sig(peak, 3)
                            ),
                            PlotPoints::new(pts),
                        )
                        .color(theme::ZERO_POINT)
                        .style(LineStyle::Dotted { spacing: 4.0 })
                        .width(1.6),
                    );
                }
            }
        });
}
