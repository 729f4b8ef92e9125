//! The window's spectral kernel and lines convolved with it (METHODS.md §2c).
//!
//! The expected Welch estimate is the true PSD convolved with the kernel
//! `K_w(f) = |Σ_j w_j e^{−2πi f j/f_s}|² / (f_s S₂)`, which has unit area [H02 §9; PW93]. For a
//! periodic cosine-sum window `w_j = Σ_r c_r cos(2πrj/N)` the transform is a sum of shifted
//! Dirichlet kernels, `W(u) = Σ_r (c_r/2)[D(u−r) + D(u+r)]` with
//! `D(x) = Σ_{j<N} e^{−2πi x j/N} = e^{−πi x(N−1)/N} sin(πx)/sin(πx/N)` (u in bins), so the
//! kernel is exact for the segment length N at no FFT cost.
//!
//! A line (Lorentzian of any width, from far below one bin to many bins) is convolved with the
//! kernel tabulated at `NODES_PER_BIN` nodes per bin and linearly interpolated between nodes:
//! the line's mass on each node's hat function is integrated in closed form
//! (`∫ℓ = atan/π`, `∫xℓ = (γ/4π) ln(x² + γ²/4)`), so a line far narrower than a node spacing
//! is placed exactly, and the discrete sum keeps the line's area exactly.

use std::f64::consts::PI;

use crate::dsp::WindowKind;

/// Kernel nodes per bin.
const NODES_PER_BIN: usize = 32;

/// The kernel of one window at one segment length, tabulated on ±`half_bins` bins.
#[derive(Debug, Clone)]
pub(crate) struct Kernel {
    /// Kernel half-width in bins.
    half_bins: usize,
    /// K(t/NODES_PER_BIN) for t = −half·P … +half·P, normalised so Σ table = NODES_PER_BIN
    /// (unit area with node spacing 1/P bins).
    table: Vec<f64>,
}

/// Dirichlet kernel D(x) = Σ_{j<N} e^{−2πi x j/N} as (re, im).
fn dirichlet(x: f64, n: usize) -> (f64, f64) {
    let nf = n as f64;
    let s_den = (PI * x / nf).sin();
    let ratio = if s_den.abs() < 1e-12 {
        // x ≈ a multiple of N: the limit N cos(πx)/cos(πx/N).
        nf * (PI * x).cos() / (PI * x / nf).cos()
    } else {
        (PI * x).sin() / s_den
    };
    let phase = -PI * x * (nf - 1.0) / nf;
    (ratio * phase.cos(), ratio * phase.sin())
}

impl Kernel {
    /// The kernel of `window` at segment length `n` (n ≥ 2).
    pub(crate) fn new(window: WindowKind, n: usize) -> Self {
        // Sidelobes of the rectangular window fall only as 1/u²: keep more of them.
        // Beyond these the kernel holds < 1e-5 of its area (Hann −62 dB at 8 bins; the
        // flat-top's main lobe is ±5 bins); the table is renormalised to unit area.
        let half_bins = match window {
            WindowKind::Rectangular => 64,
            WindowKind::Hamming => 16,
            WindowKind::FlatTop => 12,
            WindowKind::Hann | WindowKind::BlackmanHarris => 8,
        }
        .min(n / 2)
        .max(1);
        let c = window.coefficients();
        let p = NODES_PER_BIN as f64;
        let nodes = 2 * half_bins * NODES_PER_BIN + 1;
        let mut table = Vec::with_capacity(nodes);
        for t in 0..nodes {
            let u = (t as f64 - (half_bins * NODES_PER_BIN) as f64) / p;
            let (mut re, mut im) = (0.0, 0.0);
            for (r, &cr) in c.iter().enumerate() {
                let (a_re, a_im) = dirichlet(u - r as f64, n);
                let (b_re, b_im) = dirichlet(u + r as f64, n);
                re += 0.5 * cr * (a_re + b_re);
                im += 0.5 * cr * (a_im + b_im);
            }
            table.push(re * re + im * im);
        }
        let sum: f64 = table.iter().sum();
        if sum > 0.0 && sum.is_finite() {
            for v in &mut table {
                *v *= p / sum;
            }
        }
        Self { half_bins, table }
    }

    /// Kernel half-width in bins.
    pub(crate) fn half_bins(&self) -> usize {
        self.half_bins
    }

    #[cfg(test)]
    /// Kernel value at an offset of `u` bins (1/bin units, unit area), linearly interpolated
    /// between nodes; zero beyond the tabulated half-width.
    pub(crate) fn at(&self, u: f64) -> f64 {
        let p = NODES_PER_BIN as f64;
        let x = u * p + (self.half_bins * NODES_PER_BIN) as f64;
        if x.is_nan() || x < 0.0 || x > (self.table.len() - 1) as f64 {
            return 0.0;
        }
        let i = x.floor() as usize;
        let s = x - i as f64;
        let a = self.table[i];
        let b = self.table.get(i + 1).copied().unwrap_or(0.0);
        a + s * (b - a)
    }

    /// Unit-area Lorentzian of centre `centre_bins` and FWHM `width_bins` (both in bins)
    /// convolved with the kernel, at the integer bins `bins` (1/bin units: multiply by the
    /// area and divide by Δf for a PSD). Exact for the piecewise-linear kernel.
    #[cfg(test)]
    pub(crate) fn convolved_lorentzian(
        &self,
        centre_bins: f64,
        width_bins: f64,
        bins: &[usize],
    ) -> Vec<f64> {
        self.convolved_lorentzian_with_gradient(centre_bins, width_bins, bins)
            .0
    }

    /// As `convolved_lorentzian` (test-only), with the derivatives by the centre and by the
    /// width (both in bins), from the closed-form derivatives of the hat integrals.
    pub(crate) fn convolved_lorentzian_with_gradient(
        &self,
        centre_bins: f64,
        width_bins: f64,
        bins: &[usize],
    ) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let (Some(&k_min), Some(&k_max)) = (bins.iter().min(), bins.iter().max()) else {
            return (Vec::new(), Vec::new(), Vec::new());
        };
        let per = NODES_PER_BIN as i64;
        let half = (self.half_bins * NODES_PER_BIN) as i64;
        let h = 1.0 / NODES_PER_BIN as f64;
        // Node indices i (position i·h bins) that any requested bin reaches.
        let i_lo = k_min as i64 * per - half;
        let i_hi = k_max as i64 * per + half;
        let count = (i_hi - i_lo + 1) as usize;
        let g = width_bins.max(1e-300);
        let half_g = 0.5 * g;
        // ℓ(x) = (γ/2π)/(x² + γ²/4), F0(x) = atan(2x/γ)/π, F1(x) = (γ/4π) ln(x² + γ²/4).
        let lor = |x: f64| (g / (2.0 * PI)) / (x * x + half_g * half_g);
        // Hat-function weights φ_i = ∫ hat_i(v) ℓ(v) dv and their derivatives by the centre
        // u and the width γ (∂F0/∂u = −ℓ, ∂F0/∂γ = −xℓ/γ, ∂F1/∂u = −xℓ, ∂F1/∂γ = F1/γ + γℓ/4).
        let mut phi = vec![0.0; count];
        let mut phi_u = vec![0.0; count];
        let mut phi_g = vec![0.0; count];
        for c in 0..count - 1 {
            let va = (i_lo + c as i64) as f64 * h;
            let (xa, xb) = (va - centre_bins, va + h - centre_bins);
            let (a, b) = (xa / half_g, xb / half_g);
            let d = if a * b > 0.0 {
                ((b - a) / (1.0 + a * b)).atan()
            } else {
                b.atan() - a.atan()
            };
            let m0 = d / PI;
            let q = (xb * xb + half_g * half_g) / (xa * xa + half_g * half_g);
            let f1 = (g / (4.0 * PI)) * q.ln();
            let m1 = f1 - xa * m0;
            let (la, lb) = (lor(xa), lor(xb));
            let m0_u = la - lb;
            let m0_g = -(xb * lb - xa * la) / g;
            let m1_u = (xa * la - xb * lb) + m0 - xa * m0_u;
            let m1_g = f1 / g + 0.25 * g * (lb - la) - xa * m0_g;
            phi[c] += m0 - m1 / h;
            phi[c + 1] += m1 / h;
            phi_u[c] += m0_u - m1_u / h;
            phi_u[c + 1] += m1_u / h;
            phi_g[c] += m0_g - m1_g / h;
            phi_g[c + 1] += m1_g / h;
        }
        let last = self.table.len() - 1;
        let mut v = Vec::with_capacity(bins.len());
        let mut vu = Vec::with_capacity(bins.len());
        let mut vg = Vec::with_capacity(bins.len());
        for &k in bins {
            let start = (k as i64 * per - half - i_lo) as usize;
            // K(k − v_i) with v_i = k − t·h ⇒ node index i = k·P − t; table index t + half.
            let (mut s0, mut s1, mut s2) = (0.0, 0.0, 0.0);
            for (ti, kv) in self.table.iter().enumerate() {
                let j = start + (last - ti);
                s0 += kv * phi[j];
                s1 += kv * phi_u[j];
                s2 += kv * phi_g[j];
            }
            v.push(s0);
            vu.push(s1);
            vg.push(s2);
        }
        (v, vu, vg)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The kernel is symmetric, has unit area, and its ENBW-defining peak matches
    /// N S₂/S₁² (METHODS.md §1: K(0) = 1/NENBW in bins).
    #[test]
    fn kernel_peak_is_one_over_nenbw() {
        for w in WindowKind::ALL {
            let n = 4096;
            let k = Kernel::new(w, n);
            let nenbw = w.nenbw_bins(n);
            let peak = k.at(0.0);
            // Truncation renormalises the area by at most the mass beyond the table.
            let tol = match w {
                WindowKind::Rectangular => 5e-3,
                WindowKind::Hamming => 2e-4,
                _ => 1e-5,
            };
            assert!(
                (peak * nenbw - 1.0).abs() < tol,
                "{w:?}: {peak} vs {}",
                1.0 / nenbw
            );
            assert!((k.at(0.37) - k.at(-0.37)).abs() < 1e-12 * peak);
        }
    }

    /// A line far narrower than a bin, convolved, is the kernel itself at the offset.
    #[test]
    fn narrow_line_becomes_the_kernel() {
        let k = Kernel::new(WindowKind::Hann, 8192);
        let bins: Vec<usize> = (90..111).collect();
        let c = k.convolved_lorentzian(100.3, 1e-6, &bins);
        for (b, v) in bins.iter().zip(&c) {
            let want = k.at(*b as f64 - 100.3);
            assert!((v - want).abs() < 1e-5 * k.at(0.0), "{b}: {v} vs {want}");
        }
        let total: f64 = c.iter().sum();
        assert!((total - 1.0).abs() < 1e-5, "area {total}");
    }

    /// Against the exact expected Welch estimate of AR(2) lines computed by numpy from the
    /// autocovariance (tests/reference/make_lines_refs.py, numpy 2.4.6): FS 8192 Hz, Hann,
    /// N = 1024, f_m = 2500.3 Hz, FWHM 0.01 … 40 Hz (1/800 … 3.3 ENBW), variance 1.
    #[test]
    fn convolved_line_matches_the_exact_expected_welch_estimate() {
        let text = include_str!("../../tests/data/lines/expected_welch.csv");
        let (fs, n, f_m) = (8192.0, 1024usize, 2500.3);
        let df = fs / n as f64;
        let k = Kernel::new(WindowKind::Hann, n);
        let mut rows: Vec<(f64, usize, f64)> = Vec::new();
        for line in text.lines().skip(1) {
            let c: Vec<&str> = line.split(',').collect();
            rows.push((
                c[0].parse().unwrap(),
                c[1].parse().unwrap(),
                c[3].parse().unwrap(),
            ));
        }
        let mut worst = 0.0f64;
        for gamma in [0.01, 0.5, 2.0, 8.0, 40.0] {
            let these: Vec<&(f64, usize, f64)> = rows.iter().filter(|r| r.0 == gamma).collect();
            let bins: Vec<usize> = these.iter().map(|r| r.1).collect();
            let got = k.convolved_lorentzian(f_m / df, gamma / df, &bins);
            let peak = these.iter().map(|r| r.2).fold(0.0, f64::max);
            for (r, g) in these.iter().zip(&got) {
                let model = g / df;
                // Relative to the line's peak: the AR(2) line is not exactly a Lorentzian in
                // its far wings (~1e-4 of the peak here).
                let err = (model - r.2).abs() / peak;
                worst = worst.max(err);
                assert!(err < 2e-3, "γ {gamma} bin {}: {model} vs {}", r.1, r.2);
            }
        }
        assert!(worst > 0.0);
    }

    /// The closed-form derivatives agree with central differences.
    #[test]
    fn gradient_matches_finite_differences() {
        let k = Kernel::new(WindowKind::Hann, 4096);
        let bins: Vec<usize> = (95..106).collect();
        for (u0, g) in [(100.3, 0.01), (100.7, 0.8), (99.9, 6.0)] {
            let (_, du, dg) = k.convolved_lorentzian_with_gradient(u0, g, &bins);
            let (eu, eg) = (1e-5, 1e-5 * g);
            let up = k.convolved_lorentzian(u0 + eu, g, &bins);
            let dn = k.convolved_lorentzian(u0 - eu, g, &bins);
            let gp = k.convolved_lorentzian(u0, g + eg, &bins);
            let gm = k.convolved_lorentzian(u0, g - eg, &bins);
            let scale = k
                .convolved_lorentzian(u0, g, &bins)
                .iter()
                .fold(0.0f64, |m, v| m.max(*v));
            for i in 0..bins.len() {
                let nu = (up[i] - dn[i]) / (2.0 * eu);
                let ng = (gp[i] - gm[i]) / (2.0 * eg);
                assert!(
                    (nu - du[i]).abs() < 1e-4 * scale,
                    "u {u0} g {g} bin {}: {nu} vs {}",
                    bins[i],
                    du[i]
                );
                assert!(
                    (ng - dg[i]).abs() * g < 1e-4 * scale,
                    "u {u0} g {g} bin {}: {ng} vs {}",
                    bins[i],
                    dg[i]
                );
            }
        }
    }

    /// A line much wider than the kernel is the Lorentzian itself.
    #[test]
    fn wide_line_is_unchanged() {
        let k = Kernel::new(WindowKind::Hann, 8192);
        let bins: Vec<usize> = (150..351).collect();
        let (u0, g) = (250.2, 40.0);
        let c = k.convolved_lorentzian(u0, g, &bins);
        for (b, v) in bins.iter().zip(&c) {
            let x = *b as f64 - u0;
            let lor = (g / (2.0 * PI)) / (x * x + 0.25 * g * g);
            assert!((v / lor - 1.0).abs() < 2e-3, "{b}: {v} vs {lor}");
        }
    }
}
