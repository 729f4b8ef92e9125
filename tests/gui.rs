//! The window driven headless with egui_kittest (no display): the real app on the built-in
//! demo, stepped frame by frame while its engine thread runs. Checks: a spectrum arrives and
//! is drawn, the unit changes by button and by key, an overlay toggles, a snapshot is saved
//! through the typed-path field and loaded back identical, and a bad source file gives a
//! visible error message instead of a crash.

#![cfg(feature = "gui")]

use std::time::Duration;

use eframe::egui;
use egui_kittest::kittest::Queryable;
use stillpoint::dsp::units::DensityUnit;
use stillpoint::ui::{MonitorOptions, StillpointApp};

#[path = "common/gui.rs"]
mod gui_util;
use gui_util::{harness, harness_sized, has_spectrum, step_until};

fn demo_options() -> MonitorOptions {
    let mut o = MonitorOptions::demo();
    o.fresh_settings = true;
    // No session journal in the user's folder from a test.
    o.no_journal = true;
    // A short segment keeps the test quick: the first spectrum after ~0.1 s of stream.
    if let Some(w) = o.welch.as_mut() {
        w.segment = 16_384;
    }
    o
}

#[test]
fn demo_window_end_to_end() {
    let mut h = harness(demo_options());
    assert!(
        step_until(&mut h, Duration::from_secs(60), has_spectrum),
        "no spectrum from the demo; messages: {:?}",
        h.state().messages()
    );
    h.run_steps(3);
    // The demo is calibrated by its tone: displacement units are the default.
    assert_eq!(h.state().state().unit, DensityUnit::M2PerHz);
    // Status line and mode panel are there.
    h.get_by_label("Mode");
    h.get_by_label("Stray resonances");

    // Change the unit by button, then by key.
    h.get_by_label("V/√Hz").click();
    h.run_steps(2);
    assert_eq!(h.state().state().unit, DensityUnit::VPerRtHz);
    // Letter keys act anywhere only with Ctrl (or with the pointer on the plot).
    h.key_press_modifiers(egui::Modifiers::CTRL, egui::Key::U);
    h.run_steps(2);
    assert_eq!(h.state().state().unit, DensityUnit::DbV2PerHz);

    // Toggle an overlay.
    assert!(h.state().state().overlays.sql);
    // Once the fit has run, the plot legend has an entry of the same name; the overlay
    // checkbox in the side panel is laid out first.
    h.get_all_by_role_and_label(egui::accesskit::Role::CheckBox, "SQL (added noise)")
        .next()
        .expect("the SQL overlay checkbox")
        .click();
    h.run_steps(2);
    assert!(!h.state().state().overlays.sql);

    // Save a snapshot through the typed-path field, then load it back.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("cold.json");
    let field = h.get_by_label("snapshot path (JSON; the CSV is written beside it):");
    field.focus();
    field.type_text(&path.display().to_string());
    h.run_steps(2);

    h.get_by_label("Save snapshot").click_accesskit();
    h.run_steps(3);
    assert!(
        h.state()
            .messages()
            .iter()
            .any(|m| m.text.contains("snapshot saved")),
        "{:?}",
        h.state().messages()
    );
    assert!(path.exists());
    assert!(dir.path().join("cold.csv").exists());
    assert_eq!(h.state().snapshots().len(), 1);
    // Saving again to the same path asks before replacing.
    h.get_by_label("Save snapshot").click_accesskit();
    h.run_steps(3);
    h.get_by_label("Keep the existing file").click_accesskit();
    h.run_steps(2);
    h.get_by_label("Load snapshot").click_accesskit();
    h.run_steps(3);
    let snaps = h.state().snapshots();
    assert_eq!(snaps.len(), 2, "{:?}", h.state().messages());
    assert_eq!(
        snaps[0].spectrum.psd_v2_per_hz,
        snaps[1].spectrum.psd_v2_per_hz
    );
    assert_eq!(snaps[0].frequencies_hz.len(), 16_384 / 2 + 1);

    // A bad file: a visible error, no crash.
    let bad = dir.path().join("broken.wav");
    std::fs::write(&bad, b"RIFF\x10\x00\x00\x00WAVEjunkjunk").unwrap();
    let field = h.get_by_label("source path (.wav or raw), '-' for stdin, or tcp://HOST:PORT:");
    field.focus();
    field.type_text(&bad.display().to_string());
    h.run_steps(2);
    h.get_by_label("Open source").click();
    assert!(
        step_until(&mut h, Duration::from_secs(10), |app| app
            .messages()
            .iter()
            .any(|m| m.error && m.text.contains("cannot open source"))),
        "{:?}",
        h.state().messages()
    );
    h.run_steps(2);
    // In the message strip and in the status line.
    assert!(h.get_all_by_label_contains("cannot open source").count() >= 1);

    // A bad snapshot file too.
    let junk = dir.path().join("junk.json");
    std::fs::write(&junk, b"{ not json").unwrap();
    h.get_by_label("snapshot path (JSON; the CSV is written beside it):")
        .set_text_value_accesskit(&junk.display().to_string());
    h.run_steps(2);
    h.get_by_label("Load snapshot").click_accesskit();
    h.run_steps(3);
    assert!(
        h.state()
            .messages()
            .iter()
            .any(|m| m.error && m.text.contains("cannot load")),
        "{:?}",
        h.state().messages()
    );
    assert!(h.get_all_by_label_contains("cannot load").count() >= 1);
    assert_eq!(h.state().snapshots().len(), 2);

    // Issue 10: the Mode panel reads the integrated rms over the fit band (report.rms), in
    // volts on a voltage axis and in metres on a displacement axis once calibrated.
    assert!(
        step_until(&mut h, Duration::from_secs(60), |a| a
            .live()
            .frame
            .as_ref()
            .and_then(|f| f.report.as_ref())
            .is_some_and(|r| r.rms.as_ref().is_some_and(|x| x.m.is_some()))),
        "no calibrated band rms in the demo's report"
    );
    h.run_steps(2);
    assert_eq!(h.state().state().unit, DensityUnit::DbV2PerHz);
    h.get_by_label("rms in fit band (V)");
    h.get_by_label("m/√Hz").click();
    h.run_steps(2);
    assert_eq!(h.state().state().unit, DensityUnit::MPerRtHz);
    h.get_by_label("rms in fit band (m)");
}

/// Issue 14: the right panel has bounded width and collapsible sections. At 1280×800 and
/// 1600×900, on the heterodyne demo with its sideband rows and two snapshots listed, the
/// spectrum plot stays the largest part of the window (more than twice as wide as either
/// side panel, at least 15 % of the window's area with messages shown), and at 900 px height the snapshot
/// buttons are in reach without scrolling.
#[test]
fn side_panels_leave_the_plot_the_largest_part() {
    for (w, hgt) in [(1280.0, 800.0), (1600.0, 900.0)] {
        let mut h = harness_sized(egui::vec2(w, hgt), demo_options());
        let sidebands = |app: &StillpointApp| {
            app.live()
                .frame
                .as_ref()
                .and_then(|f| f.report.as_ref())
                .is_some_and(|r| r.sidebands.is_some())
        };
        assert!(
            step_until(&mut h, Duration::from_secs(60), sidebands),
            "no sideband result from the demo"
        );
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("a.json");
        h.get_by_label("snapshot path (JSON; the CSV is written beside it):")
            .set_text_value_accesskit(&path.display().to_string());
        h.run_steps(2);
        h.get_by_label("Save snapshot").click_accesskit();
        h.run_steps(3);
        h.get_by_label("Load snapshot").click_accesskit();
        h.run_steps(3);
        assert_eq!(h.state().snapshots().len(), 2, "{:?}", h.state().messages());
        h.run_steps(4);
        let l = h.state().layout();
        let window = w * hgt;
        assert!(
            l.plot.width() > 2.0 * l.right.width() && l.plot.width() > 2.0 * l.left.width(),
            "{w}×{hgt}: {l:?}"
        );
        // Up to three messages above the plot (snapshot saved, loaded, …) take height too.
        assert!(l.plot.area() >= 0.15 * window, "{w}×{hgt}: {l:?}");
        // The sideband rows are there, in the right panel.
        assert!(
            h.get_all_by_label("red (Stokes, n+1)")
                .any(|n| l.right.contains(n.rect().center())),
            "no sideband rows in the right panel: {l:?}"
        );
        if hgt >= 900.0 {
            for label in ["Save snapshot", "Load snapshot"] {
                let r = h.get_by_label(label).rect();
                assert!(r.max.y <= l.right.max.y, "{label} at {r:?}, panel {l:?}");
            }
        }
    }
}
