//! Files from the window: snapshot save/load/overlay/compare (through `crate::snapshot`),
//! PNG export of the window, and native file dialogs (rfd) with a typed-path fallback that
//! always works. A file is never replaced without asking.

use std::path::{Path, PathBuf};

use eframe::egui::{self, ColorImage};

use super::{MessageKind, StillpointApp};
use crate::model::AppState;

/// What the overwrite question is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum ConfirmKind {
    /// A snapshot.
    #[default]
    Snapshot,
    /// A PNG export.
    Png,
}

/// Typed paths and dialog availability.
#[derive(Debug, Clone, Default)]
pub struct FileState {
    /// Snapshot path (JSON; the CSV goes beside it).
    pub snapshot_path: String,
    /// Label saved with the snapshot ("4 K, 20 µW").
    pub snapshot_label: String,
    /// PNG export path.
    pub png_path: String,
    /// A path waiting for "replace?".
    pub confirm_overwrite: Option<PathBuf>,
    /// What that question is about.
    pub confirm_kind: ConfirmKind,
    /// Whether a native dialog can be shown at all.
    pub dialogs: bool,
    /// Shown when a dialog could not be opened.
    pub dialog_note: Option<String>,
    /// The two snapshots compared (indices).
    pub compare: Option<(usize, usize)>,
    /// The comparison drawn: made once per pair of snapshots, not per frame.
    pub compare_cache: Option<CompareCache>,
    /// Results of PNG exports, written by the screenshot callback (another thread).
    pub png_results: std::sync::Arc<std::sync::Mutex<Vec<Result<String, String>>>>,
}

/// A comparison of two snapshots ready to draw, with the data it was made from.
#[derive(Debug, Clone)]
pub struct CompareCache {
    /// The log10 PSDs of the two snapshots (held, so other data are never taken for them).
    pub of: (std::sync::Arc<Vec<f64>>, std::sync::Arc<Vec<f64>>),
    /// `[log10 f, dB]` points of the ratio, or why there is none.
    pub points: Result<Vec<[f64; 2]>, String>,
}

/// True if a native file dialog has a chance of opening (a D-Bus session for the desktop
/// portal, or `zenity` on the PATH).
fn dialogs_available() -> bool {
    if std::env::var_os("DBUS_SESSION_BUS_ADDRESS").is_some() {
        return true;
    }
    std::env::var_os("PATH")
        .is_some_and(|paths| std::env::split_paths(&paths).any(|d| d.join("zenity").is_file()))
}

impl FileState {
    /// Fresh state; probes for a dialog service.
    pub fn new() -> Self {
        Self {
            dialogs: dialogs_available(),
            ..Self::default()
        }
    }

    fn no_dialog(&mut self) {
        self.dialog_note = Some(
            "No file dialog service on this system (no desktop portal, no zenity): type the \
             path in the field instead."
                .into(),
        );
    }

    /// Native "open" dialog for a source; `None` if cancelled or unavailable.
    pub fn browse_source(&mut self) -> Option<PathBuf> {
        if !self.dialogs {
            self.no_dialog();
            return None;
        }
        let p = rfd::FileDialog::new()
            .add_filter(
                "recordings",
                &["wav", "WAV", "raw", "bin", "dat", "f32", "i16"],
            )
            .add_filter("all files", &["*"])
            .pick_file();
        if p.is_none() {
            self.dialog_note = Some("no file chosen (if no dialog appeared, type the path)".into());
        }
        p
    }

    /// Native "save" dialog for the PNG export.
    pub fn browse_png(&mut self) {
        if !self.dialogs {
            self.no_dialog();
            return;
        }
        if let Some(p) = rfd::FileDialog::new()
            .add_filter("PNG", &["png"])
            .set_file_name("stillpoint.png")
            .save_file()
        {
            self.png_path = p.display().to_string();
        }
    }

    /// Asks for a snapshot path with a dialog (`save`: a new file).
    pub fn browse_snapshot(&mut self, save: bool) {
        if !self.dialogs {
            self.no_dialog();
            return;
        }
        let d = rfd::FileDialog::new().add_filter("snapshot (JSON)", &["json"]);
        let p = if save {
            d.set_file_name("snapshot.json").save_file()
        } else {
            d.pick_file()
        };
        if let Some(p) = p {
            self.snapshot_path = p.display().to_string();
        }
    }
}

/// A new snapshot path in the last folder, named by the date and time (UTC, readable:
/// `stillpoint-snapshot-2026-12-03_07-45-12Z.json`).
pub fn auto_snapshot_path(state: &AppState) -> String {
    let dir = state
        .last_snapshot_dir
        .clone()
        .or_else(|| std::env::current_dir().ok())
        .unwrap_or_default();
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    let stamp = crate::model::format::utc_file_stamp(secs);
    for i in 0..1000 {
        let name = if i == 0 {
            format!("stillpoint-snapshot-{stamp}Z.json")
        } else {
            format!("stillpoint-snapshot-{stamp}Z-{i}.json")
        };
        let p = dir.join(name);
        if !p.exists() {
            return p.display().to_string();
        }
    }
    dir.join("stillpoint-snapshot.json").display().to_string()
}

/// Writes `image` as PNG to `path` atomically (temporary file + rename); an existing file is
/// replaced only with `overwrite`.
///
/// # Errors
/// The file exists (without `overwrite`), or it cannot be encoded or written.
pub fn write_png(path: &Path, image: &ColorImage, overwrite: bool) -> Result<(), String> {
    let [w, h] = image.size;
    let bytes: Vec<u8> = image.pixels.iter().flat_map(|c| c.to_array()).collect();
    let buffer = image::RgbaImage::from_raw(w as u32, h as u32, bytes)
        .ok_or_else(|| "the screenshot has an inconsistent size".to_string())?;
    crate::io::atomic::write_atomic(path, overwrite, |file| {
        buffer
            .write_to(file, image::ImageFormat::Png)
            .map_err(|e| e.to_string())
    })
    .map_err(|e| match e {
        crate::io::atomic::AtomicError::Io(e) => format!("{}: {e}", path.display()),
        crate::io::atomic::AtomicError::Inner(e) => format!("{}: {e}", path.display()),
    })
}

impl StillpointApp {
    fn typed_path(text: &str, what: &str) -> Result<PathBuf, String> {
        let t = text.trim();
        if t.is_empty() {
            Err(format!("type a path for the {what} first"))
        } else {
            Ok(PathBuf::from(t))
        }
    }

    pub(super) fn save_snapshot(&mut self, overwrite: bool) {
        let path = match Self::typed_path(&self.files.snapshot_path, "snapshot") {
            Ok(p) => p,
            Err(e) => return self.error(MessageKind::Snapshot, e),
        };
        let Some(frame) = self.live.frame.clone() else {
            return self.error(
                MessageKind::Snapshot,
                "nothing to save yet: no spectrum has arrived",
            );
        };
        let Some(spectrum) = frame.spectrum.clone() else {
            return self.error(
                MessageKind::Snapshot,
                "nothing to save yet: no spectrum has arrived",
            );
        };
        if !overwrite && path.exists() {
            self.files.confirm_overwrite = Some(path);
            self.files.confirm_kind = ConfirmKind::Snapshot;
            return;
        }
        let label = self.files.snapshot_label.trim().to_string();
        let result = crate::model::snapshots::save(
            &path,
            &spectrum,
            frame.report.as_deref(),
            &self.source,
            &label,
            overwrite,
        );
        match result {
            Ok(saved) => {
                if let Some(dir) = path.parent() {
                    self.state.last_snapshot_dir = Some(dir.to_path_buf());
                }
                self.info(
                    MessageKind::Snapshot,
                    format!("snapshot saved: {}", saved.path.display()),
                );
                self.snapshots.push(saved);
            }
            Err(e) => self.error(
                MessageKind::Snapshot,
                format!("cannot save the snapshot: {e}"),
            ),
        }
    }

    pub(super) fn load_snapshot(&mut self) {
        let path = match Self::typed_path(&self.files.snapshot_path, "snapshot") {
            Ok(p) => p,
            Err(e) => return self.error(MessageKind::Snapshot, e),
        };
        match crate::model::snapshots::load(&path) {
            Ok(s) => {
                if let Some(dir) = path.parent() {
                    self.state.last_snapshot_dir = Some(dir.to_path_buf());
                }
                self.info(
                    MessageKind::Snapshot,
                    format!(
                        "snapshot loaded: {} ({} bins)",
                        s.name,
                        s.frequencies_hz.len()
                    ),
                );
                self.snapshots.push(s);
            }
            Err(e) => self.error(
                MessageKind::Snapshot,
                format!("cannot load {}: {e}", path.display()),
            ),
        }
    }

    /// Reports finished PNG exports.
    pub(super) fn drain_png_results(&mut self) {
        let done: Vec<Result<String, String>> = self
            .files
            .png_results
            .lock()
            .map(|mut l| std::mem::take(&mut *l))
            .unwrap_or_default();
        for r in done {
            match r {
                Ok(p) => self.info(MessageKind::Export, format!("PNG saved: {p}")),
                Err(e) => self.error(MessageKind::Export, format!("cannot save the PNG: {e}")),
            }
        }
    }

    pub(super) fn export_png(&mut self, ctx: &egui::Context, overwrite: bool) {
        let path = match Self::typed_path(&self.files.png_path, "PNG export") {
            Ok(p) => p,
            Err(e) => return self.error(MessageKind::Export, e),
        };
        if !overwrite && path.exists() {
            self.files.confirm_overwrite = Some(path);
            self.files.confirm_kind = ConfirmKind::Png;
            return;
        }
        let ctx2 = ctx.clone();
        let results = std::sync::Arc::clone(&self.files.png_results);
        ctx.request_screenshot(move |image| {
            let r = write_png(&path, &image, overwrite).map(|()| path.display().to_string());
            if let Ok(mut list) = results.lock() {
                list.push(r);
            }
            ctx2.request_repaint();
        });
        self.info(
            MessageKind::Export,
            "PNG export requested (written after the next frame)",
        );
    }
}
