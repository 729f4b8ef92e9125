//! Errors of the spectral estimator.

/// Result alias for spectral estimation.
pub type Result<T> = std::result::Result<T, DspError>;

/// Invalid Welch settings or not enough data.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum DspError {
    /// A setting is out of range (message names it and the allowed range).
    #[error("{0}")]
    Config(String),
    /// Fewer samples than one segment.
    #[error("not enough data: {samples} samples, but one segment needs {segment}")]
    TooShort {
        /// Samples available.
        samples: u64,
        /// Segment length.
        segment: usize,
    },
    /// Every segment was skipped (NaN/Inf or overflowing samples).
    #[error("no usable segment: all {skipped} segments held non-finite or overflowing samples")]
    NoUsableSegment {
        /// Segments skipped.
        skipped: usize,
    },
    /// A frequency band or tone frequency outside the spectrum, or an empty band.
    #[error("{0}")]
    Band(String),
}
