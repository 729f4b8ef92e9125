//! Saved spectra ("snapshots"): a JSON metadata file plus a CSV data file with the same
//! columns as `stillpoint spectrum`, written atomically (temporary file in the same folder,
//! flush, fsync, rename).

use std::fs::{self, File};
use std::io::{self, BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

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

/// A unique temporary name beside `target`: `.NAME.PID.COUNTER.NANOS.tmp`. Such files left
/// in a folder are the remains of an interrupted save and may be deleted
/// ([`remove_stale_temp_files`]).
fn temp_path_for(target: &Path) -> PathBuf {
    let name = target
        .file_name()
        .map_or_else(|| "file".into(), |n| n.to_string_lossy().into_owned());
    let nanos = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.subsec_nanos());
    let count = TEMP_COUNTER.fetch_add(1, Ordering::Relaxed);
    parent_dir(target).join(format!(
        ".{name}.{}.{count}.{nanos}.tmp",
        std::process::id()
    ))
}

impl PendingFile {
    /// Writes a temporary file beside `target` with `write`, flushes and fsyncs it.
    ///
    /// # Errors
    /// [`AtomicError::Io`] if the file cannot be created or synced, [`AtomicError::Inner`]
    /// if `write` fails; the temporary file is removed in both cases.
    pub fn prepare<E, F>(target: &Path, write: F) -> Result<Self, AtomicError<E>>
    where
        F: FnOnce(&mut BufWriter<File>) -> Result<(), E>,
    {
        let temp = temp_path_for(target);
        let file = File::create_new(&temp).map_err(AtomicError::Io)?;
        let pending = Self {
            temp,
            target: target.to_path_buf(),
            committed: false,
        };
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
pub fn write_atomic<E, F>(path: &Path, overwrite: bool, write: F) -> Result<(), AtomicError<E>>
where
    F: FnOnce(&mut BufWriter<File>) -> Result<(), E>,
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
    let prefix = format!(".{name}.");
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
