//! Least-squares fit of one mechanical line plus background to a PSD band (METHODS.md §2 "Fit
//! model", "Honest fit uncertainties", "Model bias"):
//! `S_model(f) = B [+ s (f − f_ref)] + A (2/π) f_m² γ / [(f_m² − f²)² + γ² f²]`
//! (or the Lorentzian core), weighted with σ_k = S_model(f_k)/√K_eff iterated to convergence
//! (the Gamma-likelihood fixed point, see the solver). The covariance is (JᵀWJ)⁻¹ scaled by
//! χ²_red and inflated by 1 + 2Σρ_bin(l) for the correlation of neighbouring bins of the window.
//!
//! Units follow the spectrum: on a V²/Hz PSD the area is in V², on m²/Hz in m².

use std::f64::consts::PI;

use super::kernel::Kernel;
use super::lsq::{self, Model, SolveFailure};
use super::narrow;
use super::oscillator::{lorentzian_psd, oscillator_psd};
use super::{Estimate, PhysicsError, Result, window_stats};
use crate::dsp::Spectrum;

/// Shape of the mechanical line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum LineShape {
    /// Damped-oscillator (Hz) form; unbiased at any Q (the default).
    #[default]
    Oscillator,
    /// Lorentzian core; adequate for Q ≳ 100 and narrow bands.
    Lorentzian,
}

/// Settings of the mode fit.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FitOptions {
    /// Line shape.
    pub line_shape: LineShape,
    /// Let the background have a linear slope across the band.
    pub sloped_background: bool,
    /// Frequency ranges (Hz) left out of the fit, e.g. a calibration tone inside the band.
    pub exclude_hz: Vec<(f64, f64)>,
    /// Minimum significance A/σ_A of the fitted area to accept a mode (default 3).
    pub min_significance: f64,
}

impl Default for FitOptions {
    fn default() -> Self {
        Self {
            line_shape: LineShape::Oscillator,
            sloped_background: false,
            exclude_hz: Vec::new(),
            min_significance: 3.0,
        }
    }
}

/// A fitted mode, in the units of the spectrum that was fitted.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ModeFit {
    /// Resonance frequency f_m (Hz).
    pub frequency_hz: Estimate,
    /// FWHM linewidth γ (Hz).
    pub linewidth_hz: Estimate,
    /// Q = f_m/γ.
    pub quality_factor: Estimate,
    /// Line area A (PSD unit × Hz, e.g. V²), background excluded.
    pub area: Estimate,
    /// Peak of the line 2A/(πγ), background excluded (PSD unit).
    pub peak_psd: Estimate,
    /// Background at f_m (PSD unit).
    pub background_psd: Estimate,
    /// Background slope (PSD unit per Hz) when fitted.
    pub background_slope_per_hz: Option<Estimate>,
    /// Line shape used.
    pub line_shape: LineShape,
    /// Reduced χ² of the fit with model weights.
    pub reduced_chi2: f64,
    /// Bins used.
    pub bins: usize,
    /// Band fitted (Hz).
    pub band_hz: (f64, f64),
    /// Factor √(1+2Σρ_bin) applied to every 1σ for the window's bin correlation.
    pub error_inflation: f64,
    /// True when γ < 5·NENBW·Δf: the linewidth and peak are broadened by the resolution
    /// (METHODS.md §2 "Resolution"); the area is still good.
    pub resolution_limited: bool,
    /// Reference frequency of the slope term (Hz).
    pub slope_reference_hz: f64,
    /// For a line narrower than the resolution (METHODS.md §2c): the linewidth from the fit
    /// of the line convolved with the window's kernel, value ± 1σ (`None` when the width
    /// could not be fitted at all). `linewidth_hz` then holds the upper bound γ + 2σ.
    #[serde(default)]
    pub linewidth_fit_hz: Option<Estimate>,
}

impl ModeFit {
    /// The line alone (no background) at one frequency.
    pub(crate) fn line_psd_at(&self, frequency_hz: f64) -> f64 {
        line(
            self.line_shape,
            frequency_hz,
            self.area.value,
            self.frequency_hz.value,
            self.linewidth_hz.value,
        )
    }

    /// Energy damping rate Γ = 2πγ (rad/s) with its 1σ.
    pub fn damping_rad_s(&self) -> Estimate {
        Estimate::new(
            2.0 * PI * self.linewidth_hz.value,
            2.0 * PI * self.linewidth_hz.sigma,
        )
    }
}

fn line(shape: LineShape, f: f64, area: f64, center: f64, width: f64) -> f64 {
    match shape {
        LineShape::Oscillator => oscillator_psd(f, area, center, width),
        LineShape::Lorentzian => lorentzian_psd(f, area, center, width),
    }
}

/// Value and ∂/∂(A, f_m, γ) of a line shape.
pub(crate) fn line_and_gradient(
    shape: LineShape,
    f: f64,
    area: f64,
    center: f64,
    width: f64,
) -> (f64, [f64; 3]) {
    match shape {
        LineShape::Oscillator => {
            let m2 = center * center;
            let f2 = f * f;
            let dm = m2 - f2;
            let den = dm * dm + width * width * f2;
            let unit = (2.0 / PI) * m2 * width / den;
            let s = area * unit;
            let d_center = s * (2.0 / center - 4.0 * center * dm / den);
            let d_width = s * (1.0 / width - 2.0 * width * f2 / den);
            (s, [unit, d_center, d_width])
        }
        LineShape::Lorentzian => {
            let d = f - center;
            let den = d * d + 0.25 * width * width;
            let unit = (width / (2.0 * PI)) / den;
            let s = area * unit;
            let d_center = s * 2.0 * d / den;
            let d_width = s * (1.0 / width - 0.5 * width / den);
            (s, [unit, d_center, d_width])
        }
    }
}

/// Parameters: [B, A, f_m, γ, (s)].
struct ModeModel<'a> {
    freqs: &'a [f64],
    shape: LineShape,
    sloped: bool,
    f_ref: f64,
}

impl Model for ModeModel<'_> {
    fn n_params(&self) -> usize {
        if self.sloped { 5 } else { 4 }
    }

    fn eval(&self, p: &[f64], i: usize, grad: &mut [f64]) -> f64 {
        let f = self.freqs.get(i).copied().unwrap_or(0.0);
        let (b, a, c, w) = (p[0], p[1], p[2], p[3]);
        let (s, g) = line_and_gradient(self.shape, f, a, c, w);
        grad[0] = 1.0;
        grad[1] = g[0];
        grad[2] = g[1];
        grad[3] = g[2];
        let mut total = b + s;
        if self.sloped {
            let x = f - self.f_ref;
            grad[4] = x;
            total += p[4] * x;
        }
        total
    }

    fn admissible(&self, p: &[f64]) -> bool {
        // The background is a noise density (shot + electronic noise): it cannot be negative
        // anywhere in the band. Without this, a line that drifted during the average (wider
        // and flatter than the model) drives B below zero and the model weights diverge.
        let background_at = |f: f64| {
            if self.sloped {
                p[0] + p.get(4).copied().unwrap_or(0.0) * (f - self.f_ref)
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
            && p[2] > 0.0
            && p[3] > 0.0
            && background_at(lo) >= 0.0
            && background_at(hi) >= 0.0
    }
}

/// Median of the finite values of a slice (copies; [`crate::dsp::median::median`]); NaN
/// when there are none.
pub(crate) fn median(values: &[f64]) -> f64 {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    crate::dsp::median::median(&mut v).unwrap_or(f64::NAN)
}

/// Checks a band against a spectrum and returns the inclusive bin range.
///
/// # Errors
/// [`PhysicsError::Input`] when the band is not finite, LO ≥ HI, or lies outside 0…Nyquist.
pub fn band_bins(spectrum: &Spectrum, band_hz: (f64, f64), what: &str) -> Result<(usize, usize)> {
    let (lo, hi) = band_hz;
    let nyquist = spectrum.resolution_hz * spectrum.len().saturating_sub(1) as f64;
    if !(lo.is_finite() && hi.is_finite()) || lo >= hi {
        return Err(PhysicsError::Input(format!(
            "{what} needs its low edge below its high edge, got {lo} … {hi} Hz"
        )));
    }
    if lo < 0.0 || hi > nyquist * (1.0 + 1e-12) {
        return Err(PhysicsError::Input(format!(
            "{what} {lo}:{hi} Hz lies outside the spectrum (0 to {nyquist} Hz)"
        )));
    }
    let df = spectrum.resolution_hz;
    let k_lo = (lo / df).ceil().max(0.0) as usize;
    let k_hi = ((hi / df).floor() as usize).min(spectrum.len().saturating_sub(1));
    Ok((k_lo, k_hi))
}

/// Fits the mode in `band_hz` with default options ([`FitOptions::default`]).
///
/// # Errors
/// As [`fit_mode_with`].
pub fn fit_mode(spectrum: &Spectrum, band_hz: (f64, f64)) -> Result<ModeFit> {
    fit_mode_with(spectrum, band_hz, &FitOptions::default())
}

/// Fits one mechanical line plus background in `band_hz`.
///
/// # Errors
/// [`PhysicsError::Input`] for a band outside the spectrum or LO ≥ HI;
/// [`PhysicsError::NoMode`] when there is no line to stand behind: too few bins, no peak above
/// the floor, no convergence, a line wider than the band or narrower than a quarter bin, a
/// centre outside the band, or an area below `min_significance` σ.
pub fn fit_mode_with(
    spectrum: &Spectrum,
    band_hz: (f64, f64),
    options: &FitOptions,
) -> Result<ModeFit> {
    let (freqs, data, bins) = band_data(spectrum, band_hz, options, false)?;
    let df = spectrum.resolution_hz;
    let k_eff = if spectrum.k_eff.is_finite() && spectrum.k_eff > 0.0 {
        spectrum.k_eff
    } else {
        spectrum.averages.max(1) as f64
    };
    let inflation = window_stats::error_inflation(spectrum.window);
    let nenbw = if df > 0.0 { spectrum.enbw_hz / df } else { 1.0 };
    let plain = fit_bins(
        &freqs,
        &data,
        k_eff,
        inflation,
        nenbw * df,
        df,
        band_hz,
        options,
    );
    // A line wider than 5·ENBW is resolved: the plain model is exact enough.
    if let Ok(fit) = &plain
        && fit.linewidth_hz.value >= 5.0 * spectrum.enbw_hz
    {
        return plain;
    }
    let samples = LineSamples {
        freqs: &freqs,
        bins: &bins,
        data: &data,
    };
    match fit_narrow_line(
        spectrum,
        &samples,
        k_eff,
        inflation,
        band_hz,
        options,
        plain.as_ref().ok(),
    ) {
        Ok(fit) => Ok(fit),
        Err(e) => plain.or(Err(e)),
    }
}

/// The bins of a band that enter a fit.
struct LineSamples<'a> {
    freqs: &'a [f64],
    bins: &'a [usize],
    data: &'a [f64],
}

/// The fit of a line at or below the resolution: the model convolved with the window's
/// kernel (METHODS.md §2c), with the uncertainty floors of a line holding few degrees of
/// freedom ([`super::narrow`]).
fn fit_narrow_line(
    spectrum: &Spectrum,
    samples: &LineSamples<'_>,
    k_eff: f64,
    inflation: f64,
    band_hz: (f64, f64),
    options: &FitOptions,
    plain: Option<&ModeFit>,
) -> Result<ModeFit> {
    let df = spectrum.resolution_hz;
    let enbw = spectrum.enbw_hz;
    let kernel = Kernel::new(spectrum.window, spectrum.segment.max(2));
    let start = match plain {
        Some(p) => (
            p.background_psd.value.max(1e-300),
            p.area.value,
            p.frequency_hz.value,
        ),
        None => narrow::narrow_guess(samples.freqs, samples.data, df, spectrum.window.terms() + 1)
            .ok_or_else(|| PhysicsError::NoMode("no peak above the floor".into()))?,
    };
    let hint = plain.map(|p| (p.linewidth_hz.value - enbw).max(0.1 * enbw));
    let f_ref = 0.5 * (band_hz.0 + band_hz.1);
    let outcome = narrow::fit_convolved(
        samples.freqs,
        samples.bins,
        samples.data,
        k_eff,
        df,
        enbw,
        &kernel,
        options.line_shape,
        options.sloped_background,
        f_ref,
        start,
        hint,
        // From a plain fit's result one start (and one fallback) is enough; from the data
        // alone, try four. A spectrum of very few averages gets a capped effort: its fit
        // rarely converges, and the window's engine must not stall on it.
        plain.is_none() && k_eff >= 8.0,
        k_eff < 8.0,
    )
    .map_err(|e| {
        PhysicsError::NoMode(match e {
            SolveFailure::BadStart => "the fit could not start from the data".to_string(),
            SolveFailure::NotConverged => "the fit did not converge".to_string(),
            SolveFailure::Singular => "the fit is degenerate (line not constrained)".to_string(),
        })
    })?;
    let sol = &outcome.solution;
    let n = sol.params.len();
    let chi2_red = sol.chi2 / sol.dof.max(1) as f64;
    let var_scale = chi2_red * inflation * inflation;
    let cov =
        |a: usize, b: usize| sol.covariance.get(a * n + b).copied().unwrap_or(0.0) * var_scale;
    let sd = |k: usize| cov(k, k).max(0.0).sqrt();
    let p = &sol.params;
    let (b, a, c) = (p[0], p[1], p[2]);
    let slope_index = if outcome.fixed_width.is_some() { 3 } else { 4 };
    // The width: fitted with its σ, or unmeasurable (held at the delta-line limit).
    // The wings fix A_ensemble·γ while the core reads the realised area, so the fitted γ
    // inherits the realised area's scatter (super::narrow): add it in quadrature.
    let span = narrow::record_span_s(spectrum);
    let width_fit = match outcome.fixed_width {
        // Only below the resolution: a resolved line's wings and core are both in the fit.
        None if p[3] < enbw => {
            let own = p[3] * narrow::line_area_scatter(p[3], span);
            Some(Estimate::new(p[3], sd(3).hypot(own)))
        }
        None => Some(Estimate::new(p[3], sd(3))),
        Some(_) => None,
    };
    let resolution_limited = width_fit.is_none_or(|w| w.value < enbw);
    let (width, width_sigma) = match width_fit {
        Some(w) if !resolution_limited => (w.value, w.sigma),
        // Upper bound γ + 2σ (one-sided ≈ 98 %); ENBW when the width is not fitted at all.
        Some(w) => (w.value + 2.0 * w.sigma, w.sigma),
        None => (enbw, enbw),
    };
    // Floors for a line holding few degrees of freedom (super::narrow).
    // The width that sets the line's own scatter: the fitted one when it is measured (> 2σ);
    // otherwise nothing excludes a line narrower than 1/T, whose area is a single draw of a
    // thermal energy (100 %).
    let width_for_scatter = match width_fit {
        Some(w) if w.value > 2.0 * w.sigma => w.value,
        _ => 0.0,
    };
    let area_fit_sigma = sd(1);
    let area_sigma = area_fit_sigma.max(a * narrow::line_area_scatter(width_for_scatter, span));
    let freq_sigma = sd(2).max(narrow::line_centre_scatter_hz(width_for_scatter, span));
    let q = c / width;
    let q_sigma = q * ((freq_sigma / c).powi(2) + (width_sigma / width).powi(2)).sqrt();
    let peak = 2.0 * a / (PI * width);
    let peak_sigma = peak * ((area_sigma / a).powi(2) + (width_sigma / width).powi(2)).sqrt();
    let (bg, bg_sigma, slope) = if options.sloped_background {
        let x = c - f_ref;
        let si = slope_index;
        (
            b + p[si] * x,
            (cov(0, 0) + x * x * cov(si, si) + 2.0 * x * cov(0, si))
                .max(0.0)
                .sqrt(),
            Some(Estimate::new(p[si], sd(si))),
        )
    } else {
        (b, sd(0), None)
    };
    let fit = ModeFit {
        frequency_hz: Estimate::new(c, freq_sigma),
        linewidth_hz: Estimate::new(width, width_sigma),
        quality_factor: Estimate::new(q, q_sigma),
        area: Estimate::new(a, area_sigma),
        peak_psd: Estimate::new(peak, peak_sigma),
        background_psd: Estimate::new(bg, bg_sigma),
        background_slope_per_hz: slope,
        line_shape: options.line_shape,
        reduced_chi2: chi2_red,
        bins: samples.data.len(),
        band_hz,
        error_inflation: inflation,
        resolution_limited,
        slope_reference_hz: f_ref,
        linewidth_fit_hz: width_fit,
    };
    // Detection: the area against the fit's own (noise) uncertainty.
    accept(fit, None, area_fit_sigma, options.min_significance)
}

/// Initial guesses from the data: (B, A, f_m, γ).
pub(crate) fn initial_guess(freqs: &[f64], data: &[f64], df: f64) -> Option<(f64, f64, f64, f64)> {
    let n = data.len();
    let smooth: Vec<f64> = (0..n)
        .map(|i| {
            let lo = i.saturating_sub(1);
            let hi = (i + 1).min(n - 1);
            let s = &data[lo..=hi];
            s.iter().sum::<f64>() / s.len() as f64
        })
        .collect();
    let quarter = (n / 4).max(2).min(n);
    let b_left = median(&data[..quarter]);
    let b_right = median(&data[n - quarter..]);
    let mut floor = b_left.min(b_right);
    if !(floor.is_finite() && floor > 0.0) {
        floor = median(data);
    }
    let (i_pk, &peak) = smooth
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))?;
    let height = peak - floor;
    if height.is_nan() || height <= 0.0 {
        return None;
    }
    let half = floor + 0.5 * height;
    let mut left = freqs[0];
    for i in (0..i_pk).rev() {
        if smooth[i] <= half {
            let t = (half - smooth[i]) / (smooth[i + 1] - smooth[i]);
            left = freqs[i] + t * (freqs[i + 1] - freqs[i]);
            break;
        }
    }
    let mut right = freqs[n - 1];
    for i in i_pk + 1..n {
        if smooth[i] <= half {
            let t = (smooth[i - 1] - half) / (smooth[i - 1] - smooth[i]);
            right = freqs[i - 1] + t * (freqs[i] - freqs[i - 1]);
            break;
        }
    }
    let width = (right - left).max(0.5 * df);
    let area = height * PI * width / 2.0;
    Some((floor.max(1e-300), area, freqs[i_pk], width))
}

/// Why no solution came out of the solver, as a [`PhysicsError::NoMode`].
fn no_fit(last_err: SolveFailure) -> PhysicsError {
    PhysicsError::NoMode(match last_err {
        SolveFailure::BadStart => "the fit could not start from the data".to_string(),
        SolveFailure::NotConverged => "the fit did not converge".to_string(),
        SolveFailure::Singular => "the fit is degenerate (line not constrained)".to_string(),
    })
}

/// The usable bins of `band_hz` outside `options.exclude_hz`: (frequencies, values, bin
/// indices), values finite (and ≥ 0 unless `signed`), at least 4 more than the parameters.
fn band_data(
    spectrum: &Spectrum,
    band_hz: (f64, f64),
    options: &FitOptions,
    signed: bool,
) -> Result<(Vec<f64>, Vec<f64>, Vec<usize>)> {
    let (k_lo, k_hi) = band_bins(spectrum, band_hz, "mode band")?;
    let df = spectrum.resolution_hz;
    let mut freqs = Vec::with_capacity(k_hi.saturating_sub(k_lo) + 1);
    let mut data = Vec::with_capacity(freqs.capacity());
    let mut bins = Vec::with_capacity(freqs.capacity());
    for k in k_lo..=k_hi {
        let f = k as f64 * df;
        if options.exclude_hz.iter().any(|&(a, b)| f >= a && f <= b) {
            continue;
        }
        let Some(&d) = spectrum.psd_v2_per_hz.get(k) else {
            continue;
        };
        if d.is_finite() && (signed || d >= 0.0) {
            freqs.push(f);
            data.push(d);
            bins.push(k);
        }
    }
    let n_par = if options.sloped_background { 5 } else { 4 };
    if data.len() < n_par + 4 {
        return Err(PhysicsError::NoMode(format!(
            "the band holds only {} usable bins (need at least {})",
            data.len(),
            n_par + 4
        )));
    }
    Ok((freqs, data, bins))
}

/// The fit's result from the solver's parameters (B, A, f_m, γ[, slope]) and covariance:
/// the covariance scaled by χ²_red and the window's bin-correlation inflation², Q and the
/// peak through their gradients in (A, f_m, γ), the background at f_m (with its slope).
fn mode_fit_from(
    sol: &lsq::Solution,
    inflation: f64,
    options: &FitOptions,
    band_hz: (f64, f64),
    bins: usize,
    enbw_hz: f64,
) -> ModeFit {
    let f_ref = 0.5 * (band_hz.0 + band_hz.1);
    let n = sol.params.len();
    let chi2_red = sol.chi2 / sol.dof.max(1) as f64;
    let var_scale = chi2_red * inflation * inflation;
    let cov =
        |a: usize, b: usize| sol.covariance.get(a * n + b).copied().unwrap_or(0.0) * var_scale;
    let p = &sol.params;
    let (b, a, c, w) = (p[0], p[1], p[2], p[3]);
    let sd = |k: usize| cov(k, k).max(0.0).sqrt();
    // Derived quantities through their gradients in (A, f_m, γ) = indices 1, 2, 3.
    let propagate = |g: [f64; 3]| {
        let idx = [1usize, 2, 3];
        let mut v = 0.0;
        for (i, gi) in idx.iter().zip(g) {
            for (j, gj) in idx.iter().zip(g) {
                v += gi * gj * cov(*i, *j);
            }
        }
        v.max(0.0).sqrt()
    };
    let peak = 2.0 * a / (PI * w);
    let mut bg = b;
    let mut bg_sigma = sd(0);
    let mut slope = None;
    if options.sloped_background {
        let x = c - f_ref;
        bg = b + p[4] * x;
        bg_sigma = (cov(0, 0) + x * x * cov(4, 4) + 2.0 * x * cov(0, 4))
            .max(0.0)
            .sqrt();
        slope = Some(Estimate::new(p[4], sd(4)));
    }
    // Narrower than the resolution (γ < ENBW): the width is then reported as the upper bound
    // γ + 2σ, as the kernel-convolved fit does (a plain fit broadens such a line).
    let resolution_limited = w < enbw_hz;
    let linewidth = if resolution_limited {
        Estimate::new(w + 2.0 * sd(3), sd(3))
    } else {
        Estimate::new(w, sd(3))
    };
    // Q's lower bound with the width's upper bound.
    let q = c / linewidth.value;
    ModeFit {
        frequency_hz: Estimate::new(c, sd(2)),
        linewidth_hz: linewidth,
        quality_factor: Estimate::new(q, propagate([0.0, 1.0 / w, -c / (w * w)]) * q * w / c),
        area: Estimate::new(a, sd(1)),
        peak_psd: Estimate::new(peak, propagate([2.0 / (PI * w), 0.0, -peak / w])),
        background_psd: Estimate::new(bg, bg_sigma),
        background_slope_per_hz: slope,
        line_shape: options.line_shape,
        reduced_chi2: chi2_red,
        bins,
        band_hz,
        error_inflation: inflation,
        resolution_limited,
        slope_reference_hz: f_ref,
        linewidth_fit_hz: None,
    }
}

#[allow(clippy::too_many_arguments)]
fn fit_bins(
    freqs: &[f64],
    data: &[f64],
    k_eff: f64,
    inflation: f64,
    enbw_hz: f64,
    df: f64,
    band_hz: (f64, f64),
    options: &FitOptions,
) -> Result<ModeFit> {
    let (b0, a0, f0, w0) = initial_guess(freqs, data, df)
        .ok_or_else(|| PhysicsError::NoMode("no peak above the floor".into()))?;
    let f_ref = 0.5 * (band_hz.0 + band_hz.1);
    let model = ModeModel {
        freqs,
        shape: options.line_shape,
        sloped: options.sloped_background,
        f_ref,
    };
    let mut best: Option<lsq::Solution> = None;
    let mut last_err = SolveFailure::BadStart;
    for scale in [1.0, 3.0, 0.33] {
        let mut start = vec![b0, a0 * scale, f0, w0 * scale];
        if options.sloped_background {
            start.push(0.0);
        }
        match lsq::fit_model_weighted(&model, &start, data, k_eff) {
            Ok(sol) => {
                if best.as_ref().is_none_or(|b| sol.chi2 < b.chi2) {
                    best = Some(sol);
                }
                break;
            }
            Err(e) => last_err = e,
        }
    }
    let sol = best.ok_or_else(|| no_fit(last_err))?;
    let fit = mode_fit_from(&sol, inflation, options, band_hz, data.len(), enbw_hz);
    let detection = fit.area.sigma;
    accept(fit, Some(0.25 * df), detection, options.min_significance)
}

/// The checks every mode fit must pass before it is reported: finite values, the centre
/// inside the band, the line no wider than the band, (optionally) no narrower than
/// `min_width_hz`, and an area `min_significance` times its detection σ above zero.
fn accept(
    fit: ModeFit,
    min_width_hz: Option<f64>,
    detection_sigma: f64,
    min_significance: f64,
) -> Result<ModeFit> {
    let (c, w, a) = (
        fit.frequency_hz.value,
        fit.linewidth_hz.value,
        fit.area.value,
    );
    let band_hz = fit.band_hz;
    let all_finite = [
        fit.frequency_hz,
        fit.linewidth_hz,
        fit.quality_factor,
        fit.area,
        fit.peak_psd,
        fit.background_psd,
    ]
    .iter()
    .all(Estimate::is_finite)
        && fit.reduced_chi2.is_finite();
    if !all_finite {
        return Err(PhysicsError::NoMode(
            "the fit gave non-finite values".into(),
        ));
    }
    if c < band_hz.0 || c > band_hz.1 {
        return Err(PhysicsError::NoMode(format!(
            "the fitted centre {c:.6} Hz lies outside the band"
        )));
    }
    if w > band_hz.1 - band_hz.0 {
        return Err(PhysicsError::NoMode(format!(
            "the fitted linewidth {w:.4} Hz is wider than the band"
        )));
    }
    if let Some(min) = min_width_hz
        && w < min
    {
        return Err(PhysicsError::NoMode(format!(
            "the linewidth is unresolved (fitted {w:.3e} Hz, below {min:.3e} Hz)"
        )));
    }
    if a < min_significance * detection_sigma {
        return Err(PhysicsError::NoMode(format!(
            "no significant peak (area {:.2}σ above zero, need {})",
            a / detection_sigma,
            min_significance
        )));
    }
    Ok(fit)
}

/// The mode model shifted by a constant (data shifted alike), with a background of either
/// sign: for data that are no PSD of one channel (the real part of a cross-spectrum).
struct SignedBackground<'a> {
    inner: ModeModel<'a>,
    offset: f64,
}

impl Model for SignedBackground<'_> {
    fn n_params(&self) -> usize {
        self.inner.n_params()
    }

    fn eval(&self, p: &[f64], i: usize, grad: &mut [f64]) -> f64 {
        self.inner.eval(p, i, grad) + self.offset
    }

    fn admissible(&self, p: &[f64]) -> bool {
        p.iter().all(|v| v.is_finite()) && p[1] > 0.0 && p[2] > 0.0 && p[3] > 0.0
    }
}

/// Start values (B, A, f_m, γ) for noisy data of either sign: a running mean over ±h bins
/// (h ≈ n/40) for the peak and its half-width, the median of the outer quarters for B.
fn signed_guess(freqs: &[f64], data: &[f64], df: f64) -> Option<(f64, f64, f64, f64)> {
    let n = data.len();
    let h = (n / 40).max(1);
    let smooth: Vec<f64> = (0..n)
        .map(|i| {
            let s = &data[i.saturating_sub(h)..=(i + h).min(n - 1)];
            s.iter().sum::<f64>() / s.len() as f64
        })
        .collect();
    let quarter = (n / 4).max(2).min(n);
    let mut outer: Vec<f64> = data[..quarter].to_vec();
    outer.extend_from_slice(&data[n - quarter..]);
    let floor = median(&outer);
    let (i_pk, &peak) = smooth
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))?;
    let height = peak - floor;
    if !(height.is_finite() && height > 0.0) {
        return None;
    }
    let half = floor + 0.5 * height;
    let left = (0..i_pk)
        .rev()
        .find(|&i| smooth[i] <= half)
        .map_or(freqs[0], |i| freqs[i]);
    let right = (i_pk + 1..n)
        .find(|&i| smooth[i] <= half)
        .map_or(freqs[n - 1], |i| freqs[i]);
    let width = (right - left).max(df);
    Some((floor, height * PI * width / 2.0, freqs[i_pk], width))
}

/// Fits one mechanical line plus a flat (or sloped) background **of either sign** to
/// `data.psd_v2_per_hz` in `band_hz`, with the variance of each bin *given* by
/// `variance(k, model_k)` (bin index k, current model value there): the fit of the real part
/// of a cross-spectral density, whose variance is `(P_aa P_bb + Re² − Im²)/(2K_eff)`
/// (METHODS.md §10). The weights are recomputed from the model until the parameters settle;
/// the covariance is scaled by χ²_red and the window's bin-correlation inflation as in
/// [`fit_mode_with`], and the same acceptance checks apply. `data` supplies the bins, Δf,
/// ENBW and the window; its values may be negative.
///
/// # Errors
/// As [`fit_mode_with`].
pub(crate) fn fit_mode_given_variance(
    data: &Spectrum,
    band_hz: (f64, f64),
    options: &FitOptions,
    variance: &dyn Fn(usize, f64) -> f64,
) -> Result<ModeFit> {
    let (freqs, values, bins) = band_data(data, band_hz, options, true)?;
    let df = data.resolution_hz;
    let n_par = if options.sloped_background { 5 } else { 4 };
    let (b0, a0, f0, w0) = signed_guess(&freqs, &values, df)
        .ok_or_else(|| PhysicsError::NoMode("no peak above the background".into()))?;
    let scale_max = values.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let f_ref = 0.5 * (band_hz.0 + band_hz.1);
    let model = SignedBackground {
        inner: ModeModel {
            freqs: &freqs,
            shape: options.line_shape,
            sloped: options.sloped_background,
            f_ref,
        },
        offset: 0.0,
    };
    let model_at = |p: &[f64], i: usize| {
        let mut grad = [0.0; 5];
        model.inner.eval(p, i, &mut grad[..n_par])
    };
    let inv_var_at = |p: &[f64]| -> Option<Vec<f64>> {
        (0..values.len())
            .map(|i| {
                let v = variance(bins[i], model_at(p, i));
                (v.is_finite() && v > 0.0).then(|| 1.0 / v)
            })
            .collect()
    };
    let mut best: Option<(lsq::Solution, f64)> = None;
    let mut last_err = SolveFailure::BadStart;
    for scale in [1.0, 3.0, 0.33] {
        let mut p = vec![b0, a0 * scale, f0, w0 * scale];
        if options.sloped_background {
            p.push(0.0);
        }
        let mut outcome: std::result::Result<lsq::Solution, SolveFailure> =
            Err(SolveFailure::NotConverged);
        for _ in 0..30 {
            let Some(inv_var) = inv_var_at(&p) else {
                outcome = Err(SolveFailure::BadStart);
                break;
            };
            // Shift data and model so the model stays positive (residuals unchanged).
            let peak = p[1] * 2.0 / (PI * p[3].max(df));
            let offset = 10.0 * (scale_max + peak.abs() + p[0].abs()) + 1e-300;
            let shifted = SignedBackground {
                offset,
                inner: ModeModel { ..model.inner },
            };
            let data_shifted: Vec<f64> = values.iter().map(|v| v + offset).collect();
            match lsq::fit_model_fixed(&shifted, &p, &data_shifted, &inv_var) {
                Ok(sol) => {
                    let n = sol.params.len();
                    let moved = (0..n)
                        .map(|k| {
                            let sd = sol.covariance[k * n + k].max(0.0).sqrt();
                            (sol.params[k] - p[k]).abs() / sd.max(1e-300)
                        })
                        .fold(0.0, f64::max);
                    p.clone_from(&sol.params);
                    let settled = moved <= 1e-4;
                    outcome = Ok(sol);
                    if settled {
                        break;
                    }
                }
                Err(e) => {
                    outcome = Err(e);
                    break;
                }
            }
        }
        match outcome {
            Ok(sol) => {
                let chi2 = sol.chi2;
                if best.as_ref().is_none_or(|b| chi2 < b.1) {
                    best = Some((sol, chi2));
                }
            }
            Err(e) => last_err = e,
        }
    }
    let Some((sol, _)) = best else {
        return Err(no_fit(last_err));
    };
    let inflation = window_stats::error_inflation(data.window);
    let fit = mode_fit_from(
        &sol,
        inflation,
        options,
        band_hz,
        values.len(),
        data.enbw_hz,
    );
    let detection = fit.area.sigma;
    accept(fit, Some(0.25 * df), detection, options.min_significance)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Numerical gradient check of both line shapes.
    #[test]
    fn gradients_match_finite_differences() {
        for shape in [LineShape::Oscillator, LineShape::Lorentzian] {
            let (f, a, c, w) = (1003.0, 2.0, 1000.0, 7.0);
            let (_, g) = line_and_gradient(shape, f, a, c, w);
            let h = [1e-6, 1e-4, 1e-5];
            let base = [a, c, w];
            for k in 0..3 {
                let mut up = base;
                let mut dn = base;
                up[k] += h[k];
                dn[k] -= h[k];
                let num = (line(shape, f, up[0], up[1], up[2])
                    - line(shape, f, dn[0], dn[1], dn[2]))
                    / (2.0 * h[k]);
                assert!(
                    (num / g[k] - 1.0).abs() < 1e-6,
                    "{shape:?} {k}: {num} vs {}",
                    g[k]
                );
            }
        }
    }

    #[test]
    fn median_of_even_and_odd() {
        assert_eq!(median(&[3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]), 2.5);
    }
}
