//! Stray-resonance finder: peaks standing above a robust noise floor (BRIEF "stray
//! resonances"). The floor is a running median of the PSD over a window of bins (the median
//! of log power is the log of the median, so the median is taken on power), corrected for the
//! median/mean ratio of χ²_ν/ν with ν = 2K_eff, evaluated on a decimated grid and interpolated
//! in log power so that 10⁶ bins take milliseconds. Peaks are local maxima above a threshold
//! (dB over the floor), merged when closer than the window's main lobe; their frequency comes
//! from parabolic interpolation in log power, their width is the FWHM by interpolation (at
//! least NENBW·Δf).

use super::calibration::chi2_median_ratio;
use crate::dsp::Spectrum;

/// Settings of the peak finder.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct PeakOptions {
    /// Threshold over the floor (dB); default 10.
    pub threshold_db: f64,
    /// Running-median window (bins); default 129.
    pub floor_window_bins: usize,
    /// Frequency ranges (Hz) not searched (the mode band, the tone, sideband windows).
    pub exclude_hz: Vec<(f64, f64)>,
    /// Frequencies (Hz) of a reference snapshot's peaks; when non-empty each peak is marked
    /// new or not.
    pub reference_hz: Vec<f64>,
    /// Match tolerance (Hz) against the reference; `None` = max(3 Δf, the peak's width).
    pub tolerance_hz: Option<f64>,
    /// Keep at most this many peaks (the highest); default 500.
    pub max_peaks: usize,
}

impl Default for PeakOptions {
    fn default() -> Self {
        Self {
            threshold_db: 10.0,
            floor_window_bins: 129,
            exclude_hz: Vec::new(),
            reference_hz: Vec::new(),
            tolerance_hz: None,
            max_peaks: 500,
        }
    }
}

/// One stray resonance.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Peak {
    /// Interpolated peak frequency (Hz).
    pub frequency_hz: f64,
    /// Height over the floor (dB).
    pub height_over_floor_db: f64,
    /// FWHM (Hz), at least NENBW·Δf.
    pub linewidth_hz: f64,
    /// PSD at the peak bin.
    pub peak_psd: f64,
    /// Floor at the peak.
    pub floor_psd: f64,
    /// `Some(true)` when no reference peak lies within the tolerance; `None` without reference.
    pub new_since_reference: Option<bool>,
}

fn median_in_place(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let mid = v.len() / 2;
    v.select_nth_unstable_by(mid, f64::total_cmp);
    v[mid]
}

/// Robust floor of a PSD: running median over `window_bins` divided by the χ²_ν/ν median ratio
/// (ν = 2 K_eff), evaluated every ~window/4 bins and interpolated geometrically in between.
pub fn robust_floor(psd: &[f64], window_bins: usize, k_eff: f64) -> Vec<f64> {
    let n = psd.len();
    if n == 0 {
        return Vec::new();
    }
    let w = window_bins.clamp(3, n.max(3));
    let half = w / 2;
    let step = (w / 4).max(1);
    let bias = chi2_median_ratio(2.0 * k_eff.max(1.0));
    let mut scratch = Vec::with_capacity(w + 1);
    let mut nodes: Vec<(usize, f64)> = Vec::with_capacity(n / step + 2);
    let span = w.min(n);
    let mut k: usize = 0;
    loop {
        let hi = (k.saturating_sub(half) + span - 1).min(n - 1);
        let lo = hi + 1 - span;
        scratch.clear();
        scratch.extend(
            psd[lo..=hi]
                .iter()
                .copied()
                .filter(|x| x.is_finite() && *x > 0.0),
        );
        let m = median_in_place(&mut scratch) / bias;
        nodes.push((
            k,
            if m.is_finite() && m > 0.0 {
                m
            } else {
                f64::MIN_POSITIVE
            },
        ));
        if k == n - 1 {
            break;
        }
        k = (k + step).min(n - 1);
    }
    let mut out = vec![0.0; n];
    for pair in nodes.windows(2) {
        let (k0, v0) = pair[0];
        let (k1, v1) = pair[1];
        let (l0, l1) = (v0.ln(), v1.ln());
        for (j, o) in out[k0..=k1].iter_mut().enumerate() {
            let t = j as f64 / (k1 - k0).max(1) as f64;
            *o = (l0 + t * (l1 - l0)).exp();
        }
    }
    if nodes.len() == 1 {
        out.fill(nodes[0].1);
    }
    out
}

/// Finds stray peaks in a spectrum.
pub fn find_peaks(spectrum: &Spectrum, options: &PeakOptions) -> Vec<Peak> {
    let psd = &spectrum.psd_v2_per_hz;
    let n = psd.len();
    if n < 8 {
        return Vec::new();
    }
    let df = spectrum.resolution_hz;
    let floor = robust_floor(psd, options.floor_window_bins, spectrum.k_eff);
    let ratio = 10f64.powf(options.threshold_db / 10.0);
    let lobe = spectrum.window.tone_half_width_bins().max(1);
    let min_width = spectrum.enbw_hz.max(df);
    let excluded = |f: f64| options.exclude_hz.iter().any(|&(a, b)| f >= a && f <= b);
    // Candidates: local maxima above threshold, skipping the DC lobe.
    let mut cands: Vec<usize> = Vec::new();
    for k in (lobe + 1)..n - 1 {
        let p = psd[k];
        if !(p.is_finite() && p > ratio * floor[k] && p >= psd[k - 1] && p > psd[k + 1]) {
            continue;
        }
        if excluded(k as f64 * df) {
            continue;
        }
        match cands.last_mut() {
            Some(last) if k - *last <= 2 * lobe => {
                if p > psd[*last] {
                    *last = k;
                }
            }
            _ => cands.push(k),
        }
    }
    let mut peaks: Vec<Peak> = cands
        .into_iter()
        .map(|k| {
            let ln = |i: usize| psd[i].max(f64::MIN_POSITIVE).ln();
            let (a, b, c) = (ln(k - 1), ln(k), ln(k + 1));
            let den = a - 2.0 * b + c;
            let (delta, ln_peak) = if den < 0.0 {
                let d = (0.5 * (a - c) / den).clamp(-0.5, 0.5);
                (d, b - 0.25 * (a - c) * d)
            } else {
                (0.0, b)
            };
            let peak = ln_peak.exp();
            let fl = floor[k];
            let half = fl + 0.5 * (peak - fl);
            let mut left = k as f64;
            let mut i = k;
            while i > 0 && psd[i] > half {
                i -= 1;
            }
            if psd[i] <= half && i < k {
                left = i as f64 + (half - psd[i]) / (psd[i + 1] - psd[i]);
            }
            let mut right = k as f64;
            let mut j = k;
            while j + 1 < n && psd[j] > half {
                j += 1;
            }
            if psd[j] <= half && j > k {
                right = j as f64 - (half - psd[j]) / (psd[j - 1] - psd[j]);
            }
            let width = ((right - left) * df).max(min_width);
            Peak {
                frequency_hz: (k as f64 + delta) * df,
                height_over_floor_db: 10.0 * (peak / fl).log10(),
                linewidth_hz: width,
                peak_psd: psd[k],
                floor_psd: fl,
                new_since_reference: None,
            }
        })
        .filter(|p| {
            p.frequency_hz.is_finite()
                && p.height_over_floor_db.is_finite()
                && p.linewidth_hz.is_finite()
        })
        .collect();
    if peaks.len() > options.max_peaks {
        peaks.sort_by(|a, b| b.height_over_floor_db.total_cmp(&a.height_over_floor_db));
        peaks.truncate(options.max_peaks);
        peaks.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    }
    if !options.reference_hz.is_empty() {
        for p in &mut peaks {
            let tol = options
                .tolerance_hz
                .unwrap_or_else(|| (3.0 * df).max(p.linewidth_hz));
            let known = options
                .reference_hz
                .iter()
                .any(|r| (r - p.frequency_hz).abs() <= tol);
            p.new_since_reference = Some(!known);
        }
    }
    peaks
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floor_of_a_constant_is_the_constant_over_bias() {
        let f = robust_floor(&[2.0; 1000], 65, 10.0);
        let want = 2.0 / chi2_median_ratio(20.0);
        assert!(f.iter().all(|v| (v / want - 1.0).abs() < 1e-12));
    }
}
