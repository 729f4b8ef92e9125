//! Atomic file writes: a temporary file beside the target (unique name
//! `.NAME.PID.COUNTER.NANOS.tmp`) is written, flushed and fsynced, then renamed into place
//! (or hard-linked when an existing target must not be replaced), and the folder fsynced.
//! A failure or a kill leaves any existing target untouched. [`write_atomic`] for one file,
//! [`PendingFile`] to prepare several files before moving any into place (snapshots);
//! [`stale_temp_files`] / [`remove_stale_temp_files`] find what killed writes left behind.

use std::fs::{self, File};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use super::fnv1a64;

/// Failure of an atomic write: the file system, or the caller's writer.
#[derive(Debug)]
pub(crate) enum AtomicError<E> {
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
pub(crate) struct PendingFile {
    temp: PathBuf,
    target: PathBuf,
    committed: bool,
}

/// The folder a path lives in (`.` for a bare file name).
pub(crate) fn parent_dir(path: &Path) -> PathBuf {
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
pub(crate) fn temp_prefix(name: &str) -> String {
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
pub(crate) fn check_can_write(target: &Path) -> io::Result<()> {
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
pub(crate) struct StaleTemp {
    /// Its path.
    pub path: PathBuf,
    /// The process that wrote it (from its name), if readable.
    pub pid: Option<u32>,
    /// Its size in bytes.
    pub bytes: u64,
}

/// Temporary files beside `target` left by saves of it (names `PREFIX.PID.….tmp`, see
/// `temp_path_for`), with the process id each name carries. Whether that process still
/// runs is for the caller to judge.
///
/// # Errors
/// The folder cannot be read.
pub(crate) fn stale_temp_files(target: &Path) -> io::Result<Vec<StaleTemp>> {
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
    pub(crate) fn prepare<E, F>(
        target: &Path,
        write: F,
    ) -> std::result::Result<Self, AtomicError<E>>
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

    /// Moves the file into place. With `overwrite = false` an existing target is never
    /// replaced (a hard link, which fails if the target exists, then the temporary name is
    /// removed; where hard links are unsupported, a check then a rename).
    ///
    /// # Errors
    /// [`io::ErrorKind::AlreadyExists`] or any rename/link error; the temporary file is
    /// removed on error.
    pub(crate) fn commit(mut self, overwrite: bool) -> io::Result<()> {
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
pub(crate) fn sync_dir(dir: &Path) {
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
pub(crate) fn write_atomic<E, F>(
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
/// while another process may be saving the same file. For a snapshot use
/// [`crate::snapshot::remove_stale_temp_files`], which first finishes a save killed between
/// its two renames (its temporary JSON is then the only copy of the matching metadata).
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
