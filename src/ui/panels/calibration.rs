//! The calibration and mode section of the left panel: method, its inputs, the fit band,
//! the heterodyne carrier and the peak threshold.

use eframe::egui::{self, RichText, Ui};

use super::PanelState;
use crate::model::CalibrationMethod;
use crate::ui::{UiCommand, theme};

impl PanelState {
    pub(super) fn calibration_ui(&mut self, ui: &mut Ui, out: &mut Vec<UiCommand>) {
        let l0 = ui.label("calibration method");
        let _ = egui::ComboBox::from_id_salt("cal_method")
            .selected_text(self.method.name())
            .width(240.0)
            .show_ui(ui, |ui| {
                for m in CalibrationMethod::ALL {
                    ui.selectable_value(&mut self.method, m, m.name());
                }
            })
            .response
            .labelled_by(l0.id);
        egui::Grid::new("cal_grid").num_columns(2).show(ui, |ui| {
            let row = |ui: &mut Ui, label: &str, text: &mut String| {
                let l = ui.label(label);
                ui.add(egui::TextEdit::singleline(text).desired_width(110.0))
                    .labelled_by(l.id);
                ui.end_row();
            };
            match self.method {
                CalibrationMethod::None => {}
                CalibrationMethod::Given => row(ui, "m/V", &mut self.m_per_v),
                CalibrationMethod::ToneDisplacement => {
                    row(ui, "tone frequency (Hz)", &mut self.tone_freq);
                    row(ui, "tone rms (m)", &mut self.tone_rms);
                }
                CalibrationMethod::TonePhaseModulation => {
                    row(ui, "tone frequency (Hz)", &mut self.tone_freq);
                    row(ui, "depth β (rad)", &mut self.pm_depth);
                    row(ui, "pull G/2π (Hz/m)", &mut self.pull);
                }
                CalibrationMethod::Equipartition => {}
            }
            row(ui, "bath T (K)", &mut self.bath_t);
            if self.method == CalibrationMethod::Equipartition {
                row(ui, "bath T 1σ (K)", &mut self.bath_t_sigma);
            }
            row(ui, "effective mass (kg)", &mut self.mass);
            row(ui, "mass 1σ (kg)", &mut self.mass_sigma);
            row(ui, "band low (Hz)", &mut self.band_lo);
            row(ui, "band high (Hz)", &mut self.band_hi);
            row(ui, "carrier (Hz)", &mut self.carrier);
            if !self.carrier.trim().is_empty() {
                row(ui, "imbalance η_r/η_b", &mut self.imbalance);
            }
            row(ui, "peak threshold (dB)", &mut self.threshold);
        });
        ui.checkbox(&mut self.follow_mode, "band follows the mode")
            .on_hover_text("the band fields then show the band in use");
        ui.checkbox(
            &mut self.sloped_background,
            "sloped background under the mode",
        );
        if !self.carrier.trim().is_empty() {
            ui.horizontal(|ui| {
                ui.label("LO is");
                ui.selectable_value(&mut self.lo_above, Some(true), "above");
                ui.selectable_value(&mut self.lo_above, Some(false), "below");
                ui.label("the laser");
            });
            if self.lo_above.is_none() {
                ui.label(
                    RichText::new(crate::ui::sideband_view::LO_SIDE_PROMPT)
                        .small()
                        .color(theme::WARN),
                );
            }
        }
        if ui.button("Apply calibration").clicked() {
            out.push(UiCommand::ApplyAnalysis);
        }
    }
}
