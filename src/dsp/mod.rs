//! Spectral estimation: periodic (DFT-even) windows and their constants, the streaming Welch
//! averager, display units and band integrals, and throughput benchmarks.
//!
//! Output is always the **one-sided PSD in V²/Hz** (METHODS.md §1):
//! `PSD_k = 2 P_k / (f_s S₂)` for 0 < k < N/2 and `P_k / (f_s S₂)` at DC and (N even) Nyquist,
//! with `P_k` the average of `|Y_k|²` over segments, `S₂ = Σ w²`. Bins run from DC to Nyquist in
//! ascending frequency, `f_k = k f_s / N`. Computed in f64 with one real-FFT plan per size.
//!
//! - [`window`]: [`WindowKind`] samples, [`window::WindowConstants`] (S₁, S₂, NENBW, ENBW,
//!   −3 dB width, scallop loss, PSLL), overlap correlation, `K_eff`, bin correlation and the
//!   fit-error inflation factor.
//! - [`welch`]: [`Welch`] (push blocks of any size; linear, exponential, median, max-hold;
//!   restart; NaN/Inf segments skipped; optional worker threads) and the [`Spectrum`] it fills.
//! - [`units`]: the [`units::DensityUnit`] choices, band variance/rms, cumulative rms.
//! - [`cross`]: [`cross::CrossWelch`], cross-spectral density and coherence of two
//!   channels (scipy.signal.csd / coherence conventions, METHODS.md §10).
//! - [`median`](mod@median): numpy's median, in place.
//! - [`bench`](mod@bench): Welch throughput and the FFT-only floor, for `stillpoint bench`.

pub mod bench;
pub mod cross;
mod defaults;
mod error;
pub mod median;
mod ordered_pool;
pub mod units;
pub mod welch;
pub mod window;

pub use defaults::{DEFAULT_SEGMENT, default_segment};
pub use error::{DspError, Result};
pub use welch::{
    Averaging, Detrend, IntervalSpectrum, MEDIAN_MEMORY_LIMIT_BYTES, Spectrum, Welch, WelchConfig,
};
pub use window::{WindowConstants, WindowKind};
