//! The cooldown view: the waterfall (log PSD against log frequency and time, newest at the
//! top) as a texture that is updated one row at a time, and trend strips of the fitted f_m,
//! γ, Q, n̄ and T_eff (both on log axes: a cooldown spans 10⁷ → 10⁰) and m/V against elapsed
//! time (ticks in s, min or h as the session grows), with a reopened journal dashed beside
//! them.

use eframe::egui::{
    self, Color32, ColorImage, Rect, RichText, Sense, TextureHandle, TextureOptions, Ui, pos2, vec2,
};
use egui_plot::{Line, Plot, PlotPoints};

use super::axes::{format_hz, frequency_tick, log_spacer};
use super::theme;
use crate::model::{LiveState, TrendBuffer};

/// Texture and bookkeeping of the waterfall.
#[derive(Default)]
pub struct HistoryViewState {
    texture: Option<TextureHandle>,
    /// (waterfall epoch, rows pushed) the texture holds.
    shown: Option<(u64, u64)>,
    /// Colour range (log10 PSD) the texture was painted with.
    range: Option<(f32, f32)>,
    /// Ring row where the newest row sits.
    head: usize,
    columns: usize,
    rows: usize,
    /// Display unit and calibration for the colour bar (set by the app each frame).
    pub colour_unit: Option<(crate::dsp::units::DensityUnit, Option<f64>)>,
}

impl std::fmt::Debug for HistoryViewState {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("HistoryViewState")
            .field("shown", &self.shown)
            .finish_non_exhaustive()
    }
}

fn colour_row(values: &[f32], range: (f32, f32)) -> Vec<Color32> {
    let (lo, hi) = range;
    let span = (hi - lo).max(1e-3);
    values
        .iter()
        .map(|v| theme::waterfall_colour((v - lo) / span))
        .collect()
}

impl HistoryViewState {
    /// Brings the texture up to date: a full repaint when the grid or the colour range
    /// changed a lot, else only the rows that are new (`set_partial`).
    fn update_texture(&mut self, ctx: &egui::Context, live: &LiveState) {
        let wf = &live.waterfall;
        let Some(last) = wf.rows().back() else {
            self.texture = None;
            self.shown = None;
            return;
        };
        let columns = last.log_psd.len().max(1);
        let rows = wf.capacity();
        let now = (wf.epoch(), wf.pushed());
        if self.shown == Some(now) {
            return;
        }
        let range = wf.value_range().unwrap_or((0.0, 1.0));
        let range_moved = self
            .range
            .is_none_or(|(a, b)| (a - range.0).abs() > 0.5 || (b - range.1).abs() > 0.5);
        let same_grid = self.columns == columns
            && self.rows == rows
            && self.shown.is_some_and(|(e, _)| e == now.0)
            && self.texture.is_some();
        let new_rows = self
            .shown
            .map_or(u64::MAX, |(_, p)| now.1.saturating_sub(p));
        if same_grid && !range_moved && (new_rows as usize) < wf.rows().len() {
            let range = self.range.unwrap_or(range);
            let held = wf.rows().len();
            let first_new = held.saturating_sub(new_rows as usize);
            for r in wf.rows().iter().skip(first_new) {
                self.head = (self.head + 1) % rows;
                let img = ColorImage::new([columns, 1], colour_row(&r.log_psd, range));
                if let Some(t) = self.texture.as_mut() {
                    t.set_partial([0, self.head], img, TextureOptions::NEAREST);
                }
            }
        } else {
            // Full repaint: oldest row at ring index 0, newest at `held − 1`.
            let mut pixels = vec![Color32::from_rgb(244, 241, 234); columns * rows];
            for (i, r) in wf.rows().iter().enumerate() {
                let row = colour_row(&r.log_psd, range);
                let start = i * columns;
                if let Some(dst) = pixels.get_mut(start..start + columns.min(row.len())) {
                    dst.copy_from_slice(&row[..dst.len()]);
                }
            }
            let img = ColorImage::new([columns, rows], pixels);
            self.head = wf.rows().len().saturating_sub(1);
            match self.texture.as_mut() {
                Some(t) if self.columns == columns && self.rows == rows => {
                    t.set(img, TextureOptions::NEAREST);
                }
                _ => {
                    self.texture =
                        Some(ctx.load_texture("waterfall", img, TextureOptions::NEAREST));
                }
            }
            self.range = Some(range);
            self.columns = columns;
            self.rows = rows;
        }
        self.shown = Some(now);
    }

    /// The waterfall and the trend strips side by side.
    pub fn ui(&mut self, ui: &mut Ui, live: &LiveState, compare: Option<&TrendBuffer>) {
        self.update_texture(ui.ctx(), live);
        let h = ui.available_height().max(120.0);
        ui.horizontal_top(|ui| {
            let w = (ui.available_width() * 0.5).max(200.0);
            ui.vertical(|ui| {
                ui.set_width(w);
                self.waterfall_ui(ui, live, h);
            });
            ui.vertical(|ui| trends_ui(ui, live, compare, h));
        });
    }

    fn waterfall_ui(&self, ui: &mut Ui, live: &LiveState, height: f32) {
        let wf = &live.waterfall;
        let held = wf.rows().len();
        let span_s = match (wf.rows().front(), wf.rows().back()) {
            (Some(a), Some(b)) => b.time_s - a.time_s,
            _ => 0.0,
        };
        ui.label(
            RichText::new(format!(
                "Waterfall — log PSD, newest at the top, {held} rows over {span_s:.0} s"
            ))
            .strong(),
        );
        let size = vec2(ui.available_width(), (height - 44.0).max(60.0));
        let (rect, resp) = ui.allocate_exact_size(size, Sense::hover());
        let painter = ui.painter_at(rect);
        painter.rect_filled(rect, 2.0, theme::PLOT_BG);
        let (Some(tex), Some(last)) = (&self.texture, wf.rows().back()) else {
            painter.text(
                rect.center(),
                egui::Align2::CENTER_CENTER,
                "rows appear once a second",
                egui::FontId::proportional(13.0),
                theme::PENCIL,
            );
            return;
        };
        let rows = self.rows.max(1) as f32;
        let held_f = held as f32;
        // Newest row (ring index head) at the top, going back in time downwards: the ring is
        // drawn as up to two pieces with vertically flipped uv.
        let row_h = rect.height() / held_f.max(1.0);
        let head = self.head as f32;
        // piece 1: ring rows head, head−1, … 0 → top part
        let n1 = (head + 1.0).min(held_f);
        let top = Rect::from_min_size(rect.min, vec2(rect.width(), row_h * n1));
        let uv1 = Rect::from_min_max(
            pos2(0.0, (head + 1.0) / rows),
            pos2(1.0, (head + 1.0 - n1) / rows),
        );
        painter.image(tex.id(), top, uv1, Color32::WHITE);
        let n2 = held_f - n1;
        if n2 > 0.0 {
            let bottom =
                Rect::from_min_size(pos2(rect.min.x, top.max.y), vec2(rect.width(), row_h * n2));
            let uv2 = Rect::from_min_max(pos2(0.0, 1.0), pos2(1.0, (rows - n2) / rows));
            painter.image(tex.id(), bottom, uv2, Color32::WHITE);
        }
        // Frequency ticks under the image (log axis; round frequencies when narrow).
        let (lo, hi) = last.range_hz;
        let (llo, lhi) = (lo.log10(), hi.log10());
        let axis_y = rect.max.y;
        let range = llo..=lhi;
        let marks = log_spacer(egui_plot::GridInput {
            bounds: (llo, lhi),
            base_step_size: (lhi - llo) / f64::from(rect.width().max(1.0)),
        });
        let mut last_label_x = f32::NEG_INFINITY;
        for m in marks {
            let text = frequency_tick(m, &range);
            if text.is_empty() {
                continue;
            }
            let x = rect.min.x + rect.width() * ((m.value - llo) / (lhi - llo)) as f32;
            painter.line_segment(
                [pos2(x, axis_y - 6.0), pos2(x, axis_y)],
                egui::Stroke::new(1.0, theme::INK),
            );
            if x - last_label_x > 70.0 && x > rect.min.x + 30.0 && x < rect.max.x - 30.0 {
                painter.text(
                    pos2(x, axis_y - 7.0),
                    egui::Align2::CENTER_BOTTOM,
                    text,
                    egui::FontId::proportional(11.0),
                    theme::INK,
                );
                last_label_x = x;
            }
        }
        ui.horizontal(|ui| {
            ui.label(
                RichText::new(format!(
                    "{} … {} (log)",
                    format_hz(lo, lo),
                    format_hz(hi, hi * 0.01)
                ))
                .small(),
            );
            if let Some((a, b)) = self.range {
                super::plot::colour_bar(ui, (f64::from(a), f64::from(b)), self.colour_unit);
            }
        });
        if let Some(p) = resp.hover_pos() {
            let u = f64::from((p.x - rect.min.x) / rect.width());
            let f = 10f64.powf(llo + u * (lhi - llo));
            let k = ((p.y - rect.min.y) / row_h) as usize;
            if let Some(r) = held.checked_sub(1 + k).and_then(|i| wf.rows().get(i)) {
                let age = last.time_s - r.time_s;
                resp.on_hover_text(format!("{} · {age:.0} s ago", format_hz(f, f * 1e-4)));
            }
        }
    }
}

/// Time axis label in s, min or h by the span shown (a session grows from seconds to hours).
pub fn time_tick(value_s: f64, span_s: f64) -> String {
    if span_s < 300.0 {
        format!("{value_s:.0} s")
    } else if span_s < 3.0 * 3600.0 {
        let m = value_s / 60.0;
        if span_s < 1200.0 {
            format!("{m:.1} min")
        } else {
            format!("{m:.0} min")
        }
    } else {
        format!("{:.1} h", value_s / 3600.0)
    }
}

/// Tick label of a log10 axis: powers of ten (2× and 5× when zoomed in), plain values when
/// less than a decade is shown.
fn log_tick(mark: egui_plot::GridMark, range: &std::ops::RangeInclusive<f64>) -> String {
    let text = super::axes::power_tick(mark, range);
    if text.is_empty() && range.end() - range.start() < 1.0 {
        return super::axes::format_sig(10f64.powf(mark.value), 3);
    }
    text
}

/// `[t, log10 v]` of the positive values of a series.
fn log_series(points: Vec<[f64; 2]>) -> Vec<[f64; 2]> {
    points
        .into_iter()
        .filter(|p| p[1] > 0.0)
        .map(|p| [p[0], p[1].log10()])
        .collect()
}

type Pick = fn(&crate::model::TrendPoint) -> Option<f64>;

/// The strips: name, value of a point, log axis, colour.
const STRIPS: [(&str, Pick, bool, Color32); 6] = [
    ("f_m (Hz)", |p| p.frequency_hz, false, theme::TRACE),
    ("γ (Hz)", |p| p.linewidth_hz, false, theme::FIT),
    ("Q", |p| p.quality_factor, false, theme::SQL),
    (
        "occupancy n (log)",
        |p| p.occupancy,
        true,
        theme::ZERO_POINT,
    ),
    (
        "T_eff (K, log)",
        |p| p.effective_temperature_k,
        true,
        theme::THERMAL,
    ),
    ("m/V", |p| p.m_per_v, false, theme::TONE),
];

fn trends_ui(ui: &mut Ui, live: &LiveState, compare: Option<&TrendBuffer>, height: f32) {
    ui.label(RichText::new("Trends against elapsed time").strong());
    let t = &live.trends;
    let n = STRIPS.len();
    let strip_h = ((height - 30.0 - n as f32 * 24.0) / n as f32).max(34.0);
    let link = ui.scope_id().with("trend_link");
    for (i, (name, pick, log, colour)) in STRIPS.into_iter().enumerate() {
        let pts = t.series(pick);
        let last = pts.last().map(|p| p[1]);
        let (pts, old) = if log {
            (log_series(pts), compare.map(|c| log_series(c.series(pick))))
        } else {
            (pts, compare.map(|c| c.series(pick)))
        };
        ui.horizontal(|ui| {
            ui.label(RichText::new(name).small().strong());
            if let Some(v) = last {
                ui.label(
                    RichText::new(super::axes::format_sig(v, 5))
                        .small()
                        .monospace(),
                );
            }
        });
        let mut plot = Plot::new(("trend", i))
            .height(strip_h)
            .link_axis(link, Vec2bX::X)
            .show_axes([i == n - 1, true])
            .allow_scroll(false)
            .y_axis_min_width(56.0)
            .x_axis_formatter(|m, range| time_tick(m.value, range.end() - range.start()));
        plot = if log {
            plot.y_grid_spacer(super::axes::log_spacer)
                .y_axis_formatter(log_tick)
        } else {
            plot.y_axis_formatter(|m, _| super::axes::format_sig(m.value, 3))
        };
        plot.show(ui, |pui| {
            if let Some(old) = old {
                pui.line(
                    Line::new(format!("{name} (journal)"), PlotPoints::new(old))
                        .color(theme::PENCIL)
                        .style(egui_plot::LineStyle::dashed_loose())
                        .width(1.2),
                );
            }
            pui.line(
                Line::new(name, PlotPoints::new(pts))
                    .color(colour)
                    .width(1.5),
            );
            super::plot::session_marks(pui, live);
        });
    }
}

/// Link only the time axis of the strips.
struct Vec2bX;

impl Vec2bX {
    const X: egui::Vec2b = egui::Vec2b { x: true, y: false };
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn time_ticks_follow_the_session_length() {
        assert_eq!(time_tick(30.0, 60.0), "30 s");
        assert_eq!(time_tick(90.0, 600.0), "1.5 min");
        assert_eq!(time_tick(1800.0, 3600.0), "30 min");
        assert_eq!(time_tick(5400.0, 6.0 * 3600.0), "1.5 h");
    }

    #[test]
    fn log_strips_plot_log10_of_positive_values() {
        let s = log_series(vec![[0.0, 1e7], [1.0, 0.0], [2.0, 1.0]]);
        assert_eq!(s, vec![[0.0, 7.0], [2.0, 0.0]]);
        let range = 0.0..=7.0;
        let mark = |value| egui_plot::GridMark {
            value,
            step_size: 1.0,
        };
        assert_eq!(log_tick(mark(7.0), &range), "10⁷");
        assert_eq!(log_tick(mark(0.0), &range), "10⁰");
    }
}
