//! The streaming Welch averager (METHODS.md §1; Welch 1967; Heinzel et al. 2002 §9–§11).
//!
//! **Segments.** Samples are pushed in blocks of any size. Segment s covers samples
//! `sD … sD + N − 1` of the stream, with hop `D = N − round(rN)`; a stream of L samples gives
//! `K = ⌊(L − N)/D⌋ + 1` segments and the leftover samples wait for more data. Splitting the
//! stream into different block sizes gives bit-identical results.
//!
//! **Per segment:** the trend ([`Detrend`]: none, the mean, or the least-squares line over the
//! sample index, like `scipy.signal.detrend`) is removed *before* windowing, the segment is
//! multiplied by the periodic window `w_j` and transformed with a real FFT (f64, `realfft`, one
//! plan and all buffers made in [`Welch::new`]; nothing is allocated per segment except the
//! stored periodograms of a median average):
//! `Y_k = Σ_j w_j (x_j − trend_j) e^{−2πi jk/N}`, k = 0 … ⌊N/2⌋. A segment holding any NaN or
//! ±Inf sample is skipped and counted ([`Welch::skipped_segments`]).
//!
//! **Averaging** ([`Averaging`]) combines the powers `|Y_k|²` in f64 — never amplitudes or dB.
//!
//! **Threads.** [`Welch::set_threads`] starts persistent worker threads: each group of G
//! consecutive segment positions (G ≈ 2¹⁹/N, 1 … 64, fixed by N alone) is copied to a worker,
//! and the results are added in stream order on the caller's thread. A linear average sums
//! each group's periodograms first (from zero, in order) and then adds the group sums in
//! order — on one thread too — so the result is bit-identical for any thread count and any
//! block sizes. With workers, [`Welch::push`] returns before its segments are averaged;
//! [`Welch::flush`] waits for them.
//!
//! **Intervals.** [`Welch::set_intervals`] cuts the stream into consecutive intervals of L
//! samples (interval i covers stream samples iL … (i+1)L − 1) and keeps, beside the running
//! estimate, a *linear* sum of the periodograms of the segments that lie wholly inside the
//! interval in progress (segments across a boundary count only in the running estimate). Each
//! closed interval becomes an [`IntervalSpectrum`] ([`Welch::take_intervals`]): the mean of
//! those periodograms, normalised like the running estimate. The same periodograms feed both,
//! never a second transform: with a linear running average an interval's sum is the
//! difference of the running sum after its last segment and before its first (two copies of
//! the bins per interval); with the other averages each periodogram is also added to the
//! interval's sum in the same pass. When L is a
//! whole number of hops the interval holds exactly the segments `stillpoint track` transforms
//! for it (it restarts the segment grid at each boundary). Intervals run on the caller's
//! thread only (no worker threads while they are on).
//!
//! **Memory.** A median average keeps its periodograms: the last `max_averages` of them, or,
//! with no limit, as many as fit in [`MEDIAN_MEMORY_LIMIT_BYTES`] (then it becomes the median
//! of the most recent ones and [`Welch::median_is_capped`] says so). Nothing else grows.
//!
//! **Limits.** A segment whose energy `Σ x²` is so large that its power could overflow f64
//! (samples beyond ~1e140 V) is skipped and counted like a non-finite one, so the PSD is
//! always finite.
//!
//! **Normalisation (one-sided PSD, V²/Hz).** `PSD_k = 2 P_k / (f_s S₂)` for 0 < k < N/2 and
//! `P_k / (f_s S₂)` at k = 0 and, for even N, at k = N/2 (no mirror partner), where P_k is the
//! averaged `|Y_k|²` and `S₂ = Σ w_j²`. White noise of variance σ² gives `2σ²/f_s` and
//! `Σ_k PSD_k Δf ≈ σ²`. This is what `scipy.signal.welch(..., scaling='density',
//! return_onesided=True)` returns for the same window (tested to 1e-9 relative).
//!
//! **Bins** run from DC to Nyquist in ascending frequency, `f_k = k f_s / N`, ⌊N/2⌋ + 1 of them.
//! The [`Spectrum`] also carries `Δf = f_s/N`, `ENBW = f_s S₂/S₁²` and `K_eff`.

mod pool;

use std::sync::Arc;

use realfft::num_complex::Complex;
use realfft::{RealFftPlanner, RealToComplex};

use pool::Pool;

use super::window::{k_eff_from_rho2, overlap_correlations_squared, sums};
use super::{DspError, Result, WindowKind};

/// Trend removed from each segment before windowing.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Detrend {
    /// Nothing removed.
    None,
    /// Segment mean removed (the default).
    #[default]
    Mean,
    /// Least-squares straight line removed.
    Linear,
}

impl Detrend {
    /// Command-line spelling.
    pub fn name(self) -> &'static str {
        match self {
            Self::None => "none",
            Self::Mean => "mean",
            Self::Linear => "linear",
        }
    }

    /// Parses the command-line spelling.
    pub fn parse(text: &str) -> Option<Self> {
        match text {
            "none" => Some(Self::None),
            "mean" => Some(Self::Mean),
            "linear" => Some(Self::Linear),
            _ => None,
        }
    }
}

/// How segment periodograms are combined.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case", tag = "kind")]
pub enum Averaging {
    /// Arithmetic mean of all accepted segments (up to `WelchConfig::max_averages`).
    #[default]
    Linear,
    /// Exponential running average: after the first `time_constant_segments` segments
    /// (which are averaged linearly) each new periodogram enters with weight 1/τ.
    Exponential {
        /// τ in segments (≥ 1).
        time_constant_segments: f64,
    },
    /// Median over segments, divided by scipy's median bias (`scipy.signal.welch(...,
    /// average='median')`); keeps every periodogram (or the last `max_averages`).
    Median,
    /// Bin-wise maximum over segments (transients); not a PSD estimate of stationary noise.
    MaxHold,
}

/// Settings of the averager.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct WelchConfig {
    /// Sample rate f_s.
    pub sample_rate_hz: f64,
    /// Segment length N in samples (≥ 2).
    pub segment: usize,
    /// Overlap fraction r, 0 ≤ r < 1; hop D = N − round(rN) (≥ 1).
    pub overlap: f64,
    /// Window.
    pub window: WindowKind,
    /// Detrending of each segment.
    pub detrend: Detrend,
    /// Combination of segments.
    pub averaging: Averaging,
    /// Use at most this many segments (linear: stop accepting; median: sliding window of the
    /// last K; exponential/max-hold: ignored). `None` = all.
    pub max_averages: Option<usize>,
}

impl WelchConfig {
    /// Contract defaults: Hann, 50 % overlap, mean detrend, linear average of all segments.
    pub fn new(sample_rate_hz: f64, segment: usize) -> Self {
        Self {
            sample_rate_hz,
            segment,
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: Detrend::Mean,
            averaging: Averaging::Linear,
            max_averages: None,
        }
    }

    /// Hop D = N − round(rN) in samples.
    pub fn hop(&self) -> usize {
        let overlap_samples = (self.overlap * self.segment as f64).round() as usize;
        self.segment.saturating_sub(overlap_samples).max(1)
    }

    /// Checks every setting.
    ///
    /// # Errors
    /// [`DspError::Config`] naming the bad setting.
    pub fn validate(&self) -> Result<()> {
        if !(self.sample_rate_hz.is_finite() && self.sample_rate_hz > 0.0) {
            return Err(DspError::Config(format!(
                "sample rate must be a positive number of Hz, got {}",
                self.sample_rate_hz
            )));
        }
        if self.segment < 2 {
            return Err(DspError::Config(format!(
                "segment must be at least 2 samples, got {}",
                self.segment
            )));
        }
        if !(self.overlap.is_finite() && (0.0..1.0).contains(&self.overlap)) {
            return Err(DspError::Config(format!(
                "overlap must be a fraction with 0 <= overlap < 1, got {}",
                self.overlap
            )));
        }
        if let Averaging::Exponential {
            time_constant_segments,
        } = self.averaging
            && !(time_constant_segments.is_finite() && time_constant_segments >= 1.0)
        {
            return Err(DspError::Config(format!(
                "exponential time constant must be at least 1 segment, got {time_constant_segments}"
            )));
        }
        if self.max_averages == Some(0) {
            return Err(DspError::Config(
                "number of averages must be at least 1".to_string(),
            ));
        }
        if self.segment > 1 << 28 {
            return Err(DspError::Config(format!(
                "segment must be at most 2^28 samples, got {}",
                self.segment
            )));
        }
        Ok(())
    }
}

/// A one-sided PSD with everything needed to interpret and reproduce it.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Spectrum {
    /// Sample rate f_s.
    pub sample_rate_hz: f64,
    /// Segment length N.
    pub segment: usize,
    /// Overlap fraction.
    pub overlap: f64,
    /// Window.
    pub window: WindowKind,
    /// Detrending.
    pub detrend: Detrend,
    /// Averaging mode.
    pub averaging: Averaging,
    /// Segments combined (for exponential: segments seen since restart).
    pub averages: usize,
    /// Effective number of independent averages K_eff (METHODS.md §1; overlap-corrected):
    /// exact `K/[1 + 2Σ(1 − l/K)ρ_l²]` for a linear average of K consecutive segments; for the
    /// exponential average `1/Σ_{s,t} a_s a_t ρ²_{|s−t|}` over its actual segment weights a_s;
    /// for median and max-hold the linear value for the same K (their true variance differs:
    /// the median's is larger by about π/2 for large K, max-hold is no PSD estimate of noise).
    pub k_eff: f64,
    /// Bin spacing Δf = f_s / N.
    pub resolution_hz: f64,
    /// Equivalent noise bandwidth f_s S₂ / S₁².
    pub enbw_hz: f64,
    /// One-sided PSD, V²/Hz, bins 0 ..= N/2.
    pub psd_v2_per_hz: Vec<f64>,
}

impl Spectrum {
    /// Number of bins (⌊N/2⌋ + 1).
    pub fn len(&self) -> usize {
        self.psd_v2_per_hz.len()
    }

    /// True if there are no bins.
    pub fn is_empty(&self) -> bool {
        self.psd_v2_per_hz.is_empty()
    }

    /// Frequency of bin k.
    pub fn frequency_hz(&self, k: usize) -> f64 {
        k as f64 * self.resolution_hz
    }

    /// Normalised equivalent noise bandwidth `ENBW/Δf = N S₂/S₁²` (bins).
    pub fn nenbw_bins(&self) -> f64 {
        if self.resolution_hz > 0.0 {
            self.enbw_hz / self.resolution_hz
        } else {
            0.0
        }
    }

    /// Power spectrum `PS_k = PSD_k × ENBW` (V_rms²): the rms² of a tone centred on bin k
    /// (METHODS.md §1; off-centre tones read low by the window's scallop loss — use
    /// [`crate::physics::calibration::read_tone`] instead). Never use it for noise.
    pub fn power_spectrum_v2(&self) -> Vec<f64> {
        self.psd_v2_per_hz
            .iter()
            .map(|p| p * self.enbw_hz)
            .collect()
    }

    /// All bin frequencies.
    pub fn frequencies_hz(&self) -> Vec<f64> {
        (0..self.len()).map(|k| self.frequency_hz(k)).collect()
    }

    /// Nearest bin to a frequency (clamped to the spectrum).
    pub fn bin_of(&self, frequency_hz: f64) -> usize {
        let k = (frequency_hz / self.resolution_hz).round();
        if k.is_finite() && k > 0.0 {
            (k as usize).min(self.len().saturating_sub(1))
        } else {
            0
        }
    }
}

/// Streaming Welch averager: push samples in any block sizes, read the current estimate.
///
/// ```
/// use stillpoint::dsp::{Welch, WelchConfig};
/// let mut welch = Welch::new(WelchConfig::new(1000.0, 256))?;
/// let samples: Vec<f64> = (0..4096).map(|i| ((i * 7919) % 101) as f64 / 100.0 - 0.5).collect();
/// welch.push(&samples[..1000]);
/// welch.push(&samples[1000..]);
/// let spectrum = welch.spectrum().expect("at least one segment");
/// assert_eq!(spectrum.len(), 129);
/// assert_eq!(spectrum.averages, (4096 - 256) / 128 + 1);
/// # Ok::<(), stillpoint::dsp::DspError>(())
/// ```
pub struct Welch {
    config: WelchConfig,
    engine: Engine,
    /// Worker threads (none on one thread).
    pool: Option<Pool>,
    /// Samples from the start of the next segment not yet transformed on.
    pending: Vec<f64>,
    /// Stream index one past the last sample pushed (see [`Welch::set_intervals`]).
    pushed: u64,
}

impl std::fmt::Debug for Welch {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Welch")
            .field("config", &self.config)
            .field("segments", &self.engine.acc.segments)
            .field("skipped_segments", &self.engine.acc.skipped)
            .field("threads", &self.threads())
            .field("pending_samples", &self.pending.len())
            .finish_non_exhaustive()
    }
}

/// Turns one segment into its periodogram |Y_k|² (one per thread; also used by
/// [`super::cross`] for each channel).
pub(crate) struct Transformer {
    detrend: Detrend,
    /// Largest segment energy Σx² whose periodogram, summed over 10¹⁰ segments, stays
    /// finite: |Y_k|² ≤ N max w² Σx² (Cauchy–Schwarz).
    energy_limit: f64,
    window: Arc<[f64]>,
    fft: Arc<dyn RealToComplex<f64>>,
    fft_in: Vec<f64>,
    fft_out: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
}

impl Transformer {
    pub(crate) fn new(
        detrend: Detrend,
        window: Arc<[f64]>,
        fft: Arc<dyn RealToComplex<f64>>,
    ) -> Self {
        let fft_in = fft.make_input_vec();
        let fft_out = fft.make_output_vec();
        let scratch = fft.make_scratch_vec();
        let w_max = window
            .iter()
            .fold(0.0f64, |m, w| m.max(w.abs()))
            .max(1e-300);
        let energy_limit = f64::MAX / (1e10 * window.len().max(1) as f64 * w_max * w_max);
        Self {
            detrend,
            energy_limit,
            window,
            fft,
            fft_in,
            fft_out,
            scratch,
        }
    }

    /// Same plan and window, own buffers.
    pub(crate) fn fork(&self) -> Self {
        Self::new(
            self.detrend,
            Arc::clone(&self.window),
            Arc::clone(&self.fft),
        )
    }

    /// Loads `head ++ tail` (N samples), detrends, windows and transforms it into `fft_out`.
    /// Returns false (and leaves `fft_out` unspecified) if the segment is not finite.
    pub(crate) fn transform(&mut self, head: &[f64], tail: &[f64]) -> bool {
        if head.len() + tail.len() != self.fft_in.len() {
            return false;
        }
        if !detrend_and_window(
            head,
            tail,
            &self.window,
            self.detrend,
            self.energy_limit,
            &mut self.fft_in,
        ) {
            return false;
        }
        // Lengths are fixed by the plan, so this cannot fail.
        self.fft
            .process_with_scratch(&mut self.fft_in, &mut self.fft_out, &mut self.scratch)
            .is_ok()
    }

    /// The transform of the last accepted segment, Y_k for k = 0 … ⌊N/2⌋.
    pub(crate) fn output(&self) -> &[Complex<f64>] {
        &self.fft_out
    }

    fn powers(&self) -> impl Iterator<Item = f64> + Clone + '_ {
        self.fft_out.iter().map(|y| y.re * y.re + y.im * y.im)
    }
}

/// Bytes of stored periodograms a median average with no `max_averages` may hold before it
/// becomes a median of the most recent rows only ([`Welch::median_is_capped`]).
pub const MEDIAN_MEMORY_LIMIT_BYTES: usize = 256 << 20;

/// Segments per group for a segment length N: about 2¹⁹ samples of FFT input (1 … 64).
/// A linear average sums the periodograms of each group of consecutive segment positions
/// first and adds the group sums in order, so the bits do not depend on which thread
/// transformed a group.
fn group_len(segment: usize) -> usize {
    ((1usize << 19) / segment.max(1)).clamp(1, 64)
}

/// Combines periodograms according to the averaging mode.
struct Accumulator {
    averaging: Averaging,
    max_averages: Option<usize>,
    /// ρ_l² for l = 1 … while segments overlap.
    rho2: Vec<f64>,
    /// Linear: Σ|Y_k|² over the completed groups; exponential: running mean of |Y_k|²;
    /// max-hold: max |Y_k|².
    acc: Vec<f64>,
    /// Linear: Σ|Y_k|² of the group in progress (positions `0 .. group_pos`).
    group: Vec<f64>,
    /// Segment positions (accepted or skipped) per group, and the position in the current one.
    group_len: usize,
    group_pos: usize,
    /// Median: stored |Y_k|² rows (bins each), a ring once `median_cap` rows exist.
    history: Vec<f64>,
    history_rows: usize,
    history_next: usize,
    /// Median: most rows kept (`max_averages`, or what fits in the memory limit).
    median_cap: usize,
    /// Median: rows were overwritten although no `max_averages` was asked for.
    median_capped: bool,
    /// Exponential: weights of the most recent segments (newest first) and Σ a_s a_t ρ².
    ema_recent: Vec<f64>,
    ema_variance: f64,
    segments: usize,
    skipped: usize,
}

impl Accumulator {
    fn new(config: &WelchConfig, rho2: Vec<f64>) -> Self {
        let bins = config.segment / 2 + 1;
        let linear = matches!(config.averaging, Averaging::Linear);
        let memory_rows = (MEDIAN_MEMORY_LIMIT_BYTES / (bins * 8).max(1)).max(1);
        Self {
            averaging: config.averaging,
            max_averages: config.max_averages,
            ema_recent: vec![0.0; rho2.len()],
            rho2,
            acc: vec![0.0; bins],
            group: if linear { vec![0.0; bins] } else { Vec::new() },
            group_len: group_len(config.segment),
            group_pos: 0,
            history: Vec::new(),
            history_rows: 0,
            history_next: 0,
            median_cap: config.max_averages.unwrap_or(memory_rows).max(1),
            median_capped: false,
            ema_variance: 0.0,
            segments: 0,
            skipped: 0,
        }
    }

    fn bins(&self) -> usize {
        self.acc.len()
    }

    fn is_complete(&self) -> bool {
        matches!(self.averaging, Averaging::Linear)
            && self.max_averages.is_some_and(|k| self.segments >= k)
    }

    /// Segments a linear average can still take (usize::MAX if unlimited).
    fn room(&self) -> usize {
        match (self.averaging, self.max_averages) {
            (Averaging::Linear, Some(k)) => k.saturating_sub(self.segments),
            _ => usize::MAX,
        }
    }

    fn restart(&mut self) {
        self.acc.iter_mut().for_each(|a| *a = 0.0);
        self.group.iter_mut().for_each(|a| *a = 0.0);
        self.group_pos = 0;
        self.history.clear();
        self.history_rows = 0;
        self.history_next = 0;
        self.median_capped = false;
        self.ema_recent.iter_mut().for_each(|a| *a = 0.0);
        self.ema_variance = 0.0;
        self.segments = 0;
        self.skipped = 0;
    }

    /// One segment position done: closes the group when it is full.
    fn advance_position(&mut self) {
        self.group_pos += 1;
        if self.group_pos >= self.group_len {
            self.group_pos = 0;
            if matches!(self.averaging, Averaging::Linear) {
                for (a, g) in self.acc.iter_mut().zip(self.group.iter_mut()) {
                    *a += *g;
                    *g = 0.0;
                }
            }
        }
    }

    /// A segment that was not accepted (NaN/Inf or too large).
    fn skip(&mut self) {
        self.skipped += 1;
        self.advance_position();
    }

    /// Adds a whole group summed elsewhere (`sum` = Σ|Y_k|² of its accepted segments, in
    /// position order, starting from zero): the same bits as adding its segments one by one.
    /// Linear averaging at a group boundary only.
    fn add_group(&mut self, sum: &[f64], accepted: usize, skipped: usize) {
        debug_assert!(self.group_pos == 0 && matches!(self.averaging, Averaging::Linear));
        for (a, s) in self.acc.iter_mut().zip(sum) {
            *a += *s;
        }
        self.segments += accepted;
        self.skipped += skipped;
    }

    /// Adds one periodogram |Y_k|², k = 0 … ⌊N/2⌋ (and, when `also` is given, to it too:
    /// an interval sum, in the same pass over the bins for a linear average).
    fn add(&mut self, powers: impl Iterator<Item = f64> + Clone, also: Option<&mut [f64]>) {
        let also = match also {
            Some(also) if !matches!(self.averaging, Averaging::Linear) => {
                for (a, p) in also.iter_mut().zip(powers.clone()) {
                    *a += p;
                }
                None
            }
            other => other,
        };
        match self.averaging {
            Averaging::Linear => match also {
                Some(also) => {
                    for ((g, a), p) in self.group.iter_mut().zip(also.iter_mut()).zip(powers) {
                        *g += p;
                        *a += p;
                    }
                }
                None => {
                    for (g, p) in self.group.iter_mut().zip(powers) {
                        *g += p;
                    }
                }
            },
            Averaging::Exponential {
                time_constant_segments,
            } => {
                let count = (self.segments + 1) as f64;
                let alpha = 1.0 / count.min(time_constant_segments.max(1.0));
                for (a, p) in self.acc.iter_mut().zip(powers) {
                    *a += (p - *a) * alpha;
                }
                // Var(E_n)/S² = (1−α)² Var(E_{n−1}) + α² + 2α(1−α) Σ_l a_{n−l} ρ_l².
                let cross: f64 = self
                    .ema_recent
                    .iter()
                    .zip(&self.rho2)
                    .map(|(w, r2)| w * r2)
                    .sum();
                let keep = 1.0 - alpha;
                self.ema_variance =
                    keep * keep * self.ema_variance + alpha * alpha + 2.0 * alpha * keep * cross;
                self.ema_recent.iter_mut().for_each(|w| *w *= keep);
                if !self.ema_recent.is_empty() {
                    self.ema_recent.rotate_right(1);
                    if let Some(first) = self.ema_recent.first_mut() {
                        *first = alpha;
                    }
                }
            }
            Averaging::MaxHold => {
                let first = self.segments == 0;
                for (a, p) in self.acc.iter_mut().zip(powers) {
                    *a = if first { p } else { a.max(p) };
                }
            }
            Averaging::Median => {
                let bins = self.bins();
                let cap = self.median_cap;
                let row = if self.history_rows >= cap {
                    let r = self.history_next;
                    self.history_next = (r + 1) % cap;
                    if self.max_averages.is_none() {
                        self.median_capped = true;
                    }
                    r
                } else {
                    self.history.resize((self.history_rows + 1) * bins, 0.0);
                    self.history_rows += 1;
                    self.history_rows - 1
                };
                if let Some(dst) = self.history.get_mut(row * bins..(row + 1) * bins) {
                    for (d, p) in dst.iter_mut().zip(powers) {
                        *d = p;
                    }
                }
            }
        }
        self.segments += 1;
        self.advance_position();
    }

    /// Number of periodograms the current estimate combines.
    fn averages(&self) -> usize {
        match self.averaging {
            Averaging::Median => self.history_rows,
            _ => self.segments,
        }
    }

    fn k_eff(&self) -> f64 {
        match self.averaging {
            Averaging::Exponential { .. } if self.ema_variance > 0.0 => 1.0 / self.ema_variance,
            _ => k_eff_from_rho2(&self.rho2, self.averages()),
        }
    }

    /// Averaged |Y_k|² (P_k of METHODS.md §1) into `out`.
    fn mean_power_into(&self, out: &mut [f64]) {
        match self.averaging {
            Averaging::Linear => {
                let k = self.segments.max(1) as f64;
                for ((o, a), g) in out.iter_mut().zip(&self.acc).zip(&self.group) {
                    *o = (a + g) / k;
                }
            }
            Averaging::Exponential { .. } | Averaging::MaxHold => {
                out.copy_from_slice(&self.acc);
            }
            Averaging::Median => {
                let bins = self.bins();
                let rows = self.history_rows;
                let bias = median_bias(rows);
                let mut column = vec![0.0; rows];
                for (k, o) in out.iter_mut().enumerate() {
                    for (r, c) in column.iter_mut().enumerate() {
                        *c = self.history.get(r * bins + k).copied().unwrap_or(0.0);
                    }
                    *o = super::median::median(&mut column).unwrap_or(0.0) / bias;
                }
            }
        }
    }
}

/// The spectrum of one interval of the stream ([`Welch::set_intervals`]).
#[derive(Debug, Clone, PartialEq)]
pub struct IntervalSpectrum {
    /// First sample of the interval (stream index).
    pub start: u64,
    /// One past its last sample (for the interval still in progress when it was closed by
    /// [`Welch::finish_interval`], one past the last sample pushed).
    pub end: u64,
    /// Linear mean of the periodograms of the segments wholly inside the interval.
    pub spectrum: Spectrum,
}

/// Closed intervals kept until taken; older ones are dropped beyond this many.
const INTERVALS_KEPT: usize = 64;

/// An interval closed but not yet normalised.
struct RawInterval {
    start: u64,
    end: u64,
    sum: Vec<f64>,
    count: usize,
}

/// The interval sums of [`Welch::set_intervals`]. With a linear running average an
/// interval's sum is the difference of the running sum after its last segment and before its
/// first (two copies of the bins per interval, nothing per segment); with the other averages
/// each of its periodograms is also added to `sum` (one more addition per bin and segment).
struct Intervals {
    /// Samples per interval L.
    len: u64,
    /// The interval in progress covers `index·L … (index+1)·L − 1`.
    index: u64,
    /// The running average is linear: sums by difference.
    linear: bool,
    /// Linear: the part of the interval's sum carried over a restart of the running average;
    /// otherwise Σ|Y_k|² of its segments so far.
    sum: Vec<f64>,
    /// Linear: the running sum before the interval's first segment (`based`).
    base: Vec<f64>,
    based: bool,
    count: usize,
    done: std::collections::VecDeque<RawInterval>,
}

/// The running linear sum Σ|Y_k|² of `acc`, bin `k`.
fn running_sum(acc: &Accumulator) -> impl Iterator<Item = f64> + '_ {
    acc.acc.iter().zip(&acc.group).map(|(a, g)| a + g)
}

impl Intervals {
    fn new(len: u64, index: u64, bins: usize, linear: bool) -> Self {
        Self {
            len,
            index,
            linear,
            sum: vec![0.0; bins],
            base: if linear { vec![0.0; bins] } else { Vec::new() },
            based: false,
            count: 0,
            done: std::collections::VecDeque::new(),
        }
    }

    fn begin(&self) -> u64 {
        self.index.saturating_mul(self.len)
    }

    fn end(&self) -> u64 {
        self.index.saturating_add(1).saturating_mul(self.len)
    }

    /// Closes the interval in progress (kept if it holds a segment) and makes `index` current.
    fn close(&mut self, end: u64, index: u64, acc: &Accumulator) {
        if self.count > 0 {
            if self.done.len() == INTERVALS_KEPT {
                self.done.pop_front();
            }
            let bins = self.sum.len();
            let mut sum = std::mem::replace(&mut self.sum, vec![0.0; bins]);
            if self.linear {
                for ((s, r), b) in sum.iter_mut().zip(running_sum(acc)).zip(&self.base) {
                    *s += r - b;
                }
            }
            self.done.push_back(RawInterval {
                start: self.begin(),
                end,
                sum,
                count: self.count,
            });
        }
        self.count = 0;
        self.based = false;
        self.index = index;
    }

    /// A segment ending at `seg_end` (one past its last sample) is next: every interval
    /// that ends before it has all its segments.
    fn close_before(&mut self, seg_end: u64, acc: &Accumulator) {
        if seg_end > self.end() {
            self.close(self.end(), (seg_end - 1) / self.len.max(1), acc);
        }
    }

    /// The stream has reached `pushed`: the interval in progress is complete if it ends there.
    fn close_through(&mut self, pushed: u64, acc: &Accumulator) {
        if pushed >= self.end() {
            self.close(self.end(), pushed / self.len.max(1), acc);
        }
    }

    /// A segment starting at `start` is about to be added to `acc`: counted if it lies in the
    /// interval in progress; returns the sum it must also be added to (not linear).
    fn take_segment(&mut self, start: u64, acc: &Accumulator) -> Option<&mut [f64]> {
        if start < self.begin() {
            return None;
        }
        self.count += 1;
        if self.linear {
            if !self.based {
                for (b, r) in self.base.iter_mut().zip(running_sum(acc)) {
                    *b = r;
                }
                self.based = true;
            }
            None
        } else {
            Some(&mut self.sum)
        }
    }

    /// The running average is about to restart: carry what the interval holds so far.
    fn restarting(&mut self, acc: &Accumulator) {
        if self.linear && self.based {
            for ((s, r), b) in self
                .sum
                .iter_mut()
                .zip(running_sum(acc))
                .zip(&mut self.base)
            {
                *s += r - *b;
                *b = 0.0;
            }
        }
    }
}

/// The per-segment machinery of the caller's thread.
struct Engine {
    n: usize,
    s1: f64,
    s2: f64,
    main: Transformer,
    acc: Accumulator,
    /// Interval sums ([`Welch::set_intervals`]).
    intervals: Option<Intervals>,
}

impl Engine {
    fn new(config: &WelchConfig) -> Self {
        let n = config.segment;
        let window = config.window.samples(n);
        let (s1, s2) = sums(&window);
        let rho2 = overlap_correlations_squared(&window, config.hop());
        let mut planner = RealFftPlanner::<f64>::new();
        let fft = planner.plan_fft_forward(n);
        Self {
            n,
            s1,
            s2,
            main: Transformer::new(config.detrend, window.into(), fft),
            acc: Accumulator::new(config, rho2),
            intervals: None,
        }
    }

    /// Processes the segment `head ++ tail`, which starts at stream sample `start`, on the
    /// caller's thread. True if accepted.
    fn process(&mut self, head: &[f64], tail: &[f64], start: u64) -> bool {
        if let Some(iv) = self.intervals.as_mut() {
            iv.close_before(start.saturating_add(self.n as u64), &self.acc);
        }
        if self.main.transform(head, tail) {
            let also = match self.intervals.as_mut() {
                Some(iv) => iv.take_segment(start, &self.acc),
                None => None,
            };
            self.acc.add(self.main.powers(), also);
            true
        } else {
            self.acc.skip();
            false
        }
    }
}

/// Sums of one segment, accumulated in four lanes by sample index (sample j goes to lane
/// j mod 4, each lane in index order), so any split of the segment into pieces gives the
/// same bits.
#[derive(Default)]
struct SegmentSums {
    sum: [f64; 4],
    moment: [f64; 4],
    /// Σ x²: NaN or +Inf as soon as a sample is NaN, ±Inf or too large to square (no branch).
    energy: [f64; 4],
}

impl SegmentSums {
    /// Adds the samples `x`, which start at segment index `offset`.
    fn add(&mut self, x: &[f64], offset: usize, centre: f64, linear: bool) {
        let lead = ((4 - offset % 4) % 4).min(x.len());
        let (prefix, body) = x.split_at(lead);
        for (i, &v) in prefix.iter().enumerate() {
            self.add_one(offset + i, v, centre, linear);
        }
        let base = offset + lead;
        let mut chunks = body.chunks_exact(4);
        if linear {
            let mut j = base as f64 - centre;
            for c in &mut chunks {
                let lanes = self
                    .sum
                    .iter_mut()
                    .zip(&mut self.energy)
                    .zip(&mut self.moment)
                    .zip(c)
                    .zip([0.0, 1.0, 2.0, 3.0]);
                for ((((s, e), m), &v), u) in lanes {
                    *s += v;
                    *e += v * v;
                    *m += (j + u) * v;
                }
                j += 4.0;
            }
        } else {
            for c in &mut chunks {
                for ((s, e), &v) in self.sum.iter_mut().zip(&mut self.energy).zip(c) {
                    *s += v;
                    *e += v * v;
                }
            }
        }
        let tail_start = base + body.len() - chunks.remainder().len();
        for (i, &v) in chunks.remainder().iter().enumerate() {
            self.add_one(tail_start + i, v, centre, linear);
        }
    }

    fn add_one(&mut self, j: usize, v: f64, centre: f64, linear: bool) {
        let lane = j % 4;
        if let (Some(s), Some(p), Some(m)) = (
            self.sum.get_mut(lane),
            self.energy.get_mut(lane),
            self.moment.get_mut(lane),
        ) {
            *s += v;
            *p += v * v;
            if linear {
                *m += (j as f64 - centre) * v;
            }
        }
    }

    fn total([a, b, c, d]: [f64; 4]) -> f64 {
        (a + b) + (c + d)
    }
}

/// Writes `(x_j − mean − slope·(j − centre))·w_j` for the samples `src` starting at segment
/// index `offset` into `dst` (same length), with the trend terms as `detrend` asks.
fn window_piece(
    dst: &mut [f64],
    src: &[f64],
    window: &[f64],
    offset: usize,
    trend: (f64, f64, f64),
    detrend: Detrend,
) {
    let (mean, slope, centre) = trend;
    let w = window.get(offset..offset + src.len()).unwrap_or(&[]);
    match detrend {
        Detrend::None => {
            for ((d, &x), &w) in dst.iter_mut().zip(src).zip(w) {
                *d = x * w;
            }
        }
        Detrend::Mean => {
            for ((d, &x), &w) in dst.iter_mut().zip(src).zip(w) {
                *d = (x - mean) * w;
            }
        }
        Detrend::Linear => {
            let mut u = offset as f64 - centre;
            for ((d, &x), &w) in dst.iter_mut().zip(src).zip(w) {
                *d = (x - mean - slope * u) * w;
                u += 1.0;
            }
        }
    }
}

/// Detrends the segment `head ++ tail`, multiplies it by the window and writes it into
/// `out` (N values). Returns false if the segment holds a non-finite sample, or if its energy
/// `Σ x²` exceeds `energy_limit` (its power could overflow f64).
fn detrend_and_window(
    head: &[f64],
    tail: &[f64],
    window: &[f64],
    detrend: Detrend,
    energy_limit: f64,
    out: &mut [f64],
) -> bool {
    let n = out.len();
    let nf = n as f64;
    let centre = 0.5 * (nf - 1.0);
    let linear = matches!(detrend, Detrend::Linear);
    let mut sums = SegmentSums::default();
    sums.add(head, 0, centre, linear);
    sums.add(tail, head.len(), centre, linear);
    let energy = SegmentSums::total(sums.energy);
    if !(energy.is_finite() && energy <= energy_limit) {
        return false;
    }
    let mean = SegmentSums::total(sums.sum) / nf;
    // Least-squares line over u_j = j − (N−1)/2: slope Σu x / Σu², Σu² = N(N²−1)/12.
    let su2 = nf * (nf * nf - 1.0) / 12.0;
    let slope = if linear && su2 > 0.0 {
        SegmentSums::total(sums.moment) / su2
    } else {
        0.0
    };
    let (out_head, out_tail) = out.split_at_mut(head.len().min(n));
    window_piece(out_head, head, window, 0, (mean, slope, centre), detrend);
    window_piece(
        out_tail,
        tail,
        window,
        head.len(),
        (mean, slope, centre),
        detrend,
    );
    true
}

/// scipy's median bias for `n` periodograms (`scipy.signal._spectral_py._median_bias`):
/// `1 + Σ_{i=1}^{(n−1)//2} (1/(2i+1) − 1/(2i))`, the ratio of the median to the mean of χ²₂.
pub fn median_bias(n: usize) -> f64 {
    let m = n.saturating_sub(1) / 2;
    let tail: f64 = (1..=m)
        .map(|i| {
            let two_i = 2.0 * i as f64;
            1.0 / (two_i + 1.0) - 1.0 / two_i
        })
        .sum();
    1.0 + tail
}

impl Welch {
    /// Creates an averager (plans the FFT, allocates all buffers once).
    ///
    /// # Errors
    /// [`DspError::Config`] if `config` is invalid.
    pub fn new(config: WelchConfig) -> Result<Self> {
        config.validate()?;
        let engine = Engine::new(&config);
        let pending = Vec::with_capacity(config.segment);
        Ok(Self {
            config,
            engine,
            pool: None,
            pending,
            pushed: 0,
        })
    }

    /// Cuts the stream into intervals of `len` samples and keeps each interval's own
    /// spectrum beside the running estimate (see the module notes); `position` is the stream
    /// index of the next sample pushed (intervals are counted from stream index 0, so an
    /// averager made in the middle of a stream keeps the same grid). Stops any worker
    /// threads: intervals run on the caller's thread. `len` 0 switches intervals off.
    pub fn set_intervals(&mut self, len: u64, position: u64) {
        self.set_threads(1);
        self.pushed = position.saturating_add(self.pending.len() as u64);
        let linear = matches!(self.config.averaging, Averaging::Linear);
        self.engine.intervals =
            (len > 0).then(|| Intervals::new(len, position / len, self.bins(), linear));
    }

    /// Stream index one past the last sample pushed.
    pub fn position(&self) -> u64 {
        self.pushed
    }

    /// The intervals closed since the last call, oldest first (at most the last 64).
    pub fn take_intervals(&mut self) -> Vec<IntervalSpectrum> {
        let raw: Vec<RawInterval> = match self.engine.intervals.as_mut() {
            Some(iv) => iv.done.drain(..).collect(),
            None => return Vec::new(),
        };
        raw.into_iter().map(|r| self.interval_spectrum(r)).collect()
    }

    /// Closes the interval in progress now (the end of a recording) and returns it, with the
    /// closed ones not yet taken, oldest first; the partial one only if it holds a segment.
    pub fn finish_interval(&mut self) -> Vec<IntervalSpectrum> {
        let pushed = self.pushed;
        if let Some(iv) = self.engine.intervals.as_mut() {
            let index = iv.index.saturating_add(1).max(pushed / iv.len.max(1));
            iv.close(pushed, index, &self.engine.acc);
        }
        self.take_intervals()
    }

    fn interval_spectrum(&self, raw: RawInterval) -> IntervalSpectrum {
        let count = raw.count.max(1);
        let mut spectrum = self.empty_spectrum();
        let k = count as f64;
        spectrum.psd_v2_per_hz = raw.sum.iter().map(|s| s / k).collect();
        self.normalise(
            &mut spectrum,
            count,
            k_eff_from_rho2(&self.engine.acc.rho2, count),
        );
        spectrum.averaging = Averaging::Linear;
        IntervalSpectrum {
            start: raw.start,
            end: raw.end,
            spectrum,
        }
    }

    /// The settings.
    pub fn config(&self) -> &WelchConfig {
        &self.config
    }

    /// Hop D between segment starts, in samples.
    pub fn hop(&self) -> usize {
        self.config.hop()
    }

    /// Number of bins ⌊N/2⌋ + 1.
    pub fn bins(&self) -> usize {
        self.engine.acc.bins()
    }

    /// Samples waiting for a segment to be transformed: fewer than N on one thread; with
    /// worker threads up to one group of segments (see [`Welch::set_threads`]).
    pub fn pending_samples(&self) -> usize {
        self.pending.len()
    }

    /// Feeds samples (volts); completes and averages every segment they finish.
    /// Segments containing a non-finite sample are skipped and counted.
    /// Returns the number of segments added to the estimate by this call. Once a linear
    /// average is complete ([`Welch::is_complete`]) further samples are ignored (and the
    /// partial segment dropped) until [`Welch::restart`].
    ///
    /// With worker threads ([`Welch::set_threads`]) the segments are transformed in the
    /// background: the estimate then lags the pushed samples by up to a few groups of
    /// segments until [`Welch::flush`].
    pub fn push(&mut self, samples: &[f64]) -> usize {
        self.pushed = self.pushed.saturating_add(samples.len() as u64);
        let added = if self.pool.is_some() {
            self.push_parallel(samples)
        } else {
            self.push_sequential(samples)
        };
        if let Some(iv) = self.engine.intervals.as_mut() {
            iv.close_through(self.pushed, &self.engine.acc);
        }
        added
    }

    /// Stream index of the first sample of the segment at the start of `pending ++ rest`
    /// (`rest` being the end of the samples pushed).
    fn segment_start(&self, rest: &[f64]) -> u64 {
        self.pushed
            .saturating_sub(rest.len() as u64)
            .saturating_sub(self.pending.len() as u64)
    }

    /// [`Welch::push`] on the caller's thread.
    fn push_sequential(&mut self, samples: &[f64]) -> usize {
        let n = self.engine.n;
        let hop = self.config.hop();
        let mut accepted = 0;
        let mut rest = samples;
        loop {
            if self.engine.acc.is_complete() {
                // Samples are being dropped: the stream is no longer contiguous, so the
                // first segment after a restart starts with fresh data.
                self.pending.clear();
                return accepted;
            }
            if self.pending.is_empty() {
                // Whole segments straight from the caller's block: no copy.
                while let Some(segment) = rest.get(..n) {
                    if self.engine.acc.is_complete() {
                        self.pending.clear();
                        return accepted;
                    }
                    let start = self.segment_start(rest);
                    if self.engine.process(segment, &[], start) {
                        accepted += 1;
                    }
                    rest = rest.get(hop..).unwrap_or(&[]);
                }
                self.pending.extend_from_slice(rest);
                return accepted;
            }
            match self.step(&mut rest) {
                Some(ok) => accepted += usize::from(ok),
                None => return accepted,
            }
        }
    }

    /// Transforms the segment at the start of `pending ++ rest` on this thread and moves on
    /// by one hop. `None` (with `rest` moved into `pending`) if fewer than N samples are there.
    fn step(&mut self, rest: &mut &[f64]) -> Option<bool> {
        let n = self.engine.n;
        let have = self.pending.len().min(n);
        let head = self.pending.get(..have).unwrap_or(&[]);
        let Some(tail) = rest.get(..n - have) else {
            self.pending.extend_from_slice(rest);
            *rest = &[];
            return None;
        };
        let start = self.segment_start(rest);
        let ok = self.engine.process(head, tail, start);
        self.advance(rest, self.config.hop());
        Some(ok)
    }

    /// Moves the start of `pending ++ rest` on by `by` samples.
    fn advance(&mut self, rest: &mut &[f64], by: usize) {
        if by < self.pending.len() {
            self.pending.drain(..by);
        } else {
            *rest = rest.get(by - self.pending.len()..).unwrap_or(&[]);
            self.pending.clear();
        }
    }

    /// [`Welch::push`] with worker threads: whole groups go to the workers; a group already
    /// begun on this thread (after [`Welch::flush`]) or the last segments before a linear
    /// average's limit are done here, after the jobs in flight.
    fn push_parallel(&mut self, samples: &[f64]) -> usize {
        let hop = self.config.hop();
        let mut added = 0;
        let mut rest = samples;
        loop {
            let Some(pool) = self.pool.as_mut() else {
                return added + self.push_sequential(rest);
            };
            added += pool.collect(&mut self.engine.acc);
            if !pool.is_alive() {
                self.pool = None;
                continue;
            }
            if self.engine.acc.is_complete() {
                self.pending.clear();
                return added;
            }
            let group = pool.group();
            let acc = &self.engine.acc;
            let room = acc.room().saturating_sub(pool.positions_in_flight());
            if acc.group_pos != 0 || room < group {
                added += pool.drain(&mut self.engine.acc);
                if self.engine.acc.is_complete() {
                    continue;
                }
                match self.step(&mut rest) {
                    Some(ok) => added += usize::from(ok),
                    None => return added,
                }
                continue;
            }
            let span = pool.span();
            if self.pending.len() + rest.len() < span {
                self.pending.extend_from_slice(rest);
                return added;
            }
            let have = self.pending.len().min(span);
            let head = self.pending.get(..have).unwrap_or(&[]);
            let tail = rest.get(..span - have).unwrap_or(&[]);
            added += pool.dispatch(head, tail, &mut self.engine.acc, &mut self.engine.main);
            self.advance(&mut rest, group * hop);
        }
    }

    /// Waits for the worker threads and transforms every complete segment still waiting, so
    /// that the estimate covers all samples pushed so far (nothing to do on one thread).
    /// Returns the number of segments this added.
    pub fn flush(&mut self) -> usize {
        let mut added = 0;
        if let Some(pool) = self.pool.as_mut() {
            added += pool.drain(&mut self.engine.acc);
            if !pool.is_alive() {
                self.pool = None;
            }
        }
        let mut rest: &[f64] = &[];
        while self.pending.len() >= self.engine.n {
            if self.engine.acc.is_complete() {
                self.pending.clear();
                break;
            }
            match self.step(&mut rest) {
                Some(ok) => added += usize::from(ok),
                None => break,
            }
        }
        added
    }

    /// Uses `threads` worker threads (1 = none, the default; at most 64; none while
    /// [`Welch::set_intervals`] is on). Groups of
    /// consecutive segments (about 2¹⁹ samples of FFT input each) are copied to persistent
    /// workers and their periodograms added in stream order on the caller's thread, so the
    /// result is bit-identical to the single-threaded one for any thread count and block
    /// sizes. [`Welch::push`] then returns before its segments are averaged; call
    /// [`Welch::flush`] before reading a final estimate. Falls back to one thread if no
    /// worker can be started.
    pub fn set_threads(&mut self, threads: usize) {
        self.flush();
        self.pool = None;
        let threads = threads.clamp(1, 64);
        if threads < 2 || self.engine.intervals.is_some() {
            return;
        }
        let summed = matches!(self.config.averaging, Averaging::Linear);
        self.pool = Pool::start(
            &self.engine.main,
            threads,
            self.config.hop(),
            self.engine.acc.group_len,
            summed,
        );
    }

    /// Builder form of [`Welch::set_threads`].
    #[must_use]
    pub fn with_threads(mut self, threads: usize) -> Self {
        self.set_threads(threads);
        self
    }

    /// Worker threads used (1 = the caller's thread only).
    pub fn threads(&self) -> usize {
        self.pool.as_ref().map_or(1, Pool::threads)
    }

    /// Drops the samples of the segment in progress: the next push starts a new segment.
    /// Complete segments still waiting for the worker threads are averaged first.
    pub fn discard_pending(&mut self) {
        if self.pending.len() >= self.engine.n {
            self.flush();
        }
        self.pending.clear();
    }

    /// Segments in the estimate since the last restart.
    pub fn segments(&self) -> usize {
        self.engine.acc.segments
    }

    /// Segments skipped since the last restart because they held NaN/Inf (or samples so large,
    /// beyond ~1e140, that their power would overflow).
    pub fn skipped_segments(&self) -> usize {
        self.engine.acc.skipped
    }

    /// True when a linear average has reached `max_averages` and ignores further data.
    pub fn is_complete(&self) -> bool {
        self.engine.acc.is_complete()
    }

    /// True when a median average with no `max_averages` reached the memory limit
    /// ([`MEDIAN_MEMORY_LIMIT_BYTES`] of stored periodograms) and became the median of the
    /// most recent [`Welch::median_rows_limit`] segments.
    pub fn median_is_capped(&self) -> bool {
        self.engine.acc.median_capped
    }

    /// Most periodograms a median average keeps.
    pub fn median_rows_limit(&self) -> usize {
        self.engine.acc.median_cap
    }

    /// The current estimate, or `None` before the first segment.
    pub fn spectrum(&self) -> Option<Spectrum> {
        let mut spectrum = self.empty_spectrum();
        self.spectrum_into(&mut spectrum).then_some(spectrum)
    }

    /// A spectrum with these settings and no bins (capacity for all of them).
    fn empty_spectrum(&self) -> Spectrum {
        Spectrum {
            sample_rate_hz: self.config.sample_rate_hz,
            segment: self.config.segment,
            overlap: self.config.overlap,
            window: self.config.window,
            detrend: self.config.detrend,
            averaging: self.config.averaging,
            averages: 0,
            k_eff: 0.0,
            resolution_hz: 0.0,
            enbw_hz: 0.0,
            psd_v2_per_hz: Vec::with_capacity(self.bins()),
        }
    }

    /// Writes the current estimate into `out`, reusing its PSD buffer (no allocation after
    /// the first call, except a column buffer for the median). Returns false, leaving `out`
    /// untouched, before the first segment.
    pub fn spectrum_into(&self, out: &mut Spectrum) -> bool {
        let averages = self.engine.acc.averages();
        if averages == 0 {
            return false;
        }
        out.psd_v2_per_hz.resize(self.bins(), 0.0);
        self.engine.acc.mean_power_into(&mut out.psd_v2_per_hz);
        self.normalise(out, averages, self.engine.acc.k_eff());
        true
    }

    /// Fills `out`'s settings and turns its averaged |Y_k|² (already in `psd_v2_per_hz`) into
    /// the one-sided PSD.
    fn normalise(&self, out: &mut Spectrum, averages: usize, k_eff: f64) {
        let c = &self.config;
        let n = c.segment;
        let bins = self.bins();
        out.sample_rate_hz = c.sample_rate_hz;
        out.segment = n;
        out.overlap = c.overlap;
        out.window = c.window;
        out.detrend = c.detrend;
        out.averaging = c.averaging;
        out.averages = averages;
        out.k_eff = k_eff;
        out.resolution_hz = c.sample_rate_hz / n as f64;
        let (s1, s2) = (self.engine.s1, self.engine.s2);
        out.enbw_hz = c.sample_rate_hz * s2 / (s1 * s1);
        let single = 1.0 / (c.sample_rate_hz * self.engine.s2);
        let double = 2.0 * single;
        let last_unpaired = if n.is_multiple_of(2) {
            bins - 1
        } else {
            usize::MAX
        };
        for (k, p) in out.psd_v2_per_hz.iter_mut().enumerate() {
            *p *= if k == 0 || k == last_unpaired {
                single
            } else {
                double
            };
        }
    }

    /// Forgets all averaged data (keeps the settings and the sample buffer position);
    /// segments still with the worker threads are thrown away.
    pub fn restart(&mut self) {
        if let Some(pool) = self.pool.as_mut() {
            pool.discard();
            if !pool.is_alive() {
                self.pool = None;
            }
        }
        // Complete segments still waiting here (worker threads only) would already have been
        // averaged, and so forgotten, on one thread: skip them, keep the partial one.
        let (n, hop) = (self.engine.n, self.config.hop());
        if self.pending.len() >= n {
            let complete = (self.pending.len() - n) / hop + 1;
            let skip = (complete * hop).min(self.pending.len());
            self.pending.drain(..skip);
        }
        if let Some(iv) = self.engine.intervals.as_mut() {
            iv.restarting(&self.engine.acc);
        }
        self.engine.acc.restart();
    }
}

/// Welch PSD of a whole slice (convenience for tests and small records).
///
/// # Errors
/// Invalid settings, fewer samples than one segment ([`DspError::TooShort`]), or no segment
/// without NaN/Inf ([`DspError::NoUsableSegment`]).
pub fn welch(samples: &[f64], config: &WelchConfig) -> Result<Spectrum> {
    let mut w = Welch::new(config.clone())?;
    w.push(samples);
    match w.spectrum() {
        Some(spectrum) => Ok(spectrum),
        None if w.skipped_segments() > 0 => Err(DspError::NoUsableSegment {
            skipped: w.skipped_segments(),
        }),
        None => Err(DspError::TooShort {
            samples: samples.len() as u64,
            segment: config.segment,
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// splitmix64 → uniform in [−0.5, 0.5).
    fn noise(len: usize, seed: u64) -> Vec<f64> {
        let mut s = seed;
        (0..len)
            .map(|_| {
                s = s.wrapping_add(0x9E37_79B9_7F4A_7C15);
                let mut z = s;
                z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
                z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
                z ^= z >> 31;
                (z >> 11) as f64 / (1u64 << 53) as f64 - 0.5
            })
            .collect()
    }

    /// Direct O(N²) DFT periodogram of one segment (reference for the FFT path).
    fn naive_psd(x: &[f64], config: &WelchConfig) -> Vec<f64> {
        let n = config.segment;
        let w = config.window.samples(n);
        let mean = x.iter().sum::<f64>() / n as f64;
        let s2: f64 = w.iter().map(|v| v * v).sum();
        (0..=n / 2)
            .map(|k| {
                let (mut re, mut im) = (0.0, 0.0);
                for j in 0..n {
                    let ph = -2.0 * std::f64::consts::PI * ((j * k) % n) as f64 / n as f64;
                    let y = (x[j] - mean) * w[j];
                    re += y * ph.cos();
                    im += y * ph.sin();
                }
                let f = if k == 0 || (n.is_multiple_of(2) && k == n / 2) {
                    1.0
                } else {
                    2.0
                };
                f * (re * re + im * im) / (config.sample_rate_hz * s2)
            })
            .collect()
    }

    #[test]
    fn one_segment_matches_naive_dft() {
        for n in [16usize, 17, 64] {
            let mut c = WelchConfig::new(250.0, n);
            c.window = WindowKind::BlackmanHarris;
            let x: Vec<f64> = noise(n, 3).iter().map(|v| v + 2.0).collect();
            let s = welch(&x, &c).unwrap();
            let r = naive_psd(&x, &c);
            assert_eq!(s.len(), n / 2 + 1);
            for (a, b) in s.psd_v2_per_hz.iter().zip(&r) {
                assert!((a - b).abs() <= 1e-12 * r.iter().cloned().fold(0.0, f64::max));
            }
        }
    }

    #[test]
    fn interval_spectra_are_the_segments_inside_each_interval() {
        // L = 10 hops: each interval holds exactly the segments a fresh averager over that
        // interval alone transforms (what `track` does), whatever the block sizes; the running
        // estimate is untouched by the intervals.
        let config = WelchConfig::new(1000.0, 64);
        let x = noise(64 * 50 + 100, 3);
        let len = 320u64;
        let mut welch = Welch::new(config.clone()).unwrap();
        welch.set_intervals(len, 0);
        let mut got = Vec::new();
        for block in x.chunks(37) {
            welch.push(block);
            got.extend(welch.take_intervals());
        }
        assert_eq!(got.len(), x.len() / len as usize);
        for (i, iv) in got.iter().enumerate() {
            let a = i * len as usize;
            assert_eq!((iv.start, iv.end), (a as u64, a as u64 + len));
            let own = super::welch(&x[a..a + len as usize], &config).unwrap();
            assert_eq!(iv.spectrum.averages, own.averages);
            assert_eq!(iv.spectrum.averages, 9);
            assert!((iv.spectrum.k_eff - own.k_eff).abs() < 1e-12);
            for (p, q) in iv.spectrum.psd_v2_per_hz.iter().zip(&own.psd_v2_per_hz) {
                assert!((p - q).abs() <= 1e-12 * q.abs(), "{p} {q}");
            }
        }
        let plain = super::welch(&x, &config).unwrap();
        assert_eq!(welch.spectrum().unwrap(), plain);
        // Whatever the running average, the intervals are linear means of the same bits.
        for averaging in [
            Averaging::Median,
            Averaging::MaxHold,
            Averaging::Exponential {
                time_constant_segments: 4.0,
            },
        ] {
            let mut other = Welch::new(WelchConfig {
                averaging,
                ..config.clone()
            })
            .unwrap();
            other.set_intervals(len, 0);
            other.push(&x);
            let theirs = other.take_intervals();
            assert_eq!(theirs.len(), got.len());
            for (a, b) in theirs.iter().zip(&got) {
                // Summed here, by difference of running sums for the linear average.
                for (p, q) in a
                    .spectrum
                    .psd_v2_per_hz
                    .iter()
                    .zip(&b.spectrum.psd_v2_per_hz)
                {
                    assert!((p - q).abs() <= 1e-12 * q.abs(), "{p} {q}");
                }
                assert_eq!(a.spectrum.averaging, Averaging::Linear);
            }
        }
        // Restarting the running average (Restart in the window) keeps the interval whole.
        let mut restarted = Welch::new(config.clone()).unwrap();
        restarted.set_intervals(len, 0);
        restarted.push(&x[..480]);
        restarted.restart();
        restarted.push(&x[480..]);
        let ivs = restarted.take_intervals();
        for (a, b) in ivs.iter().zip(&got) {
            assert_eq!(a.spectrum.averages, b.spectrum.averages);
            for (p, q) in a
                .spectrum
                .psd_v2_per_hz
                .iter()
                .zip(&b.spectrum.psd_v2_per_hz)
            {
                assert!((p - q).abs() <= 1e-12 * q.abs(), "{p} {q}");
            }
        }
        // The interval in progress when the record ends: its segments so far.
        let last = welch.finish_interval();
        assert_eq!(last.len(), 1);
        let a = got.len() * len as usize;
        assert_eq!((last[0].start, last[0].end), (a as u64, x.len() as u64));
        let own = super::welch(&x[a..], &config).unwrap();
        assert_eq!(last[0].spectrum.averages, own.averages);
        // A grid that is not a whole number of hops: segments across a boundary are left out.
        let mut odd = Welch::new(config.clone()).unwrap();
        odd.set_intervals(300, 0);
        odd.push(&x);
        let ivs = odd.take_intervals();
        assert!(ivs.iter().all(|iv| iv.spectrum.averages <= 8));
        // Started in the middle of a stream (on a hop of the stream's grid): the intervals
        // stay on the stream's grid.
        let mut mid = Welch::new(config).unwrap();
        mid.set_intervals(len, 1024);
        mid.push(&x[1024..]);
        let ivs = mid.take_intervals();
        // The interval it started in holds the segments from its first sample on.
        assert_eq!((ivs[0].start, ivs[0].end), (960, 1280));
        assert_eq!(ivs[0].spectrum.averages, (256 - 64) / 32 + 1);
        assert_eq!((ivs[1].start, ivs[1].end), (1280, 1600));
        let own = super::welch(&x[1280..1600], &WelchConfig::new(1000.0, 64)).unwrap();
        for (p, q) in ivs[1].spectrum.psd_v2_per_hz.iter().zip(&own.psd_v2_per_hz) {
            assert!((p - q).abs() <= 1e-12 * q.abs(), "{p} {q}");
        }
    }

    #[test]
    fn segment_count_and_leftover() {
        let c = WelchConfig::new(1.0, 100);
        let mut w = Welch::new(c).unwrap();
        // K = ⌊(L − N)/D⌋ + 1 = ⌊(349 − 100)/50⌋ + 1 = 5; 49 samples wait.
        assert_eq!(w.push(&noise(349, 1)), 5);
        assert_eq!(w.segments(), 5);
        assert_eq!(w.pending_samples(), 349 - 250);
        assert!(
            Welch::new(WelchConfig::new(1.0, 100))
                .unwrap()
                .spectrum()
                .is_none()
        );
        assert!(matches!(
            welch(&noise(99, 1), &WelchConfig::new(1.0, 100)),
            Err(DspError::TooShort { .. })
        ));
        assert_eq!(
            welch(&[f64::NAN; 150], &WelchConfig::new(1.0, 100)),
            Err(DspError::NoUsableSegment { skipped: 2 })
        );
    }

    #[test]
    fn linear_detrend_removes_a_line_exactly() {
        let mut c = WelchConfig::new(1.0, 64);
        c.detrend = Detrend::Linear;
        c.window = WindowKind::Rectangular;
        let x: Vec<f64> = (0..64).map(|j| 3.0 - 0.25 * j as f64).collect();
        let s = welch(&x, &c).unwrap();
        assert!(
            s.psd_v2_per_hz.iter().all(|p| *p < 1e-25),
            "{:?}",
            s.psd_v2_per_hz
        );
    }

    #[test]
    fn config_validation() {
        let mut c = WelchConfig::new(1.0, 8);
        c.averaging = Averaging::Exponential {
            time_constant_segments: 0.5,
        };
        assert!(Welch::new(c).is_err());
        let mut c = WelchConfig::new(1.0, 8);
        c.max_averages = Some(0);
        assert!(Welch::new(c).is_err());
        assert!(Welch::new(WelchConfig::new(f64::NAN, 8)).is_err());
        assert!(Welch::new(WelchConfig::new(1.0, 1)).is_err());
    }

    #[test]
    fn median_bias_matches_scipy_values() {
        // scipy.signal._spectral_py._median_bias: n = 1, 2 → 1; n = 3 → 1 + 1/3 − 1/2.
        assert_eq!(median_bias(1), 1.0);
        assert_eq!(median_bias(2), 1.0);
        assert!((median_bias(3) - (1.0 + 1.0 / 3.0 - 0.5)).abs() < 1e-15);
        // Large n → ln 2 (the median of χ²₂/2).
        assert!((median_bias(100_001) - std::f64::consts::LN_2).abs() < 1e-5);
    }

    #[test]
    fn median_without_limit_keeps_the_most_recent_rows_once_capped() {
        // The memory cap (MEDIAN_MEMORY_LIMIT_BYTES) is far too large to reach in a unit
        // test; shrink it to 3 rows: the estimate must then be exactly the median of the
        // last 3 segments, as with --averages 3, and say that it was capped.
        let mut c = WelchConfig::new(1.0, 16);
        c.averaging = Averaging::Median;
        let x = noise(16 * 8, 5);
        let mut capped = Welch::new(c.clone()).unwrap();
        assert_eq!(
            capped.median_rows_limit(),
            MEDIAN_MEMORY_LIMIT_BYTES / (9 * 8)
        );
        capped.engine.acc.median_cap = 3;
        capped.push(&x);
        assert!(capped.median_is_capped());
        c.max_averages = Some(3);
        let mut limited = Welch::new(c).unwrap();
        limited.push(&x);
        assert!(!limited.median_is_capped());
        assert_eq!(capped.segments(), 15);
        let (a, b) = (capped.spectrum().unwrap(), limited.spectrum().unwrap());
        assert_eq!(a.psd_v2_per_hz, b.psd_v2_per_hz);
        // …which differs from the median of all 15 segments.
        let mut c = WelchConfig::new(1.0, 16);
        c.averaging = Averaging::Median;
        let mut all = Welch::new(c).unwrap();
        all.push(&x);
        assert_ne!(all.spectrum().unwrap().psd_v2_per_hz, a.psd_v2_per_hz);
    }
}
