//! Correlation between neighbouring PSD bins of a windowed estimate (METHODS.md §2 "Honest
//! fit uncertainties"): ρ_bin(l) = |Σ_j w_j² e^{−2πijl/N}|² / (Σ_j w_j²)², computed exactly
//! from the cosine-sum coefficients (w² is again a cosine sum, so only a few l are non-zero).

use crate::dsp::WindowKind;

/// ρ_bin(l) for l = 1, 2, … up to the last non-zero lag (empty for the rectangular window).
/// Exact for N larger than twice the window order (any practical segment).
pub fn bin_correlation(window: WindowKind) -> Vec<f64> {
    let c = window.coefficients();
    let order = c.len().saturating_sub(1);
    // w² = Σ_l d_l cos(2π l j/N), l = 0 … 2·order, from cos a cos b = ½[cos(a+b) + cos(a−b)].
    let mut d = vec![0.0; 2 * order + 1];
    for (n, cn) in c.iter().enumerate() {
        for (m, cm) in c.iter().enumerate() {
            let p = cn * cm * 0.5;
            if let Some(v) = d.get_mut(n + m) {
                *v += p;
            }
            if let Some(v) = d.get_mut(n.abs_diff(m)) {
                *v += p;
            }
        }
    }
    // Σ_j w² e^{−2πijl/N} = N d₀ (l = 0) and N d_l / 2 (l ≥ 1).
    let d0 = d.first().copied().unwrap_or(1.0);
    let mut rho: Vec<f64> = d.iter().skip(1).map(|dl| (0.5 * dl / d0).powi(2)).collect();
    while rho.last().is_some_and(|r| *r < 1e-15) {
        rho.pop();
    }
    rho
}

/// The factor √(1 + 2 Σ_l ρ_bin(l)) by which a fit treating bins as independent understates
/// its parameter errors (Hann 1.394, Blackman–Harris ≈ 1.66, rectangular 1).
pub fn error_inflation(window: WindowKind) -> f64 {
    (1.0 + 2.0 * bin_correlation(window).iter().sum::<f64>()).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hann_values() {
        // METHODS.md §2: Hann ρ(1) = 4/9, ρ(2) = 1/36 [N].
        let r = bin_correlation(WindowKind::Hann);
        assert_eq!(r.len(), 2);
        assert!((r[0] - 4.0 / 9.0).abs() < 1e-12);
        assert!((r[1] - 1.0 / 36.0).abs() < 1e-12);
        assert!(bin_correlation(WindowKind::Rectangular).is_empty());
        assert!((error_inflation(WindowKind::Hann) - 1.394).abs() < 1e-3);
    }

    #[test]
    fn other_windows_match_methods() {
        // METHODS.md §2: Hamming 0.391, 0.018; Blackman–Harris 0.666, 0.192, 0.023 [N].
        let h = bin_correlation(WindowKind::Hamming);
        assert!((h[0] - 0.391).abs() < 1e-3 && (h[1] - 0.018).abs() < 1e-3);
        let b = bin_correlation(WindowKind::BlackmanHarris);
        assert!((b[0] - 0.666).abs() < 1e-3 && (b[1] - 0.192).abs() < 1e-3);
        assert!((b[2] - 0.023).abs() < 1e-3);
        assert!((error_inflation(WindowKind::BlackmanHarris) - 1.66).abs() < 0.01);
    }
}
