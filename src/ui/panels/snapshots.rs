//! The snapshot list of the right panel: save (typed path or dialog), load, overlay,
//! reference, compare.

use std::sync::Arc;

use eframe::egui::{self, RichText, Ui};

use crate::model::{AppState, LoadedSnapshot};
use crate::ui::files::{CompareCache, FileState};
use crate::ui::{UiCommand, theme};

/// The snapshot list: save (typed path or dialog), load, overlay, reference, compare.
pub fn snapshots_ui(
    ui: &mut Ui,
    files: &mut FileState,
    snapshots: &mut Vec<LoadedSnapshot>,
    reference: &mut Option<usize>,
    state: &mut AppState,
) -> Vec<UiCommand> {
    let mut out = Vec::new();
    let l1 = ui.label("snapshot path (JSON; the CSV is written beside it):");
    ui.add(
        egui::TextEdit::singleline(&mut files.snapshot_path)
            .hint_text("/path/to/snapshot.json")
            .desired_width(f32::INFINITY),
    )
    .labelled_by(l1.id);
    ui.horizontal(|ui| {
        let l2 = ui.label("label");
        ui.add(
            egui::TextEdit::singleline(&mut files.snapshot_label)
                .hint_text("e.g. 4 K, 20 µW")
                .desired_width(150.0),
        )
        .labelled_by(l2.id);
    });
    ui.horizontal(|ui| {
        if ui.button("Save snapshot").clicked() {
            out.push(UiCommand::SaveSnapshot { overwrite: false });
        }
        if ui.button("Load snapshot").clicked() {
            out.push(UiCommand::LoadSnapshot);
        }
        if ui.button("Browse…").clicked() {
            files.browse_snapshot(files.snapshot_path.trim().is_empty());
        }
    });
    if let Some(n) = &files.dialog_note {
        ui.label(RichText::new(n).small().color(theme::WARN));
    }
    let mut remove = None;
    for (i, s) in snapshots.iter_mut().enumerate() {
        ui.horizontal(|ui| {
            let colour = theme::SNAPSHOT_COLOURS[i % theme::SNAPSHOT_COLOURS.len()];
            ui.label(RichText::new("■").color(colour));
            ui.checkbox(&mut s.visible, &s.name);
            if crate::model::state::unit_is_displacement(state.unit) && s.m_per_v.is_none() {
                ui.label(RichText::new("volts only: not drawn in metres").color(theme::WARN))
                    .on_hover_text(
                        "this snapshot was saved without a calibration; switch to a volt unit \
                         to see it",
                    );
            }
            let is_ref = *reference == Some(i);
            if ui
                .selectable_label(is_ref, "reference")
                .on_hover_text("mark stray resonances that are not in this snapshot as new")
                .clicked()
            {
                *reference = if is_ref { None } else { Some(i) };
            }
            if ui
                .small_button("×")
                .on_hover_text("remove from the list")
                .clicked()
            {
                remove = Some(i);
            }
        });
    }
    if let Some(i) = remove {
        snapshots.remove(i);
        *reference = match *reference {
            Some(r) if r == i => None,
            Some(r) if r > i => Some(r - 1),
            other => other,
        };
        files.compare = None;
    }
    if snapshots.len() >= 2 {
        let (mut a, mut b) = files.compare.unwrap_or((0, 1));
        ui.horizontal(|ui| {
            ui.label("compare");
            let name = |i: usize| snapshots.get(i).map_or("—".to_string(), |s| s.name.clone());
            egui::ComboBox::from_id_salt("cmp_a")
                .selected_text(name(a))
                .show_ui(ui, |ui| {
                    for i in 0..snapshots.len() {
                        ui.selectable_value(&mut a, i, name(i));
                    }
                });
            let l3 = ui.label("÷");
            let _ = egui::ComboBox::from_id_salt("cmp_b")
                .selected_text(name(b))
                .show_ui(ui, |ui| {
                    for i in 0..snapshots.len() {
                        ui.selectable_value(&mut b, i, name(i));
                    }
                })
                .response
                .labelled_by(l3.id);
        });
        files.compare = Some((a, b));
        if let (Some(sa), Some(sb)) = (snapshots.get(a), snapshots.get(b))
            && a != b
        {
            let same = files.compare_cache.as_ref().is_some_and(|c| {
                Arc::ptr_eq(&c.of.0, &sa.log_psd) && Arc::ptr_eq(&c.of.1, &sb.log_psd)
            });
            if !same {
                files.compare_cache = Some(CompareCache {
                    of: (Arc::clone(&sa.log_psd), Arc::clone(&sb.log_psd)),
                    points: compare_points(sa, sb),
                });
            }
            match files.compare_cache.as_ref().map(|c| &c.points) {
                Some(Ok(pts)) => {
                    ui.label(
                        RichText::new(format!("{} ÷ {} (dB)", sa.name, sb.name))
                            .small()
                            .color(theme::PENCIL),
                    );
                    egui_plot::Plot::new("compare")
                        .height(110.0)
                        .x_axis_formatter(crate::ui::axes::frequency_tick)
                        .x_grid_spacer(crate::ui::axes::log_spacer)
                        .y_axis_label("dB")
                        .show(ui, |pui| {
                            pui.line(
                                egui_plot::Line::new(
                                    "ratio",
                                    egui_plot::PlotPoints::new(pts.clone()),
                                )
                                .color(theme::TRACE),
                            );
                        });
                }
                Some(Err(e)) => {
                    ui.label(RichText::new(e).color(theme::WARN));
                }
                None => {}
            }
        }
    }
    out
}

/// The ratio a ÷ b in dB against log10 f, min/max-decimated to 400 columns.
fn compare_points(a: &LoadedSnapshot, b: &LoadedSnapshot) -> Result<Vec<[f64; 2]>, String> {
    let c = crate::snapshot::compare(&a.spectrum, &b.spectrum).map_err(|e| e.to_string())?;
    let (freqs, db): (Vec<f64>, Vec<f64>) = c
        .frequency_hz
        .iter()
        .zip(&c.ratio)
        .filter(|(f, r)| **f > 0.0 && **r > 0.0 && r.is_finite())
        .map(|(f, r)| (*f, 10.0 * r.log10()))
        .unzip();
    Ok(crate::model::decimate_minmax(
        &freqs,
        &db,
        (
            c.frequency_hz.get(1).copied().unwrap_or(1.0),
            c.frequency_hz.last().copied().unwrap_or(10.0),
        ),
        400,
    ))
}
