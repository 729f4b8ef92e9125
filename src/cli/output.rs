//! Output files of the headless commands: atomic replacement through
//! [`crate::snapshot::write_atomic`] (an existing file is only ever replaced by a complete
//! result) and `-` for stdout.

use std::io::{self, Write};
use std::path::Path;

use anyhow::{Context, Result};

use crate::snapshot::AtomicError;

use super::InputError;

/// Writes `path` atomically with the bytes `write` produces; `-` writes to stdout.
///
/// # Errors
/// The output folder does not exist or is not writable, or `write` fails; the temporary
/// file is removed and an existing `path` is left untouched.
pub fn write_atomically(
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
    crate::snapshot::write_atomic(path, true, |out| write(out)).map_err(|e| match e {
        AtomicError::Io(e) | AtomicError::Inner(e) => {
            anyhow::Error::from(e).context(format!("cannot write {}", path.display()))
        }
    })
}

/// Checks before any work that the output can be created (its folder exists), so a long run
/// does not fail at the very end.
///
/// # Errors
/// The output's folder does not exist, or the output is a directory.
pub fn check_output_path(path: &Path) -> Result<()> {
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
        return Err(
            InputError(format!("output folder {} does not exist", folder.display())).into(),
        );
    }
    Ok(())
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
