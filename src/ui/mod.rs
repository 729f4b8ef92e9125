//! The desktop window (eframe + egui_plot). Only this module imports egui, and it is compiled
//! only with the `gui` feature.
//!
//! [`run`] opens the window on a source ([`MonitorOptions`]); [`StillpointApp`] is the eframe
//! app. It owns a [`model::Engine`] (acquisition, Welch and the fit run on the engine thread,
//! never here) and a [`model::LiveState`]; each repaint it drains the engine's frames, draws
//! them, and turns clicks and keys into [`UiCommand`]s applied after the frame.

mod axes;
mod cooldown;
mod files;
mod panels;
mod plot;
mod sideband_view;
mod theme;

use std::path::PathBuf;
use std::time::Duration;

use eframe::egui::{self, Key, RichText};

use crate::acquire::{SourceConfig, SourceSpec};
use crate::dsp::WelchConfig;
use crate::dsp::units::DensityUnit;
use crate::model::{
    self, AppState, CalibrationInputs, CalibrationMethod, Engine, EngineCommand, EngineConfig,
    EngineNotice, LiveState, LoadedSnapshot, WelchSettings,
};
use crate::report::AnalysisOptions;

/// How the window starts (the CLI's `stillpoint` and `stillpoint monitor SOURCE …`).
#[derive(Debug, Clone, PartialEq)]
pub struct MonitorOptions {
    /// Source to open.
    pub source: SourceConfig,
    /// Welch settings from the command line (`None`: the remembered ones, or defaults).
    pub welch: Option<WelchConfig>,
    /// Calibration/mode/heterodyne options from the command line (`None`: remembered).
    pub analysis: Option<AnalysisOptions>,
    /// Playback speed of recordings (1 = real time; `None`: remembered, default 1).
    pub speed: Option<f64>,
    /// Save a PNG of the window to this path after `screenshot_after_s`, then quit.
    pub screenshot: Option<PathBuf>,
    /// Seconds before the screenshot is taken.
    pub screenshot_after_s: f64,
    /// Ignore remembered settings (tests, screenshots).
    pub fresh_settings: bool,
}

impl MonitorOptions {
    /// The embedded demo: the invented `quantum` scenario (seed 1): a cryostat cooldown to
    /// 4 K, then sideband laser cooling to a few phonons, read out in heterodyne
    /// ([`crate::synth::quantum`]). Calibrated like a real heterodyne set-up: the carrier, the
    /// side of the local oscillator and the phase-modulation tone (pair of lines at carrier ±
    /// f_mod of known equivalent displacement) are the scenario's own settings, as are the
    /// effective mass, the bath temperature and a band of f_m.
    pub fn demo() -> Self {
        let (welch, analysis) = sideband_view::demo_settings();
        Self {
            source: SourceConfig::new(SourceSpec::Demo {
                scenario: sideband_view::demo_scenario_name(),
                seed: 1,
            }),
            welch,
            analysis: Some(analysis),
            speed: Some(1.0),
            screenshot: None,
            screenshot_after_s: 12.0,
            fresh_settings: false,
        }
    }

    /// A source with remembered (or default) settings.
    pub fn for_source(source: SourceConfig) -> Self {
        Self {
            source,
            welch: None,
            analysis: None,
            speed: None,
            screenshot: None,
            screenshot_after_s: 12.0,
            fresh_settings: false,
        }
    }
}

/// Opens the window and runs until it is closed.
///
/// # Errors
/// The window could not be created (no display, no OpenGL).
pub fn run(options: MonitorOptions) -> anyhow::Result<()> {
    let native = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_title("stillpoint")
            .with_inner_size([1360.0, 860.0])
            .with_min_inner_size([900.0, 600.0]),
        persist_window: options.screenshot.is_none(),
        ..eframe::NativeOptions::default()
    };
    eframe::run_native(
        "stillpoint",
        native,
        Box::new(move |cc| Ok(Box::new(StillpointApp::new(cc, options)))),
    )
    .map_err(|e| anyhow::anyhow!("cannot open the window: {e}"))
}

/// A message shown in the window.
#[derive(Debug, Clone, PartialEq)]
pub struct UiMessage {
    /// Text.
    pub text: String,
    /// Shown in red.
    pub error: bool,
}

/// What a click or key asks for; applied after the frame.
#[must_use]
#[derive(Debug, Clone, PartialEq)]
pub enum UiCommand {
    /// Pause or resume.
    TogglePause,
    /// Restart the average.
    Restart,
    /// Next display unit.
    CycleUnit,
    /// Send the Welch settings to the engine.
    ApplyWelch,
    /// Send the calibration/mode inputs to the engine.
    ApplyAnalysis,
    /// Set the fit band (Hz) and re-fit.
    SetBand(f64, f64),
    /// Open the source described by the source fields.
    OpenSource,
    /// Open the demo again.
    OpenDemo,
    /// Playback speed.
    SetSpeed(f64),
    /// Save a snapshot to the typed path.
    SaveSnapshot {
        /// Replace an existing file (asked first).
        overwrite: bool,
    },
    /// Save a snapshot with an automatic name in the last folder.
    QuickSnapshot,
    /// Load the snapshot at the typed path.
    LoadSnapshot,
    /// Export a PNG of the window to the typed path.
    ExportPng {
        /// Replace an existing file (asked first).
        overwrite: bool,
    },
    /// Zoom the plot to a frequency span (Hz).
    ZoomTo(f64, f64),
    /// Zoom to the whole spectrum.
    ZoomAll,
}

/// The eframe app.
pub struct StillpointApp {
    state: AppState,
    engine: Option<Engine>,
    live: LiveState,
    source: SourceConfig,
    messages: Vec<UiMessage>,
    paused: bool,
    commands: Vec<UiCommand>,
    ui: panels::PanelState,
    plot: plot::PlotState,
    cooldown: cooldown::CooldownState,
    sidebands: sideband_view::SidebandViewState,
    files: files::FileState,
    snapshots: Vec<LoadedSnapshot>,
    reference: Option<usize>,
    show_about: bool,
    show_help: bool,
    screenshot: Option<(PathBuf, f64)>,
    screenshot_requested: bool,
    start_time: Option<f64>,
}

impl StillpointApp {
    /// Creates the app (starts the engine on `options.source`).
    pub fn new(cc: &eframe::CreationContext<'_>, options: MonitorOptions) -> Self {
        theme::install(&cc.egui_ctx);
        let mut state: AppState = if options.fresh_settings || options.screenshot.is_some() {
            AppState::default()
        } else {
            cc.storage
                .and_then(|s| eframe::get_value(s, eframe::APP_KEY))
                .unwrap_or_default()
        };
        if let Some(w) = &options.welch {
            state.welch = WelchSettings::from_config(w);
        }
        if let Some(a) = &options.analysis {
            state.calibration = CalibrationInputs::from_options(a);
        }
        if let Some(s) = options.speed {
            state.playback_speed = s;
        }
        if crate::model::state::unit_is_displacement(state.unit)
            && state.calibration.method == CalibrationMethod::None
        {
            state.unit = DensityUnit::V2PerHz;
        }
        let ctx = cc.egui_ctx.clone();
        let mut app = Self {
            state,
            engine: None,
            live: LiveState::new(),
            source: options.source.clone(),
            messages: Vec::new(),
            paused: false,
            commands: Vec::new(),
            ui: panels::PanelState::new(&options.source),
            plot: plot::PlotState::default(),
            cooldown: cooldown::CooldownState::default(),
            sidebands: sideband_view::SidebandViewState::default(),
            files: files::FileState::new(),
            snapshots: Vec::new(),
            reference: None,
            show_about: false,
            show_help: false,
            screenshot: options
                .screenshot
                .clone()
                .map(|p| (p, options.screenshot_after_s)),
            screenshot_requested: false,
            start_time: None,
        };
        app.ui.sync_from(&app.state);
        app.plot.quiet = app.screenshot.is_some();
        app.start_engine(&ctx);
        app
    }

    fn start_engine(&mut self, ctx: &egui::Context) {
        let mut config = EngineConfig::new(self.source.clone());
        config.welch = self.state.welch.clone();
        config.analysis = self.state.calibration.to_options();
        config.follow_mode = self.state.calibration.follow_mode;
        config.playback_speed = Some(self.state.playback_speed);
        let waker_ctx = ctx.clone();
        match Engine::start(
            config,
            Box::new(move || waker_ctx.request_repaint_after(Duration::from_millis(10))),
        ) {
            Ok(e) => self.engine = Some(e),
            Err(e) => self.error(format!("cannot start the engine: {e}")),
        }
    }

    /// Settings as they stand (tests read them).
    pub fn state(&self) -> &AppState {
        &self.state
    }

    /// The sideband view's trend (tests read it).
    pub fn sideband_history(&self) -> &[sideband_view::SidebandPoint] {
        self.sidebands.history()
    }

    /// Messages shown (tests read them).
    pub fn messages(&self) -> &[UiMessage] {
        &self.messages
    }

    /// Snapshots loaded (tests read them).
    pub fn snapshots(&self) -> &[LoadedSnapshot] {
        &self.snapshots
    }

    /// The live state (tests read it).
    pub fn live(&self) -> &LiveState {
        &self.live
    }

    fn error(&mut self, text: impl Into<String>) {
        self.push_message(text.into(), true);
    }

    fn info(&mut self, text: impl Into<String>) {
        self.push_message(text.into(), false);
    }

    fn push_message(&mut self, text: String, error: bool) {
        if self.messages.last().is_some_and(|m| m.text == text) {
            return;
        }
        self.messages.push(UiMessage { text, error });
        if self.messages.len() > 6 {
            self.messages.remove(0);
        }
    }

    fn send(&mut self, command: EngineCommand) {
        let sent = self.engine.as_ref().is_some_and(|e| e.send(command));
        if !sent {
            self.error("the engine is not running");
        }
    }

    fn drain_engine(&mut self) {
        let Some(engine) = &self.engine else {
            return;
        };
        let frames = engine.drain_frames();
        let notices = engine.drain_notices();
        for f in frames {
            self.sidebands.observe(&f);
            self.live.apply(f);
        }
        for n in notices {
            match n {
                EngineNotice::Opened(d) => self.info(format!("opened: {d}")),
                EngineNotice::Error(e) => self.error(e),
            }
        }
        if let Some(frame) = &self.live.frame
            && let Some(band) = frame.band_hz
            && self.state.calibration.follow_mode
        {
            // Keep the remembered band in step with the one the engine follows.
            self.state.calibration.mode_band_hz = Some(band);
        }
    }

    fn keyboard(&mut self, ctx: &egui::Context) {
        if ctx.egui_wants_keyboard_input() {
            return;
        }
        let pressed = |k: Key| ctx.input(|i| i.key_pressed(k));
        if pressed(Key::Space) {
            self.commands.push(UiCommand::TogglePause);
        }
        if pressed(Key::R) {
            self.commands.push(UiCommand::Restart);
        }
        if pressed(Key::S) {
            self.commands.push(UiCommand::QuickSnapshot);
        }
        if pressed(Key::U) {
            self.commands.push(UiCommand::CycleUnit);
        }
        if pressed(Key::B) {
            self.plot.band_mode = !self.plot.band_mode;
        }
        if pressed(Key::M) {
            self.zoom_mode_region();
        }
        if pressed(Key::A) {
            self.commands.push(UiCommand::ZoomAll);
        }
        if pressed(Key::F1) || pressed(Key::H) {
            self.show_help = !self.show_help;
        }
    }

    fn apply_commands(&mut self, ctx: &egui::Context) {
        let commands = std::mem::take(&mut self.commands);
        for c in commands {
            self.apply(c, ctx);
        }
    }

    fn apply(&mut self, command: UiCommand, ctx: &egui::Context) {
        match command {
            UiCommand::TogglePause => {
                self.paused = !self.paused;
                self.send(if self.paused {
                    EngineCommand::Pause
                } else {
                    EngineCommand::Resume
                });
            }
            UiCommand::Restart => self.send(EngineCommand::RestartAverage),
            UiCommand::CycleUnit => {
                self.state.cycle_unit();
                self.plot.reset_y = true;
            }
            UiCommand::ApplyWelch => match self.ui.welch_settings() {
                Ok(w) => {
                    self.state.welch = w.clone();
                    self.send(EngineCommand::SetWelch(w));
                }
                Err(e) => self.error(e),
            },
            UiCommand::ApplyAnalysis => match self.ui.calibration_inputs(&self.state.calibration) {
                Ok(c) => {
                    self.state.calibration = c;
                    self.send_analysis();
                }
                Err(e) => self.error(e),
            },
            UiCommand::SetBand(lo, hi) => {
                let (lo, hi) = if lo <= hi { (lo, hi) } else { (hi, lo) };
                if lo > 0.0 && hi > lo {
                    self.state.calibration.mode_band_hz = Some((lo, hi));
                    self.ui.sync_from(&self.state);
                    self.send_analysis();
                }
            }
            UiCommand::OpenSource => match self.ui.source_config() {
                Ok(cfg) => {
                    if let SourceSpec::Path(p) = &cfg.spec {
                        self.state.last_source_path = Some(p.clone());
                    }
                    self.source = cfg.clone();
                    self.cooldown = cooldown::CooldownState::default();
                    self.plot.reset_view = true;
                    self.send(EngineCommand::OpenSource(cfg));
                }
                Err(e) => self.error(e),
            },
            UiCommand::OpenDemo => {
                // The demo comes with its calibration and Welch settings (as at start-up).
                let demo = MonitorOptions::demo();
                if let Some(w) = &demo.welch {
                    self.state.welch = WelchSettings::from_config(w);
                    self.send(EngineCommand::SetWelch(self.state.welch.clone()));
                }
                if let Some(a) = &demo.analysis {
                    self.state.calibration = CalibrationInputs::from_options(a);
                    self.ui.sync_from(&self.state);
                    self.send_analysis();
                }
                self.source = demo.source.clone();
                self.cooldown = cooldown::CooldownState::default();
                self.sidebands = sideband_view::SidebandViewState::default();
                self.plot.reset_view = true;
                self.send(EngineCommand::OpenSource(demo.source));
            }
            UiCommand::SetSpeed(s) => {
                self.state.playback_speed = s;
                self.send(EngineCommand::SetSpeed(Some(s)));
            }
            UiCommand::SaveSnapshot { overwrite } => self.save_snapshot(overwrite),
            UiCommand::QuickSnapshot => {
                self.files.snapshot_path = files::auto_snapshot_path(&self.state);
                self.save_snapshot(false);
            }
            UiCommand::LoadSnapshot => self.load_snapshot(),
            UiCommand::ExportPng { overwrite } => self.export_png(ctx, overwrite),
            UiCommand::ZoomTo(lo, hi) => {
                if lo > 0.0 && hi > lo {
                    self.plot.request_x = Some((lo.log10(), hi.log10()));
                    self.plot.reset_y = true;
                }
            }
            UiCommand::ZoomAll => self.plot.reset_view = true,
        }
    }

    /// Zooms to the mode's band; in heterodyne (the band is of f_m itself) to both sidebands
    /// at carrier ± band, where the mode's lines are.
    fn zoom_mode_region(&mut self) {
        let Some((lo, hi)) = self.state.calibration.mode_band_hz else {
            return;
        };
        let w = hi - lo;
        match self.state.calibration.carrier_hz {
            Some(fc) => self
                .commands
                .push(UiCommand::ZoomTo((fc - hi - w).max(1.0), fc + hi + w)),
            None => self.commands.push(UiCommand::ZoomTo(lo - w, hi + w)),
        }
    }

    fn send_analysis(&mut self) {
        let options = self.state.calibration.to_options();
        let follow = self.state.calibration.follow_mode;
        self.send(EngineCommand::SetAnalysis {
            options,
            follow_mode: follow,
        });
    }

    fn menu_bar(&mut self, ui: &mut egui::Ui) {
        ui.horizontal_wrapped(|ui| {
            ui.label(RichText::new("stillpoint").strong().size(17.0));
            ui.separator();
            let pause_label = if self.paused { "Resume" } else { "Freeze" };
            if ui
                .button(pause_label)
                .on_hover_text("Space: freeze/resume the display")
                .clicked()
            {
                self.commands.push(UiCommand::TogglePause);
            }
            if ui
                .button("Restart average")
                .on_hover_text("R: forget the averaged segments")
                .clicked()
            {
                self.commands.push(UiCommand::Restart);
            }
            ui.separator();
            ui.label("Unit:");
            for u in crate::model::state::UNIT_CYCLE {
                let text = crate::model::state::unit_short(u);
                if ui.selectable_label(self.state.unit == u, text).clicked() {
                    self.state.unit = u;
                    self.plot.reset_y = true;
                }
            }
            ui.separator();
            if ui
                .button("Snapshot")
                .on_hover_text("S: save the current spectrum (JSON + CSV)")
                .clicked()
            {
                self.commands.push(UiCommand::QuickSnapshot);
            }
            let band_label = if self.plot.band_mode {
                "Drag on the plot to set the band…"
            } else {
                "Set fit band"
            };
            if ui
                .selectable_label(self.plot.band_mode, band_label)
                .on_hover_text("B: drag across the plot to set the mode fit band")
                .clicked()
            {
                self.plot.band_mode = !self.plot.band_mode;
            }
            if ui.button("Whole span").on_hover_text("A").clicked() {
                self.commands.push(UiCommand::ZoomAll);
            }
            if ui.button("Mode region").on_hover_text("M").clicked() {
                self.zoom_mode_region();
            }
            ui.checkbox(&mut self.state.show_cooldown, "Cooldown view");
            ui.separator();
            if ui.button("Help").clicked() {
                self.show_help = !self.show_help;
            }
            if ui.button("About").clicked() {
                self.show_about = !self.show_about;
            }
        });
    }

    fn messages_ui(&mut self, ui: &mut egui::Ui) {
        let mut remove = None;
        for (i, m) in self.messages.iter().enumerate() {
            ui.horizontal(|ui| {
                let color = if m.error { theme::ERROR } else { theme::PENCIL };
                if ui.small_button("×").on_hover_text("dismiss").clicked() {
                    remove = Some(i);
                }
                ui.label(RichText::new(&m.text).color(color));
            });
        }
        if let Some(i) = remove {
            self.messages.remove(i);
        }
    }

    fn windows(&mut self, ctx: &egui::Context) {
        let mut open = self.show_about;
        egui::Window::new("About stillpoint")
            .open(&mut open)
            .collapsible(false)
            .default_width(460.0)
            .show(ctx, |ui| {
                ui.label(format!(
                    "stillpoint {} — calibrated displacement spectra, mode fits and quantum \
                     references for mechanical resonators near their ground state.",
                    env!("CARGO_PKG_VERSION")
                ));
                ui.add_space(6.0);
                ui.label(
                    "The built-in demo is an invented device generated by our own synthesiser; \
                     it is not real data.",
                );
                ui.add_space(8.0);
                ui.label(RichText::new("Safety").strong());
                ui.label(
                    "This program only reads data; it never drives hardware. The bench it \
                     watches may not be harmless: the lasers used in optomechanics are often \
                     Class 3B or Class 4 (eye and skin hazard, also from stray reflections), and \
                     cryogens can cause asphyxiation in closed rooms and cold burns on contact.",
                );
                ui.label(
                    "Follow your laboratory's laser safety officer, your local codes and licensed \
                     practice (for example IEC 60825-1 and ANSI Z136.1); nothing in this program \
                     replaces them.",
                );
            });
        self.show_about = open;

        let mut open = self.show_help;
        egui::Window::new("Keyboard and mouse")
            .open(&mut open)
            .collapsible(false)
            .show(ctx, |ui| {
                egui::Grid::new("help_grid").striped(true).show(ui, |ui| {
                    for (k, what) in [
                        ("Space", "freeze / resume"),
                        ("R", "restart the average"),
                        ("S", "save a snapshot (JSON + CSV) in the last folder"),
                        ("U", "next display unit"),
                        ("B", "set the fit band: drag across the spectrum"),
                        ("M", "zoom to the mode region"),
                        ("A", "zoom to the whole span"),
                        ("H / F1", "this help"),
                        ("drag", "pan the plot (scroll or Ctrl+scroll to zoom)"),
                        ("double-click", "whole span"),
                        ("click a resonance", "zoom the plot to it"),
                    ] {
                        ui.label(RichText::new(k).monospace());
                        ui.label(what);
                        ui.end_row();
                    }
                });
            });
        self.show_help = open;

        if let Some(path) = self.files.confirm_overwrite.clone() {
            egui::Window::new("Replace file?")
                .collapsible(false)
                .resizable(false)
                .show(ctx, |ui| {
                    ui.label(format!("{} already exists.", path.display()));
                    ui.horizontal(|ui| {
                        if ui.button("Replace").clicked() {
                            self.files.confirm_overwrite = None;
                            let c = match self.files.confirm_kind {
                                files::ConfirmKind::Snapshot => {
                                    UiCommand::SaveSnapshot { overwrite: true }
                                }
                                files::ConfirmKind::Png => UiCommand::ExportPng { overwrite: true },
                            };
                            self.commands.push(c);
                        }
                        if ui.button("Keep the existing file").clicked() {
                            self.files.confirm_overwrite = None;
                        }
                    });
                });
        }
    }

    fn screenshot_tick(&mut self, ctx: &egui::Context) {
        let now = ctx.input(|i| i.time);
        let start = *self.start_time.get_or_insert(now);
        let Some((path, after_s)) = self.screenshot.clone() else {
            return;
        };
        if self.screenshot_requested {
            return;
        }
        if now - start >= after_s {
            self.screenshot_requested = true;
            let ctx2 = ctx.clone();
            ctx.request_screenshot(move |image| {
                if let Err(e) = files::write_png(&path, &image, true) {
                    eprintln!("stillpoint: cannot save the screenshot: {e}");
                }
                ctx2.send_viewport_cmd(egui::ViewportCommand::Close);
                ctx2.request_repaint();
            });
        } else {
            ctx.request_repaint_after(Duration::from_millis(100));
        }
    }
}

impl eframe::App for StillpointApp {
    fn logic(&mut self, ctx: &egui::Context, _frame: &mut eframe::Frame) {
        self.drain_engine();
        self.drain_png_results();
        self.keyboard(ctx);
        self.screenshot_tick(ctx);
    }

    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        let ctx = ui.ctx().clone();
        egui::Panel::top("menu")
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(6.0))
            .show(ui, |ui| self.menu_bar(ui));
        egui::Panel::bottom("status")
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(4.0))
            .show(ui, |ui| {
                panels::status_line(ui, &self.live, &self.source, self.paused)
            });
        egui::Panel::left("controls")
            .default_size(270.0)
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(8.0))
            .show(ui, |ui| {
                egui::ScrollArea::vertical().show(ui, |ui| {
                    let cmds = self.ui.controls_ui(ui, &mut self.state, &mut self.files);
                    self.commands.extend(cmds);
                });
            });
        egui::Panel::right("mode")
            .default_size(300.0)
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(8.0))
            .show(ui, |ui| {
                egui::ScrollArea::vertical().show(ui, |ui| {
                    panels::mode_panel(ui, &self.live, &self.state);
                    ui.separator();
                    panels::sideband_panel(ui, &self.live);
                    let cmds = panels::peaks_panel(
                        ui,
                        &self.live,
                        self.reference.and_then(|i| self.snapshots.get(i)),
                    );
                    self.commands.extend(cmds);
                    ui.separator();
                    let cmds = files::snapshots_ui(
                        ui,
                        &mut self.files,
                        &mut self.snapshots,
                        &mut self.reference,
                        &mut self.state,
                    );
                    self.commands.extend(cmds);
                });
            });
        egui::CentralPanel::default()
            .frame(egui::Frame::new().fill(theme::PAPER).inner_margin(8.0))
            .show(ui, |ui| {
                self.messages_ui(ui);
                let avail = ui.available_height();
                let heterodyne = self.state.calibration.carrier_hz.is_some();
                let sideband_h = if heterodyne {
                    (avail * 0.45).max(240.0)
                } else {
                    0.0
                };
                let rest = (avail - sideband_h).max(200.0);
                let plot_h = if self.state.show_cooldown {
                    (rest * 0.6).max(220.0)
                } else {
                    rest
                };
                let cmds =
                    self.plot
                        .spectrum_ui(ui, plot_h, &self.live, &self.state, &self.snapshots);
                self.commands.extend(cmds);
                if heterodyne {
                    ui.add_space(4.0);
                    self.sidebands
                        .ui(ui, sideband_h, &self.live, &self.state, &self.source);
                }
                if self.state.show_cooldown {
                    ui.add_space(4.0);
                    self.cooldown.ui(ui, &self.live);
                }
            });
        self.windows(&ctx);
        self.apply_commands(&ctx);
        // Repaint while data flows; idle when frozen or when the stream has ended.
        let flowing = !self.paused && self.live.status().is_none_or(|s| s.ended.is_none());
        if flowing {
            ctx.request_repaint_after(Duration::from_millis(50));
        }
    }

    fn save(&mut self, storage: &mut dyn eframe::Storage) {
        if self.screenshot.is_none() {
            eframe::set_value(storage, eframe::APP_KEY, &self.state);
        }
    }
}

impl Drop for StillpointApp {
    fn drop(&mut self) {
        // Join the engine (and through it the acquisition thread) before the window goes.
        self.engine = None;
    }
}

/// The model's plot-preparation benchmark (re-exported for `stillpoint bench`).
pub fn bench_plot_prep(runs: usize) -> Duration {
    model::bench_plot_prep(runs)
}
