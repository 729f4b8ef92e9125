//! Side panels: source, Welch averaging, calibration and mode band (left); the mode read-out,
//! sideband thermometry and the stray-resonance table (right); the status line (bottom).

use eframe::egui::{self, RichText, Ui};

use super::UiCommand;
use super::axes::format_hz;
use super::files::FileState;
use super::theme;
use crate::acquire::{Endian, SampleFormat, SourceConfig, SourceSpec};
use crate::analysis::AnalysisOptions;
use crate::dsp::{Detrend, WindowKind};
use crate::model::format::{format_rate, format_significant, format_uncertain, window_words};
use crate::model::state::unit_short;
use crate::model::{
    AppState, AveragingChoice, CalibrationMethod, LiveState, LoadedSnapshot, WelchSettings,
};

/// Text fields and choices being edited (applied on "Apply"/"Open").
#[derive(Debug, Clone)]
pub struct PanelState {
    source_path: String,
    sample_format: Option<SampleFormat>,
    endian: Endian,
    channels: usize,
    channel: usize,
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

/// Parses a positive finite number; `name` goes into the error.
fn parse_pos(text: &str, name: &str) -> Result<f64, String> {
    let v: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("{name}: '{}' is not a number", text.trim()))?;
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(format!("{name} must be a positive number, got {v}"))
    }
}

/// A finite number ≠ 0 (either sign).
fn parse_nonzero(text: &str, name: &str) -> Result<f64, String> {
    let v: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("{name}: '{}' is not a number", text.trim()))?;
    if v.is_finite() && v != 0.0 {
        Ok(v)
    } else {
        Err(format!("{name} must be a non-zero number, got {v}"))
    }
}

/// Empty: `None` (taken as exact); else a finite number ≥ 0.
fn parse_opt_non_negative(text: &str, name: &str) -> Result<Option<f64>, String> {
    if text.trim().is_empty() {
        return Ok(None);
    }
    let v: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("{name}: '{}' is not a number", text.trim()))?;
    if v.is_finite() && v >= 0.0 {
        Ok(Some(v))
    } else {
        Err(format!("{name} must be 0 or a positive number, got {v}"))
    }
}

fn parse_opt_pos(text: &str, name: &str) -> Result<Option<f64>, String> {
    if text.trim().is_empty() {
        Ok(None)
    } else {
        parse_pos(text, name).map(Some)
    }
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

    /// The Welch settings being edited, checked.
    ///
    /// # Errors
    /// A one-line message naming the bad field.
    pub fn welch_settings(&self) -> Result<WelchSettings, String> {
        let mut w = self.welch.clone();
        w.max_averages = if self.max_averages_text.trim().is_empty() {
            None
        } else {
            Some(
                self.max_averages_text
                    .trim()
                    .parse::<usize>()
                    .ok()
                    .filter(|k| *k >= 1)
                    .ok_or_else(|| {
                        format!(
                            "averages: '{}' is not a whole number ≥ 1",
                            self.max_averages_text.trim()
                        )
                    })?,
            )
        };
        if !w.segment_auto && (w.segment < 16 || w.segment > (1 << 24)) {
            return Err(format!(
                "segment must be 16 … 16777216 samples, got {}",
                w.segment
            ));
        }
        if !(0.0..0.95).contains(&w.overlap) {
            return Err(format!("overlap must be 0 … 0.95, got {}", w.overlap));
        }
        Ok(w)
    }

    /// The analysis options being edited, checked, and whether the band follows the mode.
    /// Starts from `current`, so options the panel has no field for (imbalance tones, the
    /// reference peaks) pass through unchanged.
    ///
    /// # Errors
    /// A one-line message naming the bad field by its label.
    pub fn analysis_options(
        &self,
        current: &AnalysisOptions,
    ) -> Result<(AnalysisOptions, bool), String> {
        let mut c = current.clone();
        c.m_per_v = None;
        c.tone_frequency_hz = None;
        c.tone_rms_m = None;
        c.pm_depth_rad = None;
        c.freq_pull_hz_per_m = None;
        match self.method {
            CalibrationMethod::None => {}
            CalibrationMethod::Given => c.m_per_v = Some(parse_pos(&self.m_per_v, "m/V")?),
            CalibrationMethod::ToneDisplacement => {
                c.tone_frequency_hz = Some(parse_pos(&self.tone_freq, "tone frequency")?);
                c.tone_rms_m = Some(parse_pos(&self.tone_rms, "tone rms")?);
            }
            CalibrationMethod::TonePhaseModulation => {
                c.tone_frequency_hz = Some(parse_pos(&self.tone_freq, "tone frequency")?);
                c.pm_depth_rad = Some(parse_pos(&self.pm_depth, "depth β")?);
                // G is often quoted signed; only |G| enters (physics::calibration).
                c.freq_pull_hz_per_m = Some(parse_nonzero(&self.pull, "pull G/2π")?);
            }
            CalibrationMethod::Equipartition => {
                if self.mass.trim().is_empty() {
                    return Err("equipartition needs the effective mass (kg)".into());
                }
                if self.bath_t.trim().is_empty() {
                    return Err("equipartition needs the bath T (K)".into());
                }
            }
        }
        c.bath_temperature_k = parse_opt_pos(&self.bath_t, "bath T")?;
        c.bath_temperature_uncertainty_k = parse_opt_non_negative(&self.bath_t_sigma, "bath T 1σ")?;
        c.mass_kg = parse_opt_pos(&self.mass, "effective mass")?;
        c.mass_uncertainty_kg = parse_opt_non_negative(&self.mass_sigma, "mass 1σ")?;
        let lo = parse_opt_pos(&self.band_lo, "band low")?;
        let hi = parse_opt_pos(&self.band_hi, "band high")?;
        c.mode_band_hz = match (lo, hi) {
            (Some(a), Some(b)) if b > a => Some((a, b)),
            (Some(a), Some(b)) => {
                return Err(format!(
                    "fit band: band low {a} Hz must be below band high {b} Hz"
                ));
            }
            (None, None) => None,
            _ => return Err("fit band: give band low and band high, or neither".into()),
        };
        c.carrier_hz = parse_opt_pos(&self.carrier, "carrier")?;
        c.lo_above = c.carrier_hz.and(self.lo_above);
        c.sideband_imbalance = if c.carrier_hz.is_some() {
            parse_opt_pos(&self.imbalance, "imbalance η_r/η_b")?
        } else {
            current.sideband_imbalance
        };
        let t: f64 = self
            .threshold
            .trim()
            .parse()
            .map_err(|_| format!("peak threshold: '{}' is not a number", self.threshold))?;
        if !(t.is_finite() && t > 0.0) {
            return Err("peak threshold must be a positive number of dB".into());
        }
        // The default (10 dB when none is given) is not turned into a given value.
        if Some(t) != current.peak_threshold_db.or(Some(10.0)) {
            c.peak_threshold_db = Some(t);
        }
        c.sloped_background = self.sloped_background;
        Ok((c, self.follow_mode))
    }

    /// The source being edited, checked.
    ///
    /// # Errors
    /// A one-line message naming the bad field.
    pub fn source_config(&self) -> Result<SourceConfig, String> {
        let text = self.source_path.trim();
        if text.is_empty() {
            return Err("type a file path, '-' for standard input or tcp://HOST:PORT".into());
        }
        let spec = SourceSpec::parse(text);
        let mut c = SourceConfig::new(spec);
        c.follow = self.follow;
        c.volts_per_unit = parse_pos(&self.volts_per_unit_text, "volts per unit")?;
        if !c.spec.is_wav() {
            c.sample_format = Some(
                self.sample_format
                    .ok_or("a raw source needs a sample format (i16, i24, i32, f32, f64)")?,
            );
            c.rate_hz = Some(parse_pos(&self.rate_text, "sample rate")?);
            c.endian = self.endian;
        } else {
            c.rate_hz = parse_opt_pos(&self.rate_text, "sample rate")?;
        }
        if self.channels == 0 || self.channel >= self.channels.max(1) && !c.spec.is_wav() {
            return Err(format!(
                "channel {} does not exist in a stream of {} channels",
                self.channel, self.channels
            ));
        }
        c.channels = self.channels.max(1);
        c.channel = self.channel;
        Ok(c)
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

    fn source_ui(&mut self, ui: &mut Ui, files: &mut FileState, out: &mut Vec<UiCommand>) {
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

    fn welch_ui(&mut self, ui: &mut Ui, out: &mut Vec<UiCommand>) {
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

    fn calibration_ui(&mut self, ui: &mut Ui, out: &mut Vec<UiCommand>) {
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
                    RichText::new(super::sideband_view::LO_SIDE_PROMPT)
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

/// `value ± σ` by the usual rule ([`format_uncertain`]), or "—".
fn pm(value: Option<f64>, sigma: Option<f64>) -> String {
    value.map_or_else(|| "—".into(), |v| format_uncertain(v, sigma))
}

/// A note under a panel: readable size, dark enough to read, wrapping in the panel.
fn note(ui: &mut Ui, text: &str, colour: egui::Color32) {
    ui.add(egui::Label::new(RichText::new(text).size(13.0).color(colour)).wrap());
}

/// The mode read-out (always visible): f_m, γ, Q, n̄, T_eff, m/V with ± 1σ.
pub fn mode_panel(ui: &mut Ui, live: &LiveState, state: &AppState) {
    ui.label(RichText::new("Mode").strong().size(16.0));
    let report = live.frame.as_ref().and_then(|f| f.report.clone());
    let m = report.as_ref().map(|r| r.mode.clone()).unwrap_or_default();
    let q = report
        .as_ref()
        .map(|r| r.quantum.clone())
        .unwrap_or_default();
    let c = report
        .as_ref()
        .map(|r| r.calibration.clone())
        .unwrap_or_default();
    egui::Grid::new("mode_grid")
        .num_columns(2)
        .striped(true)
        .show(ui, |ui| {
            let row = |ui: &mut Ui, name: &str, value: String| {
                ui.label(name);
                ui.label(RichText::new(value).monospace());
                ui.end_row();
            };
            row(
                ui,
                "f_m (Hz)",
                pm(m.frequency_hz, m.frequency_hz_uncertainty),
            );
            if m.resolution_limited == Some(true) {
                // Narrower than the resolution: the width is an upper bound, Q a lower one.
                let bound = |v: Option<f64>, sign: &str| {
                    v.map_or_else(|| "—".to_string(), |v| format!("{sign} {v:.3e}"))
                };
                row(ui, "γ FWHM (Hz), unresolved", bound(m.linewidth_hz, "≤"));
                row(ui, "Q", bound(m.quality_factor, "≥"));
            } else {
                row(
                    ui,
                    "γ FWHM (Hz)",
                    pm(m.linewidth_hz, m.linewidth_hz_uncertainty),
                );
                row(ui, "Q", pm(m.quality_factor, m.quality_factor_uncertainty));
            }
            // Heterodyne without a calibration: the sideband asymmetry's n̄ (never "—" while
            // the Sidebands panel shows one).
            let sb = report.as_ref().and_then(|r| r.sidebands.clone());
            match (q.occupancy, sb.as_ref().and_then(|s| s.occupancy)) {
                (None, Some(n)) => row(
                    ui,
                    "occupancy n (R)",
                    pm(Some(n), sb.as_ref().and_then(|s| s.occupancy_uncertainty)),
                ),
                _ => row(ui, "occupancy n", pm(q.occupancy, q.occupancy_uncertainty)),
            }
            row(
                ui,
                "T_eff (K)",
                pm(
                    q.effective_temperature_k,
                    q.effective_temperature_k_uncertainty,
                ),
            );
            row(ui, "m/V", pm(c.m_per_v, c.m_per_v_uncertainty));
            row(
                ui,
                "⟨x²⟩ (m²)",
                pm(m.variance_m2, m.variance_m2_uncertainty),
            );
            row(ui, "x_zpf (m)", pm(q.x_zpf_m, None));
            // Integrated rms over the fit band (report.rms), in m when the axis is.
            if let Some(r) = report.as_ref().and_then(|r| r.rms.as_ref()) {
                let (label, value) = crate::model::format::band_rms_readout(
                    r,
                    crate::model::state::unit_is_displacement(state.unit),
                );
                row(ui, &label, value);
            }
            row(
                ui,
                "χ²_red",
                m.reduced_chi2
                    .map_or_else(|| "—".into(), |v| format_significant(v, 3)),
            );
        });
    if let Some(method) = &c.method {
        let mut text = format!("calibration: {method}");
        if let Some(f) = c.tone_frequency_hz {
            text.push_str(&format!(", tone at {}", format_hz(f, 1.0)));
        }
        note(ui, &text, theme::INK);
    } else {
        note(ui, "uncalibrated: volts only", theme::INK);
    }
    // Drift of the calibration over the session (model::TrendBuffer::calibration_drift);
    // highlighted when it is beyond 3σ of the readings' own uncertainty.
    if let Some(d) = live.trends.calibration_drift() {
        let sigma = d
            .sigma_percent
            .map_or(String::new(), |s| format!(" ± {s:.2}"));
        note(
            ui,
            &format!(
                "calibration drift: {:+.2}{sigma} % over {:.0} s{}",
                d.percent,
                d.span_s,
                if d.is_significant() {
                    " (beyond 3σ)"
                } else {
                    ""
                }
            ),
            if d.is_significant() {
                theme::WARN
            } else {
                theme::INK
            },
        );
    }
    if crate::model::state::unit_is_displacement(state.unit) && c.m_per_v.is_none() {
        note(
            ui,
            &format!(
                "{} needs a calibration: showing nothing in metres",
                unit_short(state.unit)
            ),
            theme::WARN,
        );
    }
    if let Some(frame) = &live.frame {
        if let Some(e) = &frame.analysis_error {
            note(ui, &window_words(&format!("analysis: {e}")), theme::ERROR);
        }
        if let Some(r) = &frame.report {
            for n in r.notes.iter().take(4) {
                note(ui, &window_words(n), theme::INK);
            }
            for w in r.warnings.iter().take(4) {
                note(ui, &window_words(w), theme::WARN);
            }
        }
    }
}

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
    ui.label(RichText::new("Sidebands").strong().size(16.0));
    egui::Grid::new("sb_grid")
        .num_columns(2)
        .striped(true)
        .show(ui, |ui| {
            let row = |ui: &mut Ui, name: &str, value: String| {
                ui.label(name);
                ui.label(RichText::new(value).monospace());
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
    ui.separator();
}

/// Stray resonances: frequency, height over floor, width; new ones (against the reference
/// snapshot) highlighted; clicking a row zooms the plot there.
pub fn peaks_panel(
    ui: &mut Ui,
    live: &LiveState,
    reference: Option<&LoadedSnapshot>,
) -> Vec<UiCommand> {
    let mut out = Vec::new();
    ui.label(RichText::new("Stray resonances").strong().size(16.0));
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
        .max_height(200.0)
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

/// The status line (always visible): source, rate, averaging, resolution, what the stream
/// is doing (waiting, reconnected, ended, "at most K" reached), drops, frame time.
pub fn status_line(
    ui: &mut Ui,
    live: &LiveState,
    source: &SourceConfig,
    paused: bool,
    frame_cpu_s: f64,
) {
    ui.horizontal_wrapped(|ui| {
        let Some(s) = live.status() else {
            let name = match &source.spec {
                SourceSpec::Demo { scenario, .. } => format!("demo '{scenario}'"),
                SourceSpec::Path(p) => p.display().to_string(),
                SourceSpec::Stdin => "stdin".into(),
                SourceSpec::Tcp(a) => format!("tcp://{a}"),
            };
            ui.label(format!("opening {name}…"));
            return;
        };
        let sep = |ui: &mut Ui| {
            ui.label(RichText::new("·").color(theme::PENCIL));
        };
        // What the stream is doing comes first, so it is never cut off.
        if paused || s.paused {
            ui.label(RichText::new("FROZEN").strong().color(theme::WARN));
            sep(ui);
        }
        if let Some(w) = s.waiting_s {
            ui.label(
                RichText::new(format!(
                    "waiting for the source: no samples for {w:.0} s (reconnecting)"
                ))
                .strong()
                .color(theme::WARN),
            );
            sep(ui);
        }
        if let Some(e) = &s.ended {
            let text = if s.failed {
                window_words(e)
            } else if s.recording {
                format!(
                    "{e}: showing the result of the whole record ({} segments); Replay plays it again",
                    s.averages
                )
            } else {
                e.clone()
            };
            ui.label(RichText::new(text).strong().color(if s.failed {
                theme::ERROR
            } else {
                theme::INK
            }));
            sep(ui);
        }
        if let Some(k) = s.max_averages_reached {
            ui.label(
                RichText::new(format!(
                    "stopped: at most K = {k} segments reached (Restart average for more)"
                ))
                .strong()
                .color(theme::WARN),
            );
            sep(ui);
        }
        ui.label(RichText::new(&s.source).strong());
        sep(ui);
        ui.label(format_rate(s.sample_rate_hz));
        sep(ui);
        ui.label(format!(
            "{} · {} averaged (K_eff {:.1})",
            s.averaging, s.averages, s.k_eff
        ));
        sep(ui);
        ui.label(format!("N = {}", s.segment));
        sep(ui);
        ui.label(format!(
            "Δf {} · RBW {}",
            format_hz(s.resolution_hz, s.resolution_hz * 0.01),
            format_hz(s.rbw_hz, s.rbw_hz * 0.01)
        ));
        sep(ui);
        ui.label(format!("latency {:.0} ms", 1e3 * s.latency_s));
        if let Some(n) = &s.stream_note {
            sep(ui);
            ui.label(RichText::new(n).color(theme::WARN));
        }
        let dropped = s.dropped_blocks > 0 || s.dropped_frames > 0;
        if dropped {
            sep(ui);
            ui.label(
                RichText::new(format!(
                    "dropped {} blocks ({} samples), {} frames",
                    s.dropped_blocks, s.dropped_samples, s.dropped_frames
                ))
                .color(theme::WARN),
            );
        }
        if s.gaps > 0 {
            sep(ui);
            ui.label(
                RichText::new(format!(
                    "{} gap{} in the stream (no segment spans one)",
                    s.gaps,
                    if s.gaps == 1 { "" } else { "s" }
                ))
                .color(theme::WARN),
            );
        }
        if s.skipped_segments > 0 {
            sep(ui);
            ui.label(
                RichText::new(format!("{} segments skipped (NaN/Inf)", s.skipped_segments))
                    .color(theme::WARN),
            );
        }
        for w in &s.warnings {
            sep(ui);
            ui.label(RichText::new(w).color(theme::WARN));
        }
        sep(ui);
        ui.label(
            RichText::new(format!(
                "fit {:.0} ms · frame {:.1} ms",
                1e3 * s.analysis_s,
                1e3 * frame_cpu_s
            ))
            .color(theme::INK),
        );
    });
}
