//! The window's session journal: every trend point of a running session appended to a file
//! on disk as it is made, so closing the window or a crash does not lose the session, and
//! the trends can be reopened, compared and exported (as `stillpoint track` writes them).
//!
//! Format (two files per session, same stem, in the journal folder):
//! - `NAME.json`: the header, written atomically when the session starts (and rewritten
//!   atomically when its settings change): `format` = `"stillpoint-journal"`, `version`,
//!   `started_unix_s`, `source` (human description), `settings` (every source, Welch,
//!   calibration and mode setting, as a JSON object), `columns` (of the CSV), `changes`
//!   (settings changed during the session: wall-clock time and the new settings).
//! - `NAME.csv`: a header line `wall_time_unix_s,` + the 22 columns of `track`'s CSV
//!   ([`TRACK_HEADER`]), then one line per trend point, appended with a single `write` of the
//!   whole line and flushed to the operating system at once (no buffering in the program).
//!   A crash, or `kill -9`, can at worst leave the last line cut short; [`read_journal`]
//!   drops such a line and keeps every earlier one.
//!
//! Folder: `$STILLPOINT_JOURNAL_DIR` if set, else `$XDG_DATA_HOME/stillpoint/journal`, else
//! `~/.local/share/stillpoint/journal` (`%APPDATA%\stillpoint\journal` on Windows); the
//! window lets the user choose another ([`default_folder`]).
//!
//! Memory: the writer holds one line at a time; reading loads the rows of one journal.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use super::trend::{TRACK_HEADER, TrendRow};

/// `format` of a journal header.
pub const FORMAT: &str = "stillpoint-journal";
/// Version of the format.
pub(crate) const VERSION: u32 = 1;
/// The first column of a journal line (before the 22 `track` columns).
pub(crate) const WALL_COLUMN: &str = "wall_time_unix_s";

/// Errors of the journal.
#[derive(Debug, thiserror::Error)]
pub enum JournalError {
    /// File system error, with the path.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The cause.
        source: io::Error,
    },
    /// Not a journal (wrong header line or header file).
    #[error("{path} is not a stillpoint journal: {why}")]
    Format {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        why: String,
    },
}

fn io_at(path: &Path) -> impl FnOnce(io::Error) -> JournalError + '_ {
    move |source| JournalError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// The header of a journal (`NAME.json`).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct JournalHeader {
    /// Always [`FORMAT`].
    pub format: String,
    /// [`VERSION`].
    pub version: u32,
    /// Wall-clock start, seconds since 1970-01-01 UTC.
    pub started_unix_s: f64,
    /// The source, as the window describes it.
    pub source: String,
    /// All settings of the session (source, Welch, calibration, mode), as the window holds
    /// them.
    pub settings: serde_json::Value,
    /// The CSV columns.
    pub columns: Vec<String>,
    /// Settings changed during the session: `[wall_time_unix_s, settings]`.
    #[serde(default)]
    pub changes: Vec<(f64, serde_json::Value)>,
}

impl JournalHeader {
    /// A header for a session starting now.
    pub fn new(source: &str, settings: serde_json::Value) -> Self {
        Self {
            format: FORMAT.into(),
            version: VERSION,
            started_unix_s: now_unix_s(),
            source: source.into(),
            settings,
            columns: header_line().split(',').map(str::to_string).collect(),
            changes: Vec::new(),
        }
    }
}

/// Seconds since 1970-01-01 UTC.
pub fn now_unix_s() -> f64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0.0, |d| d.as_secs_f64())
}

/// The CSV header line of a journal (without `\n`).
pub(crate) fn header_line() -> String {
    format!("{WALL_COLUMN},{TRACK_HEADER}")
}

/// The default journal folder (module docs), `None` if no home folder is known.
pub(crate) fn default_folder() -> Option<PathBuf> {
    let env = |name: &str| std::env::var_os(name).filter(|v| !v.is_empty());
    if let Some(dir) = env("STILLPOINT_JOURNAL_DIR") {
        return Some(PathBuf::from(dir));
    }
    if cfg!(windows)
        && let Some(dir) = env("APPDATA")
    {
        return Some(PathBuf::from(dir).join("stillpoint").join("journal"));
    }
    if let Some(dir) = env("XDG_DATA_HOME") {
        return Some(PathBuf::from(dir).join("stillpoint").join("journal"));
    }
    env("HOME").map(|home| {
        PathBuf::from(home)
            .join(".local")
            .join("share")
            .join("stillpoint")
            .join("journal")
    })
}

/// `YYYYMMDD-HHMMSS` (UTC) of a Unix time (the civil-from-days algorithm of H. Hinnant,
/// "chrono-Compatible Low-Level Date Algorithms", public domain).
fn utc_stamp(unix_s: f64) -> String {
    let secs = unix_s.max(0.0).floor() as i64;
    let days = secs.div_euclid(86_400);
    let rem = secs.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!(
        "{y:04}{m:02}{d:02}-{:02}{:02}{:02}",
        rem / 3600,
        (rem / 60) % 60,
        rem % 60
    )
}

/// An open journal being appended to.
#[derive(Debug)]
pub struct JournalWriter {
    csv: File,
    csv_path: PathBuf,
    header_path: PathBuf,
    header: JournalHeader,
    rows: u64,
    line: String,
}

impl JournalWriter {
    /// Starts a new journal in `folder` (created if needed): `session-YYYYMMDD-HHMMSS-PID`
    /// (UTC start time), with a numeric suffix if that name is taken.
    ///
    /// # Errors
    /// The folder cannot be created or written.
    pub fn create(folder: &Path, header: JournalHeader) -> Result<Self, JournalError> {
        fs::create_dir_all(folder).map_err(io_at(folder))?;
        let stem = format!(
            "session-{}-{}",
            utc_stamp(header.started_unix_s),
            std::process::id()
        );
        let mut k = 0_u32;
        let (csv, csv_path) = loop {
            let name = if k == 0 {
                format!("{stem}.csv")
            } else {
                format!("{stem}-{k}.csv")
            };
            let path = folder.join(name);
            match OpenOptions::new().append(true).create_new(true).open(&path) {
                Ok(file) => break (file, path),
                Err(e) if e.kind() == io::ErrorKind::AlreadyExists && k < 1000 => k += 1,
                Err(e) => return Err(io_at(&path)(e)),
            }
        };
        let header_path = csv_path.with_extension("json");
        let mut writer = Self {
            csv,
            csv_path,
            header_path,
            header,
            rows: 0,
            line: String::new(),
        };
        writer.write_header()?;
        let first = format!("{}\n", header_line());
        writer
            .csv
            .write_all(first.as_bytes())
            .map_err(io_at(&writer.csv_path))?;
        Ok(writer)
    }

    /// Rewrites `NAME.json` atomically.
    fn write_header(&self) -> Result<(), JournalError> {
        let text = serde_json::to_string_pretty(&self.header)
            .map_err(|e| io_at(&self.header_path)(io::Error::other(e)))?;
        crate::io::atomic::write_atomic(&self.header_path, true, |out| {
            out.write_all(text.as_bytes())?;
            out.write_all(b"\n")
        })
        .map_err(|e| match e {
            crate::io::atomic::AtomicError::Io(e) | crate::io::atomic::AtomicError::Inner(e) => {
                io_at(&self.header_path)(e)
            }
        })
    }

    /// Appends one trend point made at `wall_time_unix_s`: one `write` of the whole line,
    /// straight to the operating system.
    ///
    /// # Errors
    /// Writing fails (disk full, folder removed).
    pub fn append(&mut self, wall_time_unix_s: f64, row: &TrendRow) -> Result<(), JournalError> {
        self.line.clear();
        self.line.push_str(&format!("{wall_time_unix_s:?},"));
        self.line.push_str(&row.to_csv_line());
        self.csv
            .write_all(self.line.as_bytes())
            .map_err(io_at(&self.csv_path))?;
        self.rows += 1;
        Ok(())
    }

    /// Records a change of settings in the header (rewritten atomically).
    ///
    /// # Errors
    /// The header cannot be written.
    pub(crate) fn settings_changed(
        &mut self,
        settings: serde_json::Value,
    ) -> Result<(), JournalError> {
        self.header.changes.push((now_unix_s(), settings));
        self.write_header()
    }

    /// Forces the lines written so far onto the disk (fsync), e.g. every few minutes.
    ///
    /// # Errors
    /// The sync fails.
    pub fn sync(&self) -> Result<(), JournalError> {
        self.csv.sync_data().map_err(io_at(&self.csv_path))
    }

    /// The CSV file.
    pub fn path(&self) -> &Path {
        &self.csv_path
    }

    /// Points appended.
    pub fn rows(&self) -> u64 {
        self.rows
    }
}

/// A journal read back.
#[derive(Debug, Clone, PartialEq)]
pub struct Journal {
    /// The header (`None` if `NAME.json` is missing or unreadable; the rows are still read).
    pub header: Option<JournalHeader>,
    /// `(wall_time_unix_s, row)`, in file order.
    pub rows: Vec<(f64, TrendRow)>,
    /// Lines that could not be read (a last line cut short by a crash, damaged lines).
    pub skipped_lines: usize,
}

/// Reads a journal's CSV (and its `.json` header beside it). A last line without its `\n`
/// (cut short by a crash) and damaged lines are skipped and counted.
///
/// # Errors
/// The file cannot be read, or its first line is not a journal header.
pub fn read_journal(csv_path: &Path) -> Result<Journal, JournalError> {
    let file = File::open(csv_path).map_err(io_at(csv_path))?;
    let mut reader = BufReader::new(file);
    let mut first = String::new();
    reader.read_line(&mut first).map_err(io_at(csv_path))?;
    if first.trim_end_matches(['\n', '\r']) != header_line() {
        return Err(JournalError::Format {
            path: csv_path.to_path_buf(),
            why: "its first line is not the journal's column header".into(),
        });
    }
    let mut rows = Vec::new();
    let mut skipped_lines = 0;
    let mut line = String::new();
    loop {
        line.clear();
        let n = reader.read_line(&mut line).map_err(io_at(csv_path))?;
        if n == 0 {
            break;
        }
        if !line.ends_with('\n') {
            skipped_lines += 1;
            break;
        }
        let parsed = line.split_once(',').and_then(|(wall, rest)| {
            let wall: f64 = wall.parse().ok()?;
            TrendRow::parse_csv_line(rest).ok().map(|r| (wall, r))
        });
        match parsed {
            Some(r) => rows.push(r),
            None => skipped_lines += 1,
        }
    }
    let header = fs::read_to_string(csv_path.with_extension("json"))
        .ok()
        .and_then(|t| serde_json::from_str::<JournalHeader>(&t).ok())
        .filter(|h| h.format == FORMAT);
    Ok(Journal {
        header,
        rows,
        skipped_lines,
    })
}

/// The journals in `folder`, newest first (by name, which starts with the UTC start time).
pub fn list_journals(folder: &Path) -> Vec<PathBuf> {
    let mut found: Vec<PathBuf> = fs::read_dir(folder)
        .map(|entries| {
            entries
                .filter_map(Result::ok)
                .map(|e| e.path())
                .filter(|p| {
                    p.extension().is_some_and(|e| e == "csv")
                        && p.file_name()
                            .is_some_and(|n| n.to_string_lossy().starts_with("session-"))
                })
                .collect()
        })
        .unwrap_or_default();
    found.sort();
    found.reverse();
    found
}

/// Writes `rows` as `stillpoint track` writes its CSV (header, one line per row).
///
/// # Errors
/// Writing fails.
pub(crate) fn write_track_csv<'a>(
    out: &mut dyn Write,
    rows: impl IntoIterator<Item = &'a TrendRow>,
) -> io::Result<()> {
    out.write_all(TRACK_HEADER.as_bytes())?;
    out.write_all(b"\n")?;
    for row in rows {
        out.write_all(row.to_csv_line().as_bytes())?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(t: f64) -> TrendRow {
        TrendRow {
            t_start_s: t,
            t_end_s: t + 1.0,
            averages: Some(7),
            frequency_hz: Some((1000.0 + t, Some(0.25))),
            occupancy: Some((1e6 / (1.0 + t), Some(3e4))),
            band_hz: Some((960.0, 1040.0)),
            status: "ok".into(),
            ..TrendRow::default()
        }
    }

    #[test]
    fn utc_stamps() {
        // Checked with Python: datetime.utcfromtimestamp(...).strftime("%Y%m%d-%H%M%S").
        assert_eq!(utc_stamp(0.0), "19700101-000000");
        assert_eq!(utc_stamp(951_782_400.0), "20000229-000000");
        assert_eq!(utc_stamp(1_796_300_000.5), "20261203-121320");
    }

    #[test]
    fn write_reopen_and_export() {
        let dir = tempfile::tempdir().unwrap();
        let folder = dir.path().join("journal");
        let header = JournalHeader::new("demo stream", serde_json::json!({"segment": 65536}));
        let mut w = JournalWriter::create(&folder, header.clone()).unwrap();
        for i in 0..5 {
            w.append(1.0e9 + f64::from(i), &row(f64::from(i))).unwrap();
        }
        w.settings_changed(serde_json::json!({"segment": 4096}))
            .unwrap();
        assert_eq!(w.rows(), 5);
        let back = read_journal(w.path()).unwrap();
        assert_eq!(back.rows.len(), 5);
        assert_eq!(back.skipped_lines, 0);
        assert_eq!(back.rows[3].0, 1.0e9 + 3.0);
        assert_eq!(back.rows[3].1, row(3.0));
        let h = back.header.unwrap();
        assert_eq!(h.source, "demo stream");
        assert_eq!(h.changes.len(), 1);
        assert_eq!(h.columns.len(), 23);
        assert_eq!(list_journals(&folder), vec![w.path().to_path_buf()]);
        let mut csv = Vec::new();
        write_track_csv(&mut csv, back.rows.iter().map(|r| &r.1)).unwrap();
        let text = String::from_utf8(csv).unwrap();
        assert!(text.starts_with(TRACK_HEADER));
        assert_eq!(text.lines().count(), 6);
        // A second journal in the same second gets another name.
        let w2 = JournalWriter::create(&folder, header).unwrap();
        assert_ne!(w2.path(), w.path());
    }

    #[test]
    fn a_line_cut_short_loses_only_itself() {
        let dir = tempfile::tempdir().unwrap();
        let mut w =
            JournalWriter::create(dir.path(), JournalHeader::new("x", serde_json::Value::Null))
                .unwrap();
        for i in 0..3 {
            w.append(f64::from(i), &row(f64::from(i))).unwrap();
        }
        let path = w.path().to_path_buf();
        drop(w);
        // A crash in the middle of the fourth line.
        let line = format!("3.0,{}", row(3.0).to_csv_line());
        let mut f = OpenOptions::new().append(true).open(&path).unwrap();
        f.write_all(&line.as_bytes()[..line.len() / 2]).unwrap();
        let back = read_journal(&path).unwrap();
        assert_eq!(back.rows.len(), 3);
        assert_eq!(back.skipped_lines, 1);
        // Not a journal.
        let other = dir.path().join("other.csv");
        fs::write(&other, "a,b\n1,2\n").unwrap();
        assert!(matches!(
            read_journal(&other),
            Err(JournalError::Format { .. })
        ));
    }

    #[test]
    fn default_folder_prefers_the_override() {
        // Only checks the shape: the override variable is read at call time.
        if let Some(folder) = default_folder() {
            assert!(folder.is_absolute() || folder.components().count() > 0);
        }
    }
}
