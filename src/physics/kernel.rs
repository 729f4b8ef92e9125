//! The window's spectral kernel and lines convolved with it (METHODS.md §2c): the expected
//! Welch estimate is the true PSD convolved with
//! `K_w(f) = |Σ_j w_j e^{−2πi f j/f_s}|² / (f_s S₂)` (unit area; Heinzel et al. 2002 §9).
//!
//! For a periodic cosine-sum window `w_j = Σ_n c_n cos(2πnj/N)` the transform is exact and
//! closed: `W(ν) = c₀ D(ν) + Σ_{n≥1} (c_n/2)[D(ν−n) + D(ν+n)]` with ν in bins and
//! `D(x) = e^{−iπx(N−1)/N} sin(πx)/sin(πx/N)`. It is tabulated once per (window, N) over
//! |ν| ≤ U bins (U = 8…32 by window, the mass beyond is below 1e−4 of the total) and read
//! with cubic interpolation.
//!
//! A line of any width is convolved by cutting it into cells of 1/8 bin: each cell carries
//! its exact Lorentzian mass (arctangent) times the line-shape/Lorentzian ratio at the cell
//! centre (1 for a Lorentzian; the damped-oscillator form otherwise), placed at its exact
//! first moment, so a line far narrower than a cell (Q = 10⁹) is as exact as a broad one.
//! The negative-frequency image of a line near DC and the image of a line near Nyquist are
//! included (a one-sided estimate folds them in).

use std::f64::consts::PI;

use super::fit::LineShape;
use super::oscillator::{lorentzian_psd, oscillator_psd};
use crate::dsp::WindowKind;

/// Table points per bin.
const PER_BIN: usize = 64;
/// Cells per bin for the line's mass.
const CELLS_PER_BIN: usize = 8;

/// The tabulated kernel k(ν) = |W(ν)|²/(N S₂) in bins (unit area over ν).
#[derive(Debug, Clone)]
pub struct Kernel {
    half_width_bins: usize,
    table: Vec<f64>,
}

impl Kernel {
    /// The kernel of `window` at segment length `n` (n ≥ 16).
    pub fn new(window: WindowKind, n: usize) -> Self {
        let half_width_bins = match window {
            WindowKind::Rectangular => 32,
            WindowKind::Hamming => 16,
            WindowKind::FlatTop => 10,
            WindowKind::Hann | WindowKind::BlackmanHarris => 8,
        }
        .min(n / 4)
        .max(2);
        let c = window.coefficients();
        let nf = n as f64;
        let s2: f64 = {
            // Σ w² = N (c₀² + ½ Σ_{n≥1} c_n²) for a periodic cosine sum (N > 2·order).
            let c0 = c.first().copied().unwrap_or(1.0);
            nf * (c0 * c0 + 0.5 * c.iter().skip(1).map(|x| x * x).sum::<f64>())
        };
        let d = |x: f64| -> (f64, f64) {
            // D(x) as (re, im).
            let s = (PI * x / nf).sin();
            let mag = if s.abs() < 1e-300 {
                nf
            } else {
                (PI * x).sin() / s
            };
            let ph = -PI * x * (nf - 1.0) / nf;
            (mag * ph.cos(), mag * ph.sin())
        };
        let points = 2 * half_width_bins * PER_BIN + 1;
        let table = (0..points)
            .map(|i| {
                let nu = i as f64 / PER_BIN as f64 - half_width_bins as f64;
                let (mut re, mut im) = (0.0, 0.0);
                for (m, cm) in c.iter().enumerate() {
                    if m == 0 {
                        let (a, b) = d(nu);
                        re += cm * a;
                        im += cm * b;
                    } else {
                        let (a, b) = d(nu - m as f64);
                        let (e, f) = d(nu + m as f64);
                        re += 0.5 * cm * (a + e);
                        im += 0.5 * cm * (b + f);
                    }
                }
                (re * re + im * im) / (nf * s2)
            })
            .collect();
        Self {
            half_width_bins,
            table,
        }
    }

    /// Half-width U (bins) of the table; k(ν) is taken as 0 beyond.
    pub fn half_width_bins(&self) -> usize {
        self.half_width_bins
    }

    /// k(ν) (per bin), cubic (Catmull–Rom) interpolation of the table; 0 for |ν| ≥ U.
    pub fn at(&self, nu: f64) -> f64 {
        let u = self.half_width_bins as f64;
        if nu.is_nan() || nu.abs() >= u {
            return 0.0;
        }
        let x = (nu + u) * PER_BIN as f64;
        let i = x.floor() as usize;
        let t = x - i as f64;
        let last = self.table.len() - 1;
        let g = |k: isize| -> f64 {
            let k = k.clamp(0, last as isize) as usize;
            self.table.get(k).copied().unwrap_or(0.0)
        };
        let i = i as isize;
        let (p0, p1, p2, p3) = (g(i - 1), g(i), g(i + 1), g(i + 2));
        let v = p1
            + 0.5
                * t
                * (p2 - p0
                    + t * (2.0 * p0 - 5.0 * p1 + 4.0 * p2 - p3 + t * (3.0 * (p1 - p2) + p3 - p0)));
        v.max(0.0)
    }
}

/// A line shape convolved with a window kernel, evaluated at bins of one spectrum.
#[derive(Debug, Clone)]
pub struct ConvolvedLine {
    kernel: Kernel,
    resolution_hz: f64,
    nyquist_hz: f64,
    shape: LineShape,
}

impl ConvolvedLine {
    /// For a spectrum of bin spacing `resolution_hz`, segment `n` and window `window`.
    pub fn new(window: WindowKind, n: usize, resolution_hz: f64, shape: LineShape) -> Self {
        Self {
            kernel: Kernel::new(window, n),
            resolution_hz,
            nyquist_hz: resolution_hz * (n / 2) as f64,
            shape,
        }
    }

    /// Bin spacing Δf (Hz).
    pub fn resolution_hz(&self) -> f64 {
        self.resolution_hz
    }

    /// The kernel.
    pub fn kernel(&self) -> &Kernel {
        &self.kernel
    }

    /// The expected (convolved) line PSD of area `area`, centre `center_hz`, FWHM
    /// `width_hz` at each frequency of `freqs_hz` (ascending), written into `out`.
    pub fn eval(
        &self,
        freqs_hz: &[f64],
        area: f64,
        center_hz: f64,
        width_hz: f64,
        out: &mut [f64],
    ) {
        out.iter_mut().for_each(|o| *o = 0.0);
        let (Some(&f_lo), Some(&f_hi)) = (freqs_hz.first(), freqs_hz.last()) else {
            return;
        };
        let df = self.resolution_hz;
        let u = self.kernel.half_width_bins() as f64;
        let cell = df / CELLS_PER_BIN as f64;
        let span_lo = (f_lo - u * df).max(0.0);
        let span_hi = (f_hi + u * df).min(self.nyquist_hz);
        // Also the cells whose DC image reaches the band (lines just above DC).
        let span_lo = if f_lo < u * df { 0.0 } else { span_lo };
        if span_hi <= span_lo {
            return;
        }
        let c0 = (span_lo / cell).floor() as i64;
        let c1 = (span_hi / cell).ceil() as i64;
        let half = 0.5 * width_hz;
        let cdf = |x: f64| (2.0 * (x - center_hz) / width_hz).atan() / PI;
        let mut masses: Vec<(f64, f64)> = Vec::with_capacity((c1 - c0).max(0) as usize);
        for c in c0..c1 {
            let lo = c as f64 * cell;
            let hi = lo + cell;
            let p = cdf(hi) - cdf(lo);
            if p.is_nan() || p <= 0.0 {
                continue;
            }
            let mid = 0.5 * (lo + hi);
            // First moment of the Lorentzian inside the cell.
            let (a, b) = (lo - center_hz, hi - center_hz);
            let mu = if p > 1e-14 {
                let m1 =
                    (width_hz / (4.0 * PI)) * ((b * b + half * half) / (a * a + half * half)).ln();
                (center_hz + m1 / p).clamp(lo, hi)
            } else {
                mid
            };
            let ratio = match self.shape {
                LineShape::Lorentzian => 1.0,
                LineShape::Oscillator => {
                    let l = lorentzian_psd(mid, 1.0, center_hz, width_hz);
                    if l > 0.0 {
                        oscillator_psd(mid, 1.0, center_hz, width_hz) / l
                    } else {
                        1.0
                    }
                }
            };
            let m = area * p * ratio;
            if m != 0.0 && m.is_finite() {
                masses.push((mu, m));
            }
        }
        let inv_df = 1.0 / df;
        let images: Vec<(f64, f64)> = masses
            .iter()
            .filter_map(|&(mu, m)| {
                if mu < u * df {
                    Some((-mu, m))
                } else if mu > self.nyquist_hz - u * df {
                    Some((2.0 * self.nyquist_hz - mu, m))
                } else {
                    None
                }
            })
            .collect();
        let mut start = 0usize;
        for (f, o) in freqs_hz.iter().zip(out.iter_mut()) {
            let lo = f - u * df;
            while masses.get(start).is_some_and(|&(mu, _)| mu <= lo) {
                start += 1;
            }
            let mut s = 0.0;
            for &(mu, m) in masses.get(start..).unwrap_or(&[]) {
                let nu = (f - mu) * inv_df;
                if nu <= -u {
                    break;
                }
                s += m * self.kernel.at(nu);
            }
            for &(mu, m) in &images {
                s += m * self.kernel.at((f - mu) * inv_df);
            }
            *o = s * inv_df;
        }
    }

    /// The line itself (not convolved) at one frequency.
    pub fn line_psd(&self, frequency_hz: f64, area: f64, center_hz: f64, width_hz: f64) -> f64 {
        match self.shape {
            LineShape::Lorentzian => lorentzian_psd(frequency_hz, area, center_hz, width_hz),
            LineShape::Oscillator => oscillator_psd(frequency_hz, area, center_hz, width_hz),
        }
    }

    /// The expected line PSD at one frequency (for peaks and overlays).
    pub fn at(&self, frequency_hz: f64, area: f64, center_hz: f64, width_hz: f64) -> f64 {
        let mut out = [0.0];
        self.eval(&[frequency_hz], area, center_hz, width_hz, &mut out);
        out[0]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kernel_has_unit_area_and_enbw_peak() {
        for w in [
            WindowKind::Hann,
            WindowKind::BlackmanHarris,
            WindowKind::FlatTop,
        ] {
            let k = Kernel::new(w, 4096);
            let u = k.half_width_bins() as f64;
            let n = 20_000;
            let h = 2.0 * u / n as f64;
            let area: f64 = (0..n).map(|i| k.at(-u + (i as f64 + 0.5) * h)).sum::<f64>() * h;
            assert!((area - 1.0).abs() < 1e-4, "{w:?} {area}");
            // k(0) = S₁²/(N S₂) = 1/NENBW.
            let nenbw = w.nenbw_bins(4096);
            assert!((k.at(0.0) * nenbw - 1.0).abs() < 1e-9, "{w:?}");
        }
    }

    #[test]
    fn broad_line_is_unchanged_and_narrow_line_is_the_kernel() {
        let df = 1.0;
        let c = ConvolvedLine::new(WindowKind::Hann, 1024, df, LineShape::Lorentzian);
        let f: Vec<f64> = (150..250).map(|k| k as f64).collect();
        let mut out = vec![0.0; f.len()];
        c.eval(&f, 1.0, 200.3, 40.0, &mut out);
        for (fi, o) in f.iter().zip(&out) {
            let l = lorentzian_psd(*fi, 1.0, 200.3, 40.0);
            assert!((o / l - 1.0).abs() < 2e-3, "{fi} {o} {l}");
        }
        c.eval(&f, 1.0, 200.3, 1e-7, &mut out);
        for (fi, o) in f.iter().zip(&out) {
            let k = c.kernel().at(fi - 200.3);
            assert!((o - k).abs() < 1e-6 * (1.0 / 1.5), "{fi} {o} {k}");
        }
    }
}
