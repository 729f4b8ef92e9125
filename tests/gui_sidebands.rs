//! The sideband view and the LO side in the real window under egui_kittest (no display):
//! the built-in demo is heterodyne and calibrated, its sideband view appears with both lines
//! and their numbers; a heterodyne source whose LO side is not given gets none assumed (the
//! analysis waits and says so), and typing a carrier does not pick a side either.

#![allow(clippy::unwrap_used)]
#![cfg(feature = "gui")]

use std::time::Duration;

use egui_kittest::kittest::Queryable;
use stillpoint::acquire::{SourceConfig, SourceSpec};
use stillpoint::analysis::AnalysisOptions;
use stillpoint::model::CalibrationMethod;
use stillpoint::ui::MonitorOptions;

#[path = "common/gui.rs"]
mod gui_util;
use gui_util::{harness, step_until};

fn quick(mut o: MonitorOptions) -> MonitorOptions {
    o.fresh_settings = true;
    // No session journal in the user's folder from a test.
    o.no_journal = true;
    // A short segment keeps the test quick (0.13 s of stream per segment at 500 kHz; the
    // PM calibration lines stand clear of the 295 K sidebands' Lorentzian tails at this
    // resolution).
    if let Some(w) = o.welch.as_mut() {
        w.segment = 65_536;
    } else {
        let mut w = stillpoint::dsp::WelchConfig::new(500_000.0, 16_384);
        w.averaging = stillpoint::dsp::Averaging::Exponential {
            time_constant_segments: 4.0,
        };
        o.welch = Some(stillpoint::model::WelchSettings::from_config(&w));
    }
    o
}

#[test]
fn demo_shows_the_sideband_view_calibrated() {
    let mut h = harness(quick(MonitorOptions::demo()));
    let cal = &h.state().state().analysis;
    assert!(cal.carrier_hz.is_some(), "the demo is heterodyne");
    assert_eq!(cal.lo_above, Some(true), "the demo's own set-up");
    assert_ne!(
        CalibrationMethod::of(cal),
        CalibrationMethod::None,
        "the demo is calibrated"
    );
    assert!(
        step_until(&mut h, Duration::from_secs(240), |app| app
            .live()
            .frame
            .as_ref()
            .and_then(|f| f.report.as_ref())
            .is_some_and(|r| r
                .sidebands
                .as_ref()
                .is_some_and(|s| s.ratio.is_some()))),
        "no sideband analysis; messages: {:?}; analysis error: {:?}; notes: {:?}",
        h.state().messages(),
        h.state()
            .live()
            .frame
            .as_ref()
            .map(|f| f.analysis_error.clone()),
        h.state()
            .live()
            .frame
            .as_ref()
            .and_then(|f| f.report.as_ref())
            .map(|r| r.notes.clone())
    );
    h.run_steps(3);
    // The view, its set-up line, both lines' rows and the two n̄ estimates.
    assert!(
        h.query_all_by_label_contains("both sidebands vs offset from the carrier")
            .count()
            >= 1
    );
    assert!(h.query_all_by_label_contains("LO above the laser").count() >= 1);
    assert!(h.query_all_by_label_contains("red area (n+1)").count() >= 1);
    assert!(h.query_all_by_label_contains("blue area (n)").count() >= 1);
    assert!(h.query_all_by_label_contains("n from areas").count() >= 1);
    assert!(
        h.query_all_by_label_contains("Demo (invented device)")
            .count()
            >= 1
    );
    // Calibrated by the PM lines: m/V is in the report, occupancy from areas too.
    let report = h
        .state()
        .live()
        .frame
        .as_ref()
        .unwrap()
        .report
        .clone()
        .unwrap();
    assert!(report.calibration.m_per_v.is_some(), "{:?}", report.notes);
    assert!(report.quantum.occupancy.is_some(), "{:?}", report.notes);
    // The trend of the view fills.
    assert!(
        step_until(&mut h, Duration::from_secs(240), |app| !app
            .sideband_history()
            .is_empty()),
        "no sideband trend point"
    );
    // The "Demo" button reopens it calibrated (it used to open it uncalibrated).
    h.get_by_label("Demo").click();
    h.run_steps(3);
    let cal = &h.state().state().analysis;
    assert_ne!(CalibrationMethod::of(cal), CalibrationMethod::None);
    assert_eq!(cal.lo_above, Some(true));
}

#[test]
fn no_lo_side_is_assumed() {
    // A heterodyne source with a carrier but no LO side.
    let analysis = AnalysisOptions {
        carrier_hz: Some(125_000.0),
        mode_band_hz: Some((78_400.0, 94_400.0)),
        ..AnalysisOptions::default()
    };
    let mut o = MonitorOptions::for_source(SourceConfig::new(SourceSpec::Demo {
        scenario: "quantum".into(),
        seed: 3,
    }));
    o.analysis = Some(analysis);
    let mut h = harness(quick(o));
    assert_eq!(h.state().state().analysis.lo_above, None);
    assert!(
        step_until(&mut h, Duration::from_secs(240), |app| app
            .live()
            .frame
            .as_ref()
            .is_some_and(|f| f.spectrum.is_some())),
        "no spectrum; messages: {:?}",
        h.state().messages()
    );
    h.run_steps(3);
    assert_eq!(h.state().state().analysis.lo_above, None);
    // No sideband result was made up, and the window says what it waits for.
    let frame = h.state().live().frame.clone().unwrap();
    assert!(
        frame.report.as_ref().is_none_or(|r| r.sidebands.is_none()),
        "sidebands analysed without an LO side"
    );
    assert!(
        h.query_all_by_label_contains("Choose the side of the local oscillator")
            .count()
            >= 1
    );
    assert!(h.query_all_by_label_contains("LO side not chosen").count() >= 1);
    // Choosing a side starts the analysis.
    h.get_by_label("above").click();
    h.run_steps(2);
    h.get_by_label("Apply calibration").click();
    h.run_steps(2);
    assert_eq!(h.state().state().analysis.lo_above, Some(true));
    assert!(
        step_until(&mut h, Duration::from_secs(240), |app| app
            .live()
            .frame
            .as_ref()
            .and_then(|f| f.report.as_ref())
            .is_some_and(|r| r.sidebands.is_some())),
        "no sideband analysis after choosing; messages: {:?}",
        h.state().messages()
    );
}

#[test]
fn typing_a_carrier_does_not_pick_a_side() {
    let mut o = MonitorOptions::for_source(SourceConfig::new(SourceSpec::Demo {
        scenario: "thermal".into(),
        seed: 1,
    }));
    o.analysis = Some(AnalysisOptions::default());
    let mut h = harness(quick(o));
    h.run_steps(2);
    let field = h.get_by_label("carrier (Hz)");
    field.focus();
    field.type_text("125000");
    h.run_steps(2);
    // The side selector appears with neither side selected, with the prompt.
    assert!(
        h.query_all_by_label_contains("Choose the side of the local oscillator")
            .count()
            >= 1
    );
    h.get_by_label("Apply calibration").click();
    h.run_steps(2);
    let cal = &h.state().state().analysis;
    assert_eq!(cal.carrier_hz, Some(125_000.0));
    assert_eq!(cal.lo_above, None, "an LO side was assumed");
}

/// Two detectors (`monitor --cross-channel 1`) on the bundled two-detector recording: the
/// window's engine averages the cross-spectrum, fits the mode on Re P_ab (the line is 6 dB
/// below each channel's floor, the gains of opposite sign) and the two-detector view appears
/// with both channels, the cross-spectrum and the coherence with its 5 % noise level.
#[test]
fn two_detector_view_shows_both_channels_the_cross_spectrum_and_the_coherence() {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-streams")
        .join("two_detector.wav");
    let mut source = SourceConfig::new(SourceSpec::Path(path));
    source.cross_channel = Some(1);
    let mut o = MonitorOptions::demo();
    o.source = source;
    o.fresh_settings = true;
    o.no_journal = true;
    o.speed = Some(20.0);
    if let Some(w) = o.welch.as_mut() {
        w.segment = 1024;
        w.segment_auto = false;
    }
    o.analysis = Some(AnalysisOptions {
        mode_band_hz: Some((4400.0, 5600.0)),
        ..AnalysisOptions::default()
    });
    let mut h = harness(o);
    let ended = |app: &stillpoint::ui::StillpointApp| {
        app.live()
            .frame
            .as_ref()
            .is_some_and(|f| f.cross.is_some() && f.report.is_some() && f.status.ended.is_some())
    };
    assert!(
        step_until(&mut h, Duration::from_secs(120), ended),
        "the recording did not end with a cross-spectrum; messages: {:?}",
        h.state().messages()
    );
    h.run_steps(3);
    let frame = h.state().live().frame.clone().unwrap();
    let report = frame.report.unwrap();
    let f_m = report.mode.frequency_hz.expect("no mode fitted on Re P_ab");
    assert!((f_m - 5000.0).abs() < 50.0, "f_m {f_m}");
    assert!(report.cross.is_some());
    h.get_by_label_contains("Two detectors: channel 0 (a) × channel 1 (b)");
    h.get_by_label_contains("━ |cross-spectrum|");
    h.get_by_label_contains("━ 5 % noise level");
    h.get_by_label_contains("━ mode fitted on Re");
}
