//! Motional-sideband asymmetry thermometry in heterodyne (METHODS.md §6; Safavi-Naeini et al.,
//! PRL 108, 033602 (2012); Weinstein et al., PRX 4, 041003 (2014); Underwood et al., PRA 92,
//! 061801(R) (2015)). Both lines at f_IF ± f_m are fitted jointly — Lorentzians with a shared
//! linewidth, each with its own flat background over its own window — and the optical red
//! (Stokes, ∝ n̄+1) line is picked by the side of the local oscillator: with the LO ABOVE the
//! laser the Stokes line appears at f_IF + f_m, with the LO BELOW at f_IF − f_m.
//! R = (A_red/A_blue)·(η_blue/η_red), n̄ = 1/(R − 1), σ_n̄ = σ_R/(R − 1)².

use super::fit::{self, LineShape, line_and_gradient};
use super::lsq::{self, Model};
use super::{Estimate, PhysicsError, Result, calibration, window_stats};
use crate::dsp::Spectrum;

/// The caution that goes with every sideband result (METHODS.md §6 caveat).
pub(crate) const CLASSICAL_NOISE_NOTE: &str = "sideband asymmetry: classical laser amplitude/phase noise or excess cavity occupation interferes with opposite signs in the two sidebands and can mimic or mask the quantum asymmetry (Safavi-Naeini et al. 2013, Jayich et al. 2012); characterise the laser noise at f_m or vary the probe power";

/// Inputs of the sideband analysis.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SidebandOptions {
    /// Heterodyne carrier (intermediate frequency) f_IF (Hz).
    pub carrier_hz: f64,
    /// Band of the mechanical frequency f_m itself, LO:HI (Hz offsets from the carrier).
    pub band_hz: (f64, f64),
    /// True when the local oscillator is above the laser.
    pub lo_above: bool,
    /// Detection-efficiency ratio η_red/η_blue with its 1σ (1 ± 0 when not known).
    pub imbalance: Estimate,
}

/// One fitted sideband line.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SidebandLineFit {
    /// Electronic frequency of the line (Hz).
    pub frequency_hz: Estimate,
    /// Area (PSD unit × Hz), background subtracted, before the imbalance correction.
    pub area: Estimate,
    /// Local background (PSD unit).
    pub background_psd: Estimate,
}

/// Result of the joint fit.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SidebandFit {
    /// Optical red (Stokes, n̄+1) line.
    pub red: SidebandLineFit,
    /// Optical blue (anti-Stokes, n̄) line.
    pub blue: SidebandLineFit,
    /// Shared FWHM linewidth (Hz).
    pub linewidth_hz: Estimate,
    /// f_m from the split of the two lines (Hz).
    pub mechanical_frequency_hz: Estimate,
    /// Imbalance-corrected R = (A_red/A_blue)/(η_red/η_blue).
    pub ratio: Estimate,
    /// η_red/η_blue applied.
    pub imbalance: Estimate,
    /// n̄ = 1/(R − 1); `None` when R ≤ 1 (see `notes`).
    pub occupancy: Option<Estimate>,
    /// Which side the LO is on and which electronic line was taken as red.
    pub convention: String,
    /// Reduced χ² of the joint fit (NaN for band sums).
    pub reduced_chi2: f64,
    /// The lines are narrower than the resolution (METHODS §2c): the areas are
    /// background-subtracted band sums, the frequencies interpolated peaks, and
    /// `linewidth_hz` is the ENBW, an upper bound.
    #[serde(default)]
    pub resolution_limited: bool,
    /// Caveats.
    pub notes: Vec<String>,
}

/// n̄ = 1/(R − 1) with σ_n̄ = σ_R/(R − 1)² (METHODS.md §6); `None` for R ≤ 1 or non-finite.
pub fn occupancy_from_ratio(ratio: Estimate) -> Option<Estimate> {
    let d = ratio.value - 1.0;
    if !(d.is_finite() && d > 0.0) {
        return None;
    }
    let n = Estimate::new(1.0 / d, ratio.sigma / (d * d));
    n.is_finite().then_some(n)
}

/// η_red/η_blue from two injected tones of equal power, one beside each sideband.
///
/// # Errors
/// As [`calibration::read_tone`].
pub(crate) fn imbalance_from_tones(
    spectrum: &Spectrum,
    red_tone_hz: f64,
    blue_tone_hz: f64,
) -> Result<Estimate> {
    let opts = calibration::ToneOptions::default();
    let r = calibration::read_tone(spectrum, red_tone_hz, &opts, None)?;
    let b = calibration::read_tone(spectrum, blue_tone_hz, &opts, None)?;
    let v = r.power.value / b.power.value;
    let rel = (r.power.relative().powi(2) + b.power.relative().powi(2)).sqrt();
    Ok(Estimate::new(v, v * rel))
}

/// Parameters [B_u, A_u, c_u, B_l, A_l, c_l, γ]; the first `n_upper` points belong to the
/// upper window.
struct PairModel<'a> {
    freqs: &'a [f64],
    n_upper: usize,
}

impl Model for PairModel<'_> {
    fn n_params(&self) -> usize {
        7
    }

    fn eval(&self, p: &[f64], i: usize, grad: &mut [f64]) -> f64 {
        let f = self.freqs.get(i).copied().unwrap_or(0.0);
        grad.iter_mut().for_each(|g| *g = 0.0);
        let off = if i < self.n_upper { 0 } else { 3 };
        let (s, g) = line_and_gradient(LineShape::Lorentzian, f, p[off + 1], p[off + 2], p[6]);
        grad[off] = 1.0;
        grad[off + 1] = g[0];
        grad[off + 2] = g[1];
        grad[6] = g[2];
        p[off] + s
    }

    fn admissible(&self, p: &[f64]) -> bool {
        p.iter().all(|v| v.is_finite()) && p[1] > 0.0 && p[4] > 0.0 && p[6] > 0.0
    }
}

/// Fits the sideband pair and forms R and n̄.
///
/// # Errors
/// [`PhysicsError::Input`] for a band with LO ≥ HI, a negative LO, or sideband windows outside
/// the spectrum; [`PhysicsError::Sideband`] when either line cannot be found or fitted.
pub fn fit_sidebands(spectrum: &Spectrum, options: &SidebandOptions) -> Result<SidebandFit> {
    match fit_sidebands_joint(spectrum, options) {
        Ok(f) if f.linewidth_hz.value >= spectrum.enbw_hz => Ok(f),
        Ok(f) => Ok(band_sum_sidebands(spectrum, options).unwrap_or(f)),
        Err(PhysicsError::Sideband(m)) => {
            band_sum_sidebands(spectrum, options).map_err(|_| PhysicsError::Sideband(m))
        }
        Err(e) => Err(e),
    }
}

/// The Lorentzian joint fit (resolved lines).
fn fit_sidebands_joint(spectrum: &Spectrum, options: &SidebandOptions) -> Result<SidebandFit> {
    let (lo, hi) = options.band_hz;
    let fc = options.carrier_hz;
    if !(fc.is_finite() && fc > 0.0) {
        return Err(PhysicsError::Input(format!(
            "the carrier must be a positive frequency, got {fc}"
        )));
    }
    if !(lo.is_finite() && hi.is_finite() && lo >= 0.0 && lo < hi) {
        return Err(PhysicsError::Input(format!(
            "with a carrier, the mode band must be offsets LO:HI from it with 0 <= LO < HI, got {lo}:{hi}"
        )));
    }
    if fc - hi <= 0.0 {
        return Err(PhysicsError::Input(format!(
            "the carrier {fc} Hz minus the top of the mode band {hi} Hz is below 0 Hz"
        )));
    }
    let up = fit::band_bins(
        spectrum,
        (fc + lo, fc + hi),
        "upper sideband window (--carrier + --mode-band)",
    )?;
    let dn = fit::band_bins(
        spectrum,
        (fc - hi, fc - lo),
        "lower sideband window (--carrier − --mode-band)",
    )?;
    let df = spectrum.resolution_hz;
    let collect = |(a, b): (usize, usize)| -> (Vec<f64>, Vec<f64>) {
        (a..=b)
            .filter_map(|k| {
                let d = spectrum.psd_v2_per_hz.get(k).copied()?;
                (d.is_finite() && d >= 0.0).then_some((k as f64 * df, d))
            })
            .unzip()
    };
    let (fu, du) = collect(up);
    let (fl, dl) = collect(dn);
    if fu.len() < 8 || fl.len() < 8 {
        return Err(PhysicsError::Sideband(
            "the sideband windows hold fewer than 8 bins each".into(),
        ));
    }
    let gu = fit::initial_guess(&fu, &du, df)
        .ok_or_else(|| PhysicsError::Sideband("no upper sideband above the floor".into()))?;
    let gl = fit::initial_guess(&fl, &dl, df)
        .ok_or_else(|| PhysicsError::Sideband("no lower sideband above the floor".into()))?;
    let n_upper = fu.len();
    let freqs: Vec<f64> = fu.iter().chain(&fl).copied().collect();
    let data: Vec<f64> = du.iter().chain(&dl).copied().collect();
    let model = PairModel {
        freqs: &freqs,
        n_upper,
    };
    let width0 = (0.5 * (gu.3 + gl.3)).max(df);
    let start = [gu.0, gu.1, gu.2, gl.0, gl.1, gl.2, width0];
    let sol = lsq::fit_model_weighted(&model, &start, &data, spectrum.k_eff.max(1.0))
        .map_err(|e| PhysicsError::Sideband(format!("the joint fit failed ({e:?})")))?;
    let inflation = window_stats::error_inflation(spectrum.window);
    let chi2_red = sol.chi2 / sol.dof.max(1) as f64;
    let scale = chi2_red * inflation * inflation;
    let cov = |a: usize, b: usize| sol.covariance.get(a * 7 + b).copied().unwrap_or(0.0) * scale;
    let sd = |k: usize| cov(k, k).max(0.0).sqrt();
    let p = &sol.params;
    let line = |off: usize| SidebandLineFit {
        frequency_hz: Estimate::new(p[off + 2], sd(off + 2)),
        area: Estimate::new(p[off + 1], sd(off + 1)),
        background_psd: Estimate::new(p[off], sd(off)),
    };
    let upper = line(0);
    let lower = line(3);
    let width = Estimate::new(p[6], sd(6));
    for (name, l, (a, b)) in [
        ("upper", &upper, (fc + lo, fc + hi)),
        ("lower", &lower, (fc - hi, fc - lo)),
    ] {
        if l.frequency_hz.value < a || l.frequency_hz.value > b {
            return Err(PhysicsError::Sideband(format!(
                "the {name} line was fitted outside its window"
            )));
        }
        if l.area.value < 3.0 * l.area.sigma {
            return Err(PhysicsError::Sideband(format!(
                "the {name} line is not significant ({:.1}σ)",
                l.area.value / l.area.sigma
            )));
        }
    }
    if width.value > hi - lo || width.value < 0.25 * df {
        return Err(PhysicsError::Sideband(format!(
            "the shared linewidth {:.3e} Hz is wider than the band or unresolved",
            width.value
        )));
    }
    let split = Estimate::new(
        0.5 * (upper.frequency_hz.value - lower.frequency_hz.value),
        0.5 * (cov(2, 2) + cov(5, 5) - 2.0 * cov(2, 5)).max(0.0).sqrt(),
    );
    // Red = Stokes: upper line when the LO is above the laser.
    let (red, blue, red_idx, blue_idx) = if options.lo_above {
        (upper, lower, 1, 4)
    } else {
        (lower, upper, 4, 1)
    };
    let raw = red.area.value / blue.area.value;
    let rel2 = (red.area.sigma / red.area.value).powi(2)
        + (blue.area.sigma / blue.area.value).powi(2)
        - 2.0 * cov(red_idx, blue_idx) / (red.area.value * blue.area.value);
    let eta = options.imbalance;
    let r = raw / eta.value;
    let rel_r = (rel2.max(0.0) + eta.relative().powi(2)).sqrt();
    let ratio = Estimate::new(r, r * rel_r);
    let mut notes = vec![CLASSICAL_NOISE_NOTE.to_string()];
    let occupancy = occupancy_from_ratio(ratio);
    if occupancy.is_none() {
        notes.push(format!(
            "sideband ratio R = {r:.4} ≤ 1: no occupancy (check --lo-side, the imbalance correction and classical noise)"
        ));
    }
    let convention = if options.lo_above {
        format!(
            "LO above the laser: red (Stokes, n+1) = f_IF + f_m at {:.3} Hz; blue (anti-Stokes, n) = f_IF − f_m",
            red.frequency_hz.value
        )
    } else {
        format!(
            "LO below the laser: red (Stokes, n+1) = f_IF − f_m at {:.3} Hz; blue (anti-Stokes, n) = f_IF + f_m",
            red.frequency_hz.value
        )
    };
    Ok(SidebandFit {
        red,
        blue,
        linewidth_hz: width,
        mechanical_frequency_hz: split,
        ratio,
        imbalance: eta,
        occupancy,
        convention,
        reduced_chi2: chi2_red,
        resolution_limited: false,
        notes,
    })
}

/// R = (A_red/A_blue)/(η_red/η_blue) with σ from independent relative area errors (METHODS §6).
fn ratio_of(red: Estimate, blue: Estimate, eta: Estimate) -> Estimate {
    let r = red.value / blue.value / eta.value;
    let rel = (red.relative().powi(2) + blue.relative().powi(2) + eta.relative().powi(2)).sqrt();
    Estimate::new(r, r * rel)
}

fn convention_text(lo_above: bool, red_hz: f64) -> String {
    if lo_above {
        format!(
            "LO above the laser: red (Stokes, n+1) = f_IF + f_m at {red_hz:.3} Hz; blue (anti-Stokes, n) = f_IF − f_m"
        )
    } else {
        format!(
            "LO below the laser: red (Stokes, n+1) = f_IF − f_m at {red_hz:.3} Hz; blue (anti-Stokes, n) = f_IF + f_m"
        )
    }
}

/// One line narrower than the resolution read by a band sum (METHODS §2c): the strongest
/// bin of the window, the area Σ(S_k − B)Δf over ±M bins (M = the window's tone half-width
/// plus 2, which holds ≥ 99.99 % of the kernel, METHODS §1), B the mean of the window's bins
/// farther than 2M from the peak. σ from the χ² scatter of the summed bins (1/√K_eff each,
/// neighbours correlated: × the window's error inflation) and of the background mean.
fn band_sum_line(
    spectrum: &Spectrum,
    window_hz: (f64, f64),
    what: &str,
) -> Result<SidebandLineFit> {
    let (a, b) = fit::band_bins(spectrum, window_hz, what)?;
    let psd = |k: usize| spectrum.psd_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
    let df = spectrum.resolution_hz;
    let kp = (a..=b)
        .filter(|&k| psd(k).is_finite())
        .max_by(|&x, &y| psd(x).total_cmp(&psd(y)))
        .ok_or_else(|| PhysicsError::Sideband(format!("no finite bins in the {what}")))?;
    let m = spectrum.window.tone_half_width_bins() + 2;
    let bg: Vec<f64> = (a..=b)
        .filter(|&k| k.abs_diff(kp) > 2 * m)
        .map(psd)
        .filter(|v| v.is_finite())
        .collect();
    if bg.len() < 8 {
        return Err(PhysicsError::Sideband(format!(
            "the {what} is too narrow for a band sum"
        )));
    }
    let k_eff = spectrum.k_eff.max(1.0);
    let b_mean = bg.iter().sum::<f64>() / bg.len() as f64;
    let sigma_b = b_mean / (k_eff * bg.len() as f64).sqrt();
    let lo = kp.saturating_sub(m).max(a);
    let hi = (kp + m).min(b);
    let nbins = (hi - lo + 1) as f64;
    let area: f64 = (lo..=hi).map(|k| (psd(k) - b_mean) * df).sum();
    let var_bins: f64 = (lo..=hi)
        .map(|k| (psd(k) * df).powi(2) / k_eff)
        .sum::<f64>()
        * window_stats::error_inflation(spectrum.window).powi(2);
    let sigma = (var_bins + (nbins * df * sigma_b).powi(2)).sqrt();
    if area.partial_cmp(&(3.0 * sigma)) != Some(std::cmp::Ordering::Greater) {
        return Err(PhysicsError::Sideband(format!(
            "the line in the {what} is not significant"
        )));
    }
    // Parabolic interpolation of the peak (in log power) for the frequency.
    let f = if kp > a && kp < b {
        let (l, c, r) = (psd(kp - 1).ln(), psd(kp).ln(), psd(kp + 1).ln());
        let den = l - 2.0 * c + r;
        let d = if den.abs() > 0.0 {
            0.5 * (l - r) / den
        } else {
            0.0
        };
        (kp as f64 + d.clamp(-0.5, 0.5)) * df
    } else {
        kp as f64 * df
    };
    Ok(SidebandLineFit {
        frequency_hz: Estimate::new(f, df / 12f64.sqrt()),
        area: Estimate::new(area, sigma),
        background_psd: Estimate::new(b_mean, sigma_b),
    })
}

/// Both lines by band sums (lines narrower than the resolution, METHODS §2c).
fn band_sum_sidebands(spectrum: &Spectrum, options: &SidebandOptions) -> Result<SidebandFit> {
    let (lo, hi) = options.band_hz;
    let fc = options.carrier_hz;
    let upper = band_sum_line(spectrum, (fc + lo, fc + hi), "upper sideband window")?;
    let lower = band_sum_line(spectrum, (fc - hi, fc - lo), "lower sideband window")?;
    let (red, blue) = if options.lo_above {
        (upper, lower)
    } else {
        (lower, upper)
    };
    // The ratio first: both lines are read off the same motion, so a draw of its energy
    // scales both areas alike and cancels in R.
    let ratio = ratio_of(red.area, blue.area, options.imbalance);
    let occupancy = occupancy_from_ratio(ratio);
    // Each area on its own is one draw of the line's thermal energy when the line may be
    // narrower than 1/T: its σ is at least the area itself (METHODS §11, √(2(x−1+e^{−x}))/x
    // → 1 for ΓT → 0; the linewidth is not measured here).
    let one_draw = |mut l: SidebandLineFit| {
        l.area.sigma = l.area.sigma.max(l.area.value.abs());
        l
    };
    let (red, blue) = (one_draw(red), one_draw(blue));
    let mut notes = vec![
        CLASSICAL_NOISE_NOTE.to_string(),
        format!(
            "sidebands: the lines are narrower than the resolution (ENBW {:.3} Hz): areas are background-subtracted band sums and the linewidth is not measured (METHODS §2c); each area may be a single draw of the line's energy (σ = 100 %), while R = red/blue is not affected (both lines follow the same motion)",
            spectrum.enbw_hz
        ),
    ];
    if occupancy.is_none() {
        notes.push(format!(
            "sideband ratio R = {:.4} ≤ 1: no occupancy (check --lo-side, the imbalance correction and classical noise)",
            ratio.value
        ));
    }
    let split = Estimate::new(
        0.5 * (upper.frequency_hz.value - lower.frequency_hz.value),
        0.5 * upper.frequency_hz.sigma.hypot(lower.frequency_hz.sigma),
    );
    Ok(SidebandFit {
        convention: convention_text(options.lo_above, red.frequency_hz.value),
        red,
        blue,
        linewidth_hz: Estimate::new(spectrum.enbw_hz, 0.0),
        mechanical_frequency_hz: split,
        ratio,
        imbalance: options.imbalance,
        occupancy,
        reduced_chi2: f64::NAN,
        resolution_limited: true,
        notes,
    })
}

/// The two phase-modulation calibration lines at carrier ± `f_mod_hz`, read as tones
/// (METHODS §1 band sums) and combined: the returned reading holds their summed power (each
/// line carries half the equivalent power of the tone, so c² = x_cal,rms²/(P_up + P_down),
/// whatever the split between the two detection sides) and f_mod from half their split.
///
/// # Errors
/// As [`calibration::read_tone`].
pub(crate) fn read_pm_lines(
    spectrum: &Spectrum,
    carrier_hz: f64,
    f_mod_hz: f64,
) -> Result<calibration::ToneReading> {
    let opts = calibration::ToneOptions::default();
    let up = calibration::read_tone(spectrum, carrier_hz + f_mod_hz, &opts, None)?;
    let dn = calibration::read_tone(spectrum, carrier_hz - f_mod_hz, &opts, None)?;
    let mut out = up.clone();
    out.frequency_hz = 0.5 * (up.frequency_hz - dn.frequency_hz);
    out.power = Estimate::new(
        up.power.value + dn.power.value,
        up.power.sigma.hypot(dn.power.sigma),
    );
    out.peak_power = up.peak_power + dn.peak_power;
    out.floor_psd = 0.5 * (up.floor_psd + dn.floor_psd);
    Ok(out)
}

/// Occupancy from the calibrated sideband areas (METHODS §4, §6): the red and blue areas are
/// x_zpf²(n̄+1) and x_zpf² n̄, so c²(A_red + A_blue) = x_zpf²(2n̄+1) and
/// n̄ = (c²(A_red + A_blue)/x_zpf² − 1)/2. σ by first-order propagation (independent areas,
/// the calibration's relative error).
pub(crate) fn occupancy_from_areas(
    red_v2: Estimate,
    blue_v2: Estimate,
    m2_per_v2: Estimate,
    x_zpf_m: f64,
) -> Option<Estimate> {
    let sum = red_v2.value + blue_v2.value;
    let sum_sigma = red_v2.sigma.hypot(blue_v2.sigma);
    let x2 = x_zpf_m * x_zpf_m;
    let var = m2_per_v2.value * sum;
    let var_sigma = var * (sum_sigma / sum).hypot(m2_per_v2.relative());
    let n = Estimate::new(0.5 * (var / x2 - 1.0), 0.5 * var_sigma / x2);
    (n.value.is_finite() && n.sigma.is_finite()).then_some(n)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ratio_to_occupancy() {
        // METHODS.md §6/§7: R = 1.5 → 2, R = 2 → 1, R = 11 → 0.1; σ_n = σ_R/(R−1)².
        let n = occupancy_from_ratio(Estimate::new(1.5, 1.5 * 0.02 * 2f64.sqrt())).unwrap();
        assert!((n.value - 2.0).abs() < 1e-12);
        assert!((n.sigma - 0.169_705_627_484_771_4).abs() < 1e-12);
        assert!(
            (occupancy_from_ratio(Estimate::new(11.0, 0.0))
                .unwrap()
                .value
                - 0.1)
                .abs()
                < 1e-12
        );
        assert!(occupancy_from_ratio(Estimate::new(1.0, 0.1)).is_none());
        assert!(occupancy_from_ratio(Estimate::new(0.8, 0.1)).is_none());
    }
}
