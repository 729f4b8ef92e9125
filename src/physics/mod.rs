//! Physics of a mechanical mode read out as displacement (METHODS.md §2–§6): constants,
//! the damped-oscillator model, quantum references, occupancy, calibration, the mode fit,
//! sideband thermometry and the stray-resonance finder.
//!
//! Conventions (METHODS.md §0): ordinary frequency f in Hz, Ω = 2πf in rad/s, every linewidth
//! named by its unit (γ in Hz is the FWHM of the displacement PSD, Γ = 2πγ in rad/s), and every
//! spectral density single-sided in f (∫₀^∞ S df = variance).

pub mod calibration;
pub mod constants;
mod error;
pub mod fit;
mod kernel;
mod lsq;
mod narrow;
pub mod occupancy;
pub mod oscillator;
pub mod peaks;
pub mod quantum;
pub mod sideband;
pub mod window_stats;

pub use error::{PhysicsError, Result};

/// A value with its 1σ standard uncertainty (same unit as the value).
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize, serde::Deserialize)]
pub struct Estimate {
    /// Best estimate.
    pub value: f64,
    /// 1σ standard uncertainty (≥ 0).
    pub sigma: f64,
}

impl Estimate {
    /// A value with its 1σ.
    pub fn new(value: f64, sigma: f64) -> Self {
        Self { value, sigma }
    }

    /// Relative 1σ, σ/|value| (infinite for a zero value).
    pub fn relative(&self) -> f64 {
        if self.value == 0.0 {
            f64::INFINITY
        } else {
            self.sigma / self.value.abs()
        }
    }

    /// True when both the value and its σ are finite.
    pub fn is_finite(&self) -> bool {
        self.value.is_finite() && self.sigma.is_finite()
    }
}

/// Checks that `value` is finite and strictly positive; the error names `what`.
pub(crate) fn require_positive(what: &str, value: f64) -> Result<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(PhysicsError::Input(format!(
            "{what} must be a positive finite number, got {value}"
        )))
    }
}
