//! Periodic ("DFT-even") windows `w_j = Σ_n c_n cos(2π n j / N)`, j = 0…N−1, coefficients
//! with signs as in Heinzel, Rüdiger & Schilling (2002), and the constants that interpret a
//! spectrum taken with them (METHODS.md §1):
//!
//! - window sums `S₁ = Σ w_j`, `S₂ = Σ w_j²`, coherent gain `S₁/N`;
//! - normalised and absolute equivalent noise bandwidth, `NENBW = N S₂/S₁²` bins and
//!   `ENBW = f_s S₂/S₁²` Hz;
//! - the amplitude response `|W(δ)|/S₁` at a tone offset of δ bins, from which the scallop
//!   loss (δ = ½), the largest amplitude error within ±½ bin, the −3.00 dB width and the
//!   highest side lobe (PSLL) follow;
//! - the overlap correlation `ρ_l = Σ_j w_j w_{j+lD} / S₂` of segments l hops apart, and the
//!   effective number of averages `K_eff = K / [1 + 2 Σ_{l=1}^{K−1} (1 − l/K) ρ_l²]`
//!   (Welch 1967; Percival & Walden 1993);
//! - the correlation of the power estimates of neighbouring bins,
//!   `ρ_bin(l) = |Σ_j w_j² e^{−2πi jl/N}|² / S₂²`, and the factor `√(1 + 2 Σ_l ρ_bin(l))` by
//!   which a least-squares fit that treats bins as independent understates its errors.
//!
//! All window samples are computed with the angle reduced exactly, `2π r / N` with
//! `r = min((m j) mod N, N − (m j) mod N)`, so a window is symmetric to the last bit
//! (`w_j = w_{N−j}`).

use std::f64::consts::PI;

/// The windows the averager offers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum WindowKind {
    /// Rectangular (no window).
    #[serde(rename = "rect")]
    Rectangular,
    /// Hann (0.5, −0.5).
    #[default]
    Hann,
    /// Hamming (0.54, −0.46).
    Hamming,
    /// Blackman–Harris 4-term, −92 dB ("BH92").
    BlackmanHarris,
    /// Flat-top HFT95 (Heinzel et al. 2002, App. D).
    #[serde(rename = "flattop")]
    FlatTop,
}

impl WindowKind {
    /// All windows, in menu order.
    pub(crate) const ALL: [Self; 5] = [
        Self::Rectangular,
        Self::Hann,
        Self::Hamming,
        Self::BlackmanHarris,
        Self::FlatTop,
    ];

    /// The command-line spelling: `rect`, `hann`, `hamming`, `blackman-harris`, `flattop`.
    pub fn name(self) -> &'static str {
        match self {
            Self::Rectangular => "rect",
            Self::Hann => "hann",
            Self::Hamming => "hamming",
            Self::BlackmanHarris => "blackman-harris",
            Self::FlatTop => "flattop",
        }
    }

    /// Parses the command-line spelling.
    pub fn parse(text: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|w| w.name() == text)
    }

    /// Cosine-sum coefficients c₀, c₁, … (signs included).
    pub fn coefficients(self) -> &'static [f64] {
        match self {
            Self::Rectangular => &[1.0],
            Self::Hann => &[0.5, -0.5],
            Self::Hamming => &[0.54, -0.46],
            Self::BlackmanHarris => &[0.35875, -0.48829, 0.14128, -0.01168],
            Self::FlatTop => &[1.0, -1.938_337_9, 1.304_520_2, -0.402_827, 0.035_066_5],
        }
    }

    /// Half-width M (bins) of the sum that reads a tone's power robustly, Σ_{|k−k₀|≤M}
    /// (METHODS.md §1: 3 for Hann and BH92, 5 for the flat-top).
    pub(crate) fn tone_half_width_bins(self) -> usize {
        match self {
            Self::Rectangular => 3,
            Self::Hann | Self::Hamming | Self::BlackmanHarris => 3,
            Self::FlatTop => 5,
        }
    }

    /// The N window samples (periodic: `w_j = Σ_m c_m cos(2π m j/N)`, j = 0…N−1).
    /// Empty for `n = 0`.
    pub fn samples(self, n: usize) -> Vec<f64> {
        let c = self.coefficients();
        (0..n)
            .map(|j| {
                c.iter()
                    .enumerate()
                    .map(|(m, cm)| {
                        // Exact angle reduction keeps w_j = w_{N−j} bit for bit.
                        let r = (m as u128 * j as u128 % n as u128) as usize;
                        let r = r.min(n - r) as f64;
                        cm * (2.0 * PI * r / n as f64).cos()
                    })
                    .sum()
            })
            .collect()
    }

    /// Number of cosine terms (1 for rectangular … 5 for the flat-top). The periodic window's
    /// DFT is non-zero only in bins |k| < this number.
    pub(crate) fn terms(self) -> usize {
        self.coefficients().len()
    }

    /// Constants of this window at segment length `n` (see [`WindowConstants`]).
    ///
    /// S₁, S₂, coherent gain and NENBW are exact for `n`; the response figures (widths,
    /// scallop loss, amplitude error, PSLL) are computed at min(n, 8192) samples, where
    /// they have converged to far better than the table's 4 decimals. Cost: about 10⁷
    /// operations at most; cache the result rather than calling it per frame.
    pub fn constants(self, n: usize) -> WindowConstants {
        WindowConstants::of(self, n)
    }

    /// Normalised equivalent noise bandwidth `N S₂ / S₁²` in bins (cheap: O(n)).
    /// Returns 0 for `n = 0`.
    pub fn nenbw_bins(self, n: usize) -> f64 {
        let w = self.samples(n);
        let (s1, s2) = sums(&w);
        if s1 == 0.0 {
            0.0
        } else {
            n as f64 * s2 / (s1 * s1)
        }
    }

    /// Overlap correlation `ρ_l = Σ_j w_j w_{j+lD} / Σ_j w_j²` of two segments `lag` hops of
    /// `hop` samples apart (0 when they do not overlap; 1 at lag 0).
    pub fn overlap_correlation(self, n: usize, hop: usize, lag: usize) -> f64 {
        overlap_correlation(&self.samples(n), hop, lag)
    }

    /// Effective number of independent averages of a linear Welch average of `segments`
    /// consecutive segments with hop `hop` (Welch 1967; Percival & Walden 1993):
    /// `K_eff = K / [1 + 2 Σ_{l=1}^{K−1} (1 − l/K) ρ_l²]`. Returns 0 for `segments = 0`.
    pub fn k_eff(self, n: usize, hop: usize, segments: usize) -> f64 {
        k_eff_from_window(&self.samples(n), hop, segments)
    }
}

/// Largest length at which the amplitude response is scanned.
const RESPONSE_MAX_N: usize = 8192;

/// Constants that characterise a window at one segment length (Heinzel et al. 2002 §9–§10).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct WindowConstants {
    /// The window.
    pub kind: WindowKind,
    /// Segment length N.
    pub segment: usize,
    /// `S₁ = Σ w_j`.
    pub s1: f64,
    /// `S₂ = Σ w_j²`.
    pub s2: f64,
    /// Coherent gain `S₁ / N`.
    pub coherent_gain: f64,
    /// Normalised equivalent noise bandwidth `N S₂ / S₁²` (bins).
    pub nenbw_bins: f64,
    /// Full width (bins) of the main lobe at exactly −3.00 dB of amplitude response (the
    /// convention of Heinzel et al. 2002's table).
    pub w3db_bins: f64,
    /// Full width (bins) at half power (−10 log10 2 ≈ −3.0103 dB).
    pub half_power_width_bins: f64,
    /// Scallop loss: amplitude response at a half-bin offset, dB (negative = low).
    pub scallop_loss_db: f64,
    /// Largest amplitude response within ±½ bin, dB (0 for windows whose response falls
    /// monotonically; positive for flat-tops).
    pub max_amplitude_error_db: f64,
    /// Smallest amplitude response within ±½ bin, dB.
    pub min_amplitude_error_db: f64,
    /// Peak side-lobe level relative to the main lobe, dB (negative).
    pub psll_db: f64,
}

impl WindowConstants {
    fn of(kind: WindowKind, n: usize) -> Self {
        let psll_n = n.min(RESPONSE_MAX_N);
        let w = kind.samples(n);
        let (s1, s2) = sums(&w);
        let nf = n as f64;
        let safe = |a: f64| if a.is_finite() { a } else { 0.0 };
        let nenbw_bins = safe(nf * s2 / (s1 * s1));
        let coherent_gain = safe(s1 / nf);
        // The response-derived figures converge quickly with N (cosine sums): above
        // RESPONSE_MAX_N they are taken from the same window at RESPONSE_MAX_N samples.
        let wr = if n > RESPONSE_MAX_N {
            kind.samples(RESPONSE_MAX_N)
        } else {
            w.clone()
        };
        let s1r = sums(&wr).0;
        let level = |delta: f64| amplitude_response_db(&wr, s1r, delta);
        let w3db_bins = 2.0 * main_lobe_crossing(&level, -3.0, kind.terms());
        let half_power_width_bins =
            2.0 * main_lobe_crossing(&level, -10.0 * 2f64.log10(), kind.terms());
        let mut max_db = f64::NEG_INFINITY;
        let mut min_db = f64::INFINITY;
        for i in 0..=200 {
            let db = level(0.5 * i as f64 / 200.0);
            max_db = max_db.max(db);
            min_db = min_db.min(db);
        }
        Self {
            kind,
            segment: n,
            s1,
            s2,
            coherent_gain,
            nenbw_bins,
            w3db_bins,
            half_power_width_bins,
            scallop_loss_db: safe(level(0.5)),
            max_amplitude_error_db: safe(max_db),
            min_amplitude_error_db: safe(min_db),
            psll_db: safe(peak_side_lobe_db(&level, kind.terms(), psll_n)),
        }
    }

    /// Equivalent noise bandwidth in Hz at sample rate `sample_rate_hz`: `f_s S₂ / S₁²`.
    pub fn enbw_hz(&self, sample_rate_hz: f64) -> f64 {
        self.nenbw_bins * sample_rate_hz / self.segment as f64
    }
}

/// `(S₁, S₂)` of a window.
pub(crate) fn sums(w: &[f64]) -> (f64, f64) {
    w.iter().fold((0.0, 0.0), |(a, b), &x| (a + x, b + x * x))
}

/// Amplitude response `|Σ_j w_j e^{−2πi j δ/N}| / S₁` in dB at an offset of `delta` bins.
pub(crate) fn amplitude_response_db(w: &[f64], s1: f64, delta: f64) -> f64 {
    let n = w.len() as f64;
    let (mut re, mut im) = (0.0, 0.0);
    for (j, &wj) in w.iter().enumerate() {
        let phase = -2.0 * PI * delta * j as f64 / n;
        re += wj * phase.cos();
        im += wj * phase.sin();
    }
    20.0 * (re.hypot(im) / s1.abs()).log10()
}

/// Offset δ (bins) at which the main lobe's response first falls to `target_db`.
fn main_lobe_crossing(level: &dyn Fn(f64) -> f64, target_db: f64, terms: usize) -> f64 {
    let step = 0.05;
    let limit = terms as f64 + 1.0;
    let mut lo = 0.0;
    let mut hi = f64::NAN;
    let mut d = step;
    while d <= limit {
        if level(d) < target_db {
            hi = d;
            break;
        }
        lo = d;
        d += step;
    }
    if hi.is_nan() {
        return 0.0;
    }
    for _ in 0..50 {
        let mid = 0.5 * (lo + hi);
        if level(mid) < target_db {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Highest side lobe (dB re main lobe): scan beyond the first null out to a few lobes past
/// the main lobe (cosine-sum side lobes fall with distance), refine the best by golden
/// section.
fn peak_side_lobe_db(level: &dyn Fn(f64) -> f64, terms: usize, n: usize) -> f64 {
    let step = 1.0 / 32.0;
    let limit = (terms as f64 + 12.0).min(n as f64 / 2.0);
    // First local minimum of the response = end of the main lobe.
    let mut d = step;
    let mut prev = level(0.0);
    let mut cur = level(d);
    while d + step <= limit {
        let next = level(d + step);
        if cur < prev && cur <= next {
            break;
        }
        prev = cur;
        cur = next;
        d += step;
    }
    let start = d;
    let mut best_d = start;
    let mut best = f64::NEG_INFINITY;
    let mut x = start;
    while x <= limit {
        let v = level(x);
        if v > best {
            best = v;
            best_d = x;
        }
        x += step;
    }
    // Golden-section refinement of the maximum in [best_d − step, best_d + step].
    let (mut a, mut b) = ((best_d - step).max(start), best_d + step);
    let g = 0.5 * (5f64.sqrt() - 1.0);
    for _ in 0..40 {
        let c = b - g * (b - a);
        let e = a + g * (b - a);
        if level(c) > level(e) {
            b = e;
        } else {
            a = c;
        }
    }
    best.max(level(0.5 * (a + b)))
}

/// `ρ_l` of a window: `Σ_j w_j w_{j+l·hop} / Σ_j w_j²`.
pub(crate) fn overlap_correlation(w: &[f64], hop: usize, lag: usize) -> f64 {
    let n = w.len();
    let shift = hop.saturating_mul(lag);
    if shift >= n {
        return 0.0;
    }
    let (_, s2) = sums(w);
    if s2 == 0.0 {
        return 0.0;
    }
    let num: f64 = w.iter().zip(w.iter().skip(shift)).map(|(a, b)| a * b).sum();
    num / s2
}

/// The squared overlap correlations ρ_l² for l = 1 … while the segments overlap.
pub(crate) fn overlap_correlations_squared(w: &[f64], hop: usize) -> Vec<f64> {
    let hop = hop.max(1);
    let lags = w.len().div_ceil(hop);
    (1..lags)
        .map(|l| overlap_correlation(w, hop, l).powi(2))
        .collect()
}

/// `K_eff` from the squared overlap correlations (index 0 ↔ lag 1).
pub(crate) fn k_eff_from_rho2(rho2: &[f64], segments: usize) -> f64 {
    if segments == 0 {
        return 0.0;
    }
    let k = segments as f64;
    let tail: f64 = rho2
        .iter()
        .enumerate()
        .take(segments.saturating_sub(1))
        .map(|(i, r2)| (1.0 - (i + 1) as f64 / k) * r2)
        .sum();
    k / (1.0 + 2.0 * tail)
}

fn k_eff_from_window(w: &[f64], hop: usize, segments: usize) -> f64 {
    k_eff_from_rho2(&overlap_correlations_squared(w, hop), segments)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn windows_are_periodic_and_symmetric() {
        for kind in WindowKind::ALL {
            let w = kind.samples(64);
            for j in 1..64 {
                assert_eq!(w[j], w[64 - j], "{kind:?} j={j}");
            }
        }
        // Hann: w_0 = 0, w_{N/2} = 1 (periodic, not symmetric-length).
        let w = WindowKind::Hann.samples(8);
        assert!(w[0].abs() < 1e-17);
        assert!((w[4] - 1.0).abs() < 1e-15);
    }

    #[test]
    fn hann_sums_are_exact() {
        // Periodic Hann: S₁ = N/2, S₂ = 3N/8 (Heinzel et al. 2002 §9), NENBW = 1.5.
        let c = WindowKind::Hann.constants(256);
        assert!((c.s1 - 128.0).abs() < 1e-12);
        assert!((c.s2 - 96.0).abs() < 1e-12);
        assert!((c.nenbw_bins - 1.5).abs() < 1e-14);
        assert!((c.enbw_hz(1000.0) - 1.5 * 1000.0 / 256.0).abs() < 1e-12);
    }

    #[test]
    fn constants_of_long_windows_are_cheap_and_converged() {
        let c = WindowKind::Hann.constants(1 << 20);
        assert!((c.nenbw_bins - 1.5).abs() < 1e-12);
        assert!((c.w3db_bins - 1.4382).abs() < 5e-4);
        assert!((c.scallop_loss_db + 1.4236).abs() < 5e-4);
        assert!((c.enbw_hz(1e6) - 1.5 * 1e6 / (1 << 20) as f64).abs() < 1e-9);
    }

    #[test]
    fn hann_overlap_and_bin_correlations() {
        // Hann at 50 %: ρ₁ = 1/6 (Percival & Walden 1993), K_eff = 18K²/(19K − 1).
        let n = 1024;
        assert!((WindowKind::Hann.overlap_correlation(n, 512, 1) - 1.0 / 6.0).abs() < 1e-12);
        assert!(WindowKind::Hann.overlap_correlation(n, 512, 2).abs() < 1e-15);
        for k in [1usize, 5, 20, 100] {
            let kf = k as f64;
            let expect = 18.0 * kf * kf / (19.0 * kf - 1.0);
            assert!((WindowKind::Hann.k_eff(n, 512, k) - expect).abs() < 1e-9 * expect);
        }
    }
}
