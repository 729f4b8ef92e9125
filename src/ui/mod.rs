//! The desktop window (eframe + egui_plot). Only this module imports egui, and it is compiled
//! only with the `gui` feature.
//!
//! [`run`] opens the window on a source ([`MonitorOptions`]); [`StillpointApp`] is the eframe
//! app. It owns a [`model::Engine`] (acquisition, Welch and the fit run on the engine thread,
//! never here) and a [`model::LiveState`]; each repaint it drains the engine's frames, draws
//! them, and turns clicks and keys into [`UiCommand`]s applied after the frame.

mod axes;
mod cross_view;
mod figure_export;
mod files;
mod history_view;
pub mod journal_ui;
mod panels;
mod plot;
mod sideband_view;
mod theme;

use std::path::PathBuf;
use std::time::{Duration, Instant};

use eframe::egui::{self, Key, RichText};

use crate::acquire::{SourceConfig, SourceSpec};
use crate::analysis::AnalysisOptions;
use crate::dsp::units::DensityUnit;
use crate::model::{
    self, AppState, Engine, EngineCommand, EngineConfig, EngineNotice, LiveState, LoadedSnapshot,
    WelchSettings,
};

/// How the window starts (the CLI's `stillpoint` and `stillpoint monitor SOURCE …`).
#[derive(Debug, Clone, PartialEq)]
pub struct MonitorOptions {
    /// Source to open.
    pub source: SourceConfig,
    /// Welch settings from the command line (`None`: the remembered ones, or defaults).
    pub welch: Option<WelchSettings>,
    /// Calibration/mode/heterodyne/fit options from the command line, taken as they are
    /// (`None`: the remembered ones, or defaults).
    pub analysis: Option<AnalysisOptions>,
    /// Playback speed of recordings (1 = real time; `None`: remembered, default 1).
    pub speed: Option<f64>,
    /// Save a PNG of the window to this path after `screenshot_after_s`, then quit.
    pub screenshot: Option<PathBuf>,
    /// Seconds before the screenshot is taken.
    pub screenshot_after_s: f64,
    /// Ignore remembered settings (tests, screenshots).
    pub fresh_settings: bool,
    /// Session journal folder for this run (`None`: the one chosen before, else
    /// [`model::journal::default_folder`]).
    pub journal_dir: Option<PathBuf>,
    /// Write no session journal (screenshots).
    pub no_journal: bool,
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
        let welch = welch.as_ref().map(WelchSettings::from_config);
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
            journal_dir: None,
            no_journal: false,
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
            journal_dir: None,
            no_journal: false,
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

/// What a message is about: a later success of the same kind clears an error of that kind
/// (a corrected mistake does not stay on screen).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MessageKind {
    /// Opening a source.
    Source,
    /// The averaging settings.
    Averaging,
    /// The calibration and mode settings.
    Analysis,
    /// Snapshot files.
    Snapshot,
    /// PNG export.
    Export,
    /// Anything else.
    Other,
}

/// A message shown in the window (above the plot; at most [`MESSAGES_SHOWN`] at a time).
#[derive(Debug, Clone, PartialEq)]
pub struct UiMessage {
    /// Text.
    pub text: String,
    /// Shown in red.
    pub error: bool,
    /// What it is about.
    pub kind: MessageKind,
    /// A button offered with it (label, command).
    pub action: Option<(String, UiCommand)>,
    /// Window time (s) after which it goes away by itself; `None`: until dismissed.
    pub expires_at: Option<f64>,
}

/// Messages shown at once (newest); older ones are counted and reachable by dismissing.
pub const MESSAGES_SHOWN: usize = 3;
/// Messages kept at most.
const MESSAGES_KEPT: usize = 8;
/// Seconds an information message stays.
pub const INFO_SECONDS: f64 = 8.0;
/// Seconds an error stays (unless dismissed or corrected first).
pub const ERROR_SECONDS: f64 = 30.0;

/// What a click or key asks for; applied after the frame.
#[must_use]
#[derive(Debug, Clone, PartialEq)]
pub enum UiCommand {
    /// Pause or resume.
    TogglePause,
    /// Restart the average (after the end of a recording: play it again).
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
    /// Write the publication figure of the current plot to the typed path (.svg/.png).
    ExportFigure,
    /// Zoom the plot to a frequency span (Hz).
    ZoomTo(f64, f64),
    /// Zoom to the whole spectrum.
    ZoomAll,
    /// Forget the remembered averaging and calibration settings and use the defaults for the
    /// source that is open.
    FreshSettings,
    /// Remove every message.
    DismissMessages,
}

/// The eframe app.
pub struct StillpointApp {
    state: AppState,
    engine: Option<Engine>,
    live: LiveState,
    source: SourceConfig,
    /// A source asked for and not yet opened by the engine.
    pending_source: Option<SourceConfig>,
    messages: Vec<UiMessage>,
    paused: bool,
    commands: Vec<UiCommand>,
    ui: panels::PanelState,
    plot: plot::PlotState,
    history: history_view::HistoryViewState,
    sidebands: sideband_view::SidebandViewState,
    cross: cross_view::CrossViewState,
    files: files::FileState,
    journal: journal_ui::JournalState,
    snapshots: Vec<LoadedSnapshot>,
    reference: Option<usize>,
    show_about: bool,
    show_help: bool,
    screenshot: Option<(PathBuf, f64)>,
    screenshot_requested: bool,
    start_time: Option<f64>,
    /// Window time of the frame being drawn, s.
    now_s: f64,
    /// The analysis options last sent to the engine (tests read them).
    sent_analysis: AnalysisOptions,
    /// The Welch settings last sent to the engine (tests read them).
    sent_welch: WelchSettings,
    /// CPU time of the last frames (logic + drawing), smoothed, s.
    frame_cpu_s: f64,
    /// CPU time of this frame's logic, s.
    logic_cpu_s: f64,
    /// CPU time of the last frame (logic + drawing), s, not smoothed (the benchmark reads it).
    last_frame_cpu_s: f64,
    /// Where the panels and the plot were drawn in the last frame (tests read it).
    layout: Layout,
}

/// Where the parts of the window were drawn in the last frame, in points.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Layout {
    /// The left panel (controls).
    pub left: egui::Rect,
    /// The right panel (read-outs, snapshots).
    pub right: egui::Rect,
    /// The spectrum plot.
    pub plot: egui::Rect,
}

impl Default for Layout {
    fn default() -> Self {
        Self {
            left: egui::Rect::NOTHING,
            right: egui::Rect::NOTHING,
            plot: egui::Rect::NOTHING,
        }
    }
}

/// The widest the (left, right) panels may be in a window `width` points wide: together at
/// most about half of it, so the plot between them stays the largest thing.
fn side_panel_widths(width: f32) -> (f32, f32) {
    (
        (0.2 * width).clamp(200.0, 300.0),
        (0.24 * width).clamp(240.0, 360.0),
    )
}

/// Heights of (spectrum plot, sideband view) in a central area `avail` points tall; the
/// history view takes what is left. The spectrum plot always gets the largest share.
fn central_heights(avail: f32, heterodyne: bool, history: bool) -> (f32, f32) {
    match (heterodyne, history) {
        (false, false) => (avail, 0.0),
        (false, true) => ((avail * 0.6).max(220.0), 0.0),
        (true, false) => ((avail * 0.56).max(220.0), (avail * 0.42).max(200.0)),
        (true, true) => ((avail * 0.5).max(220.0), (avail * 0.3).max(180.0)),
    }
}

/// A short name for a source, to say which one remembered settings were made for.
fn source_key(source: &SourceConfig) -> String {
    match &source.spec {
        SourceSpec::Demo { scenario, .. } => format!("the demo '{scenario}'"),
        SourceSpec::Path(p) => p.display().to_string(),
        SourceSpec::Stdin => "standard input".into(),
        SourceSpec::Tcp(a) => format!("tcp://{a}"),
    }
}

impl StillpointApp {
    /// Creates the app (starts the engine on `options.source`).
    pub fn new(cc: &eframe::CreationContext<'_>, options: MonitorOptions) -> Self {
        theme::install(&cc.egui_ctx);
        let remembered: Option<AppState> = if options.fresh_settings || options.screenshot.is_some()
        {
            None
        } else {
            cc.storage
                .and_then(|s| eframe::get_value(s, eframe::APP_KEY))
        };
        let from_storage = remembered.is_some();
        let mut state = remembered.unwrap_or_default();
        let remembered_for = state.settings_source.clone();
        if let Some(w) = &options.welch {
            state.welch = w.clone();
        }
        if let Some(a) = &options.analysis {
            state.analysis = a.clone();
        }
        if let Some(s) = options.speed {
            state.playback_speed = s;
        }
        if crate::model::state::unit_is_displacement(state.unit)
            && crate::model::CalibrationMethod::of(&state.analysis)
                == crate::model::CalibrationMethod::None
        {
            state.unit = DensityUnit::V2PerHz;
        }
        let key = source_key(&options.source);
        // Remembered settings applied to another source than the one they were made for:
        // say so, with one click back to fresh settings.
        let uses_remembered = options.welch.is_none() || options.analysis.is_none();
        let announce = from_storage
            && uses_remembered
            && remembered_for.as_deref() != Some(key.as_str())
            && (state.welch != WelchSettings::default()
                || state.analysis != AnalysisOptions::default());
        state.settings_source = Some(key.clone());
        let journal_folder = if options.no_journal || options.screenshot.is_some() {
            None
        } else {
            options
                .journal_dir
                .clone()
                .or_else(|| state.journal_folder.clone())
                .or_else(model::journal::default_folder)
        };
        let ctx = cc.egui_ctx.clone();
        let mut app = Self {
            state,
            engine: None,
            live: LiveState::new(),
            source: options.source.clone(),
            pending_source: None,
            messages: Vec::new(),
            paused: false,
            commands: Vec::new(),
            ui: panels::PanelState::new(&options.source),
            plot: plot::PlotState::default(),
            history: history_view::HistoryViewState::default(),
            sidebands: sideband_view::SidebandViewState::default(),
            cross: cross_view::CrossViewState::default(),
            files: files::FileState::new(),
            journal: journal_ui::JournalState::new(journal_folder),
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
            now_s: ctx.input(|i| i.time),
            sent_analysis: AnalysisOptions::default(),
            sent_welch: WelchSettings::default(),
            frame_cpu_s: 0.0,
            logic_cpu_s: 0.0,
            last_frame_cpu_s: 0.0,
            layout: Layout::default(),
        };
        app.ui.sync_from(&app.state);
        app.plot.quiet = app.screenshot.is_some();
        if announce {
            let from = remembered_for.unwrap_or_else(|| "an earlier session".into());
            app.push(UiMessage {
                text: format!(
                    "Averaging and calibration settings remembered from {from} are applied to \
                     {key}."
                ),
                error: false,
                kind: MessageKind::Other,
                action: Some((
                    "Fresh settings for this source".into(),
                    UiCommand::FreshSettings,
                )),
                expires_at: None,
            });
        }
        app.start_engine(&ctx);
        app
    }

    fn start_engine(&mut self, ctx: &egui::Context) {
        let mut config = EngineConfig::new(self.source.clone());
        config.welch = self.state.welch.clone();
        config.analysis = self.state.analysis.clone();
        config.follow_mode = self.state.follow_mode;
        config.playback_speed = Some(self.state.playback_speed);
        self.sent_welch = config.welch.clone();
        self.sent_analysis = config.analysis.clone();
        let waker_ctx = ctx.clone();
        match Engine::start(
            config,
            Box::new(move || waker_ctx.request_repaint_after(Duration::from_millis(10))),
        ) {
            Ok(e) => self.engine = Some(e),
            Err(e) => self.error(MessageKind::Other, format!("cannot start the engine: {e}")),
        }
    }

    /// Settings as they stand (tests read them).
    pub fn state(&self) -> &AppState {
        &self.state
    }

    /// The analysis options last handed to the engine (tests read them).
    pub fn engine_analysis(&self) -> &AnalysisOptions {
        &self.sent_analysis
    }

    /// The Welch settings last handed to the engine (tests read them).
    pub fn engine_welch(&self) -> &WelchSettings {
        &self.sent_welch
    }

    /// The fit band fields of the panel as they read (tests read them).
    pub fn band_fields(&self) -> (String, String) {
        self.ui.band_fields()
    }

    /// The source in use (tests read it).
    pub fn source(&self) -> &SourceConfig {
        &self.source
    }

    /// Messages kept, oldest first (tests read them).
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

    /// CPU time per frame (logic and drawing), smoothed over the last frames, s.
    pub fn frame_cpu_s(&self) -> f64 {
        self.frame_cpu_s
    }

    /// Where the panels and the plot were drawn in the last frame (tests read it).
    pub fn layout(&self) -> Layout {
        self.layout
    }

    /// CPU time of the last frame (logic and drawing), not smoothed, s.
    pub fn last_frame_cpu_s(&self) -> f64 {
        self.last_frame_cpu_s
    }

    /// Stops the engine and shows `frame` as if the engine had sent it (the frame-time
    /// benchmark, `tests/frame_time.rs`, feeds its own spectra with it).
    pub fn show_frame(&mut self, frame: model::Frame) {
        self.engine = None;
        self.live.apply(frame);
    }

    fn error(&mut self, kind: MessageKind, text: impl Into<String>) {
        self.push(UiMessage {
            text: text.into(),
            error: true,
            kind,
            action: None,
            expires_at: Some(self.now_s + ERROR_SECONDS),
        });
    }

    fn info(&mut self, kind: MessageKind, text: impl Into<String>) {
        self.push(UiMessage {
            text: text.into(),
            error: false,
            kind,
            action: None,
            expires_at: Some(self.now_s + INFO_SECONDS),
        });
    }

    /// A success of `kind`: errors of that kind are corrected and go.
    fn corrected(&mut self, kind: MessageKind) {
        self.messages.retain(|m| !(m.error && m.kind == kind));
    }

    fn push(&mut self, mut message: UiMessage) {
        message.text = crate::model::format::window_words(&message.text);
        if let Some(m) = self.messages.iter_mut().find(|m| m.text == message.text) {
            m.expires_at = message.expires_at;
            return;
        }
        if !message.error {
            self.corrected(message.kind);
        }
        self.messages.push(message);
        while self.messages.len() > MESSAGES_KEPT {
            self.messages.remove(0);
        }
    }

    /// Drops expired messages; returns the time until the next one expires.
    fn expire_messages(&mut self) -> Option<f64> {
        let now = self.now_s;
        self.messages
            .retain(|m| m.expires_at.is_none_or(|t| t > now));
        self.messages
            .iter()
            .filter_map(|m| m.expires_at)
            .map(|t| t - now)
            .reduce(f64::min)
    }

    fn send(&mut self, command: EngineCommand) {
        let sent = self.engine.as_ref().is_some_and(|e| e.send(command));
        if !sent {
            self.error(MessageKind::Other, "the engine is not running");
        }
    }

    fn drain_engine(&mut self) {
        let Some(engine) = &self.engine else {
            return;
        };
        let frames = engine.drain_frames();
        let notices = engine.drain_notices();
        for f in frames {
            self.journal_frame(&f);
            self.sidebands.observe(&f);
            self.live.apply(f);
        }
        for n in notices {
            match n {
                EngineNotice::Opened(d) => {
                    if let Some(cfg) = self.pending_source.take() {
                        if let SourceSpec::Path(p) = &cfg.spec {
                            self.state.last_source_path = Some(p.clone());
                        }
                        self.state.settings_source = Some(source_key(&cfg));
                        self.source = cfg;
                        self.history = history_view::HistoryViewState::default();
                        self.plot.reset_view = true;
                    }
                    self.corrected(MessageKind::Source);
                    self.info(MessageKind::Source, format!("opened: {d}"));
                }
                EngineNotice::OpenFailed(e) => {
                    self.pending_source = None;
                    let running = if self.live.frame.is_some() {
                        " (the source running before goes on)"
                    } else {
                        ""
                    };
                    self.error(MessageKind::Source, format!("{e}{running}"));
                }
                EngineNotice::Info(t) => self.info(MessageKind::Other, t),
                EngineNotice::Error(e) => self.error(MessageKind::Other, e),
            }
        }
        if let Some(frame) = &self.live.frame
            && let Some(band) = frame.band_hz
            && self.state.follow_mode
            && self.state.analysis.mode_band_hz != Some(band)
        {
            // Keep the remembered band, and the band fields, in step with the band the
            // engine follows (so "Apply" never sends a stale band).
            self.state.analysis.mode_band_hz = Some(band);
            self.ui.show_band(band);
        }
    }

    /// Keyboard shortcuts. Never while a text field has focus; letter keys and Space only
    /// while the pointer is over the spectrum plot, or anywhere with Ctrl (⌘) held, so
    /// keystrokes meant as text (after a missed click) never act.
    fn keyboard(&mut self, ctx: &egui::Context) {
        if ctx.egui_wants_keyboard_input() {
            return;
        }
        let (command, f1) = ctx.input(|i| {
            (
                i.modifiers.command || i.modifiers.ctrl,
                i.key_pressed(Key::F1),
            )
        });
        if f1 {
            self.show_help = !self.show_help;
        }
        if !(command || self.plot.hovered) {
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
        if pressed(Key::H) {
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
            UiCommand::Restart => {
                if self.paused {
                    self.paused = false;
                    self.send(EngineCommand::Resume);
                }
                self.send(EngineCommand::RestartAverage);
            }
            UiCommand::CycleUnit => {
                self.state.cycle_unit();
                self.plot.reset_y = true;
            }
            UiCommand::ApplyWelch => match self.ui.welch_settings() {
                Ok(w) => {
                    self.corrected(MessageKind::Averaging);
                    self.state.welch = w.clone();
                    self.sent_welch = w.clone();
                    self.send(EngineCommand::SetWelch(w));
                    self.journal_settings_changed();
                }
                Err(e) => self.error(MessageKind::Averaging, e),
            },
            UiCommand::ApplyAnalysis => match self.ui.analysis_options(&self.state.analysis) {
                Ok((options, follow)) => {
                    self.corrected(MessageKind::Analysis);
                    self.state.analysis = options;
                    self.state.follow_mode = follow;
                    self.send_analysis();
                }
                Err(e) => self.error(MessageKind::Analysis, e),
            },
            UiCommand::SetBand(lo, hi) => {
                let (lo, hi) = if lo <= hi { (lo, hi) } else { (hi, lo) };
                if lo > 0.0 && hi > lo {
                    self.state.analysis.mode_band_hz = Some((lo, hi));
                    self.ui.show_band((lo, hi));
                    self.send_analysis();
                }
            }
            UiCommand::OpenSource => match self.ui.source_config() {
                Ok(cfg) => {
                    // The running source stays until the engine has opened this one.
                    self.pending_source = Some(cfg.clone());
                    self.send(EngineCommand::OpenSource(cfg));
                }
                Err(e) => self.error(MessageKind::Source, e),
            },
            UiCommand::OpenDemo => {
                // The demo comes with its calibration and Welch settings (as at start-up).
                let demo = MonitorOptions::demo();
                self.pending_source = Some(demo.source.clone());
                if let Some(w) = &demo.welch {
                    self.state.welch = w.clone();
                    self.send(EngineCommand::SetWelch(self.state.welch.clone()));
                }
                if let Some(a) = &demo.analysis {
                    self.state.analysis = a.clone();
                    self.ui.sync_from(&self.state);
                    self.send_analysis();
                }
                self.history = history_view::HistoryViewState::default();
                self.sidebands = sideband_view::SidebandViewState::default();
                self.cross = cross_view::CrossViewState::default();
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
            UiCommand::ExportFigure => self.export_figure(),
            UiCommand::ZoomTo(lo, hi) => {
                if lo > 0.0 && hi > lo {
                    self.plot.request_x = Some((lo.log10(), hi.log10()));
                    self.plot.reset_y = true;
                }
            }
            UiCommand::ZoomAll => self.plot.reset_view = true,
            UiCommand::FreshSettings => {
                let fresh = AppState::default();
                self.state.welch = fresh.welch;
                self.state.analysis = fresh.analysis;
                self.state.follow_mode = fresh.follow_mode;
                if crate::model::state::unit_is_displacement(self.state.unit) {
                    self.state.unit = DensityUnit::V2PerHz;
                }
                self.ui.sync_from(&self.state);
                self.messages.retain(|m| m.action.is_none());
                self.sent_welch = self.state.welch.clone();
                self.send(EngineCommand::SetWelch(self.state.welch.clone()));
                self.send_analysis();
                self.info(
                    MessageKind::Other,
                    "fresh settings: automatic averaging, no calibration, band found automatically",
                );
            }
            UiCommand::DismissMessages => self.messages.clear(),
        }
    }

    /// Zooms to the mode's band; in heterodyne (the band is of f_m itself) to both sidebands
    /// at carrier ± band, where the mode's lines are.
    fn zoom_mode_region(&mut self) {
        let Some((lo, hi)) = self.state.analysis.mode_band_hz else {
            return;
        };
        let w = hi - lo;
        match self.state.analysis.carrier_hz {
            Some(fc) => self
                .commands
                .push(UiCommand::ZoomTo((fc - hi - w).max(1.0), fc + hi + w)),
            None => self.commands.push(UiCommand::ZoomTo(lo - w, hi + w)),
        }
    }

    fn send_analysis(&mut self) {
        let options = self.state.analysis.clone();
        self.sent_analysis = options.clone();
        let follow = self.state.follow_mode;
        self.send(EngineCommand::SetAnalysis {
            options,
            follow_mode: follow,
        });
        self.journal_settings_changed();
    }

    fn menu_bar(&mut self, ui: &mut egui::Ui) {
        ui.horizontal_wrapped(|ui| {
            ui.label(RichText::new("stillpoint").strong().size(17.0));
            ui.separator();
            let pause_label = if self.paused { "Resume" } else { "Freeze" };
            if ui
                .button(pause_label)
                .on_hover_text("Space (pointer on the plot) or Ctrl+Space: freeze/resume")
                .clicked()
            {
                self.commands.push(UiCommand::TogglePause);
            }
            let ended_recording = self
                .live
                .status()
                .is_some_and(|s| s.recording && s.ended.is_some());
            let (restart_label, restart_hint) = if ended_recording {
                ("Replay", "R: play the recording again from its start")
            } else {
                ("Restart average", "R: forget the averaged segments")
            };
            if ui
                .button(restart_label)
                .on_hover_text(restart_hint)
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

    /// The newest [`MESSAGES_SHOWN`] messages above the plot (each with its button and a ×);
    /// a fixed number of lines, so the plot is never pushed down further.
    fn messages_ui(&mut self, ui: &mut egui::Ui) {
        let mut remove = None;
        let mut commands = Vec::new();
        let first = self.messages.len().saturating_sub(MESSAGES_SHOWN);
        for (i, m) in self.messages.iter().enumerate().skip(first) {
            ui.horizontal(|ui| {
                let color = if m.error { theme::ERROR } else { theme::INK };
                if ui.small_button("×").on_hover_text("dismiss").clicked() {
                    remove = Some(i);
                }
                if let Some((label, command)) = &m.action
                    && ui.button(label).clicked()
                {
                    commands.push(command.clone());
                }
                ui.add(egui::Label::new(RichText::new(&m.text).color(color)).truncate())
                    .on_hover_text(&m.text);
            });
        }
        if first > 0 {
            ui.horizontal(|ui| {
                ui.label(RichText::new(format!("{first} older message(s)")).color(theme::PENCIL));
                if ui.small_button("dismiss all").clicked() {
                    commands.push(UiCommand::DismissMessages);
                }
            });
        }
        if let Some(i) = remove {
            self.messages.remove(i);
        }
        self.commands.extend(commands);
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
                ui.label(
                    "Keys act only while the pointer is over the spectrum plot, or anywhere with \
                     Ctrl held — never while you type in a field.",
                );
                ui.add_space(4.0);
                egui::Grid::new("help_grid").striped(true).show(ui, |ui| {
                    for (k, what) in [
                        ("Space", "freeze / resume"),
                        (
                            "R",
                            "restart the average (after a recording's end: replay it)",
                        ),
                        ("S", "save a snapshot (JSON + CSV) in the last folder"),
                        ("U", "next display unit"),
                        ("B", "set the fit band: drag across the spectrum"),
                        ("M", "zoom to the mode region"),
                        ("A", "zoom to the whole span"),
                        ("H / F1", "this help (F1 anywhere)"),
                        ("drag", "pan the plot (scroll or Ctrl+scroll to zoom)"),
                        ("double-click", "whole span"),
                        (
                            "click a resonance",
                            "zoom the plot to it (marker or list row)",
                        ),
                    ] {
                        ui.label(RichText::new(k).monospace());
                        ui.label(what);
                        ui.end_row();
                    }
                });
                ui.add_space(4.0);
                ui.label(format!(
                    "Frame time (CPU for the plot and the panels): {:.1} ms",
                    1e3 * self.frame_cpu_s
                ));
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
        let t0 = Instant::now();
        self.now_s = ctx.input(|i| i.time);
        self.drain_engine();
        self.drain_png_results();
        self.keyboard(ctx);
        self.screenshot_tick(ctx);
        self.logic_cpu_s = t0.elapsed().as_secs_f64();
    }

    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        let t0 = Instant::now();
        let ctx = ui.ctx().clone();
        self.now_s = ctx.input(|i| i.time);
        let next_expiry = self.expire_messages();
        egui::Panel::top("menu")
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(6.0))
            .show(ui, |ui| self.menu_bar(ui));
        egui::Panel::bottom("status")
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(4.0))
            .show(ui, |ui| {
                panels::status_line(ui, &self.live, &self.source, self.paused, self.frame_cpu_s);
            });
        // Both side panels have bounded widths (a share of the window): long rows wrap or
        // scroll instead of widening them, so the plot stays the largest thing in the window.
        let width = ctx.content_rect().width();
        let (left_max, right_max) = side_panel_widths(width);
        let left = egui::Panel::left("controls")
            .default_size(left_max.min(270.0))
            .size_range(200.0..=left_max)
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(8.0))
            .show(ui, |ui| {
                egui::ScrollArea::vertical().show(ui, |ui| {
                    let cmds = self.ui.controls_ui(ui, &mut self.state, &mut self.files);
                    self.commands.extend(cmds);
                });
            });
        self.layout.left = left.response.rect;
        // The right panel: collapsible sections (open state remembered); the snapshot
        // controls come before the long notes, so they are in reach without scrolling.
        let right = egui::Panel::right("mode")
            .default_size(right_max.min(310.0))
            .size_range(240.0..=right_max)
            .frame(egui::Frame::new().fill(theme::PANEL).inner_margin(8.0))
            .show(ui, |ui| {
                // Text wraps at the panel's width; only what cannot wrap scrolls sideways.
                let visible_width = ui.available_width();
                egui::ScrollArea::both().show(ui, |ui| {
                    ui.set_max_width(visible_width);
                    panels::section(ui, "mode", RichText::new("Mode"), true, |ui| {
                        panels::mode_panel(ui, &self.live, &self.state);
                    });
                    if panels::has_sidebands(&self.live) {
                        panels::section(ui, "sidebands", RichText::new("Sidebands"), true, |ui| {
                            panels::sideband_panel(ui, &self.live);
                        });
                    }
                    let reference = self.reference.and_then(|i| self.snapshots.get(i));
                    let title = RichText::new("Stray resonances");
                    panels::section(ui, "strays", title, true, |ui| {
                        let cmds = panels::peaks_panel(ui, &self.live, reference);
                        self.commands.extend(cmds);
                    });
                    panels::section(ui, "snapshots", RichText::new("Snapshots"), true, |ui| {
                        let cmds = panels::snapshots_ui(
                            ui,
                            &mut self.files,
                            &mut self.snapshots,
                            &mut self.reference,
                            &mut self.state,
                        );
                        self.commands.extend(cmds);
                    });
                    let (notes, warnings) = panels::notes_count(&self.live);
                    let title = if warnings > 0 {
                        RichText::new(format!("Notes ({notes}) and warnings ({warnings})"))
                            .color(theme::WARN)
                    } else {
                        RichText::new(format!("Notes ({notes})"))
                    };
                    panels::section(ui, "notes", title, true, |ui| {
                        panels::notes_panel(ui, &self.live);
                    });
                    self.journal_ui(ui);
                });
            });
        self.layout.right = right.response.rect;
        egui::CentralPanel::default()
            .frame(egui::Frame::new().fill(theme::PAPER).inner_margin(8.0))
            .show(ui, |ui| {
                self.messages_ui(ui);
                let avail = ui.available_height();
                let heterodyne = self.state.analysis.carrier_hz.is_some();
                let two_detectors = self
                    .live
                    .frame
                    .as_ref()
                    .is_some_and(|f| f.cross_channels.is_some());
                // The two-detector view takes the sideband view's share (a heterodyne
                // analysis is not available with two detectors).
                let (plot_h, sideband_h) =
                    central_heights(avail, heterodyne || two_detectors, self.state.show_cooldown);
                let cmds =
                    self.plot
                        .spectrum_ui(ui, plot_h, &self.live, &self.state, &self.snapshots);
                self.commands.extend(cmds);
                self.layout.plot = self.plot.rect.unwrap_or(egui::Rect::NOTHING);
                if two_detectors {
                    ui.add_space(4.0);
                    self.cross.ui(ui, sideband_h, &self.live);
                } else if heterodyne {
                    ui.add_space(4.0);
                    self.sidebands
                        .ui(ui, sideband_h, &self.live, &self.state, &self.source);
                }
                if self.state.show_cooldown {
                    ui.add_space(4.0);
                    let m_per_v = self
                        .live
                        .frame
                        .as_ref()
                        .and_then(|f| f.report.as_ref())
                        .and_then(|r| r.calibration.m_per_v);
                    self.history.colour_unit = Some((self.state.unit, m_per_v));
                    let compare = self.journal.opened.as_ref().map(|o| &o.trends);
                    self.history.ui(ui, &self.live, compare);
                }
            });
        self.windows(&ctx);
        self.apply_commands(&ctx);
        // Repaint only on change: the engine wakes the window when a frame arrives; here only
        // the next message expiry is waited for. Nothing changing (frozen, ended, an "at most
        // K" average that is full) costs no frames.
        if let Some(dt) = next_expiry {
            ctx.request_repaint_after(Duration::from_secs_f64(dt.clamp(0.05, 60.0)));
        }
        let cpu = self.logic_cpu_s + t0.elapsed().as_secs_f64();
        self.last_frame_cpu_s = cpu;
        self.frame_cpu_s = if self.frame_cpu_s > 0.0 {
            0.9 * self.frame_cpu_s + 0.1 * cpu
        } else {
            cpu
        };
    }

    fn save(&mut self, storage: &mut dyn eframe::Storage) {
        self.state.settings_source = Some(source_key(&self.source));
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

#[cfg(test)]
mod tests {
    use super::{central_heights, side_panel_widths};

    #[test]
    fn the_spectrum_plot_gets_the_largest_share() {
        for avail in [500.0, 700.0, 900.0] {
            for (heterodyne, history) in
                [(false, false), (false, true), (true, false), (true, true)]
            {
                let (plot, sidebands) = central_heights(avail, heterodyne, history);
                let rest = avail - plot - sidebands;
                assert!(
                    plot >= sidebands && plot >= rest,
                    "{avail} {heterodyne} {history}"
                );
                assert!(plot + sidebands <= avail);
            }
        }
    }

    #[test]
    fn side_panels_take_at_most_half_the_width() {
        for width in [900.0, 1280.0, 1600.0, 2560.0] {
            let (l, r) = side_panel_widths(width);
            assert!(l + r <= 0.5 * width, "{width}: {l} + {r}");
        }
    }
}
