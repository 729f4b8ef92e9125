//! Live application state with no egui dependency: the [`Engine`] thread (acquisition →
//! Welch → analysis, frames over a bounded channel), the bounded history of a session
//! ([`Waterfall`], [`TrendBuffer`]), the window's persisted settings ([`AppState`]), the
//! reference curves drawn over the spectrum, and plot preparation ([`decimate_minmax`]).
//!
//! The window (`crate::ui`) owns a [`LiveState`] and an [`Engine`]; each repaint it drains the
//! engine's frames into the live state and draws from it.

// The view helpers here (units, number formats, curves) serve the window; a build without the
// `gui` feature compiles them unused (they stay `pub(crate)` so the full build finds dead code).
#![cfg_attr(not(feature = "gui"), allow(dead_code))]

pub mod cross_curves;
pub mod curves;
pub mod decimate;
pub mod engine;
pub mod format;
pub mod history;
pub mod journal;
pub mod snapshots;
pub mod state;
pub mod trend;

pub use decimate::{
    MinMaxBlocks, bench_plot_prep, decimate_minmax, decimate_minmax_with, log_columns_max,
};
pub use engine::{
    Engine, EngineCommand, EngineConfig, EngineNotice, EngineStatus, Frame, HistoryEntry,
    SessionMark, Waker,
};
pub use history::{CalibrationDrift, TrendBuffer, TrendPoint, Waterfall, WaterfallRow};
pub use snapshots::LoadedSnapshot;
pub use state::{
    AppState, AveragingChoice, CalibrationMethod, Overlays, SourceKind, WelchSettings,
};

/// Result alias of the model.
pub type Result<T> = std::result::Result<T, ModelError>;

/// Why the engine could not start or a source could not be opened.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ModelError {
    /// A thread could not be created.
    #[error("cannot start a thread: {0}")]
    Spawn(std::io::Error),
    /// The source could not be opened.
    #[error("{0}")]
    Source(#[from] crate::acquire::AcquireError),
}

/// Waterfall rows kept (at one row per second: 15 minutes).
pub const WATERFALL_ROWS: usize = 900;
/// Trend points kept (thinned by half when full, so the strips always span the session).
pub const TREND_POINTS: usize = 4096;

/// What the window draws from: the newest frame and the session's bounded history.
#[derive(Debug, Clone)]
pub struct LiveState {
    /// The newest frame.
    pub frame: Option<Frame>,
    /// Waterfall rows.
    pub waterfall: Waterfall,
    /// Trend strips.
    pub trends: TrendBuffer,
    /// Marks of the session (band set by hand, gaps in a live stream), oldest first; at
    /// most [`SESSION_MARKS`].
    pub marks: std::collections::VecDeque<SessionMark>,
    /// Frames applied since start.
    pub frames_applied: u64,
    generation: u64,
}

/// Session marks kept.
pub(crate) const SESSION_MARKS: usize = 256;

impl Default for LiveState {
    fn default() -> Self {
        Self::new()
    }
}

impl LiveState {
    /// Empty state with the default capacities.
    pub fn new() -> Self {
        Self {
            frame: None,
            waterfall: Waterfall::new(WATERFALL_ROWS),
            trends: TrendBuffer::new(TREND_POINTS),
            marks: std::collections::VecDeque::new(),
            frames_applied: 0,
            generation: 0,
        }
    }

    /// Takes in one frame: keeps it as the newest and appends its history rows. A frame of a
    /// new source generation clears the history.
    pub fn apply(&mut self, mut frame: Frame) {
        if frame.generation != self.generation {
            self.generation = frame.generation;
            self.waterfall.clear();
            self.trends.clear();
            self.marks.clear();
        }
        for m in frame.marks.drain(..) {
            if self.marks.len() == SESSION_MARKS {
                self.marks.pop_front();
            }
            self.marks.push_back(m);
        }
        for entry in &mut frame.history {
            if let Some(row) = entry.waterfall_row.take() {
                self.waterfall.push(row);
            }
            if let Some(p) = entry.trend {
                self.trends.push(p);
            }
        }
        self.frames_applied += 1;
        self.frame = Some(frame);
    }

    /// The newest status, if any frame arrived.
    pub fn status(&self) -> Option<&EngineStatus> {
        self.frame.as_ref().map(|f| &f.status)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn live_state_clears_history_on_new_source() {
        let mut live = LiveState::new();
        let frame = |generation: u64, t: f64| Frame {
            generation,
            spectrum: None,
            cross: None,
            cross_channels: None,
            frequencies_hz: None,
            log_psd: None,
            log_psd_blocks: None,
            report: None,
            analysis_error: None,
            band_hz: None,
            status: EngineStatus::default(),
            history: vec![HistoryEntry {
                t_start_s: t - 1.0,
                t_end_s: t,
                duration_s: 1.0,
                waterfall_row: Some(WaterfallRow {
                    time_s: t,
                    range_hz: (1.0, 10.0),
                    log_psd: vec![0.0; 4],
                }),
                trend: Some(TrendPoint {
                    time_s: t,
                    ..TrendPoint::default()
                }),
                report: None,
                band_hz: None,
            }],
            marks: Vec::new(),
        };
        live.apply(frame(1, 0.0));
        live.apply(frame(1, 1.0));
        assert_eq!(live.waterfall.rows().len(), 2);
        assert_eq!(live.trends.points().len(), 2);
        live.apply(frame(2, 2.0));
        assert_eq!(live.waterfall.rows().len(), 1);
        assert_eq!(live.trends.points().len(), 1);
        assert!(
            live.frame.as_ref().unwrap().history[0]
                .waterfall_row
                .is_none()
        );
    }
}
