//! What the window's two-detector view draws, prepared without egui: both channels' PSDs, the
//! magnitude and the real part of the cross-spectral density, the uncorrelated residual left
//! after K_eff averages and the coherence with its noise level (METHODS.md §10), over a
//! frequency range and reduced to at most one point per screen column.
//!
//! The residual of two uncorrelated channels after averaging: each bin of P_ab is then a mean
//! of K_eff independent products, so |P_ab| ≈ √(P_aa P_bb / K_eff) and Re P_ab scatters about
//! zero with σ = √(P_aa P_bb / (2 K_eff)) (the variance of METHODS §10 with no common signal).
//! A line in Re P_ab that stands clear of that ±σ band is common to both detectors; more
//! averaging lowers the band as 1/√K_eff.

use crate::dsp::cross::{CrossSpectrum, coherence_noise_threshold};

/// Probability with which uncorrelated noise exceeds the coherence threshold drawn.
const FALSE_ALARM: f64 = crate::report::cross::COHERENCE_FALSE_ALARM;

/// The curves of the two-detector view. Points are `[frequency Hz, value]`; the PSD-like
/// curves hold log10 of V²/Hz (points where the value is not positive are left out), `re`
/// and `re_sigma` are linear V²/Hz, `coherence` is in [0, 1].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CrossCurves {
    /// Frequency range covered, Hz.
    pub range_hz: (f64, f64),
    /// Channel a's PSD (log10 V²/Hz).
    pub psd_a: Vec<[f64; 2]>,
    /// Channel b's PSD (log10 V²/Hz).
    pub psd_b: Vec<[f64; 2]>,
    /// |P_ab| (log10 V²/Hz).
    pub magnitude: Vec<[f64; 2]>,
    /// √(P_aa P_bb / K_eff): where |P_ab| of uncorrelated channels stands (log10 V²/Hz).
    pub residual: Vec<[f64; 2]>,
    /// Re P_ab, V²/Hz (linear, signed).
    pub re: Vec<[f64; 2]>,
    /// 1σ of Re P_ab for uncorrelated channels, √(P_aa P_bb / (2 K_eff)), V²/Hz.
    pub re_sigma: Vec<[f64; 2]>,
    /// Magnitude-squared coherence.
    pub coherence: Vec<[f64; 2]>,
    /// The coherence that uncorrelated channels exceed with 5 % probability.
    pub coherence_threshold: f64,
    /// Effective number of averages.
    pub k_eff: f64,
}

/// The curves of `cross` over `range_hz` (the whole spectrum if `None`), at most `columns`
/// points each: consecutive bins are grouped, and each group shows its largest PSD, |P_ab|,
/// residual and coherence, and the Re P_ab of largest magnitude (sign kept), so a narrow
/// line is never averaged away.
pub fn cross_curves(
    cross: &CrossSpectrum,
    range_hz: Option<(f64, f64)>,
    columns: usize,
) -> CrossCurves {
    let s = &cross.a;
    let df = s.resolution_hz;
    let bins = cross.len();
    let k_eff = if s.k_eff.is_finite() && s.k_eff > 0.0 {
        s.k_eff
    } else {
        s.averages.max(1) as f64
    };
    let mut out = CrossCurves {
        coherence_threshold: coherence_noise_threshold(k_eff, FALSE_ALARM),
        k_eff,
        ..CrossCurves::default()
    };
    if bins == 0 || !(df.is_finite() && df > 0.0) {
        return out;
    }
    let (lo, hi) = range_hz
        .filter(|(a, b)| a.is_finite() && b.is_finite() && b > a)
        .unwrap_or((0.0, (bins - 1) as f64 * df));
    let top = (bins - 1) as f64;
    let (first, last) = ((lo / df).ceil().max(0.0), (hi / df).floor().min(top));
    if first > top || last < first {
        return out;
    }
    let (first, last) = (first as usize, last as usize);
    out.range_hz = (first as f64 * df, last as f64 * df);
    let count = last - first + 1;
    let group = count.div_ceil(columns.max(1)).max(1);
    let value = |v: &[f64], k: usize| v.get(k).copied().unwrap_or(f64::NAN);
    let log = |v: f64| (v > 0.0 && v.is_finite()).then(|| v.log10());
    let mut start = first;
    while start <= last {
        let end = (start + group - 1).min(last);
        let f = 0.5 * (start + end) as f64 * df;
        let (mut pa, mut pb, mut mag, mut resid, mut coh) =
            (0.0f64, 0.0f64, 0.0f64, 0.0f64, 0.0f64);
        let mut re = 0.0f64;
        let mut sigma = 0.0f64;
        for k in start..=end {
            let a = value(&s.psd_v2_per_hz, k);
            let b = value(&cross.psd_b_v2_per_hz, k);
            let r = value(&cross.csd_re_v2_per_hz, k);
            let i = value(&cross.csd_im_v2_per_hz, k);
            pa = pa.max(a);
            pb = pb.max(b);
            mag = mag.max(r.hypot(i));
            let product = a * b;
            if product.is_finite() && product > 0.0 {
                resid = resid.max((product / k_eff).sqrt());
                sigma = sigma.max((product / (2.0 * k_eff)).sqrt());
            }
            coh = coh.max(cross.coherence_at(k));
            if r.is_finite() && r.abs() > re.abs() {
                re = r;
            }
        }
        for (curve, v) in [
            (&mut out.psd_a, pa),
            (&mut out.psd_b, pb),
            (&mut out.magnitude, mag),
            (&mut out.residual, resid),
        ] {
            if let Some(y) = log(v) {
                curve.push([f, y]);
            }
        }
        out.re.push([f, re]);
        out.re_sigma.push([f, sigma]);
        out.coherence.push([f, coh]);
        start = end + 1;
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::WelchConfig;
    use crate::dsp::cross::cross_spectrum;

    fn noise(len: usize, seed: u64) -> Vec<f64> {
        let mut s = seed;
        (0..len)
            .map(|_| {
                let z = crate::synth::rng::splitmix64(&mut s);
                (z >> 11) as f64 / (1u64 << 53) as f64 - 0.5
            })
            .collect()
    }

    #[test]
    fn residual_band_holds_uncorrelated_noise_and_a_common_tone_stands_out() {
        // Two independent noises plus a common tone at bin 100 of 1024-point segments.
        let (fs, n, len) = (1024.0, 1024, 1 << 18);
        let tone: Vec<f64> = (0..len)
            .map(|i| 0.2 * (2.0 * std::f64::consts::PI * 100.0 * i as f64 / fs).sin())
            .collect();
        let a: Vec<f64> = noise(len, 1)
            .iter()
            .zip(&tone)
            .map(|(x, t)| x + t)
            .collect();
        let b: Vec<f64> = noise(len, 2)
            .iter()
            .zip(&tone)
            .map(|(x, t)| x + t)
            .collect();
        let cross = cross_spectrum(&a, &b, &WelchConfig::new(fs, n)).unwrap();
        let c = cross_curves(&cross, None, 10_000);
        assert_eq!(c.re.len(), cross.len());
        // Away from the tone, Re P_ab stays within a few σ of zero (Gaussian, K_eff ≈ 480:
        // |z| < 4.5 in all ~500 bins); at the tone the band holds the tone's own power too
        // (σ ≈ P/√(2 K_eff)), so the tone stands about √(2 K_eff) ≈ 30 σ clear.
        let mut worst = 0.0f64;
        for (k, (re, sigma)) in c.re.iter().zip(&c.re_sigma).enumerate() {
            if (95..=105).contains(&k) || k == 0 || k + 1 == c.re.len() {
                continue;
            }
            worst = worst.max(re[1].abs() / sigma[1]);
        }
        assert!(worst < 4.5, "uncorrelated Re P_ab reached {worst} σ");
        assert!(c.re[100][1] / c.re_sigma[100][1] > 15.0);
        assert!(c.coherence[100][1] > 0.9);
        // The 5 % coherence level for K_eff averages: 1 − 0.05^{1/(K_eff−1)} (Bendat & Piersol).
        let want = 1.0 - 0.05_f64.powf(1.0 / (cross.a.k_eff - 1.0));
        assert!((c.coherence_threshold - want).abs() < 1e-12);
        // |P_ab| of uncorrelated bins sits near the residual √(P_aa P_bb / K_eff) (within
        // a factor 3 for nearly every bin).
        let near = c
            .magnitude
            .iter()
            .zip(&c.residual)
            .filter(|(m, r)| (m[1] - r[1]).abs() < 3f64.log10())
            .count();
        assert!(near as f64 > 0.9 * c.magnitude.len() as f64, "{near}");
    }

    #[test]
    fn columns_keep_the_largest_value_and_the_sign_of_re() {
        let (fs, n, len) = (1024.0, 1024, 1 << 16);
        let x = noise(len, 3);
        // b = −a: Re P_ab = −P_aa everywhere.
        let b: Vec<f64> = x.iter().map(|v| -v).collect();
        let cross = cross_spectrum(&x, &b, &WelchConfig::new(fs, n)).unwrap();
        let c = cross_curves(&cross, Some((100.0, 300.0)), 20);
        assert!(c.re.len() <= 20 && c.re.len() >= 19, "{}", c.re.len());
        assert!(c.re.iter().all(|p| p[1] < 0.0));
        assert!(c.range_hz.0 >= 100.0 && c.range_hz.1 <= 300.0);
        // The first column is the maximum of its bins.
        let group = 201usize.div_ceil(20);
        let max_a = (100..100 + group)
            .map(|k| cross.a.psd_v2_per_hz[k])
            .fold(0.0f64, f64::max);
        assert!((c.psd_a[0][1] - max_a.log10()).abs() < 1e-12);
        // Nothing to draw is not an error.
        assert!(
            cross_curves(&cross, Some((5000.0, 6000.0)), 20)
                .re
                .is_empty()
        );
    }
}
