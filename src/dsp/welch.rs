//! The streaming Welch averager (METHODS.md §1). SKELETON: types and signatures are the
//! agreed interface; bodies are being filled in.

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
    /// Effective number of independent averages K_eff (METHODS.md §1; overlap-corrected).
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
#[derive(Debug)]
pub struct Welch {
    config: WelchConfig,
}

impl Welch {
    /// Creates an averager (plans the FFT, allocates all buffers once).
    ///
    /// # Errors
    /// [`DspError::Config`] if `config` is invalid.
    pub fn new(config: WelchConfig) -> Result<Self> {
        config.validate()?;
        Ok(Self { config })
    }

    /// The settings.
    pub fn config(&self) -> &WelchConfig {
        &self.config
    }

    /// Feeds samples (volts); completes and averages every segment they finish.
    /// Segments containing a non-finite sample are skipped and counted.
    /// Returns the number of segments accepted by this call.
    pub fn push(&mut self, samples: &[f64]) -> usize {
        let _ = samples;
        0
    }

    /// Segments accepted since the last restart.
    pub fn segments(&self) -> usize {
        0
    }

    /// Segments skipped since the last restart because they held NaN/Inf.
    pub fn skipped_segments(&self) -> usize {
        0
    }

    /// True when a linear average has reached `max_averages` and ignores further data.
    pub fn is_complete(&self) -> bool {
        false
    }

    /// The current estimate, or `None` before the first segment.
    pub fn spectrum(&self) -> Option<Spectrum> {
        None
    }

    /// Forgets all averaged data (keeps the settings and the sample buffer position).
    pub fn restart(&mut self) {}
}

/// Welch PSD of a whole slice (convenience for tests and small records).
///
/// # Errors
/// Invalid settings, or fewer samples than one segment.
pub fn welch(samples: &[f64], config: &WelchConfig) -> Result<Spectrum> {
    let mut w = Welch::new(config.clone())?;
    w.push(samples);
    w.spectrum().ok_or(DspError::TooShort {
        samples: samples.len() as u64,
        segment: config.segment,
    })
}
