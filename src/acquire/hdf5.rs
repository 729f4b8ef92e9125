//! HDF5 datasets (`.h5`, `.hdf5`, `--dataset /PATH`) as a source, read with the pure-Rust
//! `hdf5-pure` crate (no C library; see DEVELOPERS.md "Lab files" for why this one).
//!
//! A 1-D dataset is one channel; a 2-D dataset is [samples, channels]. Element types:
//! int16, int32, float32, float64, either byte order; integers are scaled like raw integers
//! (volts = count × `--volts-per-unit`). Layouts: contiguous, compact and chunked (any index
//! h5py writes: v1 B-tree with the default `libver`, fixed or extensible array with
//! `libver='latest'`) with the gzip (deflate) and shuffle filters.
//!
//! Streaming: the file is opened with `File::open_streaming` (metadata and chunks are
//! fetched on demand) and the dataset is read a window of rows at a time, each window a
//! whole number of chunks (about 1 MiB), so memory does not grow with the dataset. The
//! window's bytes are in the file's element byte order, exactly the interleaved frames the
//! raw reader decodes: `Hdf5Rows` is a byte source for [`RawReader`], which does the
//! decoding, the `--channel` selection and the counting.
//!
//! Sample rate: `--rate`, else the first numeric attribute of the dataset named
//! `sample_rate_hz`, `fs` or `rate` (in that order); none of them → a clear error.

use std::path::Path;
use std::time::Instant;

use hdf5_pure::{AttrValue, Dataset, Datatype, DatatypeByteOrder};

use super::frames::{ByteSource, Fill};
use super::raw::{MAX_CHANNELS, RawFormat, RawReader};
use super::{AcquireError, Endian, Result, SampleFormat, SourceConfig};

/// Attribute names that may hold the sample rate, in the order they are tried.
pub(crate) const RATE_ATTRIBUTES: [&str; 3] = ["sample_rate_hz", "fs", "rate"];

/// Bytes aimed at per read of the dataset (rounded to whole chunks).
const WINDOW_BYTES: u64 = 1 << 20;

/// What a dataset holds, as far as reading it as a record is concerned.
#[derive(Debug, Clone, PartialEq)]
pub struct Hdf5Layout {
    /// Element encoding.
    pub sample_format: SampleFormat,
    /// Element byte order.
    pub endian: Endian,
    /// Samples per channel (first dimension).
    pub samples: u64,
    /// Channels (1 for 1-D, the second dimension of 2-D).
    pub channels: usize,
    /// Rows per chunk along the first dimension (`None`: not chunked).
    pub chunk_rows: Option<u64>,
    /// The sample rate from a dataset attribute, and the attribute's name.
    pub rate_attribute: Option<(String, f64)>,
    /// Why the first rate attribute found is unusable (not a number, not positive); an
    /// error only when `--rate` is not given.
    pub rate_problem: Option<String>,
}

/// An open dataset and its layout.
pub struct Hdf5Dataset {
    dataset: Dataset,
    /// What it holds.
    pub layout: Hdf5Layout,
    /// The path as given (for messages).
    pub path_in_file: String,
}

fn h5_error(path: &Path, what: &str, e: &hdf5_pure::Error) -> AcquireError {
    let text = e.to_string();
    // HDF5 2.0 with libver='latest' writes a data-layout message this reader does not know.
    let hint = if text.contains("layout version") {
        " (written with h5py/HDF5 2.x and libver='latest'? save with the default libver or \
         libver='v112')"
    } else {
        ""
    };
    AcquireError::Hdf5(format!("{}: {what}: {text}{hint}", path.display()))
}

/// The dataset name as `hdf5-pure` wants it (no leading `/`, which it also accepts).
fn normalise(dataset: &str) -> String {
    let trimmed = dataset.trim_start_matches('/');
    if trimmed.is_empty() {
        "/".to_string()
    } else {
        trimmed.to_string()
    }
}

impl Hdf5Dataset {
    /// Opens `dataset` in the HDF5 file at `path` and checks it can be read as a record.
    ///
    /// # Errors
    /// [`AcquireError::Open`] if the file cannot be opened; [`AcquireError::Hdf5`] for a file
    /// that is not HDF5 or is damaged, a missing dataset (the message lists the datasets
    /// of that group), strings or other non-numeric types, an unsupported numeric type or
    /// rank, an empty dataset, a rate attribute that is not a positive number.
    pub fn open(path: &Path, dataset: &str) -> Result<Self> {
        // Give the operating system's reason for a missing or unreadable file.
        std::fs::File::open(path).map_err(|source| AcquireError::Open {
            path: path.to_path_buf(),
            source,
        })?;
        let file = hdf5_pure::File::open_streaming(path)
            .map_err(|e| h5_error(path, "not a readable HDF5 file", &e))?;
        let name = normalise(dataset);
        let ds = file.dataset(&name).map_err(|e| {
            let (group, _) = name.rsplit_once('/').unwrap_or(("", &name));
            let listing = if group.is_empty() {
                file.root().datasets()
            } else {
                file.group(group).and_then(|g| g.datasets())
            };
            let there = match listing {
                Ok(names) if !names.is_empty() => {
                    let prefix = if group.is_empty() {
                        "/".to_string()
                    } else {
                        format!("/{group}/")
                    };
                    let list: Vec<String> = names.iter().map(|n| format!("{prefix}{n}")).collect();
                    format!(" (datasets there: {})", list.join(", "))
                }
                _ => String::new(),
            };
            AcquireError::Hdf5(format!(
                "{}: no dataset {dataset}{there} ({e})",
                path.display()
            ))
        })?;
        let layout = Self::layout_of(&ds, path, dataset)?;
        Ok(Self {
            dataset: ds,
            layout,
            path_in_file: dataset.to_string(),
        })
    }

    fn layout_of(ds: &Dataset, path: &Path, name: &str) -> Result<Hdf5Layout> {
        let refuse = |why: String| AcquireError::Hdf5(format!("{}: {name}: {why}", path.display()));
        let datatype = ds
            .datatype()
            .map_err(|e| h5_error(path, &format!("cannot read the type of {name}"), &e))?;
        let supported = "int16, int32, float32 and float64 are";
        let order = |o: DatatypeByteOrder| match o {
            DatatypeByteOrder::LittleEndian => Ok(Endian::Little),
            DatatypeByteOrder::BigEndian => Ok(Endian::Big),
            DatatypeByteOrder::Vax => Err(refuse("VAX byte order is not supported".into())),
        };
        let (sample_format, endian) = match &datatype {
            Datatype::FixedPoint {
                size,
                byte_order,
                layout,
            } => {
                let format = match (size, layout.signed) {
                    (2, true) => SampleFormat::I16,
                    (4, true) => SampleFormat::I32,
                    (_, signed) => {
                        return Err(refuse(format!(
                            "{}{}-bit integers are not supported ({supported})",
                            if signed { "" } else { "unsigned " },
                            size * 8
                        )));
                    }
                };
                if layout.bit_offset != 0 || u32::from(layout.bit_precision) != size * 8 {
                    return Err(refuse(
                        "integers with padding bits are not supported".into(),
                    ));
                }
                (format, order(*byte_order)?)
            }
            Datatype::FloatingPoint {
                size, byte_order, ..
            } => {
                let format = match size {
                    4 => SampleFormat::F32,
                    8 => SampleFormat::F64,
                    _ => {
                        return Err(refuse(format!(
                            "{}-bit floats are not supported ({supported})",
                            size * 8
                        )));
                    }
                };
                (format, order(*byte_order)?)
            }
            Datatype::String { .. } => {
                return Err(refuse("holds strings, not numbers".into()));
            }
            Datatype::VariableLength { .. } => {
                return Err(refuse(
                    "holds variable-length data (strings?), not numbers".into(),
                ));
            }
            other => {
                return Err(refuse(format!(
                    "holds {} data, not numbers ({supported} supported)",
                    datatype_class(other)
                )));
            }
        };
        let shape = ds
            .shape()
            .map_err(|e| h5_error(path, &format!("cannot read the shape of {name}"), &e))?;
        let (samples, channels) = match shape.as_slice() {
            [n] => (*n, 1),
            [n, c] => (*n, *c),
            [] => return Err(refuse("is a scalar, not a record".into())),
            more => {
                return Err(refuse(format!(
                    "is {}-D; a 1-D or a 2-D [samples, channels] dataset is needed",
                    more.len()
                )));
            }
        };
        if samples == 0 || channels == 0 {
            return Err(refuse(format!("is empty (shape {shape:?})")));
        }
        let channels = usize::try_from(channels)
            .ok()
            .filter(|&c| c <= MAX_CHANNELS)
            .ok_or_else(|| {
                refuse(format!(
                    "has {channels} channels (second dimension), more than the {MAX_CHANNELS} \
                     supported: is it [channels, samples]? store the transpose"
                ))
            })?;
        let chunk_rows = ds
            .chunk_shape()
            .map_err(|e| h5_error(path, &format!("cannot read the layout of {name}"), &e))?
            .and_then(|c| c.first().copied())
            .filter(|&r| r > 0);
        let attrs = ds
            .attrs()
            .map_err(|e| h5_error(path, &format!("cannot read the attributes of {name}"), &e))?;
        let mut rate_attribute = None;
        let mut rate_problem = None;
        if let Some((key, value)) = RATE_ATTRIBUTES
            .iter()
            .find_map(|k| attrs.get(*k).map(|v| (*k, v)))
        {
            match attribute_number(value) {
                Some(rate) if rate.is_finite() && rate > 0.0 => {
                    rate_attribute = Some((key.to_string(), rate));
                }
                Some(rate) => {
                    rate_problem = Some(format!(
                        "{}: {name}: attribute {key} = {rate} is not a positive sample rate; \
                         give --rate HZ",
                        path.display()
                    ));
                }
                None => {
                    rate_problem = Some(format!(
                        "{}: {name}: attribute {key} is not a number; give --rate HZ",
                        path.display()
                    ));
                }
            }
        }
        Ok(Hdf5Layout {
            sample_format,
            endian,
            samples,
            channels,
            chunk_rows,
            rate_attribute,
            rate_problem,
        })
    }
}

/// A scalar (or one-element) numeric attribute as f64.
fn attribute_number(value: &AttrValue) -> Option<f64> {
    #[allow(clippy::cast_precision_loss)] // a sample rate is far below 2^53
    let v = match value {
        AttrValue::F32(x) => f64::from(*x),
        AttrValue::F64(x) => *x,
        AttrValue::I8(x) => f64::from(*x),
        AttrValue::I16(x) => f64::from(*x),
        AttrValue::I32(x) => f64::from(*x),
        AttrValue::I64(x) => *x as f64,
        AttrValue::U8(x) => f64::from(*x),
        AttrValue::U16(x) => f64::from(*x),
        AttrValue::U32(x) => f64::from(*x),
        AttrValue::U64(x) => *x as f64,
        AttrValue::F32Array(a) if a.len() == 1 => f64::from(*a.first()?),
        AttrValue::F64Array(a) if a.len() == 1 => *a.first()?,
        AttrValue::I32Array(a) if a.len() == 1 => f64::from(*a.first()?),
        AttrValue::I64Array(a) if a.len() == 1 => *a.first()? as f64,
        _ => return None,
    };
    Some(v)
}

/// A short name of an HDF5 datatype class for messages.
fn datatype_class(datatype: &Datatype) -> &'static str {
    match datatype {
        Datatype::FixedPoint { .. } => "integer",
        Datatype::FloatingPoint { .. } => "floating-point",
        Datatype::Time { .. } => "time",
        Datatype::String { .. } => "string",
        Datatype::BitField { .. } => "bit-field",
        Datatype::Opaque { .. } => "opaque",
        Datatype::Compound { .. } => "compound (record)",
        Datatype::Reference { .. } => "reference",
        _ => "non-numeric",
    }
}

/// The source's sample rate: `--rate`, else the dataset's rate attribute.
///
/// # Errors
/// Neither is there.
pub fn sample_rate(config: &SourceConfig, layout: &Hdf5Layout, dataset: &str) -> Result<f64> {
    if let Some(rate) = config.rate_hz {
        return Ok(rate);
    }
    if let Some(problem) = &layout.rate_problem {
        return Err(AcquireError::Hdf5(problem.clone()));
    }
    layout
        .rate_attribute
        .as_ref()
        .map(|(_, rate)| *rate)
        .ok_or_else(|| {
            AcquireError::Config(format!(
                "no sample rate: dataset {dataset} has no sample_rate_hz, fs or rate \
                 attribute; give --rate HZ"
            ))
        })
}

/// The dataset named by `config` as the equivalent raw source (sample format, byte order
/// and channels from the dataset, the rate from `--rate` or the attribute), plus the open
/// dataset. A two-channel reader can build its own layout from the returned configuration.
///
/// # Errors
/// As [`Hdf5Dataset::open`]; no `--dataset`; no rate; `--channel` out of range.
pub fn raw_config(config: &SourceConfig, path: &Path) -> Result<(SourceConfig, Hdf5Dataset)> {
    let name = config.dataset.as_deref().ok_or_else(|| {
        AcquireError::Config(format!(
            "{} is an HDF5 file: say which dataset with --dataset /PATH",
            path.display()
        ))
    })?;
    let ds = Hdf5Dataset::open(path, name)?;
    let rate = sample_rate(config, &ds.layout, name)?;
    if config.channel >= ds.layout.channels {
        return Err(AcquireError::Config(format!(
            "--channel {} is out of range: dataset {name} has {} channel{} (0-based, so 0..={})",
            config.channel,
            ds.layout.channels,
            if ds.layout.channels == 1 { "" } else { "s" },
            ds.layout.channels - 1
        )));
    }
    let mut raw = config.clone();
    raw.sample_format = Some(ds.layout.sample_format);
    raw.endian = ds.layout.endian;
    raw.channels = ds.layout.channels;
    raw.rate_hz = Some(rate);
    Ok((raw, ds))
}

/// Opens the dataset named by `config` in the file at `path` as a [`RawReader`].
///
/// # Errors
/// As [`raw_config`].
pub fn open(config: &SourceConfig, path: &Path) -> Result<RawReader> {
    let (raw, ds) = raw_config(config, path)?;
    let format = RawFormat::from_config(&raw)?;
    let name = path.file_name().map_or_else(
        || path.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    let rate_from = match (&config.rate_hz, &ds.layout.rate_attribute) {
        (None, Some((attr, _))) => format!(" (rate from attribute {attr})"),
        _ => String::new(),
    };
    let description = format!(
        "{name} {} [{} × {}], HDF5, {}{rate_from}",
        ds.path_in_file,
        ds.layout.samples,
        ds.layout.channels,
        format.describe()
    );
    RawReader::with_description(Box::new(Hdf5Rows::new(ds)), format, description, false)
}

/// The rows of a dataset as a byte stream, read a window of whole chunks at a time.
pub(crate) struct Hdf5Rows {
    dataset: Dataset,
    rows: u64,
    row_bytes: u64,
    rows_per_window: u64,
    next_row: u64,
    window: Vec<u8>,
    pos: usize,
    name: String,
}

impl Hdf5Rows {
    fn new(ds: Hdf5Dataset) -> Self {
        let layout = &ds.layout;
        let row_bytes = (layout.channels as u64) * layout.sample_format.bytes() as u64;
        let aim = (WINDOW_BYTES / row_bytes.max(1)).max(1);
        let rows_per_window = match layout.chunk_rows {
            Some(chunk) => chunk.saturating_mul((aim / chunk).max(1)),
            None => aim,
        };
        Self {
            dataset: ds.dataset,
            rows: layout.samples,
            row_bytes,
            rows_per_window,
            next_row: 0,
            window: Vec::new(),
            pos: 0,
            name: ds.path_in_file,
        }
    }
}

impl ByteSource for Hdf5Rows {
    fn fill(&mut self, buf: &mut [u8], _deadline: Option<Instant>) -> Result<Fill> {
        if self.pos >= self.window.len() {
            if self.next_row >= self.rows {
                return Ok(Fill::End { truncated: false });
            }
            let count = self.rows_per_window.min(self.rows - self.next_row);
            let bytes = self
                .dataset
                .read_raw_rows(self.next_row, count)
                .map_err(|e| {
                    AcquireError::Hdf5(format!(
                        "cannot read rows {}..{} of {}: {e}",
                        self.next_row,
                        self.next_row + count,
                        self.name
                    ))
                })?;
            if bytes.len() as u64 != count * self.row_bytes {
                return Err(AcquireError::Hdf5(format!(
                    "rows {}..{} of {} gave {} bytes, not {} (damaged file?)",
                    self.next_row,
                    self.next_row + count,
                    self.name,
                    bytes.len(),
                    count * self.row_bytes
                )));
            }
            self.window = bytes;
            self.pos = 0;
            self.next_row += count;
        }
        let left = self.window.get(self.pos..).unwrap_or_default();
        let n = left.len().min(buf.len());
        let (Some(dest), Some(src)) = (buf.get_mut(..n), left.get(..n)) else {
            return Ok(Fill::End { truncated: false });
        };
        dest.copy_from_slice(src);
        self.pos += n;
        Ok(Fill::Bytes(n))
    }

    fn remaining_hint(&self) -> Option<u64> {
        let pending = (self.window.len() - self.pos.min(self.window.len())) as u64;
        Some(pending + (self.rows - self.next_row.min(self.rows)) * self.row_bytes)
    }
}
