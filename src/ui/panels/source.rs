//! The Source section of the left panel: path or address, raw format, playback speed.

use eframe::egui::{self, Ui};

use super::PanelState;
use crate::acquire::{Endian, SampleFormat};
use crate::ui::UiCommand;
use crate::ui::files::FileState;

impl PanelState {
    pub(super) fn source_ui(
        &mut self,
        ui: &mut Ui,
        files: &mut FileState,
        out: &mut Vec<UiCommand>,
    ) {
        let l2 = ui.label("source path (.wav or raw), '-' for stdin, or tcp://HOST:PORT:");
        ui.add(
            egui::TextEdit::singleline(&mut self.source_path)
                .hint_text("path or tcp://host:port")
                .desired_width(f32::INFINITY),
        )
        .labelled_by(l2.id);
        ui.horizontal(|ui| {
            if ui.button("Browse…").clicked()
                && let Some(p) = files.browse_source()
            {
                self.source_path = p.display().to_string();
            }
            if ui.button("Open source").clicked() {
                out.push(UiCommand::OpenSource);
            }
            if ui
                .button("Demo")
                .on_hover_text("the built-in invented cooldown")
                .clicked()
            {
                out.push(UiCommand::OpenDemo);
            }
        });
        ui.horizontal(|ui| {
            let l = ui.label("second detector: channel");
            ui.add(
                egui::TextEdit::singleline(&mut self.cross_channel_text)
                    .hint_text("none")
                    .desired_width(48.0),
            )
            .labelled_by(l.id)
            .on_hover_text(
                "another channel of the same source read with the first (0-based): the window \
                 then averages the cross-spectrum of the two detectors and fits the mode on it",
            );
        });
        egui::CollapsingHeader::new("raw format")
            .default_open(false)
            .show(ui, |ui| {
                egui::Grid::new("raw_grid").num_columns(2).show(ui, |ui| {
                    let l3 = ui.label("sample format");
                    let _ = egui::ComboBox::from_id_salt("fmt")
                        .selected_text(self.sample_format.map_or("—", SampleFormat::name))
                        .show_ui(ui, |ui| {
                            for f in [
                                SampleFormat::I16,
                                SampleFormat::I24,
                                SampleFormat::I32,
                                SampleFormat::F32,
                                SampleFormat::F64,
                            ] {
                                ui.selectable_value(&mut self.sample_format, Some(f), f.name());
                            }
                        })
                        .response
                        .labelled_by(l3.id);
                    ui.end_row();
                    ui.label("byte order");
                    ui.horizontal(|ui| {
                        ui.selectable_value(&mut self.endian, Endian::Little, "little");
                        ui.selectable_value(&mut self.endian, Endian::Big, "big");
                    });
                    ui.end_row();
                    let l4 = ui.label("channels");
                    ui.add(egui::DragValue::new(&mut self.channels).range(1..=64))
                        .labelled_by(l4.id);
                    ui.end_row();
                    let l5 = ui.label("channel (0-based)");
                    ui.add(egui::DragValue::new(&mut self.channel).range(0..=63))
                        .labelled_by(l5.id);
                    ui.end_row();
                    let l6 = ui.label("rate (Hz)");
                    ui.text_edit_singleline(&mut self.rate_text)
                        .labelled_by(l6.id);
                    ui.end_row();
                    let l7 = ui.label("volts per unit");
                    ui.text_edit_singleline(&mut self.volts_per_unit_text)
                        .labelled_by(l7.id);
                    ui.end_row();
                    ui.label("");
                    ui.checkbox(&mut self.follow, "follow growing file");
                    ui.end_row();
                });
            });
        ui.horizontal(|ui| {
            let l = ui.label("playback speed ×");
            let r = ui
                .add(
                    egui::DragValue::new(&mut self.speed)
                        .range(0.1..=64.0)
                        .speed(0.05),
                )
                .labelled_by(l.id);
            if r.changed() {
                out.push(UiCommand::SetSpeed(self.speed));
            }
        });
    }
}
