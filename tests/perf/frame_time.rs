//! Frame time of the window at 10⁶ bins: the real app (egui_kittest, no display, no GPU)
//! fed its frames by hand, with no engine running beside it. A release build only:
//!
//! ```text
//! cargo run --release --example frame_time [-- FRAMES]
//! ```
//!
//! (`tests/perf/frame_time.sh` does the same with a separate target directory.) Prints, per
//! scenario, the median over FRAMES frames (default 120, after 10 warm-up frames) of
//! - `app`: the CPU time the window itself measures for its logic and drawing (the "frame"
//!   figure of the status line, not smoothed), wall clock inside `App::logic` + `App::ui`;
//! - `step`: the wall time of the whole harness step (egui's layout and tessellation and the
//!   accessibility tree included; the machine's other load shows up here).
//!
//! Scenarios: `new spectrum` (a new 10⁶-bin analysis every frame, the worst case: the engine
//! publishes at most every ~150 ms), `same spectrum` (the pointer moves over the plot, the
//! data do not change), `two snapshots` (two 10⁶-bin snapshots overlaid and compared, a new
//! spectrum every frame). Timing figures are printed, never asserted.

use std::sync::Arc;
use std::time::{Duration, Instant};

use eframe::egui;
use egui_kittest::kittest::Queryable;
use stillpoint::analysis::AnalysisOptions;
use stillpoint::dsp::{Averaging, Detrend, Spectrum, WindowKind};
use stillpoint::model::{
    EngineStatus, Frame, HistoryEntry, MinMaxBlocks, TrendPoint, WaterfallRow, log_columns_max,
};
use stillpoint::ui::MonitorOptions;

#[path = "../common/gui.rs"]
mod gui_util;
use gui_util::{AppHarness, harness_sized};

/// Segment 2²¹ at 2²¹ S/s: 1 048 577 bins 1 Hz apart.
const SEGMENT: usize = 1 << 21;

/// A 10⁶-bin PSD: white floor with scatter, a Lorentzian mode at 86 kHz (γ 25 Hz), a few
/// narrow stray lines; `seed` changes the scatter (a new average).
fn spectrum(seed: u64) -> Spectrum {
    let rate = SEGMENT as f64;
    let n = SEGMENT / 2 + 1;
    let mut state = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
    let psd: Vec<f64> = (0..n)
        .map(|k| {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^= z >> 31;
            let u = (z >> 11) as f64 / (1u64 << 53) as f64;
            let f = k as f64;
            let g: f64 = 25.0;
            let mode = 1e-9 * (g / 2.0).powi(2) / ((f - 86_000.0).powi(2) + (g / 2.0).powi(2));
            let line = if k > 0 && k.is_multiple_of(61_231) {
                1e-10
            } else {
                0.0
            };
            1e-12 * (0.8 + 0.4 * u) + mode + line
        })
        .collect();
    Spectrum {
        sample_rate_hz: rate,
        segment: SEGMENT,
        overlap: 0.5,
        window: WindowKind::Hann,
        detrend: Detrend::Mean,
        averaging: Averaging::Linear,
        averages: 16,
        k_eff: 14.0,
        resolution_hz: 1.0,
        enbw_hz: 1.5,
        psd_v2_per_hz: psd,
    }
}

/// A frame as the engine makes it: spectrum, its log10, the analysis, a waterfall row and a
/// trend point.
fn frame(seed: u64, freqs: &Arc<Vec<f64>>, options: &AnalysisOptions) -> Frame {
    let s = spectrum(seed);
    let report = stillpoint::analysis::analyze(&s, options)
        .ok()
        .map(Arc::new);
    let log_psd: Vec<f64> = s
        .psd_v2_per_hz
        .iter()
        .map(|&p| if p > 0.0 { p.log10() } else { f64::NAN })
        .collect();
    let range = (80_000.0, 92_000.0);
    let row = WaterfallRow {
        time_s: seed as f64,
        range_hz: range,
        log_psd: log_columns_max(freqs, &s.psd_v2_per_hz, range, 480),
    };
    let trend = report.as_ref().map(|r| TrendPoint {
        time_s: seed as f64,
        frequency_hz: r.mode.frequency_hz,
        linewidth_hz: r.mode.linewidth_hz,
        ..TrendPoint::default()
    });
    let status = EngineStatus {
        source: "frame-time benchmark".into(),
        sample_rate_hz: s.sample_rate_hz,
        segment: SEGMENT,
        averages: 16,
        k_eff: 14.0,
        resolution_hz: 1.0,
        rbw_hz: 1.5,
        ..EngineStatus::default()
    };
    let blocks = MinMaxBlocks::new(&log_psd);
    Frame {
        generation: 1,
        log_psd_blocks: Some(Arc::new(blocks)),
        spectrum: Some(Arc::new(s)),
        cross: None,
        cross_channels: None,
        frequencies_hz: Some(Arc::clone(freqs)),
        log_psd: Some(Arc::new(log_psd)),
        analysis_error: None,
        band_hz: options.mode_band_hz,
        status,
        history: vec![HistoryEntry {
            t_start_s: seed as f64 - 1.0,
            t_end_s: seed as f64,
            duration_s: 1.0,
            waterfall_row: Some(row),
            trend,
            report: report.clone(),
            band_hz: options.mode_band_hz,
        }],
        report,
        marks: Vec::new(),
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v.get(v.len() / 2).copied().unwrap_or(f64::NAN)
}

/// Runs `frames` frames after 10 warm-up ones; `before` prepares each (outside the timing).
/// Returns the medians (app, step) in ms.
fn measure(
    h: &mut AppHarness,
    frames: usize,
    mut before: impl FnMut(&mut AppHarness, usize),
) -> (f64, f64) {
    let mut app = Vec::new();
    let mut step = Vec::new();
    for i in 0..frames + 10 {
        before(h, i);
        let t0 = Instant::now();
        h.step();
        let dt = t0.elapsed();
        if i >= 10 {
            app.push(1e3 * h.state().last_frame_cpu_s());
            step.push(1e3 * dt.as_secs_f64());
        }
    }
    (median(app), median(step))
}

fn main() {
    let frames: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(120);
    let mut o = MonitorOptions::demo();
    o.fresh_settings = true;
    o.no_journal = true;
    o.analysis = Some(AnalysisOptions::default());
    let options = AnalysisOptions {
        mode_band_hz: Some((85_000.0, 87_000.0)),
        ..AnalysisOptions::default()
    };
    let freqs = Arc::new((0..=SEGMENT / 2).map(|k| k as f64).collect::<Vec<f64>>());
    println!("preparing 4 frames of {} bins…", SEGMENT / 2 + 1);
    let pool: Vec<Frame> = (1..=4).map(|s| frame(s, &freqs, &options)).collect();

    let mut h = harness_sized(egui::vec2(1600.0, 900.0), o);
    h.state_mut().show_frame(pool[0].clone());
    h.run_steps(5);
    // The whole span in view (1600 px of plot columns over 10⁶ bins).
    h.key_press_modifiers(egui::Modifiers::CTRL, egui::Key::A);
    h.run_steps(3);

    let mut results = Vec::new();
    let mut seq = 0u64;
    let mut next = |h: &mut AppHarness, _i: usize| {
        seq += 1;
        let mut f = pool[(seq % 4) as usize].clone();
        // A new analysis each frame (new shared buffers, as the engine publishes them).
        f.spectrum = f.spectrum.map(|s| Arc::new((*s).clone()));
        f.log_psd = f.log_psd.map(|l| Arc::new((*l).clone()));
        f.log_psd_blocks = f.log_psd_blocks.map(|b| Arc::new((*b).clone()));
        f.report = f.report.map(|r| Arc::new((*r).clone()));
        if !seq.is_multiple_of(8) {
            f.history.clear();
        }
        h.state_mut().show_frame(f);
    };
    results.push(("new spectrum", measure(&mut h, frames, &mut next)));

    let plot = h.state().layout().plot;
    results.push((
        "same spectrum, pointer moving",
        measure(&mut h, frames, |h, i| {
            let x = plot.left() + (i as f32 * 7.0) % plot.width().max(1.0);
            h.hover_at(egui::pos2(x, plot.center().y));
        }),
    ));

    // Two snapshots of 10⁶ bins, saved and loaded through the snapshot list.
    let dir = std::env::temp_dir().join(format!("stillpoint-frame-time-{}", std::process::id()));
    let _ = std::fs::create_dir_all(&dir);
    let path = dir.join("a.json");
    h.get_by_label("snapshot path (JSON; the CSV is written beside it):")
        .set_text_value_accesskit(&path.display().to_string());
    h.run_steps(2);
    h.get_by_label("Save snapshot").click_accesskit();
    h.run_steps(3);
    h.get_by_label("Load snapshot").click_accesskit();
    h.run_steps(3);
    let loaded = h.state().snapshots().len();
    h.hover_at(egui::pos2(1.0, 1.0));
    results.push((
        "two snapshots, new spectrum",
        measure(&mut h, frames, &mut next),
    ));
    let _ = std::fs::remove_dir_all(&dir);

    println!(
        "frame time at {} bins, 1600×900, median of {frames} frames (ms):",
        SEGMENT / 2 + 1
    );
    println!("{:<32} {:>8} {:>8}", "scenario", "app", "step");
    for (name, (app, step)) in results {
        println!("{name:<32} {app:>8.2} {step:>8.2}");
    }
    if loaded != 2 {
        println!(
            "(only {loaded} snapshot(s) loaded: {:?})",
            h.state().messages()
        );
    }
    std::thread::sleep(Duration::from_millis(10));
}
