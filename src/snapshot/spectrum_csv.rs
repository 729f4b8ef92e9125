//! The spectrum CSV (`frequency_hz,psd_v2_per_hz[,psd_m2_per_hz]`), written by `stillpoint
//! spectrum` and as a snapshot's data file, and read back with one-line errors.

use std::io::{self, Read, Write};

use super::{MAX_CSV_BYTES, Result, SnapshotError, SpectrumTable};
use crate::dsp::Spectrum;

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

pub(super) fn parse_csv(bytes: &[u8]) -> Result<SpectrumTable> {
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
pub(super) fn truncate(s: &str, max_chars: usize) -> String {
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

#[cfg(test)]
mod tests {
    use super::*;

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
