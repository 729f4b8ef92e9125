//! Writing NumPy `.npy` files (format 1.0) of little-endian float32 rows, row by row, when
//! the number of rows is not known in advance (`stillpoint track --waterfall`, the window's
//! waterfall export).
//!
//! The format (NumPy's `numpy.lib.format` documentation, "Format Version 1.0"): the magic
//! `\x93NUMPY`, the version bytes 1 and 0, a little-endian u16 header length, then an ASCII
//! Python dict literal `{'descr': '<f4', 'fortran_order': False, 'shape': (R, C), }` padded
//! with spaces and ended by `\n` so that the data start at a multiple of 64 bytes; then the
//! data in C order. The header here is padded for the largest row count a u64 can hold, so
//! [`NpyWriter::set_rows`] rewrites it in place as rows are appended: the file on disk is a
//! valid array of the rows written so far after every [`NpyWriter::append_row`] +
//! [`NpyWriter::set_rows`] (what a live `track` does after each interval).

use std::io::{self, Seek, SeekFrom, Write};

/// Magic string of the format.
const MAGIC: &[u8] = b"\x93NUMPY";
/// Alignment of the data start (NumPy pads the header to a multiple of 64 since 1.9).
const ALIGN: usize = 64;

/// The header dict for `rows` × `columns`, padded to `total` bytes of preamble + header.
fn header(rows: u64, columns: usize, total: usize) -> Vec<u8> {
    let dict =
        format!("{{'descr': '<f4', 'fortran_order': False, 'shape': ({rows}, {columns}), }}");
    let mut out = Vec::with_capacity(total);
    out.extend_from_slice(MAGIC);
    out.extend_from_slice(&[1, 0]);
    let header_len = total - MAGIC.len() - 2 - 2;
    out.extend_from_slice(&u16::try_from(header_len).unwrap_or(u16::MAX).to_le_bytes());
    out.extend_from_slice(dict.as_bytes());
    while out.len() < total - 1 {
        out.push(b' ');
    }
    out.push(b'\n');
    out
}

/// Bytes of preamble + header for arrays of `columns` columns (room for any u64 row count).
fn header_total(columns: usize) -> usize {
    let widest = format!(
        "{{'descr': '<f4', 'fortran_order': False, 'shape': ({}, {columns}), }}",
        u64::MAX
    );
    let bare = MAGIC.len() + 2 + 2 + widest.len() + 1;
    bare.div_ceil(ALIGN) * ALIGN
}

/// A float32 C-order 2-D array being written row by row.
#[derive(Debug)]
pub(crate) struct NpyWriter<W: Write + Seek> {
    out: W,
    columns: usize,
    rows: u64,
    header_bytes: usize,
    buffer: Vec<u8>,
}

impl<W: Write + Seek> NpyWriter<W> {
    /// Starts an array of `columns` columns and no rows at the current position of `out`
    /// (normally the start of a new file).
    ///
    /// # Errors
    /// Writing the header fails.
    pub fn new(mut out: W, columns: usize) -> io::Result<Self> {
        let header_bytes = header_total(columns);
        out.write_all(&header(0, columns, header_bytes))?;
        Ok(Self {
            out,
            columns,
            rows: 0,
            header_bytes,
            buffer: Vec::with_capacity(columns * 4),
        })
    }

    /// Appends one row, each value rounded to float32 (a value too large for float32 becomes
    /// ±inf, as NumPy's own cast does). The header still says the old row count until
    /// [`NpyWriter::set_rows`] or [`NpyWriter::finish`].
    ///
    /// # Errors
    /// A row of the wrong length ([`io::ErrorKind::InvalidInput`]); writing fails.
    pub(crate) fn append_row(&mut self, row: &[f64]) -> io::Result<()> {
        if row.len() != self.columns {
            return Err(io::Error::new(
                io::ErrorKind::InvalidInput,
                format!(
                    "a waterfall row of {} values in an array of {} columns",
                    row.len(),
                    self.columns
                ),
            ));
        }
        self.buffer.clear();
        for &v in row {
            #[allow(clippy::cast_possible_truncation)]
            self.buffer.extend_from_slice(&(v as f32).to_le_bytes());
        }
        self.out.write_all(&self.buffer)?;
        self.rows += 1;
        Ok(())
    }

    /// Rewrites the header with the rows appended so far and flushes: the file is then a
    /// complete array.
    ///
    /// # Errors
    /// Seeking or writing fails.
    pub(crate) fn set_rows(&mut self) -> io::Result<()> {
        let end = self.out.stream_position()?;
        let start = end - self.header_bytes as u64 - self.rows * self.columns as u64 * 4;
        self.out.seek(SeekFrom::Start(start))?;
        self.out
            .write_all(&header(self.rows, self.columns, self.header_bytes))?;
        self.out.seek(SeekFrom::Start(end))?;
        self.out.flush()
    }

    /// Writes the final header and returns the output.
    ///
    /// # Errors
    /// Seeking or writing fails.
    pub fn finish(mut self) -> io::Result<W> {
        self.set_rows()?;
        Ok(self.out)
    }
}

/// Reads a float32 C-order 2-D `.npy` (format 1.0 or 2.0) as written by [`NpyWriter`]:
/// shape and values (as f64). For tests and for the window to reopen an exported waterfall.
///
/// # Errors
/// Not a `.npy`, not `<f4` C order 2-D, or fewer data bytes than the shape says.
pub fn read_f32_2d(bytes: &[u8]) -> Result<(usize, usize, Vec<f64>), String> {
    let bad = |what: &str| format!("not a float32 2-D .npy file: {what}");
    if bytes.get(..6) != Some(MAGIC) {
        return Err(bad("no \\x93NUMPY magic"));
    }
    let major = *bytes.get(6).ok_or_else(|| bad("cut short"))?;
    let (len, start) = match major {
        1 => {
            let b = bytes.get(8..10).ok_or_else(|| bad("cut short"))?;
            (usize::from(u16::from_le_bytes([b[0], b[1]])), 10)
        }
        2 | 3 => {
            let b = bytes.get(8..12).ok_or_else(|| bad("cut short"))?;
            let n = u32::from_le_bytes([b[0], b[1], b[2], b[3]]);
            (usize::try_from(n).map_err(|_| bad("header too long"))?, 12)
        }
        _ => return Err(bad("unknown version")),
    };
    let text = bytes
        .get(start..start + len)
        .and_then(|h| std::str::from_utf8(h).ok())
        .ok_or_else(|| bad("header cut short"))?;
    if !text.contains("'descr': '<f4'") || !text.contains("'fortran_order': False") {
        return Err(bad("descr is not '<f4' in C order"));
    }
    let shape = text
        .split("'shape': (")
        .nth(1)
        .and_then(|s| s.split(')').next())
        .ok_or_else(|| bad("no shape"))?;
    let dims: Vec<usize> = shape
        .split(',')
        .map(str::trim)
        .filter(|s| !s.is_empty())
        .map(str::parse)
        .collect::<Result<_, _>>()
        .map_err(|_| bad("shape is not integers"))?;
    let [rows, columns] = dims[..] else {
        return Err(bad("not two-dimensional"));
    };
    let count = rows
        .checked_mul(columns)
        .ok_or_else(|| bad("shape too large"))?;
    let data = bytes
        .get(start + len..)
        .filter(|d| d.len() / 4 >= count)
        .ok_or_else(|| bad("fewer data than the shape says"))?;
    let values = data
        .chunks_exact(4)
        .take(count)
        .map(|c| f64::from(f32::from_le_bytes([c[0], c[1], c[2], c[3]])))
        .collect();
    Ok((rows, columns, values))
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    #[test]
    fn header_is_aligned_and_patched_in_place() {
        let mut w = NpyWriter::new(Cursor::new(Vec::new()), 3).unwrap();
        let empty = w.out.get_ref().clone();
        assert_eq!(empty.len() % 64, 0);
        assert_eq!(*empty.last().unwrap(), b'\n');
        let (r, c, v) = read_f32_2d(&empty).unwrap();
        assert_eq!((r, c, v.len()), (0, 3, 0));
        w.append_row(&[1.0, -2.5, 1e-30]).unwrap();
        w.set_rows().unwrap();
        w.append_row(&[0.0, 3.0, 4.0]).unwrap();
        assert!(w.append_row(&[1.0]).is_err());
        let bytes = w.finish().unwrap().into_inner();
        assert_eq!(bytes.len(), empty.len() + 2 * 3 * 4);
        let (r, c, v) = read_f32_2d(&bytes).unwrap();
        assert_eq!((r, c), (2, 3));
        assert_eq!(v[1], -2.5);
        assert_eq!(v[2], f64::from(1e-30_f32));
        assert_eq!(v[5], 4.0);
        let text = std::str::from_utf8(&bytes[10..empty.len()]).unwrap();
        assert!(text.starts_with("{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }"));
        // The u16 header length covers exactly the bytes up to the data.
        assert_eq!(
            usize::from(u16::from_le_bytes([bytes[8], bytes[9]])) + 10,
            empty.len()
        );
    }

    #[test]
    fn widest_row_count_fits() {
        let total = header_total(1 << 20);
        let h = header(u64::MAX, 1 << 20, total);
        assert_eq!(h.len(), total);
        assert_eq!(h.last(), Some(&b'\n'));
        assert!(h[..total - 1].ends_with(b" ") || h[..total - 1].ends_with(b"}"));
    }
}
