//! Errors of the acquisition layer.

use std::io;
use std::path::PathBuf;

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
    /// The file is not a readable NumPy `.npy` array of a supported kind (message says why).
    #[error("not a usable .npy file: {0}")]
    Npy(String),
    /// The HDF5 file or dataset cannot be read (message says why).
    #[error("{0}")]
    Hdf5(String),
    /// Options that do not fit the source.
    #[error("{0}")]
    Config(String),
    /// Not available in this build or for this source.
    #[error("{0}")]
    Unsupported(String),
    /// A file could not be opened (missing, no permission, …).
    #[error("cannot open {}: {source}", path.display())]
    Open {
        /// The path as given.
        path: PathBuf,
        /// What the operating system said.
        source: io::Error,
    },
    /// A TCP source could not be reached (refused, unknown host, timed out).
    #[error("cannot connect to tcp://{address}: {source}")]
    Connect {
        /// `HOST:PORT` as given.
        address: String,
        /// What the operating system said.
        source: io::Error,
    },
    /// An open TCP connection failed before any sample arrived (reset by the peer, timed
    /// out by keepalive).
    #[error("the connection to tcp://{address} was lost before any sample arrived: {source}")]
    Lost {
        /// `HOST:PORT` as given.
        address: String,
        /// What the operating system said.
        source: io::Error,
    },
    /// The acquisition thread could not be started.
    #[error("cannot start the acquisition thread: {0}")]
    Thread(io::Error),
}
