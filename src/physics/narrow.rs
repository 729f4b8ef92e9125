//! Fit of a line narrower than (or comparable to) the resolution (METHODS.md §2c): the line
//! model convolved with the window's spectral kernel, so the area, the frequency and — when
//! the wings carry it — the linewidth are measured without the resolution's bias.
//!
//! Model, per bin k: `B [+ s (f_k − f_ref)] + A [ (ℓ_γ ⊛ K_w)(f_k) + S_osc(f_k) − ℓ_γ(f_k) ]`,
//! ℓ_γ the unit Lorentzian, S_osc the unit damped-oscillator line of §2 (the difference keeps
//! the oscillator's far shape; it vanishes for the Lorentzian shape). Bins farther than the
//! kernel's reach from f_m take the unconvolved line. Weights and covariance as in
//! [`super::fit`].
//!
//! The uncertainty of a line that holds few degrees of freedom is not seen by a fit to the
//! averaged spectrum (the segments are correlated through the line): the area of a line of
//! damping Γ observed for a time T scatters by `√(2(x − 1 + e^{−x}))/x`, x = ΓT (the time
//! average of an exponentially correlated energy; → √(2/(ΓT)) for ΓT ≫ 1, METHODS.md §11), and
//! its centre by `√(γ/(4πT))` (Fisher information of a Lorentzian sampled at resolution 1/T
//! with χ²₂ scatter; derived here). Both are floors on the reported 1σ.

use std::cell::RefCell;
use std::f64::consts::PI;

use super::fit::{LineShape, line_and_gradient, median};
use super::kernel::Kernel;
use super::lsq::{self, Model, SolveFailure};
use crate::dsp::{Averaging, Spectrum};

/// Extra bins beyond the kernel's half-width that still take the convolved model.
const MARGIN_BINS: f64 = 4.0;

/// Lines wider than this many bins take the plain model: the kernel's effect on them is
/// below 1e-3 of the line (its second moment over the line's curvature).
const PLAIN_ABOVE_BINS: f64 = 40.0;

/// Parameters: [B, A, f_m, γ (unless fixed), (s)].
pub(crate) struct ConvolvedModel<'a> {
    pub freqs: &'a [f64],
    pub bins: &'a [usize],
    pub df: f64,
    pub kernel: &'a Kernel,
    pub shape: LineShape,
    pub sloped: bool,
    pub f_ref: f64,
    /// γ (Hz) held fixed, or None to fit it.
    pub fixed_width: Option<f64>,
    cache: RefCell<Option<Cached>>,
}

struct Cached {
    params: Vec<f64>,
    values: Vec<f64>,
    grads: Vec<f64>,
}

impl<'a> ConvolvedModel<'a> {
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn new(
        freqs: &'a [f64],
        bins: &'a [usize],
        df: f64,
        kernel: &'a Kernel,
        shape: LineShape,
        sloped: bool,
        f_ref: f64,
        fixed_width: Option<f64>,
    ) -> Self {
        Self {
            freqs,
            bins,
            df,
            kernel,
            shape,
            sloped,
            f_ref,
            fixed_width,
            cache: RefCell::new(None),
        }
    }

    fn slope_index(&self) -> usize {
        if self.fixed_width.is_some() { 3 } else { 4 }
    }

    fn unpack(&self, p: &[f64]) -> (f64, f64, f64, f64, f64) {
        let w = self.fixed_width.unwrap_or_else(|| p[3]);
        let s = if self.sloped {
            p.get(self.slope_index()).copied().unwrap_or(0.0)
        } else {
            0.0
        };
        (p[0], p[1], p[2], w, s)
    }

    /// Unit line (area 1) at every data point, with ∂/∂f_m and ∂/∂γ.
    fn unit_line(&self, centre: f64, width: f64) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let n = self.freqs.len();
        let mut v = vec![0.0; n];
        let mut dc = vec![0.0; n];
        let mut dw = vec![0.0; n];
        for i in 0..n {
            let f = self.freqs[i];
            let (s, g) = line_and_gradient(self.shape, f, 1.0, centre, width);
            v[i] = s;
            dc[i] = g[1];
            dw[i] = g[2];
        }
        let u_m = centre / self.df;
        let g = width / self.df;
        if g > PLAIN_ABOVE_BINS {
            return (v, dc, dw);
        }
        let reach = self.kernel.half_bins() as f64 + MARGIN_BINS;
        let near: Vec<usize> = (0..n)
            .filter(|&i| (self.bins[i] as f64 - u_m).abs() <= reach)
            .collect();
        if near.is_empty() {
            return (v, dc, dw);
        }
        let near_bins: Vec<usize> = near.iter().map(|&i| self.bins[i]).collect();
        let (c0, cu, cg) = self
            .kernel
            .convolved_lorentzian_with_gradient(u_m, g, &near_bins);
        let df2 = self.df * self.df;
        for (j, &i) in near.iter().enumerate() {
            let f = self.freqs[i];
            // Replace the Lorentzian part by its convolution (keeps the oscillator's excess).
            let (lor, lg) = line_and_gradient(LineShape::Lorentzian, f, 1.0, centre, width);
            v[i] += c0[j] / self.df - lor;
            dc[i] += cu[j] / df2 - lg[1];
            dw[i] += cg[j] / df2 - lg[2];
        }
        (v, dc, dw)
    }

    fn compute(&self, p: &[f64]) {
        if self.cache.borrow().as_ref().is_some_and(|c| c.params == p) {
            return;
        }
        let (b, a, c, w, s) = self.unpack(p);
        let np = self.n_params();
        let (unit, dc, dw) = self.unit_line(c, w);
        let n = self.freqs.len();
        let mut values = vec![0.0; n];
        let mut grads = vec![0.0; n * np];
        for i in 0..n {
            let x = self.freqs[i] - self.f_ref;
            values[i] = b + a * unit[i] + if self.sloped { s * x } else { 0.0 };
            let g = &mut grads[i * np..(i + 1) * np];
            g[0] = 1.0;
            g[1] = unit[i];
            g[2] = a * dc[i];
            if self.fixed_width.is_none() {
                g[3] = a * dw[i];
            }
            if self.sloped {
                g[self.slope_index()] = x;
            }
        }
        *self.cache.borrow_mut() = Some(Cached {
            params: p.to_vec(),
            values,
            grads,
        });
    }
}

impl ConvolvedModel<'_> {
    /// The line alone (model minus background) at data point `i`.
    pub(crate) fn eval_line(&self, p: &[f64], i: usize, grad: &mut [f64]) -> f64 {
        let total = self.eval(p, i, grad);
        let (b, _, _, _, s) = self.unpack(p);
        total - b - s * (self.freqs.get(i).copied().unwrap_or(self.f_ref) - self.f_ref)
    }
}

impl Model for ConvolvedModel<'_> {
    fn n_params(&self) -> usize {
        3 + usize::from(self.fixed_width.is_none()) + usize::from(self.sloped)
    }

    fn eval(&self, p: &[f64], i: usize, grad: &mut [f64]) -> f64 {
        self.compute(p);
        let cache = self.cache.borrow();
        let Some(c) = cache.as_ref() else {
            return f64::NAN;
        };
        let np = grad.len();
        if let Some(g) = c.grads.get(i * np..(i + 1) * np) {
            grad.copy_from_slice(g);
        }
        c.values.get(i).copied().unwrap_or(f64::NAN)
    }

    fn admissible(&self, p: &[f64]) -> bool {
        let (b, a, c, w, s) = self.unpack(p);
        let (lo, hi) = (
            self.freqs.first().copied().unwrap_or(self.f_ref),
            self.freqs.last().copied().unwrap_or(self.f_ref),
        );
        let bg = |f: f64| b + s * (f - self.f_ref);
        p.iter().all(|v| v.is_finite())
            && a > 0.0
            && c > 0.0
            && w > 1e-6 * self.df
            && bg(lo) >= 0.0
            && bg(hi) >= 0.0
    }
}

/// The time span T (s) of the segments behind a spectrum.
pub(crate) fn record_span_s(spectrum: &Spectrum) -> f64 {
    let n = spectrum.segment.max(1) as f64;
    let hop = (n * (1.0 - spectrum.overlap)).round().max(1.0);
    let segments = match spectrum.averaging {
        Averaging::Exponential {
            time_constant_segments,
        } => (spectrum.averages as f64).min((2.0 * time_constant_segments).ceil()),
        _ => spectrum.averages as f64,
    }
    .max(1.0);
    ((segments - 1.0) * hop + n) / spectrum.sample_rate_hz
}

/// Relative 1σ of the time-averaged energy of a line of damping Γ = 2πγ over T:
/// `√(2(x − 1 + e^{−x}))/x` with x = ΓT (1 for x → 0, √(2/x) for x ≫ 1).
pub(crate) fn line_area_scatter(linewidth_hz: f64, span_s: f64) -> f64 {
    let x = 2.0 * PI * linewidth_hz * span_s;
    if !(x.is_finite() && x > 0.0) {
        return 1.0;
    }
    if x < 1e-4 {
        return (1.0 - x / 3.0).sqrt();
    }
    (2.0 * (x - 1.0 + (-x).exp())).sqrt() / x
}

/// 1σ floor (Hz) of the centre of a Lorentzian line of FWHM γ observed for T: √(γ/(4πT)).
pub(crate) fn line_centre_scatter_hz(linewidth_hz: f64, span_s: f64) -> f64 {
    if linewidth_hz > 0.0 && span_s > 0.0 {
        (linewidth_hz / (4.0 * PI * span_s)).sqrt()
    } else {
        0.0
    }
}

/// Start values for a narrow line: background from the outer quarters, centre from a
/// parabola through the log of the three highest bins, area from the background-subtracted
/// sum over the kernel's main lobe.
pub(crate) fn narrow_guess(
    freqs: &[f64],
    data: &[f64],
    df: f64,
    lobe_bins: usize,
) -> Option<(f64, f64, f64)> {
    let n = data.len();
    if n < 5 {
        return None;
    }
    let quarter = (n / 4).max(2).min(n);
    let mut outer = data[..quarter].to_vec();
    outer.extend_from_slice(&data[n - quarter..]);
    let floor = median(&outer).max(0.0);
    let (i_pk, _) = data.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))?;
    let mut centre = freqs[i_pk];
    if i_pk > 0 && i_pk + 1 < n {
        let (l, c, r) = (data[i_pk - 1].ln(), data[i_pk].ln(), data[i_pk + 1].ln());
        let den = l - 2.0 * c + r;
        if den.is_finite() && den < 0.0 {
            let shift = (0.5 * (l - r) / den).clamp(-0.5, 0.5);
            centre += shift * (freqs[i_pk + 1] - freqs[i_pk - 1]) * 0.5;
        }
    }
    let lo = i_pk.saturating_sub(lobe_bins);
    let hi = (i_pk + lobe_bins).min(n - 1);
    let area: f64 = data[lo..=hi].iter().map(|d| (d - floor) * df).sum();
    (area.is_finite() && area > 0.0).then_some((floor.max(1e-300), area, centre))
}

/// Outcome of a convolved fit.
pub(crate) struct ConvolvedFit {
    pub solution: lsq::Solution,
    /// γ held fixed (Hz), when the width could not be fitted.
    pub fixed_width: Option<f64>,
}

/// Fits the convolved model; tries a free width from several starts (four, or the first two
/// when not `exhaustive`) and keeps the best, and when none converges, a width held at
/// `1e-3·ENBW` (the delta-line limit). `quick` caps the solver's effort (it may give up).
#[allow(clippy::too_many_arguments)]
pub(crate) fn fit_convolved(
    freqs: &[f64],
    bins: &[usize],
    data: &[f64],
    k_eff: f64,
    df: f64,
    enbw_hz: f64,
    kernel: &Kernel,
    shape: LineShape,
    sloped: bool,
    f_ref: f64,
    start: (f64, f64, f64),
    width_hint: Option<f64>,
    exhaustive: bool,
    quick: bool,
) -> Result<ConvolvedFit, SolveFailure> {
    let (b0, a0, f0) = start;
    let mut best: Option<lsq::Solution> = None;
    let mut last_err = SolveFailure::BadStart;
    let mut widths = vec![0.3 * enbw_hz, 0.03 * enbw_hz, 1.5 * enbw_hz];
    if let Some(w) = width_hint.filter(|w| w.is_finite() && *w > 0.0) {
        widths.insert(0, w);
    }
    if !exhaustive {
        widths.truncate(2);
    }
    let free = ConvolvedModel::new(freqs, bins, df, kernel, shape, sloped, f_ref, None);
    for w0 in widths {
        let mut p = vec![b0, a0, f0, w0];
        if sloped {
            p.push(0.0);
        }
        let (passes, steps) = if quick { (12, 40) } else { (25, 80) };
        match lsq::fit_model_weighted_capped(&free, &p, data, k_eff, passes, steps) {
            Ok(sol) => {
                if best.as_ref().is_none_or(|b| sol.chi2 < b.chi2) {
                    best = Some(sol);
                }
            }
            Err(e) => last_err = e,
        }
    }
    if let Some(solution) = best {
        return Ok(ConvolvedFit {
            solution,
            fixed_width: None,
        });
    }
    let w_fixed = 1e-3 * enbw_hz.max(df);
    let fixed = ConvolvedModel::new(freqs, bins, df, kernel, shape, sloped, f_ref, Some(w_fixed));
    let mut p = vec![b0, a0, f0];
    if sloped {
        p.push(0.0);
    }
    match lsq::fit_model_weighted(&fixed, &p, data, k_eff) {
        Ok(solution) => Ok(ConvolvedFit {
            solution,
            fixed_width: Some(w_fixed),
        }),
        Err(e) => Err(if last_err == SolveFailure::BadStart {
            e
        } else {
            last_err
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn area_scatter_limits() {
        // x → 0: one realisation, 100 %; x ≫ 1: √(2/x) (METHODS.md §11).
        assert!((line_area_scatter(1e-9, 1.0) - 1.0).abs() < 1e-6);
        let x: f64 = 2.0 * PI * 10.0 * 100.0;
        assert!((line_area_scatter(10.0, 100.0) / (2.0 / x).sqrt() - 1.0).abs() < 1e-3);
    }
}
