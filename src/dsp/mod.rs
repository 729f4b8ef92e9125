//! Spectral estimation: periodic (DFT-even) windows and the streaming Welch averager.
//!
//! Output is always the **one-sided PSD in V²/Hz** (METHODS.md §1):
//! `PSD_k = 2 P_k / (f_s S₂)` for 0 < k < N/2 and `P_k / (f_s S₂)` at DC and (N even) Nyquist,
//! with `P_k` the average of `|Y_k|²` over segments, `S₂ = Σ w²`. Bins run from DC to Nyquist in
//! ascending frequency, `f_k = k f_s / N`. Computed in f64 with one real-FFT plan per size.

pub mod bench;
mod error;
pub mod units;
pub mod welch;
pub mod window;

pub use error::{DspError, Result};
pub use welch::{Averaging, Detrend, Spectrum, Welch, WelchConfig};
pub use window::WindowKind;
