//! NumPy `.npy` files (what `np.save` writes) as a source: a thin header layer over the raw
//! reader.
//!
//! The format (NumPy's "NEP 1" file format, versions 1.0, 2.0 and 3.0): the magic bytes
//! `\x93NUMPY`, a major and minor version byte, the header length (little-endian u16 for
//! 1.0, u32 for 2.0/3.0), then a Python-literal dict with the keys `descr` (the dtype, e.g.
//! `'<f4'`), `fortran_order` (`True`/`False`) and `shape` (a tuple), padded with spaces and
//! ended by a newline. The array's bytes follow at once, in C order: for a 2-D array
//! [samples, channels] exactly the interleaved frames the raw reader decodes.
//!
//! So [`NpyHeader::parse`] reads the header with a small tested parser of that literal,
//! [`raw_config`] turns it into the equivalent raw [`SourceConfig`] (sample format, byte
//! order, channel count from the header; `--rate` from the user), and [`open`] hands the
//! rest of the file to [`RawReader`]: the same bulk decoding loops, the same `--channel`
//! handling, the same speed. Integers are scaled as raw integers (volts = count ×
//! `--volts-per-unit`).
//!
//! Supported: 1-D and 2-D arrays of int16, int32, float32, float64 in either byte order.
//! Refused with a one-line reason: Fortran order, object and structured arrays, other
//! dtypes, other ranks, an empty array. A body shorter than the shape promises is read as
//! far as it goes and flagged as truncated ([`super::ReaderStats::truncated`]).

use std::fs::File;
use std::io::{self, Read};
use std::path::Path;
use std::time::Instant;

use super::frames::{ByteSource, Fill};
use super::raw::{MAX_CHANNELS, RawFormat, RawReader};
use super::{AcquireError, Endian, Result, SampleFormat, SourceConfig};

/// The six magic bytes that open every `.npy` file.
pub(crate) const MAGIC: &[u8; 6] = b"\x93NUMPY";

/// Longest header accepted (NumPy itself limits headers to 10 000 bytes unless told
/// otherwise; 1 MiB leaves room while keeping a lying length harmless).
const MAX_HEADER_BYTES: usize = 1 << 20;

/// What the header of a `.npy` file says.
#[derive(Debug, Clone, PartialEq)]
pub struct NpyHeader {
    /// Format version (major, minor).
    pub version: (u8, u8),
    /// Element encoding.
    pub sample_format: SampleFormat,
    /// Element byte order.
    pub endian: Endian,
    /// Samples per channel (the first dimension).
    pub samples: u64,
    /// Channels (1 for a 1-D array, the second dimension of a 2-D one).
    pub channels: usize,
    /// Byte offset of the array data from the start of the file.
    pub data_offset: u64,
}

impl NpyHeader {
    /// Bytes the array data should occupy according to the shape.
    pub(crate) fn data_bytes(&self) -> u64 {
        self.samples
            .saturating_mul(self.channels as u64)
            .saturating_mul(self.sample_format.bytes() as u64)
    }

    /// Parses the header at the start of `bytes` (which must hold at least the whole header;
    /// the data may follow or not).
    ///
    /// # Errors
    /// [`AcquireError::Npy`] saying what is wrong: not a `.npy` file, an unknown version, a
    /// header that is not the expected literal, or an array this program does not read.
    pub fn parse(bytes: &[u8]) -> Result<Self> {
        let bad = |why: &str| AcquireError::Npy(why.to_string());
        if bytes.len() < MAGIC.len() || &bytes[..MAGIC.len()] != MAGIC {
            return Err(bad("no NumPy magic bytes at the start (not a .npy file)"));
        }
        let (Some(&major), Some(&minor)) = (bytes.get(6), bytes.get(7)) else {
            return Err(bad("the file ends inside the header"));
        };
        let (len_bytes, utf8) = match major {
            1 => (2, false),
            2 => (4, false),
            3 => (4, true),
            _ => {
                return Err(AcquireError::Npy(format!(
                    "format version {major}.{minor} is not supported (1.0, 2.0 and 3.0 are)"
                )));
            }
        };
        let len_field = bytes
            .get(8..8 + len_bytes)
            .ok_or_else(|| bad("the file ends inside the header"))?;
        let header_len = len_field
            .iter()
            .rev()
            .fold(0_usize, |acc, &b| (acc << 8) | usize::from(b));
        if header_len > MAX_HEADER_BYTES {
            return Err(AcquireError::Npy(format!(
                "the header claims {header_len} bytes (corrupt header)"
            )));
        }
        let start = 8 + len_bytes;
        let text_bytes = bytes
            .get(start..start + header_len)
            .ok_or_else(|| bad("the file ends inside the header"))?;
        let text = if utf8 {
            std::str::from_utf8(text_bytes).map_err(|_| bad("the header is not UTF-8 text"))?
        } else {
            if !text_bytes.is_ascii() {
                return Err(bad("the header is not ASCII text (corrupt header)"));
            }
            std::str::from_utf8(text_bytes).map_err(|_| bad("the header is not ASCII text"))?
        };
        let dict = match literal::parse(text) {
            Ok(literal::Value::Dict(entries)) => entries,
            Ok(_) => return Err(bad("the header is not a dict (corrupt header)")),
            Err(why) => {
                return Err(AcquireError::Npy(format!(
                    "the header is not a readable dict literal: {why} (corrupt header)"
                )));
            }
        };
        let get = |key: &str| dict.iter().find(|(k, _)| k == key).map(|(_, v)| v);
        let descr = get("descr").ok_or_else(|| bad("the header has no 'descr' (dtype)"))?;
        let (sample_format, endian) = match descr {
            literal::Value::Str(text) => parse_descr(text)?,
            literal::Value::List(_) => {
                return Err(bad(
                    "structured (record) arrays are not supported: save one numeric column \
                     or a 2-D [samples, channels] array",
                ));
            }
            _ => return Err(bad("'descr' is not a dtype string (corrupt header)")),
        };
        match get("fortran_order") {
            Some(literal::Value::Bool(false)) => {}
            Some(literal::Value::Bool(true)) => {
                return Err(bad(
                    "Fortran-order arrays are not supported: save with np.save(path, \
                     np.ascontiguousarray(a)) (C order, [samples, channels])",
                ));
            }
            Some(_) => return Err(bad("'fortran_order' is not True or False (corrupt header)")),
            None => return Err(bad("the header has no 'fortran_order'")),
        }
        let shape = match get("shape") {
            Some(literal::Value::Tuple(items)) => items
                .iter()
                .map(|v| match v {
                    literal::Value::Int(n) => Ok(*n),
                    _ => Err(bad("'shape' holds something other than integers")),
                })
                .collect::<Result<Vec<u64>>>()?,
            Some(_) => return Err(bad("'shape' is not a tuple (corrupt header)")),
            None => return Err(bad("the header has no 'shape'")),
        };
        let (samples, channels) = match shape.as_slice() {
            [n] => (*n, 1_u64),
            [n, c] => (*n, *c),
            [] => return Err(bad("a 0-d array (a single number) is not a record")),
            more => {
                return Err(AcquireError::Npy(format!(
                    "a {}-D array is not supported: save a 1-D array or a 2-D [samples, \
                     channels] array",
                    more.len()
                )));
            }
        };
        if samples == 0 || channels == 0 {
            return Err(AcquireError::Npy(format!(
                "the array is empty (shape {shape:?}): no samples to analyse"
            )));
        }
        let channels = usize::try_from(channels)
            .ok()
            .filter(|&c| c <= MAX_CHANNELS)
            .ok_or_else(|| {
                AcquireError::Npy(format!(
                    "{channels} channels (second dimension) is more than the {MAX_CHANNELS} \
                     supported: is the array [channels, samples]? save a.T instead"
                ))
            })?;
        Ok(Self {
            version: (major, minor),
            sample_format,
            endian,
            samples,
            channels,
            data_offset: (start + header_len) as u64,
        })
    }

    /// Reads and parses the header of the file at `path`.
    ///
    /// # Errors
    /// [`AcquireError::Open`] if the file cannot be opened, else as [`NpyHeader::parse`].
    pub fn read(path: &Path) -> Result<Self> {
        let mut file = File::open(path).map_err(|source| AcquireError::Open {
            path: path.to_path_buf(),
            source,
        })?;
        Self::from_reader(&mut file)
    }

    /// Reads exactly the header from `reader`, leaving it at the first data byte.
    fn from_reader(reader: &mut dyn Read) -> Result<Self> {
        let mut head = [0_u8; 12];
        let got = read_full(reader, &mut head)?;
        let prefix = head.get(..got).unwrap_or_default();
        if got < 10 {
            // Let the parser say what is wrong (no magic, or cut inside the header).
            return Self::parse(prefix)
                .and_then(|_| Err(AcquireError::Npy("the file ends inside the header".into())));
        }
        let len_bytes = if head[6] == 1 { 2 } else { 4 };
        let header_len = head[8..8 + len_bytes]
            .iter()
            .rev()
            .fold(0_usize, |acc, &b| (acc << 8) | usize::from(b));
        if header_len > MAX_HEADER_BYTES || !matches!(head[6], 1..=3) {
            return Self::parse(prefix);
        }
        let total = 8 + len_bytes + header_len;
        let mut bytes = prefix.to_vec();
        // The 12 bytes read may already reach into the data (version 1.0, tiny header).
        if bytes.len() > total {
            return Err(AcquireError::Npy(
                "the header is shorter than its fixed fields (corrupt header)".into(),
            ));
        }
        bytes.resize(total, 0);
        let got_rest = read_full(reader, &mut bytes[got..])?;
        bytes.truncate(got + got_rest);
        Self::parse(&bytes)
    }
}

/// Reads until `buf` is full or the stream ends; returns the bytes read.
fn read_full(reader: &mut dyn Read, buf: &mut [u8]) -> Result<usize> {
    let mut filled = 0;
    while filled < buf.len() {
        match reader.read(&mut buf[filled..]) {
            Ok(0) => break,
            Ok(n) => filled += n,
            Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e.into()),
        }
    }
    Ok(filled)
}

/// `'<f4'` → (F32, Little). Accepts `<`, `>`, `|` (one-byte types only, none supported
/// here) and `=` (this machine's order).
fn parse_descr(text: &str) -> Result<(SampleFormat, Endian)> {
    let unsupported = || {
        AcquireError::Npy(format!(
            "dtype '{text}' is not supported (int16, int32, float32 or float64 are: '<i2', \
             '<i4', '<f4', '<f8' or their '>' big-endian forms)"
        ))
    };
    if text.starts_with("|O") || text == "O" {
        return Err(AcquireError::Npy(
            "object arrays are not supported (the array holds Python objects, not numbers)".into(),
        ));
    }
    let mut chars = text.chars();
    let (order, code) = match chars.next() {
        Some(c @ ('<' | '>' | '|' | '=')) => (c, chars.as_str()),
        _ => ('=', text),
    };
    let format = match code {
        "i2" => SampleFormat::I16,
        "i4" => SampleFormat::I32,
        "f4" => SampleFormat::F32,
        "f8" => SampleFormat::F64,
        _ => return Err(unsupported()),
    };
    let endian = match order {
        '<' => Endian::Little,
        '>' => Endian::Big,
        '=' if cfg!(target_endian = "big") => Endian::Big,
        '=' => Endian::Little,
        // '|' means "byte order not applicable": only for one-byte types.
        _ => return Err(unsupported()),
    };
    Ok((format, endian))
}

/// The `.npy` file named by `config` as the equivalent raw source: the header's sample
/// format, byte order and channel count, the user's `--rate`, `--channel` and
/// `--volts-per-unit`. Returns that configuration and the header (its
/// [`NpyHeader::data_offset`] is where the raw bytes start).
///
/// Other readers (a two-channel reader for `--cross-channel`) can open the same bytes with
/// [`RawFormat::from_config`] on the returned configuration.
///
/// # Errors
/// Unreadable or unsupported file, no `--rate`, `--channel` out of range.
pub fn raw_config(config: &SourceConfig, path: &Path) -> Result<(SourceConfig, NpyHeader)> {
    let header = NpyHeader::read(path)?;
    if config.rate_hz.is_none() {
        return Err(AcquireError::Config(
            "a .npy file holds no sample rate: give --rate HZ".into(),
        ));
    }
    if config.channel >= header.channels {
        return Err(AcquireError::Config(format!(
            "--channel {} is out of range: the array has {} channel{} (0-based, so 0..={})",
            config.channel,
            header.channels,
            if header.channels == 1 { "" } else { "s" },
            header.channels - 1
        )));
    }
    let mut raw = config.clone();
    raw.sample_format = Some(header.sample_format);
    raw.endian = header.endian;
    raw.channels = header.channels;
    Ok((raw, header))
}

/// Opens a `.npy` file as a [`RawReader`] over its data (see the module docs).
///
/// # Errors
/// As [`raw_config`]; I/O errors seeking past the header.
pub fn open(config: &SourceConfig, path: &Path) -> Result<RawReader> {
    let (raw, header) = raw_config(config, path)?;
    let format = RawFormat::from_config(&raw)?;
    let mut file = File::open(path).map_err(|source| AcquireError::Open {
        path: path.to_path_buf(),
        source,
    })?;
    let mut skip = (&mut file).take(header.data_offset);
    io::copy(&mut skip, &mut io::sink())?;
    let name = path.file_name().map_or_else(
        || path.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let description = format!(
        "{name}, NumPy .npy {}.{} [{} × {}], {}",
        header.version.0,
        header.version.1,
        header.samples,
        header.channels,
        format.describe()
    );
    RawReader::with_description(
        Box::new(Bounded {
            file,
            left: header.data_bytes(),
        }),
        format,
        description,
        false,
    )
}

/// The array data: at most `left` bytes; ends as truncated if the file ends first.
/// Bytes after the array (none in a file `np.save` wrote) are not read.
struct Bounded {
    file: File,
    left: u64,
}

impl ByteSource for Bounded {
    fn fill(&mut self, buf: &mut [u8], _deadline: Option<Instant>) -> Result<Fill> {
        if self.left == 0 {
            return Ok(Fill::End { truncated: false });
        }
        let want = usize::try_from(self.left)
            .unwrap_or(usize::MAX)
            .min(buf.len());
        let Some(space) = buf.get_mut(..want) else {
            return Ok(Fill::End { truncated: false });
        };
        loop {
            match self.file.read(space) {
                Ok(0) => return Ok(Fill::End { truncated: true }),
                Ok(n) => {
                    self.left -= n as u64;
                    return Ok(Fill::Bytes(n));
                }
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e.into()),
            }
        }
    }

    fn remaining_hint(&self) -> Option<u64> {
        Some(self.left)
    }
}

/// A parser of the Python-literal subset NumPy writes in `.npy` headers: dicts, tuples,
/// lists, quoted strings, integers (an old `L` suffix allowed), `True`, `False`, `None`.
pub(crate) mod literal {
    /// One literal value.
    #[derive(Debug, Clone, PartialEq)]
    pub enum Value {
        /// `'text'` or `"text"`.
        Str(String),
        /// A non-negative integer.
        Int(u64),
        /// `True` / `False`.
        Bool(bool),
        /// `None`.
        None,
        /// `(a, b, )`.
        Tuple(Vec<Value>),
        /// `[a, b]`.
        List(Vec<Value>),
        /// `{'key': value, }`, in file order.
        Dict(Vec<(String, Value)>),
    }

    /// Deepest nesting accepted (a hostile header cannot exhaust the stack).
    const MAX_DEPTH: usize = 32;

    /// Parses `text` (one literal, surrounding whitespace allowed).
    ///
    /// # Errors
    /// A short reason naming the byte offset.
    pub fn parse(text: &str) -> Result<Value, String> {
        let mut p = Parser {
            bytes: text.as_bytes(),
            pos: 0,
        };
        let value = p.value(0)?;
        p.skip_ws();
        if p.pos != p.bytes.len() {
            return Err(format!("unexpected text at byte {}", p.pos));
        }
        Ok(value)
    }

    struct Parser<'a> {
        bytes: &'a [u8],
        pos: usize,
    }

    impl Parser<'_> {
        fn peek(&self) -> Option<u8> {
            self.bytes.get(self.pos).copied()
        }

        fn skip_ws(&mut self) {
            while self.peek().is_some_and(|b| b.is_ascii_whitespace()) {
                self.pos += 1;
            }
        }

        fn expect(&mut self, byte: u8) -> Result<(), String> {
            self.skip_ws();
            if self.peek() == Some(byte) {
                self.pos += 1;
                Ok(())
            } else {
                Err(format!(
                    "expected '{}' at byte {}",
                    char::from(byte),
                    self.pos
                ))
            }
        }

        fn value(&mut self, depth: usize) -> Result<Value, String> {
            if depth > MAX_DEPTH {
                return Err("nested too deeply".into());
            }
            self.skip_ws();
            match self.peek() {
                Some(b'{') => self.dict(depth),
                Some(b'(') => self.sequence(b')', depth).map(Value::Tuple),
                Some(b'[') => self.sequence(b']', depth).map(Value::List),
                Some(b'\'' | b'"') => self.string().map(Value::Str),
                Some(b'0'..=b'9') => self.int(),
                Some(b'A'..=b'Z' | b'a'..=b'z') => self.word(),
                Some(other) => Err(format!(
                    "unexpected '{}' at byte {}",
                    char::from(other).escape_default(),
                    self.pos
                )),
                None => Err("the text ends where a value should be".into()),
            }
        }

        fn dict(&mut self, depth: usize) -> Result<Value, String> {
            self.expect(b'{')?;
            let mut entries = Vec::new();
            loop {
                self.skip_ws();
                if self.peek() == Some(b'}') {
                    self.pos += 1;
                    return Ok(Value::Dict(entries));
                }
                let key = match self.value(depth + 1)? {
                    Value::Str(s) => s,
                    _ => return Err(format!("a dict key is not a string (byte {})", self.pos)),
                };
                self.expect(b':')?;
                let value = self.value(depth + 1)?;
                entries.push((key, value));
                self.skip_ws();
                match self.peek() {
                    Some(b',') => self.pos += 1,
                    Some(b'}') => {}
                    _ => return Err(format!("expected ',' or '}}' at byte {}", self.pos)),
                }
            }
        }

        fn sequence(&mut self, close: u8, depth: usize) -> Result<Vec<Value>, String> {
            self.pos += 1; // the opening bracket, checked by the caller
            let mut items = Vec::new();
            loop {
                self.skip_ws();
                if self.peek() == Some(close) {
                    self.pos += 1;
                    return Ok(items);
                }
                items.push(self.value(depth + 1)?);
                self.skip_ws();
                match self.peek() {
                    Some(b',') => self.pos += 1,
                    Some(c) if c == close => {}
                    _ => {
                        return Err(format!(
                            "expected ',' or '{}' at byte {}",
                            char::from(close),
                            self.pos
                        ));
                    }
                }
            }
        }

        fn string(&mut self) -> Result<String, String> {
            let quote = self.peek().ok_or("the text ends inside a string")?;
            self.pos += 1;
            let start = self.pos;
            while let Some(b) = self.peek() {
                if b == quote {
                    let text = std::str::from_utf8(&self.bytes[start..self.pos])
                        .map_err(|_| "a string is not UTF-8".to_string())?;
                    self.pos += 1;
                    return Ok(text.to_string());
                }
                if b == b'\\' || b == b'\n' {
                    return Err(format!(
                        "escapes or line breaks in a string (byte {})",
                        self.pos
                    ));
                }
                self.pos += 1;
            }
            Err("a string is not closed".into())
        }

        fn int(&mut self) -> Result<Value, String> {
            let start = self.pos;
            while self.peek().is_some_and(|b| b.is_ascii_digit()) {
                self.pos += 1;
            }
            let digits = std::str::from_utf8(&self.bytes[start..self.pos])
                .map_err(|_| "bad digits".to_string())?;
            let n = digits
                .parse::<u64>()
                .map_err(|_| format!("the integer {digits} is too large"))?;
            // Python 2 long suffix, still found in old files.
            if matches!(self.peek(), Some(b'L' | b'l')) {
                self.pos += 1;
            }
            Ok(Value::Int(n))
        }

        fn word(&mut self) -> Result<Value, String> {
            let start = self.pos;
            while self
                .peek()
                .is_some_and(|b| b.is_ascii_alphanumeric() || b == b'_')
            {
                self.pos += 1;
            }
            match &self.bytes[start..self.pos] {
                b"True" => Ok(Value::Bool(true)),
                b"False" => Ok(Value::Bool(false)),
                b"None" => Ok(Value::None),
                other => Err(format!(
                    "unknown name '{}' at byte {start}",
                    String::from_utf8_lossy(other)
                )),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::literal::{Value, parse};
    use super::*;

    /// A version-1.0 file image as `np.save` lays it out (header padded to 64 bytes).
    fn npy_v1(dict: &str, data: &[u8]) -> Vec<u8> {
        let mut header = dict.to_string();
        while !(10 + header.len() + 1).is_multiple_of(64) {
            header.push(' ');
        }
        header.push('\n');
        let mut out = MAGIC.to_vec();
        out.extend([1, 0]);
        out.extend((header.len() as u16).to_le_bytes());
        out.extend(header.as_bytes());
        out.extend(data);
        out
    }

    #[test]
    fn literal_subset() {
        let deep = "(".repeat(100);
        assert_eq!(
            parse("{'descr': '<f4', 'fortran_order': False, 'shape': (3, 2), }").unwrap(),
            Value::Dict(vec![
                ("descr".into(), Value::Str("<f4".into())),
                ("fortran_order".into(), Value::Bool(false)),
                (
                    "shape".into(),
                    Value::Tuple(vec![Value::Int(3), Value::Int(2)])
                ),
            ])
        );
        assert_eq!(parse("(5,)").unwrap(), Value::Tuple(vec![Value::Int(5)]));
        assert_eq!(parse("()").unwrap(), Value::Tuple(vec![]));
        assert_eq!(
            parse("(7L, 2L)").unwrap(),
            Value::Tuple(vec![Value::Int(7), Value::Int(2)])
        );
        assert_eq!(
            parse("[('a', '<f4'), ('b', '<i2')]").unwrap(),
            Value::List(vec![
                Value::Tuple(vec![Value::Str("a".into()), Value::Str("<f4".into())]),
                Value::Tuple(vec![Value::Str("b".into()), Value::Str("<i2".into())]),
            ])
        );
        assert_eq!(parse("\"x\"").unwrap(), Value::Str("x".into()));
        assert_eq!(parse(" None ").unwrap(), Value::None);
        for bad in [
            "{'descr': '<f4'",
            "{'descr' '<f4'}",
            "{'a': 1} x",
            "{1: 2}",
            "('abc",
            "(1 2)",
            "Maybe",
            "-1",
            "99999999999999999999999",
            "",
            deep.as_str(),
        ] {
            assert!(parse(bad).is_err(), "{bad:?} should not parse");
        }
    }

    #[test]
    fn header_fields() {
        let file = npy_v1(
            "{'descr': '>i2', 'fortran_order': False, 'shape': (1000, 3), }",
            &[],
        );
        let h = NpyHeader::parse(&file).unwrap();
        assert_eq!(h.version, (1, 0));
        assert_eq!(h.sample_format, SampleFormat::I16);
        assert_eq!(h.endian, Endian::Big);
        assert_eq!((h.samples, h.channels), (1000, 3));
        assert_eq!(h.data_offset % 64, 0);
        assert_eq!(h.data_offset as usize, file.len());
        assert_eq!(h.data_bytes(), 6000);
        let one_d = npy_v1(
            "{'descr': '<f8', 'fortran_order': False, 'shape': (7,), }",
            &[],
        );
        let h = NpyHeader::parse(&one_d).unwrap();
        assert_eq!(
            (h.samples, h.channels, h.sample_format),
            (7, 1, SampleFormat::F64)
        );
    }

    #[test]
    fn refusals_say_why() {
        for (dict, want) in [
            (
                "{'descr': '<f4', 'fortran_order': True, 'shape': (4, 2), }",
                "Fortran",
            ),
            (
                "{'descr': '|O', 'fortran_order': False, 'shape': (4,), }",
                "object",
            ),
            (
                "{'descr': '<u2', 'fortran_order': False, 'shape': (4,), }",
                "'<u2'",
            ),
            (
                "{'descr': '<c8', 'fortran_order': False, 'shape': (4,), }",
                "not supported",
            ),
            (
                "{'descr': '|i1', 'fortran_order': False, 'shape': (4,), }",
                "not supported",
            ),
            (
                "{'descr': [('a', '<f4')], 'fortran_order': False, 'shape': (4,), }",
                "structured",
            ),
            (
                "{'descr': '<f4', 'fortran_order': False, 'shape': (2, 2, 2), }",
                "3-D",
            ),
            (
                "{'descr': '<f4', 'fortran_order': False, 'shape': (), }",
                "0-d",
            ),
            (
                "{'descr': '<f4', 'fortran_order': False, 'shape': (0,), }",
                "empty",
            ),
            (
                "{'descr': '<f4', 'fortran_order': False, 'shape': (10, 100000), }",
                "a.T",
            ),
            ("{'descr': '<f4', 'shape': (4,), }", "fortran_order"),
            ("{'descr': '<f4', 'fortran_order': False, }", "shape"),
            (
                "{'descr': '<f4', 'fortran_order': False, 'shape': (4,), ",
                "corrupt",
            ),
            ("['<f4']", "not a dict"),
        ] {
            let e = NpyHeader::parse(&npy_v1(dict, &[]))
                .unwrap_err()
                .to_string();
            assert!(e.contains(want), "{dict}: {e:?} should mention {want}");
            assert!(!e.contains('\n'), "one line: {e:?}");
        }
        let e = NpyHeader::parse(b"RIFF....").unwrap_err().to_string();
        assert!(e.contains("magic"), "{e}");
        let mut v9 = npy_v1(
            "{'descr': '<f4', 'fortran_order': False, 'shape': (4,), }",
            &[],
        );
        v9[6] = 9;
        let e = NpyHeader::parse(&v9).unwrap_err().to_string();
        assert!(e.contains("version 9.0"), "{e}");
        let whole = npy_v1(
            "{'descr': '<f4', 'fortran_order': False, 'shape': (4,), }",
            &[],
        );
        let e = NpyHeader::parse(&whole[..30]).unwrap_err().to_string();
        assert!(e.contains("ends inside the header"), "{e}");
    }

    #[test]
    fn descr_orders() {
        assert_eq!(
            parse_descr("<f4").unwrap(),
            (SampleFormat::F32, Endian::Little)
        );
        assert_eq!(
            parse_descr(">f8").unwrap(),
            (SampleFormat::F64, Endian::Big)
        );
        assert_eq!(
            parse_descr("<i4").unwrap(),
            (SampleFormat::I32, Endian::Little)
        );
        assert_eq!(parse_descr("=i2").unwrap().0, SampleFormat::I16);
        assert!(parse_descr("|f4").is_err());
        assert!(parse_descr("<i8").is_err());
    }
}
