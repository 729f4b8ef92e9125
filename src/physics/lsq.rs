//! A small, careful Levenberg–Marquardt solver for model-weighted least squares on PSD bins
//! (METHODS.md §2 "Fit model"): σ_k = S_model(f_k)/√K_eff, the weights re-computed from the
//! model and the fit repeated until the parameters stop moving. At that fixed point the normal
//! equations Σ (D_k − S_k) ∂S_k/S_k² = 0 are exactly the score equations of the Gamma (χ²_ν)
//! likelihood of Whittle/Percival & Walden (1993), so the same solver is the Gamma
//! maximum-likelihood fit at small K_eff as well.

/// A model evaluated bin by bin.
pub(crate) trait Model {
    /// Number of parameters.
    fn n_params(&self) -> usize;
    /// Model value at data point `i`, writing ∂S/∂p into `grad` (length `n_params`).
    fn eval(&self, params: &[f64], i: usize, grad: &mut [f64]) -> f64;
    /// False for parameter vectors outside the physical domain (e.g. a negative width).
    fn admissible(&self, params: &[f64]) -> bool;
}

/// Converged solution.
#[derive(Debug, Clone)]
pub(crate) struct Solution {
    /// Best-fit parameters.
    pub params: Vec<f64>,
    /// (Jᵀ W J)⁻¹ with the final model weights, unscaled (row-major, n×n).
    pub covariance: Vec<f64>,
    /// χ² = Σ ((D − S)/σ)² with the final weights.
    pub chi2: f64,
    /// Number of data points minus parameters.
    pub dof: usize,
}

/// Why the solver gave up.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum SolveFailure {
    /// The start point is not admissible or the model is non-positive there.
    BadStart,
    /// Too many iterations without convergence.
    NotConverged,
    /// The normal matrix is singular (a parameter is not constrained by the data).
    Singular,
}

/// Solves A x = b in place for a small dense system (Gaussian elimination, partial pivoting).
/// Returns false if singular.
fn solve_in_place(a: &mut [f64], b: &mut [f64], n: usize) -> bool {
    for col in 0..n {
        let mut piv = col;
        let mut best = 0.0;
        for row in col..n {
            let v = a.get(row * n + col).copied().unwrap_or(0.0).abs();
            if v > best {
                best = v;
                piv = row;
            }
        }
        if best.is_nan() || best <= 1e-300 || !best.is_finite() {
            return false;
        }
        if piv != col {
            for k in 0..n {
                a.swap(piv * n + k, col * n + k);
            }
            b.swap(piv, col);
        }
        let d = a.get(col * n + col).copied().unwrap_or(1.0);
        for row in col + 1..n {
            let f = a.get(row * n + col).copied().unwrap_or(0.0) / d;
            if f == 0.0 {
                continue;
            }
            for k in col..n {
                let v = a.get(col * n + k).copied().unwrap_or(0.0);
                if let Some(x) = a.get_mut(row * n + k) {
                    *x -= f * v;
                }
            }
            let bc = b.get(col).copied().unwrap_or(0.0);
            if let Some(x) = b.get_mut(row) {
                *x -= f * bc;
            }
        }
    }
    for col in (0..n).rev() {
        let mut s = b.get(col).copied().unwrap_or(0.0);
        for k in col + 1..n {
            s -= a.get(col * n + k).copied().unwrap_or(0.0) * b.get(k).copied().unwrap_or(0.0);
        }
        let d = a.get(col * n + col).copied().unwrap_or(1.0);
        if let Some(x) = b.get_mut(col) {
            *x = s / d;
        }
    }
    b.iter().all(|v| v.is_finite())
}

/// Inverse of a small symmetric positive matrix, via scaling to unit diagonal first.
fn invert(m: &[f64], n: usize) -> Option<Vec<f64>> {
    let scale: Vec<f64> = (0..n)
        .map(|i| {
            let d = m.get(i * n + i).copied().unwrap_or(0.0);
            if d > 0.0 { 1.0 / d.sqrt() } else { 0.0 }
        })
        .collect();
    if scale.iter().any(|s| *s == 0.0 || !s.is_finite()) {
        return None;
    }
    let mut inv = vec![0.0; n * n];
    for col in 0..n {
        let mut a: Vec<f64> = (0..n * n)
            .map(|idx| {
                let (i, j) = (idx / n, idx % n);
                m.get(idx).copied().unwrap_or(0.0) * scale[i] * scale[j]
            })
            .collect();
        let mut e = vec![0.0; n];
        if let Some(v) = e.get_mut(col) {
            *v = 1.0;
        }
        if !solve_in_place(&mut a, &mut e, n) {
            return None;
        }
        for (row, v) in e.iter().enumerate() {
            if let Some(x) = inv.get_mut(row * n + col) {
                *x = v * scale[row] * scale[col];
            }
        }
    }
    Some(inv)
}

/// Weighted normal equations at `params` with fixed weights `inv_var` (1/σ²):
/// returns (χ², JᵀWJ, JᵀW r) or `None` if the model is non-positive or non-finite somewhere.
fn normal_equations(
    model: &dyn Model,
    params: &[f64],
    data: &[f64],
    inv_var: &[f64],
) -> Option<(f64, Vec<f64>, Vec<f64>)> {
    let n = model.n_params();
    let mut jtj = vec![0.0; n * n];
    let mut jtr = vec![0.0; n];
    let mut grad = vec![0.0; n];
    let mut chi2 = 0.0;
    for (i, (&d, &w)) in data.iter().zip(inv_var).enumerate() {
        let s = model.eval(params, i, &mut grad);
        if !(s.is_finite() && s > 0.0) {
            return None;
        }
        let r = d - s;
        chi2 += w * r * r;
        for a in 0..n {
            let ga = grad[a] * w;
            jtr[a] += ga * r;
            for b in a..n {
                jtj[a * n + b] += ga * grad[b];
            }
        }
    }
    for a in 0..n {
        for b in 0..a {
            jtj[a * n + b] = jtj[b * n + a];
        }
    }
    chi2.is_finite().then_some((chi2, jtj, jtr))
}

/// Model values at `params` (None if any is non-positive or non-finite).
fn model_values(model: &dyn Model, params: &[f64], len: usize) -> Option<Vec<f64>> {
    let mut grad = vec![0.0; model.n_params()];
    let mut out = Vec::with_capacity(len);
    for i in 0..len {
        let s = model.eval(params, i, &mut grad);
        if !(s.is_finite() && s > 0.0) {
            return None;
        }
        out.push(s);
    }
    Some(out)
}

/// χ² only (for trial steps).
fn chi2_at(model: &dyn Model, params: &[f64], data: &[f64], inv_var: &[f64]) -> Option<f64> {
    if !model.admissible(params) {
        return None;
    }
    let mut grad = vec![0.0; model.n_params()];
    let mut chi2 = 0.0;
    for (i, (&d, &w)) in data.iter().zip(inv_var).enumerate() {
        let s = model.eval(params, i, &mut grad);
        if !(s.is_finite() && s > 0.0) {
            return None;
        }
        chi2 += w * (d - s) * (d - s);
    }
    chi2.is_finite().then_some(chi2)
}

/// Levenberg–Marquardt with fixed weights, Marquardt's diagonal scaling.
/// Returns the parameters at convergence (or after `max_iter`).
fn lm_fixed_weights(
    model: &dyn Model,
    start: &[f64],
    data: &[f64],
    inv_var: &[f64],
    max_iter: usize,
) -> Result<Vec<f64>, SolveFailure> {
    let n = model.n_params();
    let mut p = start.to_vec();
    let mut lambda = 1e-3;
    let (mut chi2, mut jtj, mut jtr) =
        normal_equations(model, &p, data, inv_var).ok_or(SolveFailure::BadStart)?;
    for _ in 0..max_iter {
        let mut improved = false;
        for _ in 0..30 {
            let mut a = jtj.clone();
            let mut b = jtr.clone();
            for k in 0..n {
                let d = jtj[k * n + k];
                a[k * n + k] = d * (1.0 + lambda) + 1e-300;
            }
            if !solve_in_place(&mut a, &mut b, n) {
                lambda *= 10.0;
                continue;
            }
            let trial: Vec<f64> = p.iter().zip(&b).map(|(x, dx)| x + dx).collect();
            match chi2_at(model, &trial, data, inv_var) {
                Some(c) if c <= chi2 => {
                    let rel = chi2 - c;
                    // Step small compared with each parameter's scale → converged.
                    let small = b.iter().enumerate().all(|(k, dx)| {
                        let sd = 1.0 / jtj[k * n + k].sqrt();
                        dx.abs() <= 1e-9 * sd.max(1e-300) || dx.abs() <= 1e-14 * p[k].abs()
                    });
                    p = trial;
                    lambda = (lambda * 0.3).max(1e-12);
                    let ne =
                        normal_equations(model, &p, data, inv_var).ok_or(SolveFailure::BadStart)?;
                    chi2 = ne.0;
                    jtj = ne.1;
                    jtr = ne.2;
                    if small || rel <= 1e-13 * chi2.max(1e-300) {
                        return Ok(p);
                    }
                    improved = true;
                    break;
                }
                _ => lambda *= 10.0,
            }
            if lambda > 1e16 {
                break;
            }
        }
        if !improved {
            // No downhill step at any damping: we are at the minimum to machine precision.
            return Ok(p);
        }
    }
    // Every accepted step lowered χ², so after `max_iter` steps `p` is the best point found;
    // the outer re-weighting loop decides whether the parameters have settled.
    Ok(p)
}

/// Model-weighted least squares iterated to convergence of the weights
/// (σ_k = S_model(f_k)/√K_eff).
pub(crate) fn fit_model_weighted(
    model: &dyn Model,
    start: &[f64],
    data: &[f64],
    k_eff: f64,
) -> Result<Solution, SolveFailure> {
    fit_model_weighted_capped(model, start, data, k_eff, 40, 200)
}

/// [`fit_model_weighted`] with at most `passes` re-weightings of at most `steps`
/// Levenberg–Marquardt steps each (a quick fit that may give up: the stray-line finder).
pub(crate) fn fit_model_weighted_capped(
    model: &dyn Model,
    start: &[f64],
    data: &[f64],
    k_eff: f64,
    passes: usize,
    steps: usize,
) -> Result<Solution, SolveFailure> {
    let n = model.n_params();
    if !model.admissible(start) || data.len() <= n {
        return Err(SolveFailure::BadStart);
    }
    let k_eff = if k_eff.is_finite() && k_eff > 0.0 {
        k_eff
    } else {
        1.0
    };
    let mut p = start.to_vec();
    let mut converged = false;
    // Largest parameter move of the last re-weighting pass, in units of its 1σ.
    let mut last_move_sigma = f64::INFINITY;
    for _ in 0..passes {
        let s = model_values(model, &p, data.len()).ok_or(SolveFailure::BadStart)?;
        let inv_var: Vec<f64> = s.iter().map(|v| k_eff / (v * v)).collect();
        let next = lm_fixed_weights(model, &p, data, &inv_var, steps)?;
        // Compare the move with the parameter scales from the current normal matrix.
        let (_, jtj, _) =
            normal_equations(model, &next, data, &inv_var).ok_or(SolveFailure::BadStart)?;
        last_move_sigma = (0..n)
            .map(|k| {
                let sd = 1.0 / jtj[k * n + k].sqrt();
                if next[k] == p[k] {
                    0.0
                } else {
                    (next[k] - p[k]).abs() / sd
                }
            })
            .fold(0.0, f64::max);
        p = next;
        if last_move_sigma <= 1e-6 {
            converged = true;
            break;
        }
    }
    // A poor model (e.g. a line that drifted during the average) can make the weights cycle
    // without settling to 1e-6σ; a cycle far smaller than the statistical error is harmless,
    // and the misfit then shows in χ²_red, which scales the reported uncertainties.
    if !converged && !last_move_sigma.is_nan() && last_move_sigma <= 0.05 {
        converged = true;
    }
    if !converged {
        return Err(SolveFailure::NotConverged);
    }
    let s = model_values(model, &p, data.len()).ok_or(SolveFailure::BadStart)?;
    let inv_var: Vec<f64> = s.iter().map(|v| k_eff / (v * v)).collect();
    let (chi2, jtj, _) =
        normal_equations(model, &p, data, &inv_var).ok_or(SolveFailure::BadStart)?;
    let covariance = invert(&jtj, n).ok_or(SolveFailure::Singular)?;
    if covariance.iter().any(|v| !v.is_finite()) || (0..n).any(|k| covariance[k * n + k] <= 0.0) {
        return Err(SolveFailure::Singular);
    }
    Ok(Solution {
        params: p,
        covariance,
        chi2,
        dof: data.len() - n,
    })
}

/// Least squares with *given* weights `inv_var` (1/σ², one per data point): Levenberg–Marquardt
/// to convergence, then the unscaled covariance (JᵀWJ)⁻¹. For data whose variance is known
/// from elsewhere (e.g. the real part of a cross-spectral density, METHODS.md §10). The model
/// must stay positive over the data (shift data and model by the same constant if needed:
/// residuals and derivatives do not change).
pub(crate) fn fit_model_fixed(
    model: &dyn Model,
    start: &[f64],
    data: &[f64],
    inv_var: &[f64],
) -> Result<Solution, SolveFailure> {
    let n = model.n_params();
    if !model.admissible(start) || data.len() <= n || inv_var.len() != data.len() {
        return Err(SolveFailure::BadStart);
    }
    let p = lm_fixed_weights(model, start, data, inv_var, 400)?;
    let (chi2, jtj, _) =
        normal_equations(model, &p, data, inv_var).ok_or(SolveFailure::BadStart)?;
    let covariance = invert(&jtj, n).ok_or(SolveFailure::Singular)?;
    if covariance.iter().any(|v| !v.is_finite()) || (0..n).any(|k| covariance[k * n + k] <= 0.0) {
        return Err(SolveFailure::Singular);
    }
    Ok(Solution {
        params: p,
        covariance,
        chi2,
        dof: data.len() - n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// y = a + b x on x = 0..n.
    struct Line;
    impl Model for Line {
        fn n_params(&self) -> usize {
            2
        }
        fn eval(&self, p: &[f64], i: usize, g: &mut [f64]) -> f64 {
            g[0] = 1.0;
            g[1] = i as f64;
            p[0] + p[1] * i as f64
        }
        fn admissible(&self, _: &[f64]) -> bool {
            true
        }
    }

    #[test]
    fn exact_data_is_recovered() {
        let data: Vec<f64> = (0..20).map(|i| 3.0 + 0.5 * i as f64).collect();
        let s = fit_model_weighted(&Line, &[1.0, 1.0], &data, 10.0).unwrap();
        assert!((s.params[0] - 3.0).abs() < 1e-9 && (s.params[1] - 0.5).abs() < 1e-9);
        assert!(s.chi2 < 1e-12);
    }

    #[test]
    fn inverse_is_an_inverse() {
        let m = [4.0, 1.0, 1.0, 3.0];
        let inv = invert(&m, 2).unwrap();
        let prod00 = m[0] * inv[0] + m[1] * inv[2];
        let prod01 = m[0] * inv[1] + m[1] * inv[3];
        assert!((prod00 - 1.0).abs() < 1e-12 && prod01.abs() < 1e-12);
    }
}
