//! Helpers shared by the window tests (`tests/gui*.rs`, each including this file as
//! `#[path = "common/gui.rs"] mod gui_util;`, so a binary compiles only these few lines):
//! the real app in an egui_kittest harness, and stepping it until a condition holds.

#![allow(dead_code)]

use std::time::{Duration, Instant};

use eframe::egui;
use egui_kittest::Harness;
use stillpoint::ui::{MonitorOptions, StillpointApp};

/// The real app with `options` in a 1360 × 900 harness.
pub fn harness(options: MonitorOptions) -> Harness<'static, StillpointApp> {
    Harness::builder()
        .with_size(egui::vec2(1360.0, 900.0))
        .build_eframe(move |cc| StillpointApp::new(cc, options))
}

/// Steps frames (with short sleeps, so the engine thread runs) until `done` holds or
/// `timeout` has passed; returns whether it held. A deadline, not a speed requirement.
pub fn step_until(
    h: &mut Harness<'static, StillpointApp>,
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
    h: &mut Harness<'static, StillpointApp>,
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
