//! Saved spectra ("snapshots"): `NAME.json` (metadata: program version, UTC time saved, label
//! and notes, source, every Welch setting, the calibration, the analysis [`Report`] if any,
//! the name, row count and FNV-1a hash of the data file) plus `NAME.csv` (the spectrum, in
//! exactly the columns `stillpoint spectrum` writes: `frequency_hz,psd_v2_per_hz[,psd_m2_per_hz]`,
//! one row per bin from DC to Nyquist, shortest round-trip numbers, so f64 values survive
//! bit-exactly).
//!
//! Writes are atomic ([`PendingFile`]: temporary file in the same folder with a unique name,
//! write, flush, fsync, rename, fsync of the folder on Unix). A save prepares both files
//! before moving either into place, CSV first, then JSON; the JSON carries the CSV's FNV-1a
//! hash, which ties the pair together. An existing snapshot is never replaced unless
//! `overwrite` is true. A save killed between the two renames leaves the new CSV beside the
//! old JSON and the new JSON complete (fsynced) in its temporary file: the save's journal.
//! [`load`] sees the hash mismatch and uses that JSON, so a load always yields one whole
//! snapshot (the old pair when the kill came before the CSV rename, the new pair after it);
//! [`remove_stale_temp_files`] first finishes such a save (moves that JSON into place) and
//! only then deletes the temporary files, so cleaning never leaves a mixed pair behind.
//!
//! Loading gives one-line errors for damaged files (bad JSON, missing columns, non-numeric or
//! non-finite values, a row count or frequency grid that does not match the metadata).
//! [`compare()`] forms ratio and difference of two spectra (interpolating the reference when the
//! grids differ); [`excess_bands`] and [`mark_new_peaks`] list what is new since a reference.

mod compare;
mod spectrum_csv;

pub use compare::{Comparison, ExcessBand, compare, excess_bands, mark_new_peaks};
pub use spectrum_csv::{read_spectrum_csv, write_spectrum_csv, write_spectrum_csv_with};

use std::fs::{self, File};
use std::io::{self, BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::time::SystemTime;

use serde::{Deserialize, Serialize};

use crate::dsp::{Averaging, Detrend, Spectrum, WindowKind};
use crate::io::atomic::{AtomicError, PendingFile, parent_dir, sync_dir, temp_prefix};
use crate::io::fnv1a64;
use crate::report::Report;
use spectrum_csv::{parse_csv, truncate};

/// Name written in every snapshot's `format` field.
pub(crate) const FORMAT_NAME: &str = "stillpoint-snapshot";
/// Version of the snapshot format this program writes and reads.
pub(crate) const FORMAT_VERSION: u32 = 1;
/// Largest metadata file accepted (bytes).
const MAX_JSON_BYTES: u64 = 64 << 20;
/// Largest data file accepted (bytes).
const MAX_CSV_BYTES: u64 = 1 << 31;

/// Result alias of this module.
pub type Result<T> = std::result::Result<T, SnapshotError>;

/// Why a snapshot could not be saved, loaded or compared.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SnapshotError {
    /// Saving would replace an existing snapshot and `overwrite` was false.
    #[error("{} already exists; choose another name or allow overwriting", path.display())]
    Exists {
        /// The existing file.
        path: PathBuf,
    },
    /// A file-system error while writing.
    #[error("cannot write {}: {source}", path.display())]
    Write {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: io::Error,
    },
    /// A file-system error while reading.
    #[error("cannot read {}: {source}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: io::Error,
    },
    /// The metadata JSON is damaged or not a snapshot.
    #[error("{}: not a usable snapshot: {message}", path.display())]
    Metadata {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// The spectrum CSV is damaged (`location` is the file and/or line).
    #[error("{location}: {message}")]
    Csv {
        /// File and line, e.g. `x.csv line 12`.
        location: String,
        /// What is wrong.
        message: String,
    },
    /// The spectrum or settings to save are unusable (NaN, empty, bad calibration).
    #[error("cannot save this spectrum: {0}")]
    Invalid(String),
    /// Two spectra cannot be compared.
    #[error("cannot compare the spectra: {0}")]
    Incompatible(String),
}

/// The calibration in force when the snapshot was taken.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SnapshotCalibration {
    /// Metres per volt.
    pub m_per_v: f64,
    /// `"tone"`, `"equipartition"` or `"given"`.
    pub method: String,
    /// 1σ of `m_per_v`, if known.
    #[serde(default)]
    pub m_per_v_uncertainty: Option<f64>,
}

/// What the user and the program know about a spectrum besides its data.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct SnapshotInfo {
    /// Short label, e.g. "4 K, 20 µW".
    pub label: String,
    /// Free notes.
    pub notes: String,
    /// Where the samples came from (path, `tcp://…`, `demo:cooldown seed 1`).
    pub source: String,
    /// Calibration, if any (adds the `psd_m2_per_hz` column).
    pub calibration: Option<SnapshotCalibration>,
    /// The analysis report of this spectrum, if one was made.
    pub report: Option<Report>,
}

/// Every Welch setting of the saved spectrum (the [`Spectrum`] fields except the data).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WelchSettings {
    /// Sample rate f_s (Hz).
    pub sample_rate_hz: f64,
    /// Segment length N.
    pub segment: usize,
    /// Overlap fraction.
    pub overlap: f64,
    /// Window.
    pub window: WindowKind,
    /// Detrending.
    pub detrend: Detrend,
    /// Averaging mode.
    pub averaging: Averaging,
    /// Segments combined.
    pub averages: usize,
    /// Effective independent averages.
    pub k_eff: f64,
    /// Bin spacing Δf (Hz).
    pub resolution_hz: f64,
    /// Equivalent noise bandwidth (Hz).
    pub enbw_hz: f64,
}

impl WelchSettings {
    /// The settings of a spectrum.
    pub fn of(s: &Spectrum) -> Self {
        Self {
            sample_rate_hz: s.sample_rate_hz,
            segment: s.segment,
            overlap: s.overlap,
            window: s.window,
            detrend: s.detrend,
            averaging: s.averaging,
            averages: s.averages,
            k_eff: s.k_eff,
            resolution_hz: s.resolution_hz,
            enbw_hz: s.enbw_hz,
        }
    }

    /// A spectrum with these settings and `psd_v2_per_hz`.
    pub fn spectrum(&self, psd_v2_per_hz: Vec<f64>) -> Spectrum {
        Spectrum {
            sample_rate_hz: self.sample_rate_hz,
            segment: self.segment,
            overlap: self.overlap,
            window: self.window,
            detrend: self.detrend,
            averaging: self.averaging,
            averages: self.averages,
            k_eff: self.k_eff,
            resolution_hz: self.resolution_hz,
            enbw_hz: self.enbw_hz,
            psd_v2_per_hz,
        }
    }
}

/// The metadata file `NAME.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SnapshotMeta {
    /// Always [`FORMAT_NAME`].
    pub format: String,
    /// [`FORMAT_VERSION`] of the writer.
    pub format_version: u32,
    /// Program and version that saved it.
    pub program: String,
    /// When it was saved, UTC, ISO 8601 (`2026-12-02T06:10:41Z`).
    pub saved_utc: String,
    /// User label.
    pub label: String,
    /// User notes.
    pub notes: String,
    /// Source description.
    pub source: String,
    /// Welch settings.
    pub welch: WelchSettings,
    /// Calibration, if any.
    pub calibration: Option<SnapshotCalibration>,
    /// Analysis report, if any.
    pub report: Option<Report>,
    /// File name (no folder) of the CSV data beside this file.
    pub data_file: String,
    /// Rows (bins) in the data file.
    pub bins: usize,
    /// Columns of the data file.
    pub columns: Vec<String>,
    /// FNV-1a 64-bit hash of the data file's bytes, 16 hex digits.
    pub data_fnv1a64: String,
}

/// A loaded (or just saved) snapshot.
#[derive(Debug, Clone, PartialEq)]
pub struct Snapshot {
    /// The metadata.
    pub meta: SnapshotMeta,
    /// The spectrum with its settings.
    pub spectrum: Spectrum,
    /// The calibrated column, if the file has one.
    pub psd_m2_per_hz: Option<Vec<f64>>,
    /// Where it was loaded from / saved to (the JSON file).
    pub path: PathBuf,
    /// Things the user should know (data edited after saving, metadata recovered from an
    /// interrupted save); empty normally.
    pub warnings: Vec<String>,
}

/// The columns of a spectrum CSV as read.
#[derive(Debug, Clone, PartialEq)]
pub struct SpectrumTable {
    /// `frequency_hz`.
    pub frequency_hz: Vec<f64>,
    /// `psd_v2_per_hz`.
    pub psd_v2_per_hz: Vec<f64>,
    /// `psd_m2_per_hz`, when present.
    pub psd_m2_per_hz: Option<Vec<f64>>,
}

/// `(NAME.json, NAME.csv)` for a path given as `NAME`, `NAME.json` or `NAME.csv`.
pub fn snapshot_paths(path: &Path) -> (PathBuf, PathBuf) {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    let base = match ext.as_deref() {
        Some("json" | "csv") => path.with_extension(""),
        _ => path.to_path_buf(),
    };
    let with = |e: &str| {
        let mut s = base.clone().into_os_string();
        s.push(e);
        PathBuf::from(s)
    };
    (with(".json"), with(".csv"))
}

/// UTC time as ISO 8601 with seconds, e.g. `2026-12-02T06:10:41Z` (days → civil date by
/// H. Hinnant's `civil_from_days` algorithm).
pub(crate) fn iso8601_utc(time: SystemTime) -> String {
    let secs = match time.duration_since(SystemTime::UNIX_EPOCH) {
        Ok(d) => i64::try_from(d.as_secs()).unwrap_or(i64::MAX),
        Err(e) => -i64::try_from(e.duration().as_secs()).unwrap_or(i64::MAX),
    };
    let days = secs.div_euclid(86_400);
    let rem = secs.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1_460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}Z",
        rem / 3_600,
        (rem / 60) % 60,
        rem % 60
    )
}

fn check_spectrum(s: &Spectrum) -> Result<()> {
    let invalid = |m: String| Err(SnapshotError::Invalid(m));
    if s.is_empty() {
        return invalid("the spectrum has no bins".to_string());
    }
    if !(s.resolution_hz.is_finite() && s.resolution_hz > 0.0) {
        return invalid(format!("resolution {} Hz is not positive", s.resolution_hz));
    }
    if !(s.sample_rate_hz.is_finite() && s.sample_rate_hz > 0.0) {
        return invalid(format!(
            "sample rate {} Hz is not positive",
            s.sample_rate_hz
        ));
    }
    for (name, v) in [
        ("overlap", s.overlap),
        ("k_eff", s.k_eff),
        ("enbw_hz", s.enbw_hz),
    ] {
        if !v.is_finite() {
            return invalid(format!("{name} is not finite"));
        }
    }
    if let Some(k) = s
        .psd_v2_per_hz
        .iter()
        .position(|p| !(p.is_finite() && *p >= 0.0))
    {
        return invalid(format!(
            "bin {k} holds {:?} (a PSD must be finite and non-negative)",
            s.psd_v2_per_hz.get(k).copied().unwrap_or(f64::NAN)
        ));
    }
    Ok(())
}

/// Saves `spectrum` with `info` as `NAME.json` + `NAME.csv` (`path` may be `NAME`,
/// `NAME.json` or `NAME.csv`), atomically (module docs). Returns the snapshot as saved.
///
/// # Errors
/// [`SnapshotError::Exists`] if either file exists and `overwrite` is false;
/// [`SnapshotError::Invalid`] for a spectrum with non-finite values or a bad calibration;
/// [`SnapshotError::Write`] for file-system errors (an existing snapshot is then untouched).
pub fn save(
    path: &Path,
    spectrum: &Spectrum,
    info: &SnapshotInfo,
    overwrite: bool,
) -> Result<Snapshot> {
    save_until(path, spectrum, info, overwrite, None)?.ok_or_else(|| {
        SnapshotError::Invalid("the save stopped before it was complete".to_string())
    })
}

/// [`save`], stopping after `stop` (crash tests); `Ok(None)` when it stopped.
fn save_until(
    path: &Path,
    spectrum: &Spectrum,
    info: &SnapshotInfo,
    overwrite: bool,
    stop: Option<SaveStep>,
) -> Result<Option<Snapshot>> {
    check_spectrum(spectrum)?;
    let m_per_v = info.calibration.as_ref().map(|c| c.m_per_v);
    if let Some(c) = &info.calibration
        && !(c.m_per_v.is_finite() && c.m_per_v > 0.0)
    {
        return Err(SnapshotError::Invalid(format!(
            "calibration {} m/V is not a positive number",
            c.m_per_v
        )));
    }
    let (json_path, csv_path) = snapshot_paths(path);
    if !overwrite {
        for p in [&json_path, &csv_path] {
            if p.exists() {
                return Err(SnapshotError::Exists { path: p.clone() });
            }
        }
    }
    let mut csv = Vec::with_capacity(spectrum.len() * 48 + 64);
    write_spectrum_csv(&mut csv, spectrum, m_per_v)
        .map_err(|e| SnapshotError::Invalid(e.to_string()))?;
    let data_file = csv_path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let mut columns = vec!["frequency_hz".to_string(), "psd_v2_per_hz".to_string()];
    if m_per_v.is_some() {
        columns.push("psd_m2_per_hz".to_string());
    }
    let meta = SnapshotMeta {
        format: FORMAT_NAME.to_string(),
        format_version: FORMAT_VERSION,
        program: format!("stillpoint {}", env!("CARGO_PKG_VERSION")),
        saved_utc: iso8601_utc(SystemTime::now()),
        label: info.label.clone(),
        notes: info.notes.clone(),
        source: info.source.clone(),
        welch: WelchSettings::of(spectrum),
        calibration: info.calibration.clone(),
        report: info.report.clone(),
        data_file,
        bins: spectrum.len(),
        columns,
        data_fnv1a64: format!("{:016x}", fnv1a64(&csv)),
    };
    let mut json = serde_json::to_vec_pretty(&meta)
        .map_err(|e| SnapshotError::Invalid(format!("metadata cannot be written: {e}")))?;
    json.push(b'\n');
    let write_err = |path: &Path| {
        let path = path.to_path_buf();
        move |e: AtomicError<io::Error>| SnapshotError::Write {
            path,
            source: match e {
                AtomicError::Io(e) | AtomicError::Inner(e) => e,
            },
        }
    };
    let pending_csv = PendingFile::prepare(&csv_path, |w: &mut BufWriter<File>| w.write_all(&csv))
        .map_err(write_err(&csv_path))?;
    let pending_json =
        PendingFile::prepare(&json_path, |w: &mut BufWriter<File>| w.write_all(&json))
            .map_err(write_err(&json_path))?;
    let commit_err = |path: &Path, e: io::Error| {
        if e.kind() == io::ErrorKind::AlreadyExists {
            SnapshotError::Exists {
                path: path.to_path_buf(),
            }
        } else {
            SnapshotError::Write {
                path: path.to_path_buf(),
                source: e,
            }
        }
    };
    if stop == Some(SaveStep::BothPrepared) {
        std::mem::forget((pending_csv, pending_json));
        return Ok(None);
    }
    pending_csv
        .commit(overwrite)
        .map_err(|e| commit_err(&csv_path, e))?;
    if stop == Some(SaveStep::DataInPlace) {
        std::mem::forget(pending_json);
        return Ok(None);
    }
    if let Err(e) = pending_json.commit(overwrite) {
        if !overwrite {
            // We created the CSV a moment ago; do not leave half a snapshot behind.
            let _ = fs::remove_file(&csv_path);
        }
        return Err(commit_err(&json_path, e));
    }
    Ok(Some(Snapshot {
        meta,
        spectrum: spectrum.clone(),
        psd_m2_per_hz: m_per_v
            .map(|c| spectrum.psd_v2_per_hz.iter().map(|p| p * (c * c)).collect()),
        path: json_path,
        warnings: Vec::new(),
    }))
}

/// Where [`save_killed_after`] stops a save, as if the process were killed there.
#[doc(hidden)]
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SaveStep {
    /// Both temporary files written and fsynced, neither in place.
    BothPrepared,
    /// The new CSV renamed into place, the new JSON still in its temporary file: the window
    /// in which the pair on disk is mixed (new data, old metadata).
    DataInPlace,
}

/// A save (with `overwrite`) that stops after `step` and leaves its temporary files as a
/// killed process would: for the crash tests, which can then hit each window deliberately.
///
/// # Errors
/// As [`save`].
#[doc(hidden)]
pub fn save_killed_after(
    path: &Path,
    spectrum: &Spectrum,
    info: &SnapshotInfo,
    step: SaveStep,
) -> Result<()> {
    save_until(path, spectrum, info, true, Some(step)).map(|_| ())
}

fn read_limited(path: &Path, limit: u64) -> Result<Vec<u8>> {
    let file = File::open(path).map_err(|source| SnapshotError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    let mut bytes = Vec::new();
    file.take(limit + 1)
        .read_to_end(&mut bytes)
        .map_err(|source| SnapshotError::Read {
            path: path.to_path_buf(),
            source,
        })?;
    if bytes.len() as u64 > limit {
        return Err(SnapshotError::Metadata {
            path: path.to_path_buf(),
            message: format!("file larger than {limit} bytes"),
        });
    }
    Ok(bytes)
}

/// Parses and checks snapshot metadata (the JSON file's bytes).
///
/// # Errors
/// [`SnapshotError::Metadata`] (with `path` for the message) if it is not valid JSON, not a
/// snapshot, a newer format version, or inconsistent.
pub(crate) fn parse_meta(bytes: &[u8], path: &Path) -> Result<SnapshotMeta> {
    let err = |message: String| SnapshotError::Metadata {
        path: path.to_path_buf(),
        message,
    };
    // serde quotes offending values, which may hold line breaks: keep the message one line.
    let meta: SnapshotMeta =
        serde_json::from_slice(bytes).map_err(|e| err(truncate(&e.to_string(), 300)))?;
    if meta.format != FORMAT_NAME {
        return Err(err(format!(
            "format is '{}', expected '{FORMAT_NAME}'",
            truncate(&meta.format, 40)
        )));
    }
    if meta.format_version > FORMAT_VERSION {
        return Err(err(format!(
            "format version {} is newer than this program reads ({FORMAT_VERSION})",
            meta.format_version
        )));
    }
    let name_ok = !meta.data_file.is_empty()
        && Path::new(&meta.data_file)
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            == Some(meta.data_file.clone())
        && meta.data_file != ".."
        && meta.data_file != ".";
    if !name_ok {
        return Err(err(format!(
            "data_file '{}' must be a file name beside the metadata",
            truncate(&meta.data_file, 60)
        )));
    }
    let w = &meta.welch;
    let positive = |v: f64| v.is_finite() && v > 0.0;
    if !(positive(w.resolution_hz) && positive(w.sample_rate_hz)) {
        return Err(err(
            "welch.resolution_hz and welch.sample_rate_hz must be positive".to_string(),
        ));
    }
    if meta.bins == 0 {
        return Err(err("bins must be at least 1".to_string()));
    }
    if let Some(c) = &meta.calibration
        && !(c.m_per_v.is_finite() && c.m_per_v > 0.0)
    {
        return Err(err(format!(
            "calibration.m_per_v {} is not positive",
            c.m_per_v
        )));
    }
    Ok(meta)
}

/// The complete metadata of a save of `json_path` killed between its two renames: a
/// temporary `.NAME.json.….tmp` whose hash is `hash` (the data file in place) and whose data
/// file is `data_file`. Returns its path and contents.
fn journal_meta(json_path: &Path, hash: &str, data_file: &str) -> Option<(PathBuf, SnapshotMeta)> {
    temp_metadata_candidates(json_path)
        .into_iter()
        .find_map(|p| {
            let bytes = read_limited(&p, MAX_JSON_BYTES).ok()?;
            let m = parse_meta(&bytes, json_path).ok()?;
            (m.data_fnv1a64 == hash && m.data_file == data_file).then_some((p, m))
        })
}

/// Finishes a save of the snapshot at `path` that was killed between its two renames (the
/// new CSV beside the old or no JSON, the new JSON complete in its temporary file) by moving
/// that JSON into place. Returns whether there was one to finish. Do not call while another
/// process may be saving the same snapshot.
///
/// # Errors
/// The rename failed.
pub(crate) fn complete_interrupted_save(path: &Path) -> io::Result<bool> {
    let (json_path, csv_path) = snapshot_paths(path);
    let Ok(csv) = read_limited(&csv_path, MAX_CSV_BYTES) else {
        return Ok(false);
    };
    let hash = format!("{:016x}", fnv1a64(&csv));
    let current = read_limited(&json_path, MAX_JSON_BYTES)
        .and_then(|b| parse_meta(&b, &json_path))
        .ok();
    if current.as_ref().is_some_and(|m| m.data_fnv1a64 == hash) {
        return Ok(false);
    }
    let data_file = csv_path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let Some((journal, _)) = journal_meta(&json_path, &hash, &data_file) else {
        return Ok(false);
    };
    fs::rename(&journal, &json_path)?;
    sync_dir(&parent_dir(&json_path));
    Ok(true)
}

/// Removes the temporary files left beside the snapshot at `path` (`NAME`, `NAME.json` or
/// `NAME.csv`) by killed saves, after finishing a save killed between its renames
/// ([`complete_interrupted_save`]), so the pair on disk is whole before its journal goes.
/// Returns how many files were removed. Do not call while another process may be saving it.
///
/// # Errors
/// The folder cannot be read, or the rename failed.
pub fn remove_stale_temp_files(path: &Path) -> io::Result<usize> {
    complete_interrupted_save(path)?;
    let (json_path, csv_path) = snapshot_paths(path);
    Ok(crate::io::atomic::remove_stale_temp_files(&json_path)?
        + crate::io::atomic::remove_stale_temp_files(&csv_path)?)
}

/// Temporary metadata files of interrupted saves of `json_path` (`.NAME.json.….tmp`).
fn temp_metadata_candidates(json_path: &Path) -> Vec<PathBuf> {
    let Some(name) = json_path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
    else {
        return Vec::new();
    };
    let prefix = temp_prefix(&name);
    let Ok(dir) = fs::read_dir(parent_dir(json_path)) else {
        return Vec::new();
    };
    let mut found: Vec<PathBuf> = dir
        .filter_map(|e| e.ok())
        .filter(|e| {
            let n = e.file_name().to_string_lossy().into_owned();
            n.starts_with(&prefix) && n.ends_with(".tmp")
        })
        .map(|e| e.path())
        .collect();
    found.sort();
    found
}

/// Loads a snapshot (`path` may be `NAME`, `NAME.json` or `NAME.csv`) and checks the data
/// against the metadata: row count, columns, hash, and the frequency grid `f_k = k Δf`.
///
/// # Errors
/// [`SnapshotError::Read`], [`SnapshotError::Metadata`] or [`SnapshotError::Csv`], each a
/// one-line reason.
pub fn load(path: &Path) -> Result<Snapshot> {
    let (json_path, _) = snapshot_paths(path);
    let meta = parse_meta(&read_limited(&json_path, MAX_JSON_BYTES)?, &json_path)?;
    let csv_path = parent_dir(&json_path).join(&meta.data_file);
    let csv = read_limited(&csv_path, MAX_CSV_BYTES)?;
    let hash = format!("{:016x}", fnv1a64(&csv));
    let mut warnings = Vec::new();
    let meta = if hash == meta.data_fnv1a64 {
        meta
    } else {
        // A save killed between its two renames leaves the new CSV beside the old JSON, and
        // the new JSON complete in a temporary file: use it (module docs). Otherwise the CSV
        // was edited after saving: load it if it still fits the metadata, with a warning.
        let recovered = journal_meta(&json_path, &hash, &meta.data_file).map(|(_, m)| m);
        match recovered {
            Some(m) => {
                warnings.push(
                    "recovered the metadata of an interrupted save from its temporary file"
                        .to_string(),
                );
                m
            }
            None => {
                warnings.push(format!(
                    "{} was modified after it was saved (its hash differs from the metadata)",
                    meta.data_file
                ));
                meta
            }
        }
    };
    assemble(meta, &csv, &csv_path, json_path, warnings)
}

/// Parses a snapshot from the bytes of its two files without touching the file system
/// (no recovery of interrupted saves; a hash mismatch is a warning). For tests and fuzzing.
///
/// # Errors
/// As [`load`].
pub fn from_bytes(json: &[u8], csv: &[u8]) -> Result<Snapshot> {
    let json_path = PathBuf::from("<metadata>");
    let meta = parse_meta(json, &json_path)?;
    let mut warnings = Vec::new();
    if format!("{:016x}", fnv1a64(csv)) != meta.data_fnv1a64 {
        warnings.push(format!(
            "{} was modified after it was saved (its hash differs from the metadata)",
            meta.data_file
        ));
    }
    let csv_path = PathBuf::from(meta.data_file.clone());
    assemble(meta, csv, &csv_path, json_path, warnings)
}

/// Checks the CSV against the metadata and builds the snapshot.
fn assemble(
    meta: SnapshotMeta,
    csv: &[u8],
    csv_path: &Path,
    json_path: PathBuf,
    warnings: Vec<String>,
) -> Result<Snapshot> {
    let location = csv_path.display().to_string();
    let table = parse_csv(csv).map_err(|e| match e {
        SnapshotError::Csv {
            location: l,
            message,
        } => SnapshotError::Csv {
            location: format!("{location} {l}"),
            message,
        },
        other => other,
    })?;
    let grid_err = |message: String| SnapshotError::Csv {
        location: location.clone(),
        message,
    };
    if table.frequency_hz.len() != meta.bins {
        return Err(grid_err(format!(
            "{} rows, but the metadata says {} bins",
            table.frequency_hz.len(),
            meta.bins
        )));
    }
    if meta.calibration.is_some() != table.psd_m2_per_hz.is_some() {
        return Err(grid_err(
            "the psd_m2_per_hz column must be present exactly when the metadata has a calibration"
                .to_string(),
        ));
    }
    let df = meta.welch.resolution_hz;
    for (k, &f) in table.frequency_hz.iter().enumerate() {
        let want = k as f64 * df;
        if (f - want).abs() > 1e-9 * want.abs().max(df) {
            return Err(grid_err(format!(
                "row {} has frequency {f:?} Hz, but the grid k × {df:?} Hz gives {want:?}",
                k + 1
            )));
        }
    }
    let spectrum = meta.welch.spectrum(table.psd_v2_per_hz);
    Ok(Snapshot {
        meta,
        spectrum,
        psd_m2_per_hz: table.psd_m2_per_hz,
        path: json_path,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn iso8601_known_instants() {
        // Reference strings from Python's datetime.fromtimestamp(t, UTC).
        let at = |s: u64| iso8601_utc(SystemTime::UNIX_EPOCH + std::time::Duration::from_secs(s));
        assert_eq!(at(0), "1970-01-01T00:00:00Z");
        assert_eq!(at(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(at(1_700_000_000), "2023-11-14T22:13:20Z");
        assert_eq!(at(4_102_444_799), "2099-12-31T23:59:59Z");
    }

    #[test]
    fn paths() {
        let (j, c) = snapshot_paths(Path::new("d/spec.json"));
        assert_eq!(j, PathBuf::from("d/spec.json"));
        assert_eq!(c, PathBuf::from("d/spec.csv"));
        let (j, c) = snapshot_paths(Path::new("d/4K.run"));
        assert_eq!(j, PathBuf::from("d/4K.run.json"));
        assert_eq!(c, PathBuf::from("d/4K.run.csv"));
    }
}
