//! The rolling spectrum: log-log (or log-dB) plot of the live PSD in the chosen unit with the
//! overlays (fitted mode, zero-point spectrum and its peak level, SQL of the added noise,
//! thermal expectation at the bath temperature, snapshots, fit band, stray-resonance and tone
//! markers). The trace is min/max-decimated to the pixel columns of the current view before
//! drawing, so a 10⁶-bin spectrum costs about a millisecond per frame and narrow lines stay.

use std::ops::RangeInclusive;
use std::sync::Arc;

use eframe::egui::{self, Ui, Vec2b};
use egui_plot::{
    Corner, GridMark, HLine, Legend, Line, LineStyle, MarkerShape, Plot, PlotBounds, PlotPoints,
    Points, Span, VLine,
};

use super::UiCommand;
use super::axes::{format_hz, format_power, frequency_tick, log_spacer, power_tick};
use super::theme;
use crate::model::curves::{ModeShape, grid_around_mode};
use crate::model::state::{
    plot_y, plot_y_from_m2, unit_affine, unit_is_db, unit_is_displacement, unit_label, unit_short,
};
use crate::model::{AppState, LiveState, LoadedSnapshot, MinMaxBlocks, decimate_minmax_with};

/// Plot-side state: view requests, band dragging, cached per-bin y values.
#[derive(Debug, Default)]
pub struct PlotState {
    /// Dragging on the plot sets the fit band.
    pub band_mode: bool,
    /// No hover read-out (screenshots).
    pub quiet: bool,
    band_drag_start: Option<f64>,
    /// Set x bounds (log10 Hz) on the next frame.
    pub request_x: Option<(f64, f64)>,
    /// Whole span on the next frame.
    pub reset_view: bool,
    /// Re-fit the y range to the data in view on the next frame.
    pub reset_y: bool,
    /// Frequency range in view on the last frame, Hz (for "Export figure").
    pub view_hz: Option<(f64, f64)>,
    /// The pointer was over the plot in the last frame (letter shortcuts act only then).
    pub hovered: bool,
    /// Where the plot was drawn in the last frame.
    pub rect: Option<egui::Rect>,
    /// The live trace decimated for the view.
    live_trace: TraceCache,
    /// Each snapshot's trace decimated for the view (in the order of the list).
    snapshot_traces: Vec<TraceCache>,
    /// The legend goes to the top right (the highest point of the trace in view was in the
    /// left half in the last frame), else to the top left: it never covers the mode's peak.
    legend_right: bool,
    view_initialised: bool,
    /// The user has panned or zoomed the plot: the y range is theirs from then on (until a
    /// zoom command or a unit change); before that it follows each new spectrum.
    user_view: bool,
}

/// A min/max-decimated trace ([`decimate_minmax_with`]) kept until its data, the view or the
/// plot's width change: a frame that only redraws (the pointer moves, a panel opens) makes
/// no pass over the bins; a new analysis or a pan or zoom makes exactly one.
#[derive(Debug, Default)]
struct TraceCache {
    /// The data decimated (held, so a new buffer is never mistaken for it).
    data: Option<Arc<Vec<f64>>>,
    view_hz: (f64, f64),
    columns: usize,
    /// `[log10 f, value]`, ascending in f.
    points: Vec<[f64; 2]>,
    /// (min, max) of the points' values.
    range: Option<(f64, f64)>,
}

impl TraceCache {
    /// The decimated points of `values` (on `freqs`) for the view, from the cache when
    /// nothing changed.
    fn update(
        &mut self,
        freqs: &[f64],
        values: &Arc<Vec<f64>>,
        blocks: Option<&MinMaxBlocks>,
        view_hz: (f64, f64),
        columns: usize,
    ) -> &[[f64; 2]] {
        let same = self.data.as_ref().is_some_and(|d| Arc::ptr_eq(d, values))
            && self.view_hz == view_hz
            && self.columns == columns;
        if !same {
            self.points = decimate_minmax_with(freqs, values, blocks, view_hz, columns);
            self.range = self
                .points
                .iter()
                .fold(None, |r: Option<(f64, f64)>, p| {
                    Some(r.map_or((p[1], p[1]), |(a, b)| (a.min(p[1]), b.max(p[1]))))
                })
                .filter(|(a, b)| b > a);
            self.data = Some(Arc::clone(values));
            self.view_hz = view_hz;
            self.columns = columns;
        }
        &self.points
    }

    /// (min, max) of the cached trace mapped by `y = a·v + b` (a > 0).
    fn y_range(&self, (a, b): (f64, f64)) -> Option<(f64, f64)> {
        self.range.map(|(lo, hi)| (a * lo + b, a * hi + b))
    }
}

/// (min, max) of the finite log10 PSD values in a frequency range, mapped to plot y.
fn y_range_in(
    freqs: &[f64],
    logs: &[f64],
    x_hz: (f64, f64),
    affine: (f64, f64),
) -> Option<(f64, f64)> {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    let a = freqs.partition_point(|&f| f < x_hz.0);
    let b = freqs.partition_point(|&f| f <= x_hz.1);
    for &y in logs.get(a..b)? {
        if y.is_finite() {
            lo = lo.min(y);
            hi = hi.max(y);
        }
    }
    let (p, q) = affine;
    (lo.is_finite() && hi > lo).then_some((p * lo + q, p * hi + q))
}

impl PlotState {
    /// Draws the spectrum plot `height` points tall. Returns the commands it asks for.
    pub fn spectrum_ui(
        &mut self,
        ui: &mut Ui,
        height: f32,
        live: &LiveState,
        state: &AppState,
        snapshots: &[LoadedSnapshot],
    ) -> Vec<UiCommand> {
        let mut out = Vec::new();
        let unit = state.unit;
        let frame = live.frame.as_ref();
        let report = frame.and_then(|f| f.report.clone());
        let m_per_v = report
            .as_ref()
            .and_then(|r| r.calibration.m_per_v)
            .filter(|c| c.is_finite() && *c > 0.0);
        let empty = Vec::new();
        let freqs: &[f64] = frame
            .and_then(|f| f.frequencies_hz.as_deref())
            .unwrap_or(&empty);
        let logs_arc: Arc<Vec<f64>> = frame.and_then(|f| f.log_psd.clone()).unwrap_or_default();
        let logs: &[f64] = &logs_arc;
        let blocks = frame.and_then(|f| f.log_psd_blocks.clone());
        let affine = unit_affine(unit, m_per_v);
        let have_data = affine.is_some() && logs.iter().any(|y| y.is_finite());
        if !have_data {
            let text = if unit_is_displacement(unit) && m_per_v.is_none() && !freqs.is_empty() {
                format!(
                    "No calibration yet: {} needs one (choose a method under 'Calibration and \
                     mode', or switch to a voltage unit).",
                    unit_short(unit)
                )
            } else {
                "Waiting for the first averaged spectrum…".to_string()
            };
            let r = ui.allocate_ui(egui::vec2(ui.available_width(), height), |ui| {
                ui.centered_and_justified(|ui| {
                    ui.label(egui::RichText::new(text).color(theme::PENCIL).size(15.0));
                });
            });
            self.hovered = r.response.contains_pointer();
            self.rect = Some(r.response.rect);
            return out;
        }
        let (ya, yb) = affine.unwrap_or((1.0, 0.0));
        let full_x = (
            freqs.get(1).copied().unwrap_or(1.0).log10(),
            freqs.last().copied().unwrap_or(10.0).log10(),
        );
        let db = unit_is_db(unit);
        let band = frame.and_then(|f| f.band_hz);
        let mode = report.as_ref().and_then(|r| {
            let f = r.mode.frequency_hz.filter(|v| v.is_finite() && *v > 0.0)?;
            let g = r.mode.linewidth_hz.filter(|v| v.is_finite() && *v > 0.0)?;
            Some((
                ModeShape {
                    frequency_hz: f,
                    linewidth_hz: g,
                },
                r.mode.variance_v2,
                r.mode.background_psd_v2_per_hz,
            ))
        });
        let mass = state.analysis.mass_kg;
        let bath_t = state.analysis.bath_temperature_k.unwrap_or(0.0);
        let overlays = state.overlays.clone();
        let peaks = report.as_ref().map(|r| r.peaks.clone()).unwrap_or_default();
        let tone = report
            .as_ref()
            .and_then(|r| r.calibration.tone_frequency_hz);
        let sb = report.as_ref().and_then(|r| r.sidebands.clone());
        let sidebands = [
            (
                "red sideband (Stokes, n+1)",
                sb.as_ref().and_then(|s| s.red.frequency_hz),
                theme::SIDEBAND_RED,
            ),
            (
                "blue sideband (anti-Stokes, n)",
                sb.as_ref().and_then(|s| s.blue.frequency_hz),
                theme::SIDEBAND_BLUE,
            ),
        ];
        // In heterodyne the mode's lines sit at carrier ± f_m, not at f_m: no mode curves.
        let heterodyne = state.analysis.carrier_hz.is_some() || sb.is_some();
        // In heterodyne the band is of f_m itself; its lines sit at carrier ± band.
        let carrier = state.analysis.carrier_hz.filter(|c| *c > 0.0);
        let band_spans: Vec<(f64, f64)> = match (band, carrier) {
            (Some((lo, hi)), Some(fc)) => vec![(fc - hi, fc - lo), (fc + lo, fc + hi)],
            (Some(b), None) => vec![b],
            _ => Vec::new(),
        };
        let band_mode = self.band_mode;
        let quiet = self.quiet;
        let mut request_bounds: Option<PlotBounds> = None;
        if !self.view_initialised {
            // Start on the mode region when a band is known (the physics is there), else on
            // the whole span.
            self.view_initialised = true;
            let first = match (band, carrier) {
                (Some((_, hi)), Some(fc)) => Some(((fc - hi).max(1.0), fc + hi)),
                _ => band,
            };
            self.request_x = Some(first.map_or(full_x, |(lo, hi)| {
                let w = hi - lo;
                (
                    (lo - 2.5 * w).max(10f64.powf(full_x.0)).log10(),
                    (hi + 2.5 * w).min(10f64.powf(full_x.1)).log10(),
                )
            }));
        }
        if self.reset_view {
            self.reset_view = false;
            self.request_x = Some(full_x);
        }
        // The lowest reference level drawn (the zero-point peak) stays inside the y range.
        let zp_y = mode.and_then(|(shape, _, _)| {
            let m = mass.filter(|m| *m > 0.0 && overlays.zero_point)?;
            plot_y_from_m2(
                shape.zero_point_m2_per_hz(shape.frequency_hz, m),
                unit,
                m_per_v,
            )
        });
        let with_refs = move |r: Option<(f64, f64)>| {
            r.map(|(a, b)| (zp_y.map_or(a, |z| a.min(z - if db { 5.0 } else { 0.5 })), b))
        };
        if self.request_x.is_some() || self.reset_y {
            self.user_view = false;
        }
        if let Some((x0, x1)) = self.request_x.take() {
            let (y0, y1) = with_refs(y_range_in(
                freqs,
                logs,
                (10f64.powf(x0), 10f64.powf(x1)),
                (ya, yb),
            ))
            .unwrap_or((-1.0, 1.0));
            let pad = if db { 3.0 } else { 0.3 };
            request_bounds = Some(PlotBounds::from_min_max([x0, y0 - pad], [x1, y1 + pad]));
            self.reset_y = false;
        }
        let reset_y = std::mem::take(&mut self.reset_y);
        let mut drag_start = self.band_drag_start;
        let mut band_set: Option<(f64, f64)> = None;
        let mut want_reset = false;
        let mut zoom_to: Option<(f64, f64)> = None;
        let mut hovered = false;
        let mut legend_right = self.legend_right;
        let mut user_view = self.user_view;
        let mut plot_rect = self.rect;

        let y_label = unit_label(unit);
        let y_fmt = move |mark: GridMark, range: &RangeInclusive<f64>| {
            if db {
                format!("{:.0}", mark.value)
            } else {
                power_tick(mark, range)
            }
        };
        let hover_unit = unit_short(unit);
        let mut plot = Plot::new("spectrum")
            .height(height)
            .legend(
                Legend::default()
                    .position(if self.legend_right {
                        Corner::RightTop
                    } else {
                        Corner::LeftTop
                    })
                    .follow_insertion_order(true)
                    .background_alpha(0.85),
            )
            .x_axis_label("frequency")
            .y_axis_label(y_label)
            .x_grid_spacer(log_spacer)
            .x_axis_formatter(frequency_tick)
            .y_axis_formatter(y_fmt)
            .y_axis_min_width(56.0)
            .auto_bounds(Vec2b::new(false, false))
            .allow_double_click_reset(false)
            .allow_drag(!band_mode)
            .allow_boxed_zoom(!band_mode)
            .show_crosshair(!quiet)
            .label_formatter(move |pos| {
                if quiet {
                    return None;
                }
                let p = match pos {
                    egui_plot::HoverPosition::NearDataPoint { position, .. }
                    | egui_plot::HoverPosition::Elsewhere { position } => *position,
                };
                let f = 10f64.powf(p.x);
                let y = if db {
                    format!("{:.1} {hover_unit}", p.y)
                } else {
                    format!("{:.3e} {hover_unit}", 10f64.powf(p.y))
                };
                Some(format!("{}\n{y}", format_hz(f, f * 1e-5)))
            });
        if !db {
            plot = plot.y_grid_spacer(log_spacer);
        }
        plot.show(ui, |pui| {
            if let Some(b) = request_bounds {
                pui.set_plot_bounds(b);
            }
            let bounds = pui.plot_bounds();
            let (x0, x1) = (bounds.min()[0], bounds.max()[0]);
            let view_hz = (10f64.powf(x0), 10f64.powf(x1));
            self.view_hz = Some(view_hz);
            let columns = pui.response().rect.width().max(100.0) as usize;
            // The live trace for this view: decimated once per new spectrum, pan or zoom.
            let new_data = !self
                .live_trace
                .data
                .as_ref()
                .is_some_and(|d| Arc::ptr_eq(d, &logs_arc));
            let mut pts = self
                .live_trace
                .update(freqs, &logs_arc, blocks.as_deref(), view_hz, columns)
                .to_vec();
            for p in &mut pts {
                p[1] = ya * p[1] + yb;
            }
            let in_view = self.live_trace.y_range((ya, yb));
            // Follow the data when the whole trace has left the y range (a cooling mode
            // falls by decades): re-fit as if asked to.
            let (by0, by1) = (bounds.min()[1], bounds.max()[1]);
            let lost = in_view.is_some_and(|(d0, d1)| d1 < by0 + 0.15 * (by1 - by0) || d0 > by1);
            // Until the user pans or zooms, the y range follows every new spectrum (the first
            // one may be a young average with the mode's peak still far below its final height).
            let follow = new_data && !self.user_view;
            if (reset_y || lost || follow)
                && let Some((y0, y1)) = with_refs(in_view)
            {
                let pad = if db { 3.0 } else { 0.3 };
                pui.set_plot_bounds_y(y0 - pad..=y1 + pad);
            }

            // Fit band (shaded) first, so the traces draw over it.
            if overlays.band {
                for &(lo, hi) in band_spans.iter().filter(|(lo, hi)| *lo > 0.0 && hi > lo) {
                    pui.add(
                        Span::new("fit band", lo.log10()..=hi.log10())
                            .fill(theme::BAND)
                            .border_width(0.0),
                    );
                }
            }
            // Snapshots (each decimated once per view, from log10 values made at load).
            if overlays.snapshots {
                self.snapshot_traces
                    .resize_with(snapshots.len(), TraceCache::default);
                for (i, s) in snapshots.iter().filter(|s| s.visible).enumerate() {
                    // A snapshot is drawn in metres only with its own calibration (never the
                    // live source's); an uncalibrated one is left out in metre units and the
                    // snapshot list says so.
                    let Some((sa, sb)) = unit_affine(unit, s.m_per_v) else {
                        continue;
                    };
                    let Some(cache) = self.snapshot_traces.get_mut(i) else {
                        continue;
                    };
                    let mut pts = cache
                        .update(
                            &s.frequencies_hz,
                            &s.log_psd,
                            Some(&s.log_psd_blocks),
                            view_hz,
                            columns,
                        )
                        .to_vec();
                    for p in &mut pts {
                        p[1] = sa * p[1] + sb;
                    }
                    if !pts.is_empty() {
                        let colour = theme::SNAPSHOT_COLOURS[i % theme::SNAPSHOT_COLOURS.len()];
                        pui.line(
                            Line::new(format!("snapshot: {}", s.name), PlotPoints::new(pts))
                                .color(colour)
                                .width(1.0),
                        );
                    }
                }
            }
            // The live trace.
            if let Some(top) = pts.iter().max_by(|a, b| a[1].total_cmp(&b[1])) {
                // Hysteresis: the legend moves only when the peak is clearly on the other side.
                let u = (top[0] - x0) / (x1 - x0);
                if u < 0.4 {
                    legend_right = true;
                } else if u > 0.6 {
                    legend_right = false;
                }
            }
            pui.line(
                Line::new("live spectrum", PlotPoints::new(pts))
                    .color(theme::TRACE)
                    .width(1.3),
            );
            // Reference curves of the fitted mode.
            if let Some((shape, area_v2, background_v2)) = mode.filter(|_| !heterodyne) {
                let grid = grid_around_mode(view_hz, 500, shape);
                let curve = |f: &dyn Fn(f64) -> Option<f64>| -> Vec<[f64; 2]> {
                    grid.iter()
                        .filter_map(|&x| f(x).map(|y| [x.log10(), y]))
                        .collect()
                };
                if overlays.fit
                    && let (Some(a), Some(b)) = (area_v2, background_v2)
                {
                    let (blo, bhi) = band.unwrap_or((
                        shape.frequency_hz - 25.0 * shape.linewidth_hz,
                        shape.frequency_hz + 25.0 * shape.linewidth_hz,
                    ));
                    let pts = curve(&|f| {
                        if f < blo || f > bhi {
                            None
                        } else {
                            plot_y(b + shape.line(f, a), unit, m_per_v)
                        }
                    });
                    pui.line(
                        Line::new("fitted mode", PlotPoints::new(pts))
                            .color(theme::FIT)
                            .width(2.0),
                    );
                }
                if let Some(m) = mass.filter(|m| *m > 0.0) {
                    if overlays.thermal && bath_t > 0.0 {
                        let pts = curve(&|f| {
                            plot_y_from_m2(shape.thermal_m2_per_hz(f, m, bath_t), unit, m_per_v)
                        });
                        pui.line(
                            Line::new(
                                format!("thermal at {bath_t} K (bath)"),
                                PlotPoints::new(pts),
                            )
                            .color(theme::THERMAL)
                            .style(LineStyle::Dashed { length: 8.0 })
                            .width(1.5),
                        );
                    }
                    if overlays.sql {
                        let pts =
                            curve(&|f| plot_y_from_m2(shape.sql_m2_per_hz(f, m), unit, m_per_v));
                        pui.line(
                            Line::new("SQL (added noise)", PlotPoints::new(pts))
                                .color(theme::SQL)
                                .style(LineStyle::Dotted { spacing: 5.0 })
                                .width(1.6),
                        );
                    }
                    if overlays.zero_point {
                        let pts = curve(&|f| {
                            plot_y_from_m2(shape.zero_point_m2_per_hz(f, m), unit, m_per_v)
                        });
                        pui.line(
                            Line::new("zero-point spectrum", PlotPoints::new(pts))
                                .color(theme::ZERO_POINT)
                                .width(1.6),
                        );
                        let peak = shape.zero_point_m2_per_hz(shape.frequency_hz, m);
                        if let Some(y) = plot_y_from_m2(peak, unit, m_per_v) {
                            // The level in the unit of the axis.
                            let label = if db {
                                format!("zero-point peak {y:.1} {}", unit_short(unit))
                            } else {
                                format!(
                                    "zero-point peak {} {}",
                                    format_power_short(10f64.powf(y)),
                                    unit_short(unit)
                                )
                            };
                            pui.add(
                                HLine::new(label, y)
                                    .color(theme::ZERO_POINT)
                                    .style(LineStyle::Dashed { length: 4.0 })
                                    .width(1.0),
                            );
                        }
                    }
                }
            }
            // Motional sidebands of a heterodyne record.
            for (name, f, colour) in &sidebands {
                if let Some(f) = f.filter(|f| *f > 0.0) {
                    pui.add(
                        VLine::new(*name, f.log10())
                            .color(*colour)
                            .style(LineStyle::Dashed { length: 6.0 })
                            .width(1.2),
                    );
                }
            }
            // Calibration tone and stray resonances.
            if let Some(t) = tone.filter(|t| *t > 0.0) {
                pui.add(
                    VLine::new("calibration tone", t.log10())
                        .color(theme::TONE)
                        .style(LineStyle::Dashed { length: 3.0 })
                        .width(1.0),
                );
            }
            let mut markers: Vec<([f64; 2], usize)> = Vec::new();
            if overlays.peaks && !peaks.is_empty() {
                let pts: Vec<[f64; 2]> = peaks
                    .iter()
                    .enumerate()
                    .filter_map(|(i, p)| {
                        let k = freqs.partition_point(|&f| f < p.frequency_hz);
                        let y = (k.saturating_sub(2)..(k + 2).min(logs.len()))
                            .filter_map(|j| logs.get(j).map(|l| ya * l + yb))
                            .filter(|y| y.is_finite())
                            .fold(f64::NEG_INFINITY, f64::max);
                        let xy = [p.frequency_hz.log10(), y + if db { 2.0 } else { 0.15 }];
                        y.is_finite().then(|| {
                            markers.push((xy, i));
                            xy
                        })
                    })
                    .collect();
                pui.points(
                    Points::new("stray resonances", PlotPoints::new(pts))
                        .shape(MarkerShape::Down)
                        .color(theme::PEAK)
                        .filled(true)
                        .radius(4.0),
                );
            }
            // Band dragging; a click on a stray-resonance marker zooms to it.
            let resp = pui.response().clone();
            if !band_mode
                && resp.clicked()
                && overlays.peaks
                && let Some(pointer) = resp.interact_pointer_pos()
            {
                let hit = markers
                    .iter()
                    .filter_map(|(xy, i)| {
                        let at = pui.screen_from_plot(egui_plot::PlotPoint::new(xy[0], xy[1]));
                        let d = at.distance(pointer);
                        (d <= 10.0).then_some((d, peaks.get(*i)?))
                    })
                    .min_by(|a, b| a.0.total_cmp(&b.0));
                if let Some((_, p)) = hit {
                    let resolution = freqs.get(1).copied().unwrap_or(1.0);
                    let half = (30.0 * p.linewidth_hz).max(50.0 * resolution);
                    zoom_to = Some((
                        (p.frequency_hz - half).max(resolution),
                        p.frequency_hz + half,
                    ));
                }
            }
            hovered = resp.contains_pointer();
            let scrolled = hovered
                && pui
                    .ctx()
                    .input(|i| i.smooth_scroll_delta != egui::Vec2::ZERO);
            if resp.dragged() || scrolled {
                user_view = true;
            }
            plot_rect = Some(resp.rect);
            if band_mode {
                if resp.drag_started() {
                    drag_start = pui.pointer_coordinate().map(|p| p.x);
                }
                if let (Some(a), Some(p)) = (drag_start, pui.pointer_coordinate()) {
                    let (lo, hi) = if a <= p.x { (a, p.x) } else { (p.x, a) };
                    pui.add(
                        Span::new("new band", lo..=hi)
                            .fill(egui::Color32::from_rgba_unmultiplied(184, 78, 52, 40))
                            .border_color(theme::FIT),
                    );
                    if resp.drag_stopped() {
                        band_set = Some((10f64.powf(lo), 10f64.powf(hi)));
                        drag_start = None;
                    }
                }
            } else if resp.double_clicked() {
                want_reset = true;
            }
        });
        self.band_drag_start = drag_start;
        self.hovered = hovered;
        self.legend_right = legend_right;
        self.user_view = user_view;
        self.rect = plot_rect;
        if let Some((lo, hi)) = zoom_to {
            out.push(UiCommand::ZoomTo(lo, hi));
        }
        if let Some((lo, hi)) = band_set {
            self.band_mode = false;
            if hi > lo * (1.0 + 1e-7) {
                out.push(UiCommand::SetBand(lo, hi));
            }
        }
        if want_reset {
            self.reset_view = true;
        }
        out
    }
}

fn format_power_short(v: f64) -> String {
    if !(v.is_finite() && v > 0.0) {
        return "—".into();
    }
    let e = v.log10().floor();
    let m = v / 10f64.powf(e);
    if (m - 1.0).abs() < 0.005 {
        format_power(10f64.powf(e))
    } else {
        format!("{m:.2}×{}", format_power(10f64.powf(e)))
    }
}

/// The session's marks (a fit band set by hand, a gap in a live stream) as thin vertical
/// lines on a plot whose x axis is the session time (the trend strips).
pub fn session_marks(pui: &mut egui_plot::PlotUi<'_>, live: &LiveState) {
    for m in &live.marks {
        pui.add(
            VLine::new(m.text.clone(), m.time_s)
                .color(theme::WARN)
                .style(LineStyle::Dashed { length: 4.0 })
                .width(1.0),
        );
    }
}

/// A small colour bar for the waterfall: the colour scale from `range_log_v2` (log10 of
/// V²/Hz at the two ends) with its ends labelled in the display unit (V²/Hz when the unit
/// needs a calibration that is not there).
pub fn colour_bar(
    ui: &mut Ui,
    range_log_v2: (f64, f64),
    unit: Option<(crate::dsp::units::DensityUnit, Option<f64>)>,
) {
    use crate::dsp::units::DensityUnit;
    let (unit, m_per_v) = unit.unwrap_or((DensityUnit::V2PerHz, None));
    let (unit, (a, b)) = match unit_affine(unit, m_per_v) {
        Some(ab) => (unit, ab),
        None => (DensityUnit::V2PerHz, (1.0, 0.0)),
    };
    let label = |log_v2: f64| {
        let y = a * log_v2 + b;
        if unit_is_db(unit) {
            format!("{y:.0}")
        } else {
            format_power_short(10f64.powf(y))
        }
    };
    ui.label(egui::RichText::new(label(range_log_v2.0)).size(12.0));
    let (rect, _) = ui.allocate_exact_size(egui::vec2(120.0, 12.0), egui::Sense::hover());
    let steps = 40;
    let w = rect.width() / steps as f32;
    for i in 0..steps {
        let u = (i as f32 + 0.5) / steps as f32;
        let r = egui::Rect::from_min_size(
            egui::pos2(rect.min.x + i as f32 * w, rect.min.y),
            egui::vec2(w + 0.5, rect.height()),
        );
        ui.painter().rect_filled(r, 0.0, theme::waterfall_colour(u));
    }
    ui.label(
        egui::RichText::new(format!("{} {}", label(range_log_v2.1), unit_short(unit))).size(12.0),
    );
}
