//! The mode read-out of the right panel (f_m, γ, Q, n̄, T_eff, m/V with ± 1σ) and the
//! analysis's notes and warnings (a section of their own, so long notes never push the
//! snapshot controls out of reach).

use eframe::egui::{self, RichText, Ui};

use super::{note, pm};
use crate::model::format::{format_significant, window_words};
use crate::model::state::unit_short;
use crate::model::{AppState, LiveState};
use crate::ui::axes::format_hz;
use crate::ui::theme;

/// The mode read-out: f_m, γ, Q, n̄, T_eff, m/V with ± 1σ, the calibration in use and an
/// analysis that failed.
pub fn mode_panel(ui: &mut Ui, live: &LiveState, state: &AppState) {
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
                ui.add(egui::Label::new(RichText::new(value).monospace()).wrap());
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
    if let Some(e) = live.frame.as_ref().and_then(|f| f.analysis_error.as_ref()) {
        note(ui, &window_words(&format!("analysis: {e}")), theme::ERROR);
    }
}

/// (notes, warnings) of the newest analysis, for the section's title.
pub fn notes_count(live: &LiveState) -> (usize, usize) {
    live.frame
        .as_ref()
        .and_then(|f| f.report.as_ref())
        .map_or((0, 0), |r| (r.notes.len(), r.warnings.len()))
}

/// The analysis's warnings (first, highlighted) and notes, in the window's words.
pub fn notes_panel(ui: &mut Ui, live: &LiveState) {
    let Some(r) = live.frame.as_ref().and_then(|f| f.report.as_ref()) else {
        return;
    };
    if r.notes.is_empty() && r.warnings.is_empty() {
        note(ui, "none", theme::PENCIL);
    }
    for w in r.warnings.iter().take(6) {
        note(ui, &window_words(w), theme::WARN);
    }
    for n in r.notes.iter().take(6) {
        note(ui, &window_words(n), theme::INK);
    }
}
