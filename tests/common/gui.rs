//! Helpers shared by the window tests (`tests/gui*.rs`, each including this file as
//! `#[path = "common/gui.rs"] mod gui_util;`, so a binary compiles only these few lines):
//! the real app in an egui_kittest harness, and stepping it until a condition holds.

#![allow(dead_code)]

use std::ops::{Deref, DerefMut};
use std::time::{Duration, Instant};

use eframe::egui;
use egui_kittest::Harness;
use stillpoint::ui::{MonitorOptions, StillpointApp};

/// The real app driven through its `eframe::App` methods, made on the harness's first frame
/// with the harness's context. (egui_kittest's own eframe driver needs its `eframe`
/// feature, which turns on eframe's AccessKit platform adapter and its D-Bus stack: 55
/// crates and ~13 % of the test build, for nothing the tests use.) Derefs to the app, so a
/// test reads `h.state().live()`.
pub struct Window {
    app: Option<StillpointApp>,
    options: Option<MonitorOptions>,
    frame: eframe::Frame,
}

impl Window {
    fn new(options: MonitorOptions) -> Self {
        Self {
            app: None,
            options: Some(options),
            frame: eframe::Frame::_new_kittest(),
        }
    }

    /// One frame: the app's logic, then its ui (as eframe runs them).
    fn run(&mut self, ui: &mut egui::Ui) {
        use eframe::App as _;
        if self.app.is_none()
            && let Some(options) = self.options.take()
        {
            let cc = eframe::CreationContext::_new_kittest(ui.ctx().clone());
            self.app = Some(StillpointApp::new(&cc, options));
        }
        if let Some(app) = self.app.as_mut() {
            app.logic(ui.ctx(), &mut self.frame);
            app.ui(ui, &mut self.frame);
        }
    }
}

impl Deref for Window {
    type Target = StillpointApp;

    fn deref(&self) -> &StillpointApp {
        self.app
            .as_ref()
            .expect("the harness runs a first frame when it is built")
    }
}

impl DerefMut for Window {
    fn deref_mut(&mut self) -> &mut StillpointApp {
        self.app
            .as_mut()
            .expect("the harness runs a first frame when it is built")
    }
}

/// The harness the window tests drive.
pub type AppHarness = Harness<'static, Window>;

/// The real app with `options` in a 1360 × 900 harness.
pub fn harness(options: MonitorOptions) -> AppHarness {
    harness_sized(egui::vec2(1360.0, 900.0), options)
}

/// The real app with `options` in a harness of `size` points.
pub fn harness_sized(size: egui::Vec2, options: MonitorOptions) -> AppHarness {
    Harness::builder().with_size(size).build_ui_state(
        |ui, window: &mut Window| window.run(ui),
        Window::new(options),
    )
}

/// Steps frames (with short sleeps, so the engine thread runs) until `done` holds or
/// `timeout` has passed; returns whether it held. A deadline, not a speed requirement.
pub fn step_until(
    h: &mut AppHarness,
    timeout: Duration,
    done: impl Fn(&StillpointApp) -> bool,
) -> bool {
    let t0 = Instant::now();
    while t0.elapsed() < timeout {
        h.step();
        if done(h.state()) {
            return true;
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    false
}

/// [`step_until`], panicking with `what` and the window's messages if `done` never held.
pub fn wait_for(
    h: &mut AppHarness,
    timeout: Duration,
    what: &str,
    done: impl Fn(&StillpointApp) -> bool,
) {
    if !step_until(h, timeout, done) {
        panic!(
            "timed out waiting for {what}; messages: {:?}",
            h.state().messages()
        );
    }
}

/// A frame with a spectrum and its analysis has arrived.
pub fn has_spectrum(app: &StillpointApp) -> bool {
    app.live()
        .frame
        .as_ref()
        .is_some_and(|f| f.spectrum.is_some() && f.report.is_some())
}
