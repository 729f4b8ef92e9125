//! The status line at the bottom of the window.

use eframe::egui::{RichText, Ui};

use crate::acquire::{SourceConfig, SourceSpec};
use crate::model::LiveState;
use crate::model::format::{format_rate, window_words};
use crate::ui::axes::format_hz;
use crate::ui::theme;

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
            } else if let (true, Some(note)) = (s.recording, &s.record_note) {
                format!(
                    "{e}: {note} ({} segments); Replay plays it again",
                    s.averages
                )
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
        // Skipped segments are in the reader's warnings (with the non-finite samples).
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
