//! Side panels, one file each: the left panel's sections ([`source`], [`averaging`],
//! [`calibration`], overlays and export here), the right panel's read-outs ([`mode`],
//! [`sidebands`], [`strays`], [`snapshots`]) and the status line ([`status`]).
//! [`fields`] reads the edit fields back into checked settings.

use eframe::egui::{self, RichText, Ui};

use super::UiCommand;
use super::files::FileState;
use crate::acquire::{Endian, SampleFormat, SourceConfig, SourceSpec};
use crate::model::format::format_uncertain;
use crate::model::{AppState, CalibrationMethod, WelchSettings};

mod averaging;
mod calibration;
mod fields;
mod mode;
mod sidebands;
mod snapshots;
mod source;
mod status;
mod strays;

pub use mode::{mode_panel, notes_count, notes_panel};
pub use sidebands::{has_sidebands, sideband_panel};
pub use snapshots::snapshots_ui;
pub use status::status_line;
pub use strays::peaks_panel;

/// Text fields and choices being edited (applied on "Apply"/"Open").
#[derive(Debug, Clone)]
pub struct PanelState {
    source_path: String,
    sample_format: Option<SampleFormat>,
    endian: Endian,
    channels: usize,
    channel: usize,
    /// A second detector's channel (two detectors), blank for none.
    cross_channel_text: String,
    rate_text: String,
    volts_per_unit_text: String,
    follow: bool,
    speed: f64,

    welch: WelchSettings,
    max_averages_text: String,

    method: CalibrationMethod,
    m_per_v: String,
    tone_freq: String,
    tone_rms: String,
    pm_depth: String,
    pull: String,
    bath_t: String,
    bath_t_sigma: String,
    mass: String,
    mass_sigma: String,
    band_lo: String,
    band_hi: String,
    follow_mode: bool,
    carrier: String,
    lo_above: Option<bool>,
    threshold: String,
    sloped_background: bool,
    imbalance: String,
}

fn num_text(v: f64) -> String {
    if v == 0.0 {
        "0".into()
    } else if (1e-3..1e6).contains(&v.abs()) {
        format!("{}", (v * 1e6).round() / 1e6)
    } else {
        format!("{v:e}")
    }
}

fn opt_text(v: Option<f64>) -> String {
    v.map(num_text).unwrap_or_default()
}

impl PanelState {
    /// Fields for `source`.
    pub fn new(source: &SourceConfig) -> Self {
        let source_path = match &source.spec {
            SourceSpec::Path(p) => p.display().to_string(),
            SourceSpec::Stdin => "-".into(),
            SourceSpec::Tcp(a) => format!("tcp://{a}"),
            SourceSpec::Demo { .. } => String::new(),
        };
        let mut s = Self {
            source_path,
            sample_format: source.sample_format,
            endian: source.endian,
            channels: source.channels,
            channel: source.channel,
            cross_channel_text: source
                .cross_channel
                .map_or_else(String::new, |j| j.to_string()),
            rate_text: opt_text(source.rate_hz),
            volts_per_unit_text: num_text(source.volts_per_unit),
            follow: source.follow,
            speed: 1.0,
            welch: WelchSettings::default(),
            max_averages_text: String::new(),
            method: CalibrationMethod::None,
            m_per_v: String::new(),
            tone_freq: String::new(),
            tone_rms: String::new(),
            pm_depth: String::new(),
            pull: String::new(),
            bath_t: String::new(),
            bath_t_sigma: String::new(),
            mass: String::new(),
            mass_sigma: String::new(),
            band_lo: String::new(),
            band_hi: String::new(),
            follow_mode: true,
            carrier: String::new(),
            lo_above: None,
            threshold: String::new(),
            sloped_background: false,
            imbalance: String::new(),
        };
        s.sync_from(&AppState::default());
        s
    }

    /// Copies the settings into the edit fields (fields of the methods not in use keep
    /// what was typed in them, so switching the method back does not lose it).
    pub fn sync_from(&mut self, state: &AppState) {
        self.welch = state.welch.clone();
        self.max_averages_text = state
            .welch
            .max_averages
            .map(|k| k.to_string())
            .unwrap_or_default();
        let c = &state.analysis;
        self.method = CalibrationMethod::of(c);
        let keep = |field: &mut String, v: Option<f64>| {
            if let Some(v) = v {
                *field = num_text(v);
            }
        };
        keep(&mut self.m_per_v, c.m_per_v);
        keep(&mut self.tone_freq, c.tone_frequency_hz);
        keep(&mut self.tone_rms, c.tone_rms_m);
        keep(&mut self.pm_depth, c.pm_depth_rad);
        keep(&mut self.pull, c.freq_pull_hz_per_m);
        self.bath_t = opt_text(c.bath_temperature_k);
        self.bath_t_sigma = opt_text(c.bath_temperature_uncertainty_k);
        self.mass = opt_text(c.mass_kg);
        self.mass_sigma = opt_text(c.mass_uncertainty_kg);
        self.band_lo = opt_text(c.mode_band_hz.map(|b| b.0));
        self.band_hi = opt_text(c.mode_band_hz.map(|b| b.1));
        self.follow_mode = state.follow_mode;
        self.carrier = opt_text(c.carrier_hz);
        self.lo_above = c.lo_above;
        self.threshold = num_text(c.peak_threshold_db.unwrap_or(10.0));
        self.sloped_background = c.sloped_background;
        self.imbalance = opt_text(c.sideband_imbalance);
        self.speed = state.playback_speed;
    }

    /// The band fields as typed (low, high).
    pub fn band_fields(&self) -> (String, String) {
        (self.band_lo.clone(), self.band_hi.clone())
    }

    /// Shows `band` (Hz) in the band fields: the band in use when it follows the mode.
    pub fn show_band(&mut self, band: (f64, f64)) {
        self.band_lo = format!("{:.1}", band.0);
        self.band_hi = format!("{:.1}", band.1);
    }

    /// The left panel. Returns the commands it asks for.
    pub fn controls_ui(
        &mut self,
        ui: &mut Ui,
        state: &mut AppState,
        files: &mut FileState,
    ) -> Vec<UiCommand> {
        let mut out = Vec::new();
        egui::CollapsingHeader::new("Source")
            .default_open(true)
            .show(ui, |ui| self.source_ui(ui, files, &mut out));
        egui::CollapsingHeader::new("Welch averaging")
            .default_open(false)
            .show(ui, |ui| self.welch_ui(ui, &mut out));
        egui::CollapsingHeader::new("Calibration and mode")
            .default_open(true)
            .show(ui, |ui| self.calibration_ui(ui, &mut out));
        egui::CollapsingHeader::new("Overlays")
            .default_open(true)
            .show(ui, |ui| {
                let o = &mut state.overlays;
                ui.checkbox(&mut o.fit, "fitted mode");
                ui.checkbox(&mut o.zero_point, "zero-point spectrum");
                ui.checkbox(&mut o.sql, "SQL (added noise)");
                ui.checkbox(&mut o.thermal, "thermal at bath T");
                ui.checkbox(&mut o.band, "fit band");
                ui.checkbox(&mut o.peaks, "stray resonances");
                ui.checkbox(&mut o.snapshots, "snapshots");
            });
        egui::CollapsingHeader::new("Export")
            .default_open(false)
            .show(ui, |ui| {
                let l1 = ui.label("PNG of the window:");
                ui.add(
                    egui::TextEdit::singleline(&mut files.png_path)
                        .hint_text("/path/to/plot.png")
                        .desired_width(f32::INFINITY),
                )
                .labelled_by(l1.id);
                ui.horizontal(|ui| {
                    if ui.button("Browse…").clicked() {
                        files.browse_png();
                    }
                    if ui.button("Export PNG").clicked() {
                        out.push(UiCommand::ExportPng { overwrite: false });
                    }
                    if ui
                        .button("Export figure")
                        .on_hover_text("the plot in view as a publication figure (.svg or .png)")
                        .clicked()
                    {
                        out.push(UiCommand::ExportFigure);
                    }
                });
            });
        out
    }
}

/// `value ± σ` by the usual rule ([`format_uncertain`]), or "—".
fn pm(value: Option<f64>, sigma: Option<f64>) -> String {
    value.map_or_else(|| "—".into(), |v| format_uncertain(v, sigma))
}

/// A note under a panel: readable size, dark enough to read, wrapping in the panel.
fn note(ui: &mut Ui, text: &str, colour: egui::Color32) {
    ui.add(egui::Label::new(RichText::new(text).size(13.0).color(colour)).wrap());
}

/// A section of the right panel: a collapsing header in the panel's title size. Its open
/// state is kept by egui under `id` (remembered across sessions with the window's state).
pub fn section(
    ui: &mut Ui,
    id: &str,
    title: RichText,
    default_open: bool,
    body: impl FnOnce(&mut Ui),
) {
    egui::CollapsingHeader::new(title.strong().size(16.0))
        .id_salt(id)
        .default_open(default_open)
        .show(ui, body);
}
