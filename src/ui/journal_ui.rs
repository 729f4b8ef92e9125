//! The window's session journal ([`crate::model::journal`]): every trend point of the
//! running session appended to `NAME.csv` as it is made (one line per point, about once a
//! second, never per frame), a journal reopened beside the live trends, and the trends and
//! the waterfall exported as `stillpoint track` writes them (CSV; float32 `.npy` + `.json`
//! axes).
//!
//! An I/O error stops the journal (never the live view) and says so in the window; choosing
//! a folder starts a new journal there.

use std::io::Write;
use std::path::{Path, PathBuf};

use eframe::egui::{self, RichText, Ui};

use super::{MessageKind, StillpointApp, theme};
use crate::model::journal::{self, Journal, JournalHeader, JournalWriter};
use crate::model::trend::TrendRow;
use crate::model::{Frame, HistoryEntry, TREND_POINTS, TrendBuffer, TrendPoint, Waterfall};
use crate::npy_writer::NpyWriter;

/// The journal being written, a journal opened for comparison, and the panel's fields.
#[derive(Debug, Default)]
pub struct JournalState {
    /// Journal folder in use (`None`: no journal, e.g. no home folder or switched off).
    pub folder: Option<PathBuf>,
    /// Writer of the session (created at the first trend point of each source).
    writer: Option<JournalWriter>,
    /// Source generation the writer belongs to.
    generation: u64,
    /// Why the journal stopped (shown until another folder is chosen).
    pub failed: Option<String>,
    /// End time of the last point journaled (start of the next interval), s.
    last_t_s: f64,
    /// A journal opened: its file, its rows as trends (bounded) and the number of rows.
    pub opened: Option<OpenedJournal>,
    /// Typed folder.
    pub folder_field: String,
    /// Typed path of a journal to open.
    pub open_field: String,
    /// Typed path of the trend CSV export.
    pub csv_field: String,
    /// Typed path of the waterfall `.npy` export.
    pub npy_field: String,
}

/// A journal reopened in the window.
#[derive(Debug, Clone)]
pub struct OpenedJournal {
    /// Its CSV file.
    pub path: PathBuf,
    /// The journal as read.
    pub journal: Journal,
    /// Its rows as trend points (time: `t_end_s`), thinned like the live strips.
    pub trends: TrendBuffer,
}

/// A trend point of a journal row (time: the row's `t_end_s`).
pub fn point_of_row(row: &TrendRow) -> TrendPoint {
    let v = |m: crate::model::trend::Measured| m.map(|p| p.0).filter(|x| x.is_finite());
    TrendPoint {
        time_s: row.t_end_s,
        frequency_hz: v(row.frequency_hz),
        linewidth_hz: v(row.linewidth_hz),
        occupancy: v(row.occupancy).or_else(|| v(row.sideband_occupancy)),
        m_per_v: v(row.m_per_v),
        m_per_v_uncertainty: row.m_per_v.and_then(|p| p.1),
        effective_temperature_k: v(row.effective_temperature_k),
        quality_factor: v(row.quality_factor),
    }
}

/// The journal row of a history interval: the analysis of that interval's own spectrum,
/// judged over its length (the Γ·T test of METHODS §11), with its start and end as times —
/// the row `stillpoint track` writes for the same interval. An interval without an analysis
/// (a live source's engine was behind and gave the frame's one analysis to the running
/// average, or the fit failed) keeps its row, empty, with status `no_analysis`, so the
/// journal's intervals stay contiguous.
pub fn row_of_entry(entry: &HistoryEntry, calibration_asked: bool) -> TrendRow {
    let Some(report) = entry.report.as_ref().filter(|_| entry.trend.is_some()) else {
        return TrendRow::empty(
            entry.t_start_s,
            entry.t_end_s,
            None,
            entry.band_hz,
            "no_analysis",
        );
    };
    let mut row = TrendRow::from_report(
        report,
        0.0,
        entry.duration_s,
        entry.band_hz,
        calibration_asked,
    );
    row.t_start_s = entry.t_start_s;
    row.t_end_s = entry.t_end_s;
    row
}

/// Writes the trend rows as `stillpoint track` writes its CSV, atomically.
///
/// # Errors
/// The file cannot be written.
pub fn export_trends_csv(path: &Path, rows: &[TrendRow]) -> std::io::Result<()> {
    let mut out = Vec::with_capacity(256 * rows.len() + 512);
    journal::write_track_csv(&mut out, rows.iter())?;
    write_file(path, &out)
}

fn write_file(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    crate::io::atomic::write_atomic(path, true, |out| out.write_all(bytes)).map_err(|e| match e {
        crate::io::atomic::AtomicError::Io(e) | crate::io::atomic::AtomicError::Inner(e) => e,
    })
}

/// Writes the waterfall as `stillpoint track --waterfall` does: a float32 `.npy` of PSD
/// (V²/Hz; rows oldest first, one column per log-spaced frequency column, NaN where there
/// was no data) and `.json` axes beside it (`frequency_hz` column centres, `t_start_s`,
/// `t_end_s`, `unit`). Returns the `.json` path.
///
/// # Errors
/// No rows, or a file cannot be written.
pub fn export_waterfall_npy(path: &Path, waterfall: &Waterfall) -> std::io::Result<PathBuf> {
    let rows = waterfall.rows();
    let Some(last) = rows.back() else {
        return Err(std::io::Error::other("the waterfall has no rows yet"));
    };
    let columns = last.log_psd.len();
    let mut npy = NpyWriter::new(std::io::Cursor::new(Vec::new()), columns)?;
    let mut t_start = Vec::with_capacity(rows.len());
    let mut t_end = Vec::with_capacity(rows.len());
    let mut previous = None;
    for r in rows {
        let psd: Vec<f64> = r
            .log_psd
            .iter()
            .map(|v| 10f64.powf(f64::from(*v)))
            .collect();
        npy.append_row(&psd)?;
        t_start.push(previous.unwrap_or(r.time_s));
        t_end.push(r.time_s);
        previous = Some(r.time_s);
    }
    let bytes = npy.finish()?.into_inner();
    let (lo, hi) = last.range_hz;
    let span = (hi / lo).ln();
    let frequency: Vec<f64> = (0..columns)
        .map(|j| lo * (span * (j as f64 + 0.5) / columns as f64).exp())
        .collect();
    let axes = serde_json::json!({
        "frequency_hz": frequency,
        "t_start_s": t_start,
        "t_end_s": t_end,
        "unit": "V^2/Hz",
    });
    let json = path.with_extension("json");
    write_file(path, &bytes)?;
    let text = serde_json::to_string(&axes).map_err(std::io::Error::other)?;
    write_file(&json, format!("{text}\n").as_bytes())?;
    Ok(json)
}

impl JournalState {
    /// A journal writing into `folder` (`None`: no journal).
    pub fn new(folder: Option<PathBuf>) -> Self {
        Self {
            folder_field: folder
                .as_ref()
                .map(|f| f.display().to_string())
                .unwrap_or_default(),
            folder,
            ..Self::default()
        }
    }

    /// The journal file being written.
    pub fn path(&self) -> Option<&Path> {
        self.writer.as_ref().map(JournalWriter::path)
    }

    /// Points written to it.
    pub fn rows(&self) -> u64 {
        self.writer.as_ref().map_or(0, JournalWriter::rows)
    }

    /// Ends the journal being written (the next point starts a new one).
    pub fn close(&mut self) {
        self.writer = None;
    }
}

impl StillpointApp {
    /// Settings of the session as the journal's header holds them.
    fn journal_settings(&self) -> serde_json::Value {
        serde_json::json!({
            "source": super::source_key(&self.source),
            "window": serde_json::to_value(&self.state).unwrap_or(serde_json::Value::Null),
            "welch_sent": serde_json::to_value(&self.sent_welch).unwrap_or(serde_json::Value::Null),
            "analysis_sent": serde_json::to_value(&self.sent_analysis)
                .unwrap_or(serde_json::Value::Null),
        })
    }

    /// Appends a row per history interval of the frame to the journal; called once per
    /// frame taken from the engine, so it writes about once a second.
    pub(super) fn journal_frame(&mut self, frame: &Frame) {
        if frame.history.is_empty() || self.journal.failed.is_some() {
            return;
        }
        let Some(folder) = self.journal.folder.clone() else {
            return;
        };
        if self.journal.writer.is_some() && self.journal.generation != frame.generation {
            self.journal.writer = None;
        }
        if self.journal.writer.is_none() {
            let header =
                JournalHeader::new(&super::source_key(&self.source), self.journal_settings());
            match JournalWriter::create(&folder, header) {
                Ok(w) => {
                    self.journal.writer = Some(w);
                    self.journal.generation = frame.generation;
                    self.journal.last_t_s = 0.0;
                }
                Err(e) => {
                    self.journal_failed(e.to_string());
                    return;
                }
            }
        }
        let asked = crate::model::CalibrationMethod::of(&self.state.analysis)
            != crate::model::CalibrationMethod::None;
        for entry in &frame.history {
            let row = row_of_entry(entry, asked);
            self.journal.last_t_s = row.t_end_s;
            let result = self
                .journal
                .writer
                .as_mut()
                .map(|w| w.append(journal::now_unix_s(), &row));
            if let Some(Err(e)) = result {
                self.journal_failed(e.to_string());
                return;
            }
        }
    }

    fn journal_failed(&mut self, why: String) {
        self.journal.writer = None;
        let text = format!(
            "the session journal stopped: {why} (the live view goes on; choose another \
             journal folder to start again)"
        );
        self.journal.failed = Some(why);
        self.error(MessageKind::Other, text);
    }

    /// Records changed settings in the journal's header.
    pub(super) fn journal_settings_changed(&mut self) {
        let settings = self.journal_settings();
        let result = self
            .journal
            .writer
            .as_mut()
            .map(|w| w.settings_changed(settings));
        if let Some(Err(e)) = result {
            self.journal_failed(e.to_string());
        }
    }

    /// The journal file being written (tests read it).
    pub fn journal_path(&self) -> Option<&Path> {
        self.journal.path()
    }

    /// The journal reopened for comparison (tests read it).
    pub fn opened_journal(&self) -> Option<&OpenedJournal> {
        self.journal.opened.as_ref()
    }

    /// Journals into `folder` from the next trend point (a new journal file).
    pub fn set_journal_folder(&mut self, folder: PathBuf) {
        self.journal.writer = None;
        self.journal.failed = None;
        self.journal.folder_field = folder.display().to_string();
        self.state.journal_folder = Some(folder.clone());
        self.journal.folder = Some(folder);
        self.corrected(MessageKind::Other);
    }

    /// Opens a journal and shows its trends beside the live ones; a bad file is a message.
    pub fn open_journal(&mut self, path: &Path) {
        match journal::read_journal(path) {
            Ok(j) => {
                let mut trends = TrendBuffer::new(TREND_POINTS);
                for (_, row) in &j.rows {
                    trends.push(point_of_row(row));
                }
                let skipped = if j.skipped_lines > 0 {
                    format!(" ({} unreadable line(s) skipped)", j.skipped_lines)
                } else {
                    String::new()
                };
                self.info(
                    MessageKind::Other,
                    format!(
                        "journal opened: {} points from {}{skipped}",
                        j.rows.len(),
                        path.display()
                    ),
                );
                self.journal.opened = Some(OpenedJournal {
                    path: path.to_path_buf(),
                    journal: j,
                    trends,
                });
            }
            Err(e) => self.error(MessageKind::Other, format!("cannot open the journal: {e}")),
        }
    }

    /// Writes the session's trends (every point of the journal being written, or of the
    /// journal opened when there is none) as `stillpoint track` writes its CSV.
    pub fn export_trends(&mut self, path: &Path) {
        let rows: Result<Vec<TrendRow>, String> = if let Some(p) = self.journal.path() {
            journal::read_journal(p)
                .map(|j| j.rows.into_iter().map(|r| r.1).collect())
                .map_err(|e| e.to_string())
        } else if let Some(o) = &self.journal.opened {
            Ok(o.journal.rows.iter().map(|r| r.1.clone()).collect())
        } else {
            Err(
                "no journal is being written or open (its folder can be chosen under \
                 Session journal)"
                    .into(),
            )
        };
        let result = rows.and_then(|rows| {
            export_trends_csv(path, &rows)
                .map(|()| rows.len())
                .map_err(|e| e.to_string())
        });
        match result {
            Ok(n) => self.info(
                MessageKind::Export,
                format!("{n} trend rows written to {}", path.display()),
            ),
            Err(e) => self.error(
                MessageKind::Export,
                format!("cannot export the trends to {}: {e}", path.display()),
            ),
        }
    }

    /// Writes the waterfall held as `.npy` + `.json` axes.
    pub fn export_waterfall(&mut self, path: &Path) {
        match export_waterfall_npy(path, &self.live.waterfall) {
            Ok(json) => self.info(
                MessageKind::Export,
                format!(
                    "waterfall written to {} (axes in {})",
                    path.display(),
                    json.display()
                ),
            ),
            Err(e) => self.error(
                MessageKind::Export,
                format!("cannot export the waterfall to {}: {e}", path.display()),
            ),
        }
    }

    /// The panel: journal file and folder, open a journal, exports.
    pub(super) fn journal_ui(&mut self, ui: &mut Ui) {
        egui::CollapsingHeader::new(RichText::new("Session journal").strong())
            .default_open(false)
            .show(ui, |ui| self.journal_panel(ui));
    }

    fn journal_panel(&mut self, ui: &mut Ui) {
        let dialogs = self.files.dialogs;
        match (self.journal.path(), &self.journal.failed) {
            (_, Some(why)) => {
                ui.label(RichText::new(format!("stopped: {why}")).color(theme::ERROR));
            }
            (Some(p), None) => {
                ui.label(
                    RichText::new(format!("{} points → {}", self.journal.rows(), p.display()))
                        .small(),
                );
            }
            (None, None) if self.journal.folder.is_none() => {
                ui.label(RichText::new("off (choose a folder)").color(theme::PENCIL));
            }
            (None, None) => {
                ui.label(RichText::new("starts with the first trend point").color(theme::PENCIL));
            }
        }
        ui.horizontal(|ui| {
            ui.label("Folder");
            ui.add(egui::TextEdit::singleline(&mut self.journal.folder_field).desired_width(140.0));
        });
        ui.horizontal(|ui| {
            if ui.button("Use folder").clicked() && !self.journal.folder_field.trim().is_empty() {
                let f = PathBuf::from(self.journal.folder_field.trim());
                self.set_journal_folder(f);
            }
            if dialogs
                && ui.button("Choose…").clicked()
                && let Some(f) = rfd::FileDialog::new().pick_folder()
            {
                self.set_journal_folder(f);
            }
        });
        ui.separator();
        ui.horizontal(|ui| {
            ui.label("Journal");
            ui.add(egui::TextEdit::singleline(&mut self.journal.open_field).desired_width(140.0));
        });
        ui.horizontal(|ui| {
            if ui.button("Open journal").clicked() && !self.journal.open_field.trim().is_empty() {
                let p = PathBuf::from(self.journal.open_field.trim());
                self.open_journal(&p);
            }
            if dialogs && ui.button("Open journal…").clicked() {
                let mut d = rfd::FileDialog::new().add_filter("journal (CSV)", &["csv"]);
                if let Some(f) = &self.journal.folder {
                    d = d.set_directory(f);
                }
                if let Some(p) = d.pick_file() {
                    self.journal.open_field = p.display().to_string();
                    self.open_journal(&p);
                }
            }
            if self.journal.opened.is_some() && ui.button("Close").clicked() {
                self.journal.opened = None;
            }
        });
        if let Some(o) = &self.journal.opened {
            let source = o
                .journal
                .header
                .as_ref()
                .map_or("unknown source".to_string(), |h| h.source.clone());
            ui.label(
                RichText::new(format!(
                    "comparing: {} points of {source} (dashed in the trends)",
                    o.journal.rows.len()
                ))
                .small(),
            );
        }
        ui.separator();
        ui.horizontal(|ui| {
            ui.label("CSV");
            ui.add(egui::TextEdit::singleline(&mut self.journal.csv_field).desired_width(120.0));
            if ui.button("Export trends").clicked() {
                let typed = self.journal.csv_field.trim().to_string();
                let p = if typed.is_empty() && dialogs {
                    rfd::FileDialog::new()
                        .add_filter("CSV", &["csv"])
                        .set_file_name("trends.csv")
                        .save_file()
                } else {
                    (!typed.is_empty()).then(|| PathBuf::from(typed))
                };
                if let Some(p) = p {
                    self.export_trends(&p);
                }
            }
        });
        ui.horizontal(|ui| {
            ui.label(".npy");
            ui.add(egui::TextEdit::singleline(&mut self.journal.npy_field).desired_width(120.0));
            if ui.button("Export waterfall").clicked() {
                let typed = self.journal.npy_field.trim().to_string();
                let p = if typed.is_empty() && dialogs {
                    rfd::FileDialog::new()
                        .add_filter("NumPy", &["npy"])
                        .set_file_name("waterfall.npy")
                        .save_file()
                } else {
                    (!typed.is_empty()).then(|| PathBuf::from(typed))
                };
                if let Some(p) = p {
                    self.export_waterfall(&p);
                }
            }
        });
    }
}
