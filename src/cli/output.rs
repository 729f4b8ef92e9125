//! Output files of the headless commands: atomic replacement through
//! [`crate::io::atomic::write_atomic`] (an existing file is only ever replaced by a complete
//! result, keeping its permissions) and `-` for stdout.
//!
//! Before any sample is read, [`check_output_for`] makes sure the result can be written: the
//! folder exists and a file can be created in it (the temporary file is really created and
//! removed), the name is not too long, the output is not the input recording itself, and
//! temporary files left beside it by earlier killed runs are removed (or reported if their
//! process may still be running). An existing output that is not a regular file (a device
//! such as `/dev/null`, a FIFO) is written directly instead of being replaced.

use std::fs;
use std::io::{self, Write};
use std::path::Path;

use anyhow::{Context, Result};

use crate::acquire::SourceSpec;
use crate::io::atomic::AtomicError;

use super::{InputError, note, warn};

/// Writes `path` atomically with the bytes `write` produces; `-` writes to stdout; an
/// existing non-regular file (device, FIFO) is opened and written directly.
///
/// # Errors
/// The output folder does not exist or is not writable, or `write` fails; the temporary
/// file is removed and an existing `path` is left untouched.
pub(crate) fn write_atomically(
    path: &Path,
    write: impl FnOnce(&mut dyn Write) -> io::Result<()>,
) -> Result<()> {
    if path.as_os_str() == "-" {
        let stdout = io::stdout();
        let mut lock = stdout.lock();
        write(&mut lock).context("cannot write to stdout")?;
        lock.flush().context("cannot write to stdout")?;
        return Ok(());
    }
    if path.is_dir() {
        return Err(InputError(format!(
            "output {} is a directory; give a file name",
            path.display()
        ))
        .into());
    }
    if is_special(path) {
        let file = fs::OpenOptions::new()
            .write(true)
            .open(path)
            .with_context(|| format!("cannot open {} for writing", path.display()))?;
        let mut out = io::BufWriter::new(file);
        write(&mut out)
            .and_then(|()| out.flush())
            .with_context(|| format!("cannot write {}", path.display()))?;
        return Ok(());
    }
    crate::io::atomic::write_atomic(path, true, |out| write(out)).map_err(|e| match e {
        AtomicError::Io(e) | AtomicError::Inner(e) => {
            anyhow::Error::from(e).context(format!("cannot write {}", path.display()))
        }
    })
}

/// True if `path` exists and is neither a regular file nor a folder (a character or block
/// device, a FIFO, a socket), following symbolic links.
fn is_special(path: &Path) -> bool {
    fs::metadata(path).is_ok_and(|m| !m.is_file() && !m.is_dir())
}

/// True if `path` is a FIFO.
fn is_fifo(path: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        fs::metadata(path).is_ok_and(|m| m.file_type().is_fifo())
    }
    #[cfg(not(unix))]
    {
        let _ = path;
        false
    }
}

/// Checks before any work that the output can be created: not a folder, its folder exists
/// and a file can be created in it, its name is acceptable. Does not look at the input
/// (see [`check_output_for`]).
///
/// # Errors
/// One line naming the output and what is wrong with it.
pub(crate) fn check_output_path(path: &Path) -> Result<()> {
    if path.as_os_str() == "-" {
        return Ok(());
    }
    if path.is_dir() {
        return Err(InputError(format!(
            "output {} is a directory; give a file name",
            path.display()
        ))
        .into());
    }
    if let Some(folder) = path.parent()
        && !folder.as_os_str().is_empty()
        && !folder.is_dir()
    {
        let what = if folder.exists() {
            "is not a folder"
        } else {
            "does not exist"
        };
        return Err(InputError(format!("output folder {} {what}", folder.display())).into());
    }
    if is_special(path) {
        // Written directly (no temporary file): it must open for writing. (A FIFO is not
        // opened now: that would wait for its reader.)
        if is_fifo(path) {
            return Ok(());
        }
        fs::OpenOptions::new()
            .write(true)
            .open(path)
            .map_err(|e| InputError(format!("cannot write to {}: {e}", path.display())))?;
        return Ok(());
    }
    crate::io::atomic::check_can_write(path).map_err(|e| {
        let why = if e.kind() == io::ErrorKind::InvalidFilename {
            format!(
                "the name is too long for the file system ({} bytes)",
                path.file_name().map_or(0, |n| n.len())
            )
        } else {
            e.to_string()
        };
        InputError(format!(
            "cannot create the output {}: {why}",
            path.display()
        ))
    })?;
    Ok(())
}

/// [`check_output_path`], then: the output must not be the input recording (same file by
/// device and inode, or by canonical path), and temporary files of earlier killed runs
/// writing the same output are removed (their process has ended) or reported.
///
/// # Errors
/// As [`check_output_path`]; the output is the input.
pub(crate) fn check_output_for(path: &Path, source: &str) -> Result<()> {
    check_output_path(path)?;
    if path.as_os_str() == "-" {
        return Ok(());
    }
    if let SourceSpec::Path(input) = SourceSpec::parse(source)
        && same_file(&input, path)
    {
        return Err(InputError(format!(
            "the output {} is the input recording; give another output name (it would be \
             replaced by the result)",
            path.display()
        ))
        .into());
    }
    clean_stale_temporaries(path);
    Ok(())
}

/// True if both paths name one existing file.
fn same_file(a: &Path, b: &Path) -> bool {
    let (Ok(ma), Ok(mb)) = (fs::metadata(a), fs::metadata(b)) else {
        return false;
    };
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if ma.dev() == mb.dev() && ma.ino() == mb.ino() {
            return true;
        }
    }
    let _ = (&ma, &mb);
    matches!((fs::canonicalize(a), fs::canonicalize(b)), (Ok(x), Ok(y)) if x == y)
}

/// Removes the temporary files that earlier runs writing `path` left when they were killed
/// (their process no longer exists), with a note; reports those whose process may still run.
fn clean_stale_temporaries(path: &Path) {
    let Ok(found) = crate::io::atomic::stale_temp_files(path) else {
        return;
    };
    let own = std::process::id();
    let can_tell = Path::new("/proc/self").exists();
    let (mut removed, mut removed_bytes, mut kept) = (0_usize, 0_u64, 0_usize);
    for temp in found {
        let alive = match temp.pid {
            Some(pid) if pid == own => continue,
            Some(pid) => !can_tell || Path::new("/proc").join(pid.to_string()).exists(),
            None => !can_tell,
        };
        if !alive && fs::remove_file(&temp.path).is_ok() {
            removed += 1;
            removed_bytes += temp.bytes;
        } else {
            kept += 1;
        }
    }
    if removed > 0 {
        note(&format!(
            "removed {removed} temporary file{} ({}) left beside {} by earlier interrupted runs",
            if removed == 1 { "" } else { "s" },
            format_bytes(removed_bytes),
            path.display()
        ));
    }
    if kept > 0 {
        warn(&format!(
            "{kept} temporary file{} beside {} (.{}.….tmp) belong to another run that may \
             still be writing it (or to an earlier interrupted run: remove them if none is)",
            if kept == 1 { "" } else { "s" },
            path.display(),
            path.file_name()
                .map_or_else(String::new, |n| n.to_string_lossy().into_owned())
        ));
    }
}

/// "12 bytes", "3.4 MiB".
pub(crate) fn format_bytes(bytes: u64) -> String {
    const KIB: f64 = 1024.0;
    let b = bytes as f64;
    if b < KIB {
        format!("{bytes} bytes")
    } else if b < KIB * KIB {
        format!("{:.1} KiB", b / KIB)
    } else if b < KIB * KIB * KIB {
        format!("{:.1} MiB", b / (KIB * KIB))
    } else {
        format!("{:.1} GiB", b / (KIB * KIB * KIB))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::fs;

    #[test]
    fn atomic_write_keeps_old_file_on_failure() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.csv");
        fs::write(&path, b"old").unwrap();
        let failed = write_atomically(&path, |w| {
            w.write_all(b"partial")?;
            Err(io::Error::other("simulated failure"))
        });
        assert!(failed.is_err());
        assert_eq!(fs::read(&path).unwrap(), b"old");
        assert_eq!(
            fs::read_dir(dir.path()).unwrap().count(),
            1,
            "temp file left behind"
        );
        write_atomically(&path, |w| w.write_all(b"new")).unwrap();
        assert_eq!(fs::read(&path).unwrap(), b"new");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
