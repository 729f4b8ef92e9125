//! The sideband read-out of the right panel (heterodyne sources only).

use eframe::egui::{self, RichText, Ui};

use super::{note, pm};
use crate::model::LiveState;
use crate::ui::axes::format_hz;
use crate::ui::theme;

/// Sideband thermometry (heterodyne sources only).
pub fn sideband_panel(ui: &mut Ui, live: &LiveState) {
    let Some(sb) = live
        .frame
        .as_ref()
        .and_then(|f| f.report.as_ref())
        .and_then(|r| r.sidebands.clone())
    else {
        return;
    };
    egui::Grid::new("sb_grid")
        .num_columns(2)
        .striped(true)
        .show(ui, |ui| {
            let row = |ui: &mut Ui, name: &str, value: String| {
                ui.label(name);
                ui.add(egui::Label::new(RichText::new(value).monospace()).wrap());
                ui.end_row();
            };
            row(
                ui,
                "red (Stokes, n+1)",
                format!(
                    "{} · {} V²",
                    sb.red
                        .frequency_hz
                        .map_or("—".into(), |f| format_hz(f, 1.0)),
                    pm(sb.red.area_v2, sb.red.area_v2_uncertainty)
                ),
            );
            row(
                ui,
                "blue (anti-Stokes, n)",
                format!(
                    "{} · {} V²",
                    sb.blue
                        .frequency_hz
                        .map_or("—".into(), |f| format_hz(f, 1.0)),
                    pm(sb.blue.area_v2, sb.blue.area_v2_uncertainty)
                ),
            );
            row(ui, "R = red/blue", pm(sb.ratio, sb.ratio_uncertainty));
            row(
                ui,
                "n = 1/(R−1)",
                pm(sb.occupancy, sb.occupancy_uncertainty),
            );
            row(ui, "γ (Hz)", pm(sb.linewidth_hz, None));
            row(ui, "imbalance η_b/η_r", pm(sb.imbalance_correction, None));
        });
    if let Some(c) = &sb.convention {
        note(ui, c, theme::INK);
    }
}

/// True when the newest analysis has a sideband result (the section is shown only then).
pub fn has_sidebands(live: &LiveState) -> bool {
    live.frame
        .as_ref()
        .and_then(|f| f.report.as_ref())
        .is_some_and(|r| r.sidebands.is_some())
}
