//! The Welch averaging section of the left panel.

use eframe::egui::{self, Ui};

use super::PanelState;
use crate::dsp::{Detrend, WindowKind};
use crate::model::AveragingChoice;
use crate::ui::UiCommand;

impl PanelState {
    pub(super) fn welch_ui(&mut self, ui: &mut Ui, out: &mut Vec<UiCommand>) {
        egui::Grid::new("welch_grid").num_columns(2).show(ui, |ui| {
            let l8 = ui.label("segment N");
            let shown = if self.welch.segment_auto {
                "auto".to_string()
            } else {
                self.welch.segment.to_string()
            };
            let _ = egui::ComboBox::from_id_salt("segment")
                .selected_text(shown)
                .show_ui(ui, |ui| {
                    ui.selectable_value(&mut self.welch.segment_auto, true, "auto")
                        .on_hover_text(
                            "a recording: 65536, or fewer so that about 8 segments fit \
                             (as the command line); a live source: 16384",
                        );
                    for p in 8..=22 {
                        let n = 1usize << p;
                        if ui
                            .selectable_label(
                                !self.welch.segment_auto && self.welch.segment == n,
                                n.to_string(),
                            )
                            .clicked()
                        {
                            self.welch.segment = n;
                            self.welch.segment_auto = false;
                        }
                    }
                })
                .response
                .labelled_by(l8.id);
            ui.end_row();
            let l9 = ui.label("overlap");
            ui.add(
                egui::DragValue::new(&mut self.welch.overlap)
                    .range(0.0..=0.9)
                    .speed(0.01),
            )
            .labelled_by(l9.id);
            ui.end_row();
            let l10 = ui.label("window");
            let _ = egui::ComboBox::from_id_salt("window")
                .selected_text(self.welch.window.name())
                .show_ui(ui, |ui| {
                    for w in WindowKind::ALL {
                        ui.selectable_value(&mut self.welch.window, w, w.name());
                    }
                })
                .response
                .labelled_by(l10.id);
            ui.end_row();
            let l11 = ui.label("detrend");
            let _ = egui::ComboBox::from_id_salt("detrend")
                .selected_text(self.welch.detrend.name())
                .show_ui(ui, |ui| {
                    for d in [Detrend::None, Detrend::Mean, Detrend::Linear] {
                        ui.selectable_value(&mut self.welch.detrend, d, d.name());
                    }
                })
                .response
                .labelled_by(l11.id);
            ui.end_row();
            let l12 = ui.label("averaging");
            let _ = egui::ComboBox::from_id_salt("averaging")
                .selected_text(self.welch.averaging.name())
                .show_ui(ui, |ui| {
                    for a in AveragingChoice::ALL {
                        ui.selectable_value(&mut self.welch.averaging, a, a.name());
                    }
                })
                .response
                .labelled_by(l12.id);
            ui.end_row();
            if matches!(
                self.welch.averaging,
                AveragingChoice::Exponential | AveragingChoice::Auto
            ) {
                let l13 = ui.label("τ (segments)");
                ui.add(
                    egui::DragValue::new(&mut self.welch.time_constant_segments)
                        .range(1.0..=10_000.0),
                )
                .labelled_by(l13.id);
                ui.end_row();
            }
            if self.welch.averaging != AveragingChoice::Exponential {
                let l14 = ui.label("at most K");
                ui.add(egui::TextEdit::singleline(&mut self.max_averages_text).hint_text("all"))
                    .labelled_by(l14.id);
                ui.end_row();
            }
        });
        if ui.button("Apply (restarts the average)").clicked() {
            out.push(UiCommand::ApplyWelch);
        }
    }
}
