//! The one error type of the physics module.

/// Result alias for the physics module.
pub type Result<T> = std::result::Result<T, PhysicsError>;

/// Why a physics computation gave no answer.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PhysicsError {
    /// A physically impossible input (the message names the quantity and the value).
    #[error("{0}")]
    Input(String),
    /// The mode fit found no resonance it can stand behind (the message says why).
    #[error("no mode found in band: {0}")]
    NoMode(String),
    /// No calibration tone could be read (the message says why).
    #[error("calibration tone not found: {0}")]
    NoTone(String),
    /// The sideband pair could not be fitted (the message says why).
    #[error("sideband fit failed: {0}")]
    Sideband(String),
}
