//! Output files of the headless commands: atomic replacement through
//! [`crate::snapshot::write_atomic`] (an existing file is only ever replaced by a complete
//! result), `-` for stdout, and the spectrum CSV.

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

/// Shortest text that reads back to the same `f64` (Rust's `Display`/`LowerExp` are both
/// shortest round-trip); exponent form outside 1e-4 ≤ |x| < 1e16 (as Python's repr) to keep tiny PSDs short.
pub fn format_number(value: f64) -> String {
    let magnitude = value.abs();
    if value == 0.0 || (1e-4..1e16).contains(&magnitude) {
        format!("{value}")
    } else {
        format!("{value:e}")
    }
}

/// Writes the spectrum CSV: header `frequency_hz,psd_v2_per_hz[,psd_m2_per_hz]`, one row per
/// bin.
///
/// # Errors
/// Write failures of `out`.
pub fn write_spectrum_csv(
    out: &mut dyn Write,
    frequencies_hz: &[f64],
    psd_v2_per_hz: &[f64],
    m2_per_v2: Option<f64>,
) -> io::Result<()> {
    match m2_per_v2 {
        Some(_) => writeln!(out, "frequency_hz,psd_v2_per_hz,psd_m2_per_hz")?,
        None => writeln!(out, "frequency_hz,psd_v2_per_hz")?,
    }
    for (f, p) in frequencies_hz.iter().zip(psd_v2_per_hz) {
        match m2_per_v2 {
            Some(c2) => writeln!(
                out,
                "{},{},{}",
                format_number(*f),
                format_number(*p),
                format_number(p * c2)
            )?,
            None => writeln!(out, "{},{}", format_number(*f), format_number(*p))?,
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::fs;

    #[test]
    fn numbers_round_trip_and_stay_short() {
        for x in [
            0.0,
            1.0,
            0.1,
            1000.0,
            1.234_567_890_123_456_7e-20,
            3.0e-5,
            9.99e-6,
            2.5e16,
            f64::MIN_POSITIVE,
            f64::MAX,
            123_456.789,
        ] {
            let text = format_number(x);
            assert_eq!(text.parse::<f64>().unwrap(), x, "{text}");
        }
        assert_eq!(format_number(1e-20), "1e-20");
        assert_eq!(format_number(1000.0), "1000");
        assert_eq!(format_number(0.5), "0.5");
    }

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
