//! The stray-resonance table of the right panel.

use eframe::egui::{self, RichText, Ui};

use super::note;
use crate::model::{LiveState, LoadedSnapshot};
use crate::ui::axes::format_hz;
use crate::ui::{UiCommand, theme};

/// Height of the stray table before it scrolls (about six rows), so the sections below
/// stay in reach.
const STRAY_ROWS_HEIGHT: f32 = 132.0;

/// Stray resonances: frequency, height over floor, width; new ones (against the reference
/// snapshot) highlighted; clicking a row zooms the plot there.
pub fn peaks_panel(
    ui: &mut Ui,
    live: &LiveState,
    reference: Option<&LoadedSnapshot>,
) -> Vec<UiCommand> {
    let mut out = Vec::new();
    let Some(frame) = &live.frame else {
        ui.label("waiting for a spectrum…");
        return out;
    };
    let mut peaks = frame
        .report
        .as_ref()
        .map(|r| r.peaks.clone())
        .unwrap_or_default();
    let resolution = frame.spectrum.as_ref().map_or(1.0, |s| s.resolution_hz);
    if let Some(r) = reference {
        crate::snapshot::mark_new_peaks(&mut peaks, &r.peaks, 3.0 * resolution);
        note(ui, &format!("new since '{}' in ochre", r.name), theme::INK);
    }
    if peaks.is_empty() {
        ui.label("none above the threshold");
        return out;
    }
    egui::ScrollArea::vertical()
        .id_salt("peaks_scroll")
        .max_height(STRAY_ROWS_HEIGHT)
        .show(ui, |ui| {
            egui::Grid::new("peaks_grid")
                .num_columns(3)
                .striped(true)
                .show(ui, |ui| {
                    ui.label(RichText::new("frequency").strong());
                    ui.label(RichText::new("dB over floor").strong());
                    ui.label(RichText::new("width").strong());
                    ui.end_row();
                    for p in peaks.iter().take(60) {
                        let new = p.new_since_reference == Some(true);
                        let mut text =
                            RichText::new(format_hz(p.frequency_hz, resolution)).monospace();
                        if new {
                            text = text.background_color(egui::Color32::from_rgb(240, 214, 150));
                        }
                        if ui
                            .link(text)
                            .on_hover_text("zoom the plot to this line")
                            .clicked()
                        {
                            let half = (30.0 * p.linewidth_hz).max(50.0 * resolution);
                            out.push(UiCommand::ZoomTo(
                                (p.frequency_hz - half).max(resolution),
                                p.frequency_hz + half,
                            ));
                        }
                        ui.label(
                            RichText::new(format!("{:.1}", p.height_over_floor_db)).monospace(),
                        );
                        ui.label(
                            RichText::new(format_hz(p.linewidth_hz, p.linewidth_hz * 0.1))
                                .monospace(),
                        );
                        ui.end_row();
                    }
                });
        });
    out
}
