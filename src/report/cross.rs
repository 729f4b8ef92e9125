//! The two-detector analysis (`analyze --cross-channel J`, METHODS.md §10): the mode fitted on
//! the real part of the cross-spectral density P_ab of channels a and b, where the detectors'
//! uncorrelated imprecision noise averages away, weighted by
//! `var(Re P̂_ab) ≈ (P_aa P_bb + Re(P_ab)² − Im(P_ab)²)/(2K_eff)` (Bendat & Piersol ch. 9).
//!
//! Calibration: `--m-per-v` (both channels), a tone read in each channel's PSD (the
//! cross-spectrum is divided by the product of the two volts-per-metre factors, i.e.
//! multiplied by `c_a c_b` m²/V²), or equipartition on the cross-spectrum's line area. The
//! report's `calibration.m_per_v` is then `√(c_a c_b)`, so that `mode.*` and `quantum.*`
//! follow from the usual code; `cross.*` holds the rest. Stray peaks are found in channel a's
//! PSD.

use serde::{Deserialize, Serialize};

use super::Report;
use crate::analysis::{self, AnalysisError, AnalysisOptions};
use crate::dsp::cross::{CrossSpectrum, coherence_noise_threshold};
use crate::physics::calibration::{self, Calibration, CalibrationMethod, ToneOptions};
use crate::physics::fit::{self, FitOptions, ModeFit};
use crate::physics::{Estimate, PhysicsError};

/// Probability with which uncorrelated noise exceeds `cross.coherence_noise_threshold`.
pub const COHERENCE_FALSE_ALARM: f64 = 0.05;

/// The `cross.*` keys of the report.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct CrossReport {
    /// Channel a (`--channel K`).
    pub channel_a: usize,
    /// Channel b (`--cross-channel J`).
    pub channel_b: usize,
    /// Effective number of independent averages K_eff of the cross-spectrum.
    pub k_eff: f64,
    /// Magnitude-squared coherence at the bin nearest the fitted mode frequency.
    pub coherence_at_mode: Option<f64>,
    /// Level that the coherence of uncorrelated channels exceeds with 5 % probability:
    /// `1 − 0.05^{1/(K_eff − 1)}`.
    pub coherence_noise_threshold: f64,
    /// Uncorrelated floor left in the cross-spectrum after averaging, √(S_aa S_bb / K_eff) at
    /// the mode, calibrated (m²/Hz); null when uncalibrated.
    pub residual_floor_m2_per_hz: Option<f64>,
    /// The same in V²/Hz (√(P_aa P_bb / K_eff) at the mode).
    pub residual_floor_v2_per_hz: Option<f64>,
    /// Channel a's PSD at the mode, V²/Hz.
    pub psd_a_at_mode_v2_per_hz: Option<f64>,
    /// Channel b's PSD at the mode, V²/Hz.
    pub psd_b_at_mode_v2_per_hz: Option<f64>,
    /// Channel a's PSD at the mode, calibrated (m²/Hz; its own m/V).
    pub psd_a_at_mode_m2_per_hz: Option<f64>,
    /// Channel b's PSD at the mode, calibrated (m²/Hz).
    pub psd_b_at_mode_m2_per_hz: Option<f64>,
    /// Metres per volt of channel a.
    pub m_per_v_a: Option<f64>,
    /// 1σ.
    pub m_per_v_a_uncertainty: Option<f64>,
    /// Metres per volt of channel b.
    pub m_per_v_b: Option<f64>,
    /// 1σ.
    pub m_per_v_b_uncertainty: Option<f64>,
    /// 10 log₁₀(fitted line peak / the smaller of the two channels' background at the mode):
    /// negative when the mode lies below both detectors' floors.
    pub mode_peak_over_floor_db: Option<f64>,
}

/// Runs the two-detector analysis on a cross-spectrum of channels `channels = (a, b)`.
///
/// # Errors
/// [`AnalysisError::Input`] for impossible options (as [`analysis::analyze`]) and for
/// `--carrier` (sideband thermometry is a single-channel analysis).
pub fn analyze_cross(
    cross: &CrossSpectrum,
    options: &AnalysisOptions,
    channels: (usize, usize),
) -> Result<Report, AnalysisError> {
    if options.carrier_hz.is_some() {
        return Err(AnalysisError::Setting {
            setting: analysis::Setting::Carrier,
            message: "sideband thermometry (a carrier frequency) is not available with two \
                      detectors (a second channel)"
                .into(),
        });
    }
    analysis::validate(&cross.a, options)?;
    let spectrum_b = cross.spectrum_b();
    // Welch keys and stray peaks from channel a, as a single-channel run would give them.
    let peaks_only = AnalysisOptions {
        peak_threshold_db: options.peak_threshold_db,
        reference_peaks_hz: options.reference_peaks_hz.clone(),
        ..AnalysisOptions::default()
    };
    let mut report = analysis::analyze(&cross.a, &peaks_only)?;
    report.notes.clear();
    let df = cross.a.resolution_hz;
    let tone_exclusion = options.tone_frequency_hz.map(|f| {
        let half = (cross.a.window.tone_half_width_bins() + 2) as f64 * df;
        (f - half - 5.0 * df, f + half + 5.0 * df)
    });
    let mut exclude: Vec<(f64, f64)> = tone_exclusion.into_iter().collect();
    exclude.extend(options.mode_band_hz);
    report.peaks.retain(|p| {
        !exclude
            .iter()
            .any(|&(a, b)| p.frequency_hz >= a && p.frequency_hz <= b)
    });
    let notes = &mut report.notes;
    notes.push(format!(
        "cross: mode.* and quantum.* from Re P_ab of channels {} (a) and {} (b), weighted by var(Re P_ab) = (P_aa P_bb + Re² − Im²)/(2 K_eff); peaks[] from channel a",
        channels.0, channels.1
    ));

    // --- Mode fit on Re P_ab ---
    let k_eff = if cross.a.k_eff.is_finite() && cross.a.k_eff > 0.0 {
        cross.a.k_eff
    } else {
        cross.a.averages.max(1) as f64
    };
    let mut mode_fit: Option<ModeFit> = None;
    if let Some(band) = options.mode_band_hz {
        let fit_options = FitOptions {
            sloped_background: options.sloped_background,
            exclude_hz: tone_exclusion.into_iter().collect(),
            ..FitOptions::default()
        };
        let variance = |k: usize, model: f64| {
            let paa = cross.a.psd_v2_per_hz.get(k).copied().unwrap_or(0.0);
            let pbb = cross.psd_b_v2_per_hz.get(k).copied().unwrap_or(0.0);
            let im = cross.csd_im_v2_per_hz.get(k).copied().unwrap_or(0.0);
            (paa * pbb + model * model - im * im).max(0.0) / (2.0 * k_eff)
        };
        // Detectors of opposite sign give a negative line: fit −Re P_ab then (say so).
        let re = cross.csd_re_spectrum();
        let mut negated = re.clone();
        negated.psd_v2_per_hz.iter_mut().for_each(|v| *v = -*v);
        let positive = fit::fit_mode_given_variance(&re, band, &fit_options, &variance);
        let negative = fit::fit_mode_given_variance(&negated, band, &fit_options, &variance);
        let significance = |f: &ModeFit| f.area.value / f.area.sigma.max(f64::MIN_POSITIVE);
        match (positive, negative) {
            (Err(PhysicsError::Input(m)), _) => return Err(AnalysisError::Input(m)),
            (Ok(p), Ok(n)) if significance(&n) > significance(&p) => {
                notes.push(negative_note());
                mode_fit = Some(n);
            }
            (Ok(p), _) => mode_fit = Some(p),
            (Err(_), Ok(n)) => {
                notes.push(negative_note());
                mode_fit = Some(n);
            }
            (Err(e), Err(_)) => notes.push(format!("mode: {e}; mode keys are null")),
        }
    } else {
        notes.push("mode: no --mode-band given; mode and quantum keys are null".into());
    }

    // --- Calibration: one m/V per channel, or c_a c_b from equipartition ---
    let mut per_channel: Option<(Calibration, Calibration)> = None;
    let mut cal: Option<Calibration> = None;
    if let Some(c) = options.m_per_v {
        let given = calibration::given(c).map_err(analysis::input)?;
        per_channel = Some((given.clone(), given));
    } else if let (Some(f_tone), Some(x)) =
        (options.tone_frequency_hz, analysis::tone_rms_m(options)?)
    {
        let read = |s: &crate::dsp::Spectrum, which: &str| {
            calibration::read_tone(s, f_tone, &ToneOptions::default(), None)
                .and_then(|r| calibration::from_tone(&r, x))
                .map_err(|e| format!("calibration: tone in channel {which}: {e}"))
        };
        match (read(&cross.a, "a"), read(&spectrum_b, "b")) {
            (Ok(a), Ok(b)) => per_channel = Some((a, b)),
            (Err(e), _) | (_, Err(e)) => notes.push(e),
        }
        report.calibration.tone_rms_m = Some(x);
    } else if let (Some(t), Some(mass), Some(m)) =
        (options.bath_temperature_k, options.mass_kg, &mode_fit)
    {
        cal = Some(
            calibration::equipartition(
                m.area,
                m.frequency_hz.value,
                Estimate::new(mass, options.mass_uncertainty_kg.unwrap_or(0.0)),
                Estimate::new(t, options.bath_temperature_uncertainty_k.unwrap_or(0.0)),
            )
            .map_err(analysis::input)?,
        );
        notes.push("calibration: equipartition on the cross-spectrum's line area assumes the mode is thermalised to the bath; the occupancy then equals the bath occupancy by construction".into());
    }
    if let Some((a, b)) = &per_channel {
        // One factor √(c_a c_b) for the cross-spectrum: c_a c_b m²/V².
        let value = (a.m_per_v.value * b.m_per_v.value).sqrt();
        let rel = 0.5 * a.m_per_v.relative().hypot(b.m_per_v.relative());
        cal = Some(Calibration {
            method: a.method,
            m_per_v: Estimate::new(value, value * rel),
            tone: None,
        });
        if a.method == CalibrationMethod::Tone {
            notes.push("calibration: m_per_v = √(m/V of a × m/V of b), each read from the tone in its own channel".into());
        }
    }
    if cal.is_none() {
        notes.push("calibration: none (give --m-per-v, a tone, or --bath-temperature with --mass); calibrated keys are null".into());
    }
    if let Some(c) = &cal {
        report.calibration.method = Some(c.method.name().to_string());
        report.calibration.m_per_v = Some(c.m_per_v.value);
        report.calibration.m_per_v_uncertainty = Some(c.m_per_v.sigma);
    }

    // --- mode.*, quantum.* ---
    if let Some(m) = &mode_fit {
        analysis::fill_mode(&mut report.mode, m, cal.as_ref());
    }
    analysis::fill_quantum(&mut report, mode_fit.as_ref(), cal.as_ref(), options);

    // --- cross.* ---
    let mut out = CrossReport {
        channel_a: channels.0,
        channel_b: channels.1,
        k_eff,
        coherence_noise_threshold: coherence_noise_threshold(k_eff, COHERENCE_FALSE_ALARM),
        ..CrossReport::default()
    };
    if let Some((a, b)) = &per_channel {
        out.m_per_v_a = Some(a.m_per_v.value);
        out.m_per_v_a_uncertainty = Some(a.m_per_v.sigma);
        out.m_per_v_b = Some(b.m_per_v.value);
        out.m_per_v_b_uncertainty = Some(b.m_per_v.sigma);
    }
    if let Some(m) = &mode_fit {
        let k = cross.a.bin_of(m.frequency_hz.value);
        let paa = cross.a.psd_v2_per_hz.get(k).copied();
        let pbb = cross.psd_b_v2_per_hz.get(k).copied();
        out.coherence_at_mode = Some(cross.coherence_at(k));
        out.psd_a_at_mode_v2_per_hz = paa;
        out.psd_b_at_mode_v2_per_hz = pbb;
        if let (Some(paa), Some(pbb)) = (paa, pbb) {
            let residual = (paa * pbb / k_eff).sqrt();
            out.residual_floor_v2_per_hz = Some(residual);
            if let Some(c) = &cal {
                out.residual_floor_m2_per_hz = Some(residual * c.m2_per_v2().value);
            }
            if let Some((a, b)) = &per_channel {
                out.psd_a_at_mode_m2_per_hz = Some(paa * a.m2_per_v2().value);
                out.psd_b_at_mode_m2_per_hz = Some(pbb * b.m2_per_v2().value);
            }
            // √(P_aa P_bb) − peak is the geometric mean of the two channels' backgrounds in
            // the cross-spectrum's units (exact for real gains: √(g_a² N_b g_b² N_a)/…).
            let peak = m.peak_psd.value;
            let floor = (paa * pbb).sqrt() - peak;
            if peak > 0.0 && floor > 0.0 {
                out.mode_peak_over_floor_db = Some(10.0 * (peak / floor).log10());
            }
        }
        if m.resolution_limited {
            report.notes.push(format!(
                "mode: the line is narrower than the resolution (ENBW {:.4} Hz): linewidth_hz is the upper bound γ + 2σ = {:.4} Hz and Q its lower bound (the area is not affected)",
                cross.a.enbw_hz, m.linewidth_hz.value
            ));
        } else if m.linewidth_hz.value < 5.0 * cross.a.enbw_hz {
            report.notes.push(format!(
                "mode: linewidth {:.4} Hz is below 5·ENBW = {:.4} Hz; linewidth and peak are broadened by the resolution (the area is not)",
                m.linewidth_hz.value,
                5.0 * cross.a.enbw_hz
            ));
        }
    }
    report.cross = Some(out);
    analysis::sanitize(&mut report);
    sanitize_cross(&mut report);
    Ok(report)
}

fn negative_note() -> String {
    "cross: the line is negative in Re P_ab (the two detectors' gains have opposite signs); fitted −Re P_ab".into()
}

/// Nulls any non-finite `cross.*` value (the JSON never holds NaN/Inf).
fn sanitize_cross(report: &mut Report) {
    let Some(c) = report.cross.as_mut() else {
        return;
    };
    for v in [
        &mut c.coherence_at_mode,
        &mut c.residual_floor_m2_per_hz,
        &mut c.residual_floor_v2_per_hz,
        &mut c.psd_a_at_mode_v2_per_hz,
        &mut c.psd_b_at_mode_v2_per_hz,
        &mut c.psd_a_at_mode_m2_per_hz,
        &mut c.psd_b_at_mode_m2_per_hz,
        &mut c.m_per_v_a,
        &mut c.m_per_v_a_uncertainty,
        &mut c.m_per_v_b,
        &mut c.m_per_v_b_uncertainty,
        &mut c.mode_peak_over_floor_db,
    ] {
        if v.is_some_and(|x| !x.is_finite()) {
            *v = None;
        }
    }
    if !c.k_eff.is_finite() {
        c.k_eff = 0.0;
    }
    if !c.coherence_noise_threshold.is_finite() {
        c.coherence_noise_threshold = 1.0;
    }
}
