//! Fit of one line convolved with the window's spectral kernel (METHODS.md §2c), for lines
//! narrower than ~10 ENBW, down to lines far narrower than a bin (Q = 10⁹):
//! `E[Ŝ](f_k) = B [+ s (f_k − f_ref)] + A·(L_{f_m,γ} ⊗ K_w)(f_k)` with the same model weights
//! and Gamma-likelihood fixed point as the plain fit ([`super::lsq`]). The linewidth is
//! fitted as ln γ, so the fit stays well posed as γ → 0; when the data cannot tell γ from 0
//! (γ < 2σ_γ) the line is fitted with γ fixed far below the resolution and γ is reported as
//! an upper bound from the profile of χ² (Δχ² = 4 χ²_red·inflation², about 95 %).
//! Also used by the stray-line finder (Lorentzian shape).

use std::cell::RefCell;

use super::kernel::ConvolvedLine;
use super::lsq::{self, Model, SolveFailure};

/// Result of a convolved fit (parameter values and the scaled covariance pieces needed).
#[derive(Debug, Clone)]
pub(crate) struct ConvFit {
    /// Background at f_ref (or flat).
    pub background: f64,
    /// Area.
    pub area: f64,
    /// Centre.
    pub center_hz: f64,
    /// FWHM γ (the fitted value, or the fixed tiny value when unresolved).
    pub width_hz: f64,
    /// Slope when fitted.
    pub slope: Option<f64>,
    /// Covariance (unscaled) in the parameter order [B, A, f_m, ln γ?, s?].
    pub covariance: Vec<f64>,
    /// Number of parameters.
    pub n_params: usize,
    /// Whether ln γ was a free parameter.
    pub width_free: bool,
    /// χ² and degrees of freedom.
    pub chi2: f64,
    /// Degrees of freedom.
    pub dof: usize,
}

struct Cache {
    params: Vec<f64>,
    value: Vec<f64>,
    grad: Vec<Vec<f64>>,
}

/// Parameters: [B, A, f_m, (ln γ if free), (s if sloped)].
pub(crate) struct ConvModel<'a> {
    freqs: &'a [f64],
    line: &'a ConvolvedLine,
    sloped: bool,
    f_ref: f64,
    fixed_width: Option<f64>,
    resolution_hz: f64,
    plain: bool,
    cache: RefCell<Option<Cache>>,
}

impl<'a> ConvModel<'a> {
    pub(crate) fn new(
        freqs: &'a [f64],
        line: &'a ConvolvedLine,
        sloped: bool,
        f_ref: f64,
        fixed_width: Option<f64>,
        resolution_hz: f64,
    ) -> Self {
        Self {
            freqs,
            line,
            sloped,
            f_ref,
            fixed_width,
            resolution_hz,
            plain: false,
            cache: RefCell::new(None),
        }
    }

    /// The same model without the kernel (for lines ≫ ENBW, where it changes nothing).
    pub(crate) fn unconvolved(mut self) -> Self {
        self.plain = true;
        self
    }

    fn shape(&self, center: f64, width: f64, out: &mut [f64]) {
        if self.plain {
            for (o, f) in out.iter_mut().zip(self.freqs) {
                *o = self.line.line_psd(*f, 1.0, center, width);
            }
        } else {
            self.line.eval(self.freqs, 1.0, center, width, out);
        }
    }

    fn width(&self, p: &[f64]) -> f64 {
        match self.fixed_width {
            Some(w) => w,
            None => p.get(3).copied().unwrap_or(0.0).exp(),
        }
    }

    fn slope_index(&self) -> usize {
        if self.fixed_width.is_some() { 3 } else { 4 }
    }

    fn compute(&self, p: &[f64]) -> Cache {
        let n = self.freqs.len();
        let (b, a, c) = (p[0], p[1], p[2]);
        let w = self.width(p);
        let mut shape = vec![0.0; n];
        self.shape(c, w, &mut shape);
        let hf = 1e-4 * w.max(self.resolution_hz);
        let mut up = vec![0.0; n];
        let mut dn = vec![0.0; n];
        self.shape(c + hf, w, &mut up);
        self.shape(c - hf, w, &mut dn);
        let d_center: Vec<f64> = up
            .iter()
            .zip(&dn)
            .map(|(u, d)| a * (u - d) / (2.0 * hf))
            .collect();
        let mut grad = vec![vec![1.0; n], shape.clone(), d_center];
        if self.fixed_width.is_none() {
            let hu: f64 = 1e-3;
            self.shape(c, w * hu.exp(), &mut up);
            self.shape(c, w * (-hu).exp(), &mut dn);
            grad.push(
                up.iter()
                    .zip(&dn)
                    .map(|(u, d)| a * (u - d) / (2.0 * hu))
                    .collect(),
            );
        }
        let mut value: Vec<f64> = shape.iter().map(|s| b + a * s).collect();
        if self.sloped {
            let s = p.get(self.slope_index()).copied().unwrap_or(0.0);
            let xs: Vec<f64> = self.freqs.iter().map(|f| f - self.f_ref).collect();
            for (v, x) in value.iter_mut().zip(&xs) {
                *v += s * x;
            }
            grad.push(xs);
        }
        Cache {
            params: p.to_vec(),
            value,
            grad,
        }
    }
}

impl Model for ConvModel<'_> {
    fn n_params(&self) -> usize {
        3 + usize::from(self.fixed_width.is_none()) + usize::from(self.sloped)
    }

    fn eval(&self, p: &[f64], i: usize, grad: &mut [f64]) -> f64 {
        let mut cache = self.cache.borrow_mut();
        if cache.as_ref().is_none_or(|c| c.params != p) {
            *cache = Some(self.compute(p));
        }
        let Some(c) = cache.as_ref() else {
            return f64::NAN;
        };
        for (g, col) in grad.iter_mut().zip(&c.grad) {
            *g = col.get(i).copied().unwrap_or(0.0);
        }
        c.value.get(i).copied().unwrap_or(f64::NAN)
    }

    fn admissible(&self, p: &[f64]) -> bool {
        let w = self.width(p);
        let center = p[2];
        let bg = |f: f64| {
            if self.sloped {
                p[0] + p.get(self.slope_index()).copied().unwrap_or(0.0) * (f - self.f_ref)
            } else {
                p[0]
            }
        };
        let (lo, hi) = (
            self.freqs.first().copied().unwrap_or(self.f_ref),
            self.freqs.last().copied().unwrap_or(self.f_ref),
        );
        p.iter().all(|v| v.is_finite())
            && p[1] > 0.0
            && center > 0.0
            && w > 1e-12 * center
            && w < 1.999 * center
            && bg(lo) >= 0.0
            && bg(hi) >= 0.0
    }
}

/// Fits the convolved line. `start` = (B, A, f_m, γ); `fixed_width` fixes γ.
#[allow(clippy::too_many_arguments)]
pub(crate) fn fit(
    freqs: &[f64],
    data: &[f64],
    k_eff: f64,
    line: &ConvolvedLine,
    resolution_hz: f64,
    sloped: bool,
    f_ref: f64,
    start: (f64, f64, f64, f64),
    fixed_width: Option<f64>,
    plain: bool,
) -> Result<ConvFit, SolveFailure> {
    let mut model = ConvModel::new(freqs, line, sloped, f_ref, fixed_width, resolution_hz);
    if plain {
        model = model.unconvolved();
    }
    let (b0, a0, f0, w0) = start;
    let mut p = vec![b0, a0, f0];
    if fixed_width.is_none() {
        p.push(w0.ln());
    }
    if sloped {
        p.push(0.0);
    }
    let sol = lsq::fit_model_weighted(&model, &p, data, k_eff)?;
    let width = match fixed_width {
        Some(w) => w,
        None => sol.params[3].exp(),
    };
    Ok(ConvFit {
        background: sol.params[0],
        area: sol.params[1],
        center_hz: sol.params[2],
        width_hz: width,
        slope: sloped.then(|| sol.params.last().copied().unwrap_or(0.0)),
        n_params: model.n_params(),
        width_free: fixed_width.is_none(),
        covariance: sol.covariance,
        chi2: sol.chi2,
        dof: sol.dof,
    })
}

/// Variance of the time average, over a record of length T, of the energy of a line of
/// energy damping rate Γ, relative to its mean squared: `2(x − 1 + e^{−x})/x²`, x = ΓT
/// (exponential energy distribution, autocorrelation e^{−Γ|τ|}); → 2/(ΓT) for ΓT ≫ 1
/// (METHODS.md §11), → 1 for a single coherent look.
pub fn line_energy_relative_variance(gamma_t: f64) -> f64 {
    if !(gamma_t.is_finite() && gamma_t > 0.0) {
        return 1.0;
    }
    if gamma_t < 1e-4 {
        return 1.0 - gamma_t / 3.0;
    }
    2.0 * (gamma_t - 1.0 + (-gamma_t).exp()) / (gamma_t * gamma_t)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn energy_variance_limits() {
        assert!((line_energy_relative_variance(1e-6) - 1.0).abs() < 1e-6);
        let x = 1e4;
        assert!((line_energy_relative_variance(x) * x / 2.0 - 1.0).abs() < 1e-3);
    }
}
