//! The two-detector view (a source read with a second channel, `monitor --cross-channel J`):
//! on the left both channels' PSDs with the magnitude of the cross-spectral density and the
//! residual that uncorrelated noise leaves after K_eff averages; on the right the real part
//! of the cross-spectral density on a linear scale, with the ±1σ band of uncorrelated noise
//! and the mode fitted on it, and below it the coherence with its 5 % noise level. When more
//! averaging stops lowering the residual below the line, the view shows it: the band shrinks
//! as 1/√K_eff while a common line stays.
//!
//! The curves are prepared by [`crate::model::cross_curves`] (no egui there) once per new
//! cross-spectrum, not once per frame.

use std::sync::Arc;

use eframe::egui::{self, RichText, Ui, Vec2b};
use egui_plot::{HLine, Line, LineStyle, Plot, PlotPoints, Polygon, VLine};

use super::axes::{format_sig, log_spacer, power_tick};
use super::theme;
use crate::dsp::cross::CrossSpectrum;
use crate::model::LiveState;
use crate::model::cross_curves::{CrossCurves, cross_curves};
use crate::physics::oscillator::{lorentzian_psd, oscillator_psd};
use crate::report::Report;

/// Columns the curves are reduced to (about one per screen pixel of a wide plot).
const COLUMNS: usize = 1600;

/// Channel b's trace.
const CHANNEL_B: egui::Color32 = egui::Color32::from_rgb(120, 150, 80);
/// The cross-spectrum's trace.
const CROSS: egui::Color32 = egui::Color32::from_rgb(150, 60, 140);
/// The uncorrelated residual.
const RESIDUAL: egui::Color32 = egui::Color32::from_rgb(150, 146, 138);

/// The view's cache: the curves of the newest cross-spectrum over the range shown.
/// What the cached curves were made from: the cross-spectrum and the report (their
/// addresses) and the range shown (bits of its ends).
type CacheKey = (usize, usize, Option<(u64, u64)>);

#[derive(Default)]
pub struct CrossViewState {
    key: Option<CacheKey>,
    curves: CrossCurves,
    band: InBand,
}

/// The right-hand plots' points inside the fit band (all bins without one): made with the
/// curves, not per frame.
#[derive(Default)]
struct InBand {
    /// Re P_ab.
    re: Vec<[f64; 2]>,
    /// The ±1σ band of uncorrelated noise as a closed polygon.
    sigma_polygon: Vec<[f64; 2]>,
    /// The fitted mode on Re P_ab.
    fit: Option<Vec<[f64; 2]>>,
    /// The coherence.
    coherence: Vec<[f64; 2]>,
}

impl InBand {
    /// Only the fit band: a calibration tone or another common line outside it would set
    /// the linear scales and flatten the mode.
    fn new(c: &CrossCurves, fit: Option<Vec<[f64; 2]>>, fit_band: Option<(f64, f64)>) -> Self {
        let inside = |p: &&[f64; 2]| fit_band.is_none_or(|(lo, hi)| p[0] >= lo && p[0] <= hi);
        let sigma: Vec<&[f64; 2]> = c.re_sigma.iter().filter(inside).collect();
        Self {
            re: c.re.iter().filter(inside).copied().collect(),
            sigma_polygon: sigma
                .iter()
                .map(|p| [p[0], p[1]])
                .chain(sigma.iter().rev().map(|p| [p[0], -p[1]]))
                .collect(),
            fit: fit.map(|points| points.iter().filter(inside).copied().collect()),
            coherence: c.coherence.iter().filter(inside).copied().collect(),
        }
    }
}

impl CrossViewState {
    /// Draws the view in `height` points if the newest frame holds a cross-spectrum.
    pub fn ui(&mut self, ui: &mut Ui, height: f32, live: &LiveState) {
        let Some(frame) = live.frame.as_ref() else {
            return;
        };
        let Some(cross) = frame.cross.as_ref() else {
            ui.label("two detectors: waiting for the first averaged segment of both channels");
            return;
        };
        let report = frame.report.as_deref();
        // Around the fit band (three band widths) when there is one, else everything.
        let range = frame.band_hz.map(|(lo, hi)| {
            let w = hi - lo;
            ((lo - w).max(0.0), hi + w)
        });
        let key = (
            Arc::as_ptr(cross) as usize,
            frame.report.as_ref().map_or(0, |r| Arc::as_ptr(r) as usize),
            range.map(|(a, b)| (a.to_bits(), b.to_bits())),
        );
        if self.key != Some(key) {
            self.curves = cross_curves(cross, range, COLUMNS);
            let fit = fit_curve(cross, report, self.curves.range_hz);
            self.band = InBand::new(&self.curves, fit, frame.band_hz);
            self.key = Some(key);
        }
        let (a, b) = frame.cross_channels.unwrap_or((0, 1));
        header(ui, &self.curves, report, a, b);
        let h = (height - 40.0).max(120.0);
        ui.columns(2, |cols| {
            if let [left, right] = cols {
                spectra_plot(left, h, &self.curves, a, b);
                re_plot(right, 0.58 * h, &self.band, report);
                coherence_plot(right, 0.42 * h - 4.0, &self.curves, &self.band, report);
            }
        });
    }
}

/// One line: channels, K_eff, coherence at the mode against its noise level, the residual.
fn header(ui: &mut Ui, c: &CrossCurves, report: Option<&Report>, a: usize, b: usize) {
    let cross = report.and_then(|r| r.cross.as_ref());
    let mut text = format!(
        "Two detectors: channel {a} (a) × channel {b} (b), K_eff {:.0}",
        c.k_eff
    );
    if let Some(coh) = cross.and_then(|x| x.coherence_at_mode) {
        let common = if coh > c.coherence_threshold {
            "common to both"
        } else {
            "not above noise"
        };
        text.push_str(&format!(
            " · coherence at the mode {coh:.3} (uncorrelated noise exceeds {:.3} in 5 % of bins: {common})",
            c.coherence_threshold
        ));
    }
    if let Some(r) = cross.and_then(|x| x.residual_floor_v2_per_hz) {
        text.push_str(&format!(
            " · uncorrelated residual at the mode {} V²/Hz, falls as 1/√K_eff",
            format_sig(r, 2)
        ));
    }
    ui.label(RichText::new(text).color(theme::INK));
}

/// A legend above a plot, out of the data's way: one coloured name per curve.
fn legend_row(ui: &mut Ui, entries: &[(egui::Color32, String)]) {
    ui.horizontal_wrapped(|ui| {
        ui.spacing_mut().item_spacing.x = 10.0;
        for (colour, name) in entries {
            ui.label(RichText::new(format!("━ {name}")).color(*colour).small());
        }
    });
}

fn spectra_plot(ui: &mut Ui, height: f32, c: &CrossCurves, a: usize, b: usize) {
    legend_row(
        ui,
        &[
            (theme::TRACE, format!("channel {a} (a)")),
            (CHANNEL_B, format!("channel {b} (b)")),
            (CROSS, "|cross-spectrum|".into()),
            (
                RESIDUAL,
                "uncorrelated residual √(Pa·Pb/K_eff) (dashed)".into(),
            ),
        ],
    );
    Plot::new("cross_spectra")
        .height(height - 18.0)
        .x_axis_label("frequency (Hz)")
        .y_axis_label("V²/Hz")
        .y_grid_spacer(log_spacer)
        .y_axis_formatter(power_tick)
        .auto_bounds(Vec2b::new(true, true))
        .allow_scroll(false)
        .show(ui, |pui| {
            pui.line(
                Line::new(format!("channel {a} (a)"), PlotPoints::new(c.psd_a.clone()))
                    .color(theme::TRACE)
                    .width(1.0),
            );
            pui.line(
                Line::new(format!("channel {b} (b)"), PlotPoints::new(c.psd_b.clone()))
                    .color(CHANNEL_B)
                    .width(1.0),
            );
            pui.line(
                Line::new("|cross-spectrum|", PlotPoints::new(c.magnitude.clone()))
                    .color(CROSS)
                    .width(1.4),
            );
            pui.line(
                Line::new(
                    "uncorrelated residual √(Pa·Pb/K_eff)",
                    PlotPoints::new(c.residual.clone()),
                )
                .color(RESIDUAL)
                .style(LineStyle::Dashed { length: 6.0 })
                .width(1.2),
            );
        });
}

/// The fitted mode on Re P_ab (background + line, with the sign of the data), V²/Hz.
fn fit_curve(
    cross: &CrossSpectrum,
    report: Option<&Report>,
    range: (f64, f64),
) -> Option<Vec<[f64; 2]>> {
    let m = &report?.mode;
    // A resolution-limited line: the kernel fit's own γ (linewidth_hz is then an upper bound).
    let gamma = m.linewidth_kernel_fit_hz.or(m.linewidth_hz)?;
    let (area, f_m) = (m.variance_v2?, m.frequency_hz?);
    let background = m.background_psd_v2_per_hz.unwrap_or(0.0);
    // The fit ran on −Re P_ab when the detectors' gains have opposite signs.
    let k = (f_m / cross.a.resolution_hz).round() as usize;
    let sign = match cross.csd_re_v2_per_hz.get(k) {
        Some(v) if *v < 0.0 => -1.0,
        _ => 1.0,
    };
    let lorentzian = m.line_shape.as_deref() == Some("lorentzian");
    let (lo, hi) = range;
    Some(
        (0..=600)
            .map(|i| {
                let f = lo + (hi - lo) * f64::from(i) / 600.0;
                let line = if lorentzian {
                    lorentzian_psd(f, area, f_m, gamma)
                } else {
                    oscillator_psd(f, area, f_m, gamma)
                };
                [f, sign * (background + line)]
            })
            .collect(),
    )
}

fn re_plot(ui: &mut Ui, height: f32, in_band: &InBand, report: Option<&Report>) {
    legend_row(
        ui,
        &[
            (CROSS, "Re cross-spectrum".into()),
            (theme::FIT, "mode fitted on Re".into()),
            (RESIDUAL, "±1σ of uncorrelated noise (shaded)".into()),
        ],
    );
    Plot::new("cross_re")
        .height(height - 18.0)
        .y_axis_label("Re P_ab (V²/Hz)")
        .auto_bounds(Vec2b::new(true, true))
        .allow_scroll(false)
        .show(ui, |pui| {
            if !in_band.sigma_polygon.is_empty() {
                pui.polygon(
                    Polygon::new(
                        "±1σ of uncorrelated noise",
                        PlotPoints::new(in_band.sigma_polygon.clone()),
                    )
                    .fill_color(egui::Color32::from_rgba_unmultiplied(150, 146, 138, 50))
                    .stroke(egui::Stroke::NONE),
                );
            }
            pui.line(
                Line::new("Re cross-spectrum", PlotPoints::new(in_band.re.clone()))
                    .color(CROSS)
                    .width(1.0),
            );
            if let Some(points) = &in_band.fit {
                pui.line(
                    Line::new("mode fitted on Re", PlotPoints::new(points.clone()))
                        .color(theme::FIT)
                        .width(1.8),
                );
            }
            if let Some(f) = report.and_then(|r| r.mode.frequency_hz) {
                pui.vline(VLine::new("", f).color(theme::PENCIL).width(0.6));
            }
        });
}

/// The coherence in the fit band, on a scale that shows a weak coherence next to its noise
/// level.
fn coherence_plot(
    ui: &mut Ui,
    height: f32,
    c: &CrossCurves,
    in_band: &InBand,
    report: Option<&Report>,
) {
    legend_row(
        ui,
        &[
            (CROSS, "coherence".into()),
            (
                RESIDUAL,
                format!(
                    "5 % noise level {:.3} (dashed): uncorrelated bins exceed it 1 time in 20",
                    c.coherence_threshold
                ),
            ),
        ],
    );
    Plot::new("cross_coherence")
        .height((height - 18.0).max(70.0))
        .x_axis_label("frequency (Hz)")
        .y_axis_label("coherence")
        .include_y(0.0)
        .include_y(2.0 * c.coherence_threshold)
        .auto_bounds(Vec2b::new(true, true))
        .allow_scroll(false)
        .show(ui, |pui| {
            pui.line(
                Line::new("coherence", PlotPoints::new(in_band.coherence.clone()))
                    .color(CROSS)
                    .width(1.0),
            );
            pui.hline(
                HLine::new(
                    format!("5 % noise level ({:.3})", c.coherence_threshold),
                    c.coherence_threshold,
                )
                .color(RESIDUAL)
                .style(LineStyle::Dashed { length: 6.0 }),
            );
            if let Some(f) = report.and_then(|r| r.mode.frequency_hz) {
                pui.vline(VLine::new("", f).color(theme::PENCIL).width(0.6));
            }
        });
}
