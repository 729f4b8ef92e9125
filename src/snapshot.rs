//! Saved spectra ("snapshots"): `NAME.json` (metadata: program version, UTC time saved, label
//! and notes, source, every Welch setting, the calibration, the analysis [`Report`] if any,
//! the name, row count and FNV-1a hash of the data file) plus `NAME.csv` (the spectrum, in
//! exactly the columns `stillpoint spectrum` writes: `frequency_hz,psd_v2_per_hz[,psd_m2_per_hz]`,
//! one row per bin from DC to Nyquist, shortest round-trip numbers, so f64 values survive
//! bit-exactly).
//!
//! Writes are atomic ([`PendingFile`]: temporary file in the same folder with a unique name,
//! write, flush, fsync, rename, fsync of the folder on Unix). A save prepares both files
//! before moving either into place, CSV first, then JSON. An existing snapshot is never
//! replaced unless `overwrite` is true. If a save is killed between the two renames, the new
//! CSV sits beside the old JSON; [`load`] sees the hash mismatch and uses the complete,
//! fsynced temporary JSON of that save instead, so a load always yields one whole snapshot.
//! Temporary files `.NAME.json.….tmp` / `.NAME.csv.….tmp` left by killed saves are harmless
//! and can be removed with [`remove_stale_temp_files`].
//!
//! Loading gives one-line errors for damaged files (bad JSON, missing columns, non-numeric or
//! non-finite values, a row count or frequency grid that does not match the metadata).
//! [`compare`] forms ratio and difference of two spectra (interpolating the reference when the
//! grids differ); [`excess_bands`] and [`mark_new_peaks`] list what is new since a reference.

use std::fs::{self, File};
use std::io::{self, BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::SystemTime;

use serde::{Deserialize, Serialize};

use crate::dsp::{Averaging, Detrend, Spectrum, WindowKind};
use crate::report::{PeakReport, Report};

/// Name written in every snapshot's `format` field.
pub const FORMAT_NAME: &str = "stillpoint-snapshot";
/// Version of the snapshot format this program writes and reads.
pub const FORMAT_VERSION: u32 = 1;
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

/// FNV-1a, 64 bit (Fowler–Noll–Vo; offset basis 0xcbf29ce484222325, prime 0x100000001b3).
pub fn fnv1a64(bytes: &[u8]) -> u64 {
    bytes.iter().fold(0xcbf2_9ce4_8422_2325, |h, &b| {
        (h ^ u64::from(b)).wrapping_mul(0x0000_0100_0000_01b3)
    })
}

/// UTC time as ISO 8601 with seconds, e.g. `2026-12-02T06:10:41Z` (days → civil date by
/// H. Hinnant's `civil_from_days` algorithm).
pub fn iso8601_utc(time: SystemTime) -> String {
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

/// Writes a spectrum as CSV: header `frequency_hz,psd_v2_per_hz[,psd_m2_per_hz]`, one row per
/// bin (DC to Nyquist), numbers in Rust's shortest round-trip form (`{:?}`), `\n` line ends.
/// The third column is `m_per_v² × psd_v2_per_hz`. Used by `stillpoint spectrum` and snapshots.
///
/// # Errors
/// An I/O error, or [`io::ErrorKind::InvalidData`] for a non-finite value or calibration
/// (never written).
pub fn write_spectrum_csv<W: Write>(
    writer: W,
    spectrum: &Spectrum,
    m_per_v: Option<f64>,
) -> io::Result<()> {
    write_spectrum_csv_with(writer, spectrum, m_per_v, false)
}

/// [`write_spectrum_csv`], with `cumulative_rms` also the columns `cumulative_rms_v` (and
/// `cumulative_rms_m` = `m_per_v × cumulative_rms_v` when calibrated) after the others:
/// `√(Σ_{j ≤ k} PSD_j Δf)`, the rms of everything at and below f_k, DC bin included, rising
/// to the total rms at Nyquist ([`crate::dsp::units::cumulative_rms`], from low frequency).
///
/// # Errors
/// As [`write_spectrum_csv`].
pub fn write_spectrum_csv_with<W: Write>(
    mut writer: W,
    spectrum: &Spectrum,
    m_per_v: Option<f64>,
    cumulative_rms: bool,
) -> io::Result<()> {
    let bad = |what: String| io::Error::new(io::ErrorKind::InvalidData, what);
    let scale = match m_per_v {
        Some(c) if c.is_finite() && c > 0.0 => Some(c),
        Some(c) => return Err(bad(format!("calibration {c} m/V is not a positive number"))),
        None => None,
    };
    let cumulative = cumulative_rms.then(|| {
        crate::dsp::units::cumulative_rms(spectrum, crate::dsp::units::Cumulation::FromLowFrequency)
    });
    let mut header = String::from("frequency_hz,psd_v2_per_hz");
    if scale.is_some() {
        header.push_str(",psd_m2_per_hz");
    }
    if cumulative.is_some() {
        header.push_str(",cumulative_rms_v");
        if scale.is_some() {
            header.push_str(",cumulative_rms_m");
        }
    }
    header.push('\n');
    writer.write_all(header.as_bytes())?;
    let mut line = String::new();
    for (k, &p) in spectrum.psd_v2_per_hz.iter().enumerate() {
        use std::fmt::Write as _;
        let f = spectrum.frequency_hz(k);
        if !(f.is_finite() && p.is_finite()) {
            return Err(bad(format!("bin {k} is not finite (f = {f}, psd = {p})")));
        }
        line.clear();
        let _ = write!(line, "{f:?},{p:?}");
        if let Some(c) = scale {
            let m = p * (c * c);
            if !m.is_finite() {
                return Err(bad(format!("bin {k}: calibrated value overflows")));
            }
            let _ = write!(line, ",{m:?}");
        }
        if let Some(rms) = &cumulative {
            let v = rms.get(k).copied().unwrap_or(f64::NAN);
            if !v.is_finite() {
                return Err(bad(format!("bin {k}: cumulative rms is not finite")));
            }
            let _ = write!(line, ",{v:?}");
            if let Some(c) = scale {
                let m = v * c;
                if !m.is_finite() {
                    return Err(bad(format!("bin {k}: calibrated cumulative rms overflows")));
                }
                let _ = write!(line, ",{m:?}");
            }
        }
        line.push('\n');
        writer.write_all(line.as_bytes())?;
    }
    writer.flush()
}

/// Reads a spectrum CSV as [`write_spectrum_csv`] writes it (header required, columns found
/// by name, extra columns ignored, blank lines and `\r\n` accepted).
///
/// # Errors
/// [`SnapshotError::Csv`] with `line N` and a one-line reason: missing column, wrong number
/// of fields, a value that is not a number or not finite, frequencies not increasing, no rows.
pub fn read_spectrum_csv<R: Read>(mut reader: R) -> Result<SpectrumTable> {
    let mut bytes = Vec::new();
    reader
        .by_ref()
        .take(MAX_CSV_BYTES + 1)
        .read_to_end(&mut bytes)
        .map_err(|e| csv_error("input", e.to_string()))?;
    if bytes.len() as u64 > MAX_CSV_BYTES {
        return Err(csv_error("input", "larger than 2 GiB".to_string()));
    }
    parse_csv(&bytes)
}

fn csv_error(location: impl Into<String>, message: String) -> SnapshotError {
    SnapshotError::Csv {
        location: location.into(),
        message,
    }
}

fn parse_csv(bytes: &[u8]) -> Result<SpectrumTable> {
    let text = std::str::from_utf8(bytes).map_err(|e| {
        csv_error(
            "input",
            format!("not UTF-8 text (byte {})", e.valid_up_to()),
        )
    })?;
    let mut lines = text
        .split('\n')
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim_end_matches('\r')))
        .filter(|(_, l)| !l.trim().is_empty());
    let Some((header_line, header)) = lines.next() else {
        return Err(csv_error("input", "empty file (no header)".to_string()));
    };
    let names: Vec<&str> = header.split(',').map(str::trim).collect();
    let find = |name: &str| names.iter().position(|n| *n == name);
    let loc = |line: usize| format!("line {line}");
    let (Some(fi), Some(pi)) = (find("frequency_hz"), find("psd_v2_per_hz")) else {
        return Err(csv_error(
            loc(header_line),
            format!(
                "header must name the columns frequency_hz and psd_v2_per_hz, found '{}'",
                truncate(header, 80)
            ),
        ));
    };
    let mi = find("psd_m2_per_hz");
    let mut table = SpectrumTable {
        frequency_hz: Vec::new(),
        psd_v2_per_hz: Vec::new(),
        psd_m2_per_hz: mi.map(|_| Vec::new()),
    };
    for (line, row) in lines {
        let fields: Vec<&str> = row.split(',').map(str::trim).collect();
        if fields.len() != names.len() {
            return Err(csv_error(
                loc(line),
                format!(
                    "{} fields, but the header has {}",
                    fields.len(),
                    names.len()
                ),
            ));
        }
        let value = |i: usize, name: &str| -> Result<f64> {
            let text = fields.get(i).copied().unwrap_or("");
            let v: f64 = text.parse().map_err(|_| {
                csv_error(
                    loc(line),
                    format!("{name}: '{}' is not a number", truncate(text, 40)),
                )
            })?;
            if v.is_finite() {
                Ok(v)
            } else {
                Err(csv_error(
                    loc(line),
                    format!("{name}: {text} is not finite"),
                ))
            }
        };
        let f = value(fi, "frequency_hz")?;
        let p = value(pi, "psd_v2_per_hz")?;
        if p < 0.0 {
            return Err(csv_error(
                loc(line),
                format!("psd_v2_per_hz is negative ({p:?})"),
            ));
        }
        if let Some(&last) = table.frequency_hz.last()
            && f <= last
        {
            return Err(csv_error(
                loc(line),
                format!("frequencies must increase ({f:?} after {last:?})"),
            ));
        }
        table.frequency_hz.push(f);
        table.psd_v2_per_hz.push(p);
        if let (Some(i), Some(col)) = (mi, table.psd_m2_per_hz.as_mut()) {
            col.push(value(i, "psd_m2_per_hz")?);
        }
    }
    if table.frequency_hz.is_empty() {
        return Err(csv_error("input", "no data rows".to_string()));
    }
    Ok(table)
}

/// At most `max_chars` characters of `s` for an error message, on one line: control
/// characters (a line break inside a quoted value) are shown escaped (`\n`).
fn truncate(s: &str, max_chars: usize) -> String {
    let mut t = String::new();
    for (i, c) in s.chars().enumerate() {
        if i == max_chars {
            t.push('…');
            break;
        }
        if c.is_control() {
            t.extend(c.escape_default());
        } else {
            t.push(c);
        }
    }
    t
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
    pending_csv
        .commit(overwrite)
        .map_err(|e| commit_err(&csv_path, e))?;
    if let Err(e) = pending_json.commit(overwrite) {
        if !overwrite {
            // We created the CSV a moment ago; do not leave half a snapshot behind.
            let _ = fs::remove_file(&csv_path);
        }
        return Err(commit_err(&json_path, e));
    }
    Ok(Snapshot {
        meta,
        spectrum: spectrum.clone(),
        psd_m2_per_hz: m_per_v
            .map(|c| spectrum.psd_v2_per_hz.iter().map(|p| p * (c * c)).collect()),
        path: json_path,
        warnings: Vec::new(),
    })
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
pub fn parse_meta(bytes: &[u8], path: &Path) -> Result<SnapshotMeta> {
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
        let recovered = temp_metadata_candidates(&json_path)
            .into_iter()
            .filter_map(|p| {
                let bytes = read_limited(&p, MAX_JSON_BYTES).ok()?;
                parse_meta(&bytes, &json_path).ok()
            })
            .find(|m| m.data_fnv1a64 == hash && m.data_file == meta.data_file);
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

/// Ratio and difference of a spectrum against a reference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    /// Frequencies of the compared bins (the current spectrum's grid).
    pub frequency_hz: Vec<f64>,
    /// current / reference (bins where the reference is zero are left out).
    pub ratio: Vec<f64>,
    /// current − reference (V²/Hz).
    pub difference_v2_per_hz: Vec<f64>,
    /// True if the reference was linearly interpolated onto the current grid.
    pub interpolated: bool,
    /// Bins of the current spectrum left out (outside the reference's range, or zero
    /// reference).
    pub bins_left_out: usize,
}

/// Compares `current` with `reference` bin by bin when the grids match (same Δf within
/// 1e-9 relative), else by linear interpolation of the reference onto the current bins that
/// lie inside the reference's frequency range.
///
/// # Errors
/// [`SnapshotError::Incompatible`] if the frequency ranges do not overlap or a spectrum is
/// empty or has a bad resolution.
pub fn compare(current: &Spectrum, reference: &Spectrum) -> Result<Comparison> {
    let bad = |m: &str| Err(SnapshotError::Incompatible(m.to_string()));
    if current.is_empty() || reference.is_empty() {
        return bad("a spectrum is empty");
    }
    if !(current.resolution_hz > 0.0 && reference.resolution_hz > 0.0) {
        return bad("a spectrum has no valid resolution");
    }
    let same_grid =
        (current.resolution_hz - reference.resolution_hz).abs() <= 1e-9 * current.resolution_hz;
    let ref_max = reference.frequency_hz(reference.len() - 1);
    let mut out = Comparison {
        frequency_hz: Vec::new(),
        ratio: Vec::new(),
        difference_v2_per_hz: Vec::new(),
        interpolated: !same_grid,
        bins_left_out: 0,
    };
    for (k, &c) in current.psd_v2_per_hz.iter().enumerate() {
        let f = current.frequency_hz(k);
        let r = if same_grid {
            reference.psd_v2_per_hz.get(k).copied()
        } else if f <= ref_max {
            let x = f / reference.resolution_hz;
            let i = x.floor() as usize;
            let t = x - i as f64;
            match (
                reference.psd_v2_per_hz.get(i),
                reference.psd_v2_per_hz.get(i + 1),
            ) {
                (Some(a), Some(b)) => Some(a + (b - a) * t),
                (Some(a), None) => Some(*a),
                _ => None,
            }
        } else {
            None
        };
        match r {
            Some(r) if r > 0.0 && r.is_finite() && c.is_finite() => {
                out.frequency_hz.push(f);
                out.ratio.push(c / r);
                out.difference_v2_per_hz.push(c - r);
            }
            _ => out.bins_left_out += 1,
        }
    }
    if out.frequency_hz.is_empty() {
        return bad("the spectra share no frequency range");
    }
    Ok(out)
}

/// A band of contiguous bins where the current spectrum exceeds the reference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ExcessBand {
    /// First frequency of the band (Hz).
    pub start_hz: f64,
    /// Last frequency of the band (Hz).
    pub end_hz: f64,
    /// Frequency of the largest ratio (Hz).
    pub peak_hz: f64,
    /// Largest ratio in dB, 10 log10(current/reference).
    pub peak_ratio_db: f64,
    /// Bins in the band.
    pub bins: usize,
}

/// Bands where `comparison.ratio` exceeds `threshold_db` (e.g. 6 dB): what is new or grown
/// since the reference. Noise alone exceeds a threshold T dB in a bin with probability that
/// falls with the number of averages (χ²/ν statistics, METHODS §1); choose T accordingly.
pub fn excess_bands(comparison: &Comparison, threshold_db: f64) -> Vec<ExcessBand> {
    let limit = 10_f64.powf(threshold_db / 10.0);
    let mut bands = Vec::new();
    let mut current: Option<ExcessBand> = None;
    for (&f, &r) in comparison.frequency_hz.iter().zip(&comparison.ratio) {
        if r > limit {
            let db = 10.0 * r.log10();
            match current.as_mut() {
                Some(b) => {
                    b.end_hz = f;
                    b.bins += 1;
                    if db > b.peak_ratio_db {
                        b.peak_ratio_db = db;
                        b.peak_hz = f;
                    }
                }
                None => {
                    current = Some(ExcessBand {
                        start_hz: f,
                        end_hz: f,
                        peak_hz: f,
                        peak_ratio_db: db,
                        bins: 1,
                    });
                }
            }
        } else if let Some(b) = current.take() {
            bands.push(b);
        }
    }
    if let Some(b) = current {
        bands.push(b);
    }
    bands
}

/// Marks each current peak `new_since_reference = Some(true)` unless a reference peak lies
/// within `max(tolerance_hz, (linewidth_a + linewidth_b)/2)` of it. Returns how many are new.
pub fn mark_new_peaks(
    current: &mut [PeakReport],
    reference: &[PeakReport],
    tolerance_hz: f64,
) -> usize {
    let mut new = 0;
    for p in current.iter_mut() {
        let known = reference.iter().any(|r| {
            let tol = tolerance_hz.max(0.5 * (p.linewidth_hz + r.linewidth_hz));
            (p.frequency_hz - r.frequency_hz).abs() <= tol
        });
        p.new_since_reference = Some(!known);
        if !known {
            new += 1;
        }
    }
    new
}

/// Failure of an atomic write: the file system, or the caller's writer.
#[derive(Debug)]
pub enum AtomicError<E> {
    /// Creating, syncing or renaming the file failed (or the target exists and overwriting
    /// was not allowed: [`io::ErrorKind::AlreadyExists`]).
    Io(io::Error),
    /// The caller's writer failed.
    Inner(E),
}

static TEMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// A fully written and fsynced temporary file beside its target, not yet in place. Dropping
/// it without [`PendingFile::commit`] deletes the temporary file.
#[derive(Debug)]
pub struct PendingFile {
    temp: PathBuf,
    target: PathBuf,
    committed: bool,
}

/// The folder a path lives in (`.` for a bare file name).
fn parent_dir(path: &Path) -> PathBuf {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Longest target name (bytes) whose temporary name keeps the whole name; longer names are
/// shortened and hashed so the temporary name stays within the usual 255-byte limit.
const TEMP_NAME_KEEP: usize = 200;

/// The start of every temporary name for a target called `name`: `.NAME.`, or for names
/// longer than [`TEMP_NAME_KEEP`] bytes `.SHORTENED~HASH.` (the first 100 bytes of the
/// name, then its FNV-1a hash), so `.PREFIX.PID.COUNTER.NANOS.tmp` fits in 255 bytes.
fn temp_prefix(name: &str) -> String {
    if name.len() <= TEMP_NAME_KEEP {
        return format!(".{name}.");
    }
    let mut cut = 100;
    while !name.is_char_boundary(cut) {
        cut -= 1;
    }
    let head = name.get(..cut).unwrap_or("");
    format!(".{head}~{:016x}.", fnv1a64(name.as_bytes()))
}

/// A unique temporary name beside `target`: `.NAME.PID.COUNTER.NANOS.tmp` (see
/// [`temp_prefix`] for long names). Such files left in a folder are the remains of an
/// interrupted save and may be deleted ([`remove_stale_temp_files`]).
fn temp_path_for(target: &Path) -> PathBuf {
    let name = target
        .file_name()
        .map_or_else(|| "file".into(), |n| n.to_string_lossy().into_owned());
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.subsec_nanos());
    let count = TEMP_COUNTER.fetch_add(1, Ordering::Relaxed);
    parent_dir(target).join(format!(
        "{}{}.{count}.{nanos}.tmp",
        temp_prefix(&name),
        std::process::id()
    ))
}

/// Checks that the temporary file of a save of `target` can be created (the folder exists
/// and is writable, the names fit the file system) by creating and removing one, and that
/// `target`'s own name is acceptable to the file system.
///
/// # Errors
/// What the file system said (permission denied, read-only, name too long, not a folder).
pub fn check_can_write(target: &Path) -> io::Result<()> {
    match fs::symlink_metadata(target) {
        Ok(_) => {}
        Err(e) if e.kind() == io::ErrorKind::NotFound => {}
        Err(e) => return Err(e),
    }
    let temp = temp_path_for(target);
    File::create_new(&temp)?;
    let _ = fs::remove_file(&temp);
    Ok(())
}

/// A temporary file of an earlier save of some target (see [`stale_temp_files`]).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct StaleTemp {
    /// Its path.
    pub path: PathBuf,
    /// The process that wrote it (from its name), if readable.
    pub pid: Option<u32>,
    /// Its size in bytes.
    pub bytes: u64,
}

/// Temporary files beside `target` left by saves of it (names `PREFIX.PID.….tmp`, see
/// [`temp_path_for`]), with the process id each name carries. Whether that process still
/// runs is for the caller to judge.
///
/// # Errors
/// The folder cannot be read.
pub fn stale_temp_files(target: &Path) -> io::Result<Vec<StaleTemp>> {
    let Some(name) = target.file_name().map(|n| n.to_string_lossy().into_owned()) else {
        return Ok(Vec::new());
    };
    let prefix = temp_prefix(&name);
    let mut found = Vec::new();
    for entry in fs::read_dir(parent_dir(target))? {
        let entry = entry?;
        let file_name = entry.file_name().to_string_lossy().into_owned();
        let Some(rest) = file_name
            .strip_prefix(&prefix)
            .and_then(|r| r.strip_suffix(".tmp"))
        else {
            continue;
        };
        let meta = match entry.metadata() {
            Ok(m) if m.is_file() => m,
            _ => continue,
        };
        let pid = rest.split('.').next().and_then(|p| p.parse().ok());
        found.push(StaleTemp {
            path: entry.path(),
            pid,
            bytes: meta.len(),
        });
    }
    found.sort_by(|a, b| a.path.cmp(&b.path));
    Ok(found)
}

impl PendingFile {
    /// Writes a temporary file beside `target` with `write`, flushes and fsyncs it.
    ///
    /// # Errors
    /// [`AtomicError::Io`] if the file cannot be created or synced, [`AtomicError::Inner`]
    /// if `write` fails; the temporary file is removed in both cases.
    pub fn prepare<E, F>(target: &Path, write: F) -> std::result::Result<Self, AtomicError<E>>
    where
        F: FnOnce(&mut BufWriter<File>) -> std::result::Result<(), E>,
    {
        let temp = temp_path_for(target);
        let file = File::create_new(&temp).map_err(AtomicError::Io)?;
        let pending = Self {
            temp,
            target: target.to_path_buf(),
            committed: false,
        };
        // Replacing a file keeps its permissions (a 0600 result stays private); set before
        // any byte is written.
        if let Ok(meta) = fs::metadata(target)
            && meta.is_file()
        {
            file.set_permissions(meta.permissions())
                .map_err(AtomicError::Io)?;
        }
        let mut writer = BufWriter::new(file);
        write(&mut writer).map_err(AtomicError::Inner)?;
        writer.flush().map_err(AtomicError::Io)?;
        let file = writer
            .into_inner()
            .map_err(|e| AtomicError::Io(e.into_error()))?;
        file.sync_all().map_err(AtomicError::Io)?;
        Ok(pending)
    }

    /// The target path.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// The temporary path.
    pub fn temp_path(&self) -> &Path {
        &self.temp
    }

    /// Moves the file into place. With `overwrite = false` an existing target is never
    /// replaced (a hard link, which fails if the target exists, then the temporary name is
    /// removed; where hard links are unsupported, a check then a rename).
    ///
    /// # Errors
    /// [`io::ErrorKind::AlreadyExists`] or any rename/link error; the temporary file is
    /// removed on error.
    pub fn commit(mut self, overwrite: bool) -> io::Result<()> {
        if overwrite {
            fs::rename(&self.temp, &self.target)?;
        } else {
            match fs::hard_link(&self.temp, &self.target) {
                Ok(()) => {
                    let _ = fs::remove_file(&self.temp);
                }
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists => return Err(e),
                Err(_) => {
                    if self.target.exists() {
                        return Err(io::Error::new(
                            io::ErrorKind::AlreadyExists,
                            format!("{} already exists", self.target.display()),
                        ));
                    }
                    fs::rename(&self.temp, &self.target)?;
                }
            }
        }
        self.committed = true;
        sync_dir(&parent_dir(&self.target));
        Ok(())
    }
}

impl Drop for PendingFile {
    fn drop(&mut self) {
        if !self.committed {
            let _ = fs::remove_file(&self.temp);
        }
    }
}

/// fsync of a directory so a rename survives a power cut (Unix; best effort elsewhere).
fn sync_dir(dir: &Path) {
    #[cfg(unix)]
    {
        if let Ok(d) = File::open(dir) {
            let _ = d.sync_all();
        }
    }
    #[cfg(not(unix))]
    {
        let _ = dir;
    }
}

/// Writes `path` atomically: a temporary file in the same folder is written by `write`,
/// flushed, fsynced and renamed over `path` (see [`PendingFile`]). A failure leaves any
/// existing `path` untouched.
///
/// # Errors
/// [`AtomicError::Inner`] from `write`; [`AtomicError::Io`] from the file system, including
/// [`io::ErrorKind::AlreadyExists`] when `overwrite` is false and `path` exists.
pub fn write_atomic<E, F>(
    path: &Path,
    overwrite: bool,
    write: F,
) -> std::result::Result<(), AtomicError<E>>
where
    F: FnOnce(&mut BufWriter<File>) -> std::result::Result<(), E>,
{
    if !overwrite && path.exists() {
        return Err(AtomicError::Io(io::Error::new(
            io::ErrorKind::AlreadyExists,
            format!("{} already exists", path.display()),
        )));
    }
    let pending = PendingFile::prepare(path, write)?;
    pending.commit(overwrite).map_err(AtomicError::Io)
}

/// Removes temporary files left beside `target` by interrupted saves (names
/// `.NAME.*.tmp` for `target`'s file name NAME); returns how many were removed. Do not call
/// while another process may be saving the same file.
///
/// # Errors
/// The folder cannot be read.
pub fn remove_stale_temp_files(target: &Path) -> io::Result<usize> {
    let Some(name) = target.file_name().map(|n| n.to_string_lossy().into_owned()) else {
        return Ok(0);
    };
    let prefix = temp_prefix(&name);
    let mut removed = 0;
    for entry in fs::read_dir(parent_dir(target))? {
        let entry = entry?;
        let file_name = entry.file_name().to_string_lossy().into_owned();
        if file_name.starts_with(&prefix)
            && file_name.ends_with(".tmp")
            && fs::remove_file(entry.path()).is_ok()
        {
            removed += 1;
        }
    }
    Ok(removed)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fnv_reference_values() {
        // FNV-1a 64 test vectors (Fowler/Noll/Vo reference list; checked with Python here).
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a64(b"foobar"), 0x8594_4171_f739_67e8);
    }

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

    #[test]
    fn csv_errors_are_one_line() {
        for (text, needle) in [
            ("", "empty"),
            ("a,b\n1,2\n", "header"),
            ("frequency_hz,psd_v2_per_hz\n", "no data"),
            ("frequency_hz,psd_v2_per_hz\n0,1\n1\n", "line 3"),
            ("frequency_hz,psd_v2_per_hz\n0,x\n", "not a number"),
            ("frequency_hz,psd_v2_per_hz\n0,NaN\n", "not finite"),
            ("frequency_hz,psd_v2_per_hz\n0,inf\n", "not finite"),
            ("frequency_hz,psd_v2_per_hz\n1,1\n0,1\n", "increase"),
            ("frequency_hz,psd_v2_per_hz\n0,-1\n", "negative"),
        ] {
            let e = read_spectrum_csv(text.as_bytes()).unwrap_err().to_string();
            assert!(e.contains(needle), "{text:?}: {e}");
            assert!(!e.contains('\n'), "{e}");
        }
    }
}
