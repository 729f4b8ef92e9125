//! Errors of the acquisition layer.

use std::io;

/// Result alias for acquisition.
pub type Result<T> = std::result::Result<T, AcquireError>;

/// Why a source could not be opened or read.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum AcquireError {
    /// Underlying I/O failure.
    #[error("{0}")]
    Io(#[from] io::Error),
    /// The file is not a readable WAV (message says why).
    #[error("not a usable WAV file: {0}")]
    Wav(String),
    /// Options that do not fit the source.
    #[error("{0}")]
    Config(String),
    /// Not available in this build or for this source.
    #[error("{0}")]
    Unsupported(String),
}
