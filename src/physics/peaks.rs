//! Stray-resonance finder (BRIEF "stray resonances", METHODS.md §8b).
//!
//! **Floor.** A running median of the PSD (the median of power, corrected for the
//! median/mean ratio of χ²_ν/ν, ν = 2K_eff) over a window that is wide *in hertz*: the
//! window at f spans clamp(f, 65 bins, 8 × the widest line sought) — narrow near DC so a
//! rising low-frequency floor and the mains lines at 50/60 Hz are followed, wide elsewhere so
//! a resolved line or the wings of a strong one do not lift it. It is iteratively clipped:
//! bins more than 3σ (σ = floor/√K_eff) above the current floor, widened by their own
//! extent, are left out and the median taken again (three passes). Evaluated on nodes every
//! 1/8 window and interpolated geometrically.
//!
//! **Lines.** Local maxima above threshold × (floor + the lines already found), taken from
//! the highest down, so the wings and noise of a strong line are never listed as lines of
//! their own and a line is listed once. Each line is fitted (Lorentzian convolved with the
//! window's kernel, METHODS §2c, plus a local sloped background; a plain Lorentzian when it
//! is wider than 12 ENBW): frequency, FWHM γ (the ENBW when the line is not resolved), and
//! the height 10 log₁₀(peak of the expected spectrum / floor) — no scalloping loss. If a
//! fit fails the line keeps its interpolated peak and half-power width.

use super::calibration::chi2_median_ratio;
use super::fit::LineShape;
use super::kernel::ConvolvedLine;
use crate::dsp::Spectrum;

/// Settings of the peak finder.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct PeakOptions {
    /// Threshold over the floor (dB); default 10.
    pub threshold_db: f64,
    /// Smallest floor window (bins) near DC, clamped to 9…65; default 129 (→ 65).
    pub floor_window_bins: usize,
    /// The widest line sought (Hz): the floor window reaches 8× this. Default: f_s/128.
    #[serde(default)]
    pub max_linewidth_hz: Option<f64>,
    /// Frequency ranges (Hz) not searched (the mode band, the tone, sideband windows).
    pub exclude_hz: Vec<(f64, f64)>,
    /// Frequencies (Hz) of a reference snapshot's peaks; when non-empty each peak is marked
    /// new or not.
    pub reference_hz: Vec<f64>,
    /// Match tolerance (Hz) against the reference; `None` = max(3 Δf, the peak's width).
    pub tolerance_hz: Option<f64>,
    /// Keep at most this many peaks (the highest); default 500.
    pub max_peaks: usize,
}

impl Default for PeakOptions {
    fn default() -> Self {
        Self {
            threshold_db: 10.0,
            floor_window_bins: 129,
            max_linewidth_hz: None,
            exclude_hz: Vec::new(),
            reference_hz: Vec::new(),
            tolerance_hz: None,
            max_peaks: 500,
        }
    }
}

/// One stray resonance.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Peak {
    /// Interpolated peak frequency (Hz).
    pub frequency_hz: f64,
    /// Height over the floor (dB).
    pub height_over_floor_db: f64,
    /// FWHM γ (Hz) from the fit of the line convolved with the window's kernel; the ENBW
    /// when the line is not resolved.
    pub linewidth_hz: f64,
    /// PSD at the peak bin.
    pub peak_psd: f64,
    /// Floor at the peak.
    pub floor_psd: f64,
    /// `Some(true)` when no reference peak lies within the tolerance; `None` without reference.
    pub new_since_reference: Option<bool>,
}

fn median_in_place(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let mid = v.len() / 2;
    v.select_nth_unstable_by(mid, f64::total_cmp);
    v[mid]
}

/// Robust floor of a PSD: running median over `window_bins` divided by the χ²_ν/ν median ratio
/// (ν = 2 K_eff), evaluated every ~window/4 bins and interpolated geometrically in between.
pub fn robust_floor(psd: &[f64], window_bins: usize, k_eff: f64) -> Vec<f64> {
    let n = psd.len();
    if n == 0 {
        return Vec::new();
    }
    let w = window_bins.clamp(3, n.max(3));
    let half = w / 2;
    let step = (w / 4).max(1);
    let bias = chi2_median_ratio(2.0 * k_eff.max(1.0));
    let mut scratch = Vec::with_capacity(w + 1);
    let mut nodes: Vec<(usize, f64)> = Vec::with_capacity(n / step + 2);
    let span = w.min(n);
    let mut k: usize = 0;
    loop {
        let hi = (k.saturating_sub(half) + span - 1).min(n - 1);
        let lo = hi + 1 - span;
        scratch.clear();
        scratch.extend(
            psd[lo..=hi]
                .iter()
                .copied()
                .filter(|x| x.is_finite() && *x > 0.0),
        );
        let m = median_in_place(&mut scratch) / bias;
        nodes.push((
            k,
            if m.is_finite() && m > 0.0 {
                m
            } else {
                f64::MIN_POSITIVE
            },
        ));
        if k == n - 1 {
            break;
        }
        k = (k + step).min(n - 1);
    }
    let mut out = vec![0.0; n];
    for pair in nodes.windows(2) {
        let (k0, v0) = pair[0];
        let (k1, v1) = pair[1];
        let (l0, l1) = (v0.ln(), v1.ln());
        for (j, o) in out[k0..=k1].iter_mut().enumerate() {
            let t = j as f64 / (k1 - k0).max(1) as f64;
            *o = (l0 + t * (l1 - l0)).exp();
        }
    }
    if nodes.len() == 1 {
        out.fill(nodes[0].1);
    }
    out
}

/// Robust floor with iterative clipping, window wide in hertz (module docs).
/// `widest_line_hz` is the widest line sought; `window` sets the lobe skipped at DC.
pub fn clipped_floor(
    psd: &[f64],
    resolution_hz: f64,
    k_eff: f64,
    widest_line_hz: f64,
    min_window_bins: usize,
    dc_skip_bins: usize,
) -> Vec<f64> {
    let n = psd.len();
    if n == 0 {
        return Vec::new();
    }
    let df = if resolution_hz > 0.0 {
        resolution_hz
    } else {
        1.0
    };
    let max_w = ((8.0 * widest_line_hz / df).ceil() as usize).max(min_window_bins);
    let width_at = |k: usize| -> usize {
        let f_bins = k;
        f_bins.clamp(min_window_bins, max_w).min(n).max(3)
    };
    let bias = chi2_median_ratio(2.0 * k_eff.max(1.0));
    let z = 1.0 + 3.0 / k_eff.max(1.0).sqrt();
    let first = dc_skip_bins.min(n - 1);
    let mut masked = vec![false; n];
    let mut floor = vec![0.0; n];
    let mut scratch: Vec<f64> = Vec::new();
    for pass in 0..3 {
        let mut nodes: Vec<(usize, f64)> = Vec::new();
        let mut k = 0usize;
        loop {
            let w = width_at(k);
            let half = w / 2;
            let mut lo = k.saturating_sub(half).max(first);
            let mut hi = (lo + w - 1).min(n - 1);
            if hi + 1 - lo < w {
                lo = (hi + 1).saturating_sub(w).max(first);
            }
            // Widen until a quarter of the window is unmasked (or the whole spectrum).
            let mut value = f64::NAN;
            for _ in 0..6 {
                scratch.clear();
                scratch.extend(
                    psd[lo..=hi]
                        .iter()
                        .zip(&masked[lo..=hi])
                        .filter(|(x, m)| !**m && x.is_finite() && **x > 0.0)
                        .map(|(x, _)| *x),
                );
                if scratch.len() * 4 >= w || (lo == first && hi == n - 1) {
                    value = median_in_place(&mut scratch) / bias;
                    break;
                }
                let extra = hi + 1 - lo;
                lo = lo.saturating_sub(extra / 2).max(first);
                hi = (hi + extra / 2).min(n - 1);
            }
            nodes.push((
                k,
                if value.is_finite() && value > 0.0 {
                    value
                } else {
                    f64::MIN_POSITIVE
                },
            ));
            if k == n - 1 {
                break;
            }
            k = (k + (w / 8).max(1)).min(n - 1);
        }
        for pair in nodes.windows(2) {
            let (k0, v0) = pair[0];
            let (k1, v1) = pair[1];
            let (l0, l1) = (v0.ln(), v1.ln());
            for (j, o) in floor[k0..=k1].iter_mut().enumerate() {
                let t = j as f64 / (k1 - k0).max(1) as f64;
                *o = (l0 + t * (l1 - l0)).exp();
            }
        }
        if nodes.len() == 1 {
            floor.fill(nodes[0].1);
        }
        if pass == 2 {
            break;
        }
        // Clip: runs of bins above z·floor, widened by their own length on each side.
        masked.fill(false);
        let mut k = first;
        while k < n {
            if psd[k] > z * floor[k] {
                let start = k;
                while k < n && psd[k] > z * floor[k] {
                    k += 1;
                }
                let len = k - start;
                let pad = len.max(2);
                let a = start.saturating_sub(pad);
                let b = (k + pad).min(n);
                masked[a..b].iter_mut().for_each(|m| *m = true);
            } else {
                k += 1;
            }
        }
    }
    floor
}

/// A fitted or estimated line, for the "already found" background of later candidates.
#[derive(Debug, Clone, Copy)]
struct Found {
    center_hz: f64,
    width_hz: f64,
    area: f64,
    convolved: bool,
}

/// Finds stray peaks in a spectrum.
pub fn find_peaks(spectrum: &Spectrum, options: &PeakOptions) -> Vec<Peak> {
    let psd = &spectrum.psd_v2_per_hz;
    let n = psd.len();
    if n < 8 {
        return Vec::new();
    }
    let df = spectrum.resolution_hz;
    let skip = spectrum.window.terms().max(1);
    let widest = options
        .max_linewidth_hz
        .filter(|w| w.is_finite() && *w > 0.0)
        .unwrap_or(spectrum.sample_rate_hz / 128.0);
    let min_window = options.floor_window_bins.clamp(9, 65);
    let line = ConvolvedLine::new(spectrum.window, spectrum.segment, df, LineShape::Lorentzian);
    let floor0 = clipped_floor(psd, df, spectrum.k_eff, widest, min_window, skip);
    // First pass without fits (the lines' rough shapes are enough to take them out of
    // the floor); the fits run once, over the final floor.
    let (first, found) = detect(spectrum, &line, &floor0, options, false);
    if found.is_empty() {
        return finish(first, spectrum, options);
    }
    // The floor again, with the lines found taken out (their wings reach far: a 32 dB line
    // is still 1 % over the floor 60 widths away), then the lines again over it.
    let residual: Vec<f64> = psd
        .iter()
        .enumerate()
        .map(|(k, &p)| {
            let f = k as f64 * df;
            let lines: f64 = found.iter().map(|l| found_psd(&line, l, f)).sum();
            (p - lines).max(0.05 * p)
        })
        .collect();
    let floor1 = clipped_floor(&residual, df, spectrum.k_eff, widest, min_window, skip);
    let (second, _) = detect(spectrum, &line, &floor1, options, true);
    finish(second, spectrum, options)
}

/// One pass of candidate search and fits over a given floor.
fn detect(
    spectrum: &Spectrum,
    line: &ConvolvedLine,
    floor: &[f64],
    options: &PeakOptions,
    with_fits: bool,
) -> (Vec<Peak>, Vec<Found>) {
    let psd = &spectrum.psd_v2_per_hz;
    let n = psd.len();
    let df = spectrum.resolution_hz;
    let enbw = spectrum.enbw_hz.max(df);
    let lobe = spectrum.window.tone_half_width_bins().max(1);
    let skip = spectrum.window.terms().max(1);
    let ratio = 10f64.powf(options.threshold_db / 10.0);
    // Candidates from 2 dB below the threshold (a line between bins loses up to 1.42 dB to
    // scalloping with Hann); a fitted line is kept when its fitted height reaches the
    // threshold, an unfitted one when its highest bin does.
    let cand_ratio = ratio * 10f64.powf(-0.2);
    // A maximum must also stand out of the lines already found (their wings, their noise)
    // by 4σ of a bin (σ/S = 1/√K_eff), at least 1 dB.
    let prominence = (1.0 + 4.0 / spectrum.k_eff.max(1.0).sqrt()).max(1.26);
    let excluded = |f: f64| options.exclude_hz.iter().any(|&(a, b)| f >= a && f <= b);
    let k_eff = if spectrum.k_eff.is_finite() && spectrum.k_eff > 0.0 {
        spectrum.k_eff
    } else {
        spectrum.averages.max(1) as f64
    };
    // Candidates: local maxima above threshold over the floor, skipping the DC bins that
    // the mean removal touches (the window's DFT is zero beyond its number of terms).
    let mut cands: Vec<usize> = (skip..n - 1)
        .filter(|&k| {
            let p = psd[k];
            p.is_finite()
                && p > cand_ratio * floor[k]
                && p >= psd[k - 1]
                && p > psd[k + 1]
                && !excluded(k as f64 * df)
        })
        .collect();
    cands.sort_by(|&a, &b| (psd[b] / floor[b]).total_cmp(&(psd[a] / floor[a])));
    let widths: Vec<(usize, f64)> = cands
        .iter()
        .map(|&k| (k, half_power_width(psd, floor, k) * df))
        .collect();
    let width_of = |k: usize| {
        widths
            .iter()
            .find(|(c, _)| *c == k)
            .map_or(enbw, |(_, w)| w.max(enbw))
    };
    let mut found: Vec<Found> = Vec::new();
    let mut peaks: Vec<Peak> = Vec::new();
    let fit_limit = if with_fits { 48usize } else { 0 };
    for &k in &cands {
        if peaks.len() >= options.max_peaks.max(1) * 2 {
            break;
        }
        let f = k as f64 * df;
        // Already explained by a line found (its own maxima, its wings)?
        let others: f64 = found.iter().map(|l| found_psd(line, l, f)).sum();
        if psd[k] <= prominence * (floor[k] + others) {
            continue;
        }
        if found
            .iter()
            .any(|l| (l.center_hz - f).abs() < 0.5 * l.width_hz.max(2.0 * lobe as f64 * df))
        {
            continue;
        }
        let w_est = width_of(k);
        let fitted = if peaks.len() < fit_limit {
            fit_stray(
                spectrum, line, floor, k, w_est, &cands, &width_of, k_eff, prominence, options,
            )
        } else {
            None
        };
        let (peak, line_found) = match fitted {
            Some(x) if x.0.height_over_floor_db >= options.threshold_db => x,
            Some(_) => continue,
            None if psd[k] > ratio * floor[k] => estimate_stray(spectrum, floor, k, enbw),
            None => continue,
        };
        if !(peak.frequency_hz.is_finite()
            && peak.height_over_floor_db.is_finite()
            && peak.linewidth_hz.is_finite())
        {
            continue;
        }
        found.push(line_found);
        peaks.push(peak);
    }
    (peaks, found)
}

/// Merges maxima that converged to one line, caps the list, marks new/known.
fn finish(mut peaks: Vec<Peak>, spectrum: &Spectrum, options: &PeakOptions) -> Vec<Peak> {
    let df = spectrum.resolution_hz;
    let lobe = spectrum.window.tone_half_width_bins().max(1);
    peaks.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    // Two maxima that converged to one line in their fits: keep the higher.
    let mut merged: Vec<Peak> = Vec::with_capacity(peaks.len());
    for p in peaks {
        match merged.last_mut() {
            Some(q)
                if (p.frequency_hz - q.frequency_hz).abs()
                    < 0.5
                        * p.linewidth_hz
                            .max(q.linewidth_hz)
                            .max(2.0 * lobe as f64 * df) =>
            {
                if p.height_over_floor_db > q.height_over_floor_db {
                    *q = p;
                }
            }
            _ => merged.push(p),
        }
    }
    let mut peaks = merged;
    if peaks.len() > options.max_peaks {
        peaks.sort_by(|a, b| b.height_over_floor_db.total_cmp(&a.height_over_floor_db));
        peaks.truncate(options.max_peaks);
        peaks.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    }
    if !options.reference_hz.is_empty() {
        for p in &mut peaks {
            let tol = options
                .tolerance_hz
                .unwrap_or_else(|| (3.0 * df).max(p.linewidth_hz));
            let known = options
                .reference_hz
                .iter()
                .any(|r| (r - p.frequency_hz).abs() <= tol);
            p.new_since_reference = Some(!known);
        }
    }
    peaks
}

/// A found line's expected PSD at f: convolved with the kernel near it, its own
/// (Lorentzian) wings beyond the kernel's reach.
fn found_psd(line: &ConvolvedLine, l: &Found, f: f64) -> f64 {
    let u = line.kernel().half_width_bins() as f64 * line.resolution_hz();
    if l.convolved && (f - l.center_hz).abs() < u {
        line.at(f, l.area, l.center_hz, l.width_hz)
    } else {
        line.line_psd(f, l.area, l.center_hz, l.width_hz)
    }
}

/// Half-power full width (bins) of the 3-bin-smoothed PSD around bin k, over the floor.
fn half_power_width(psd: &[f64], floor: &[f64], k: usize) -> f64 {
    let n = psd.len();
    let sm = |i: usize| {
        let lo = i.saturating_sub(1);
        let hi = (i + 1).min(n - 1);
        psd[lo..=hi].iter().sum::<f64>() / (hi + 1 - lo) as f64
    };
    let top = sm(k).max(psd[k]);
    let half = floor[k] + 0.5 * (top - floor[k]);
    let mut l = k;
    while l > 0 && sm(l) > half {
        l -= 1;
    }
    let mut r = k;
    while r + 1 < n && sm(r) > half {
        r += 1;
    }
    (r - l).max(1) as f64
}

/// The fallback reading of a line: parabolic peak in log power, half-power width.
fn estimate_stray(spectrum: &Spectrum, floor: &[f64], k: usize, enbw: f64) -> (Peak, Found) {
    let psd = &spectrum.psd_v2_per_hz;
    let df = spectrum.resolution_hz;
    let ln = |i: usize| psd[i].max(f64::MIN_POSITIVE).ln();
    let (a, b, c) = (ln(k - 1), ln(k), ln(k + 1));
    let den = a - 2.0 * b + c;
    let (delta, ln_peak) = if den < 0.0 {
        let d = (0.5 * (a - c) / den).clamp(-0.5, 0.5);
        (d, b - 0.25 * (a - c) * d)
    } else {
        (0.0, b)
    };
    let peak = ln_peak.exp();
    let width = (half_power_width(psd, floor, k) * df).max(enbw);
    let f = (k as f64 + delta) * df;
    (
        Peak {
            frequency_hz: f,
            height_over_floor_db: 10.0 * (peak / floor[k]).log10(),
            linewidth_hz: width,
            peak_psd: psd[k],
            floor_psd: floor[k],
            new_since_reference: None,
        },
        {
            // Unresolved (half-power width ≲ 2 ENBW): the kernel's shape, area = excess·ENBW;
            // else a Lorentzian of that width.
            let excess = (peak - floor[k]).max(0.0);
            if width < 2.0 * enbw {
                Found {
                    center_hz: f,
                    width_hz: 1e-3 * enbw,
                    area: excess * enbw,
                    convolved: true,
                }
            } else {
                Found {
                    center_hz: f,
                    width_hz: width,
                    area: excess * std::f64::consts::PI * 0.5 * width,
                    convolved: true,
                }
            }
        },
    )
}

/// Fits one stray; when the line proves wider than the half-power estimate (a noisy
/// spectrum cuts the crossing short), fits again over a band sized from the first fit.
#[allow(clippy::too_many_arguments)]
fn fit_stray(
    spectrum: &Spectrum,
    line: &ConvolvedLine,
    floor: &[f64],
    k: usize,
    width_est_hz: f64,
    cands: &[usize],
    width_of: &dyn Fn(usize) -> f64,
    k_eff: f64,
    prominence: f64,
    options: &PeakOptions,
) -> Option<(Peak, Found)> {
    let first = fit_stray_once(
        spectrum,
        line,
        floor,
        k,
        width_est_hz,
        cands,
        width_of,
        k_eff,
        prominence,
        options,
    )?;
    if first.1.width_hz > 1.3 * width_est_hz {
        if let Some(second) = fit_stray_once(
            spectrum,
            line,
            floor,
            k,
            first.1.width_hz,
            cands,
            width_of,
            k_eff,
            prominence,
            options,
        ) {
            return Some(second);
        }
    }
    Some(first)
}

/// Fits one stray (module docs); `None` when the fit fails or lands elsewhere.
#[allow(clippy::too_many_arguments)]
fn fit_stray_once(
    spectrum: &Spectrum,
    line: &ConvolvedLine,
    floor: &[f64],
    k: usize,
    width_est_hz: f64,
    cands: &[usize],
    width_of: &dyn Fn(usize) -> f64,
    k_eff: f64,
    prominence: f64,
    options: &PeakOptions,
) -> Option<(Peak, Found)> {
    let psd = &spectrum.psd_v2_per_hz;
    let n = psd.len();
    let df = spectrum.resolution_hz;
    let enbw = spectrum.enbw_hz.max(df);
    let f0 = k as f64 * df;
    let plain = width_est_hz > 12.0 * enbw;
    let half = (3.0 * width_est_hz).max(8.0 * df);
    let k_lo = (((f0 - half) / df).floor().max(0.0) as usize).max(spectrum.window.terms().max(1));
    let k_hi = (((f0 + half) / df).ceil() as usize).min(n - 1);
    if k_hi <= k_lo + 6 {
        return None;
    }
    // Other candidates in the band that stand above this line's rough profile (peak over
    // the floor, the estimated width, convolved with the kernel) by the threshold.
    let gamma_est = (width_est_hz - enbw).max(0.05 * enbw);
    let unit0 = line.at(f0, 1.0, f0, gamma_est);
    let excess = (psd[k] - floor[k]).max(0.0);
    let ratio = 10f64.powf(options.threshold_db / 10.0);
    let separate: Vec<(f64, f64)> = cands
        .iter()
        .filter(|&&c| c != k && c >= k_lo && c <= k_hi)
        .filter_map(|&c| {
            let fc = c as f64 * df;
            let own = if unit0 > 0.0 {
                excess * line.at(fc, 1.0, f0, gamma_est) / unit0
            } else {
                0.0
            };
            (psd[c] > ratio * (floor[c] + own)).then(|| (fc, (0.75 * width_of(c)).max(2.5 * df)))
        })
        .collect();
    let mut freqs = Vec::with_capacity(k_hi - k_lo + 1);
    let mut data = Vec::with_capacity(k_hi - k_lo + 1);
    for i in k_lo..=k_hi {
        let f = i as f64 * df;
        if options.exclude_hz.iter().any(|&(a, b)| f >= a && f <= b) {
            continue;
        }
        // Leave out the cores of other lines inside the band (not this line's own noise
        // maxima, and never this line's core).
        let own_core = (f - f0).abs() < (0.5 * width_est_hz).max(2.0 * df);
        let other = !own_core && separate.iter().any(|&(fc, w)| (f - fc).abs() < w);
        if other {
            continue;
        }
        let d = psd[i];
        if d.is_finite() && d > 0.0 {
            freqs.push(f);
            data.push(d);
        }
    }
    if data.len() < 10 {
        return None;
    }
    let b0 = floor[k];
    let gamma0 = if plain {
        width_est_hz
    } else {
        (width_est_hz - enbw).max(0.3 * enbw)
    };
    let a0 = ((psd[k] - b0).max(0.0) * std::f64::consts::PI * 0.5 * width_est_hz).max(1e-300);
    let f_ref = f0;
    let fit = super::linefit::fit(
        &freqs,
        &data,
        k_eff,
        line,
        df,
        true,
        f_ref,
        (b0, a0, f0, gamma0),
        None,
        plain,
    )
    .ok()?;
    let c = fit.center_hz;
    if (c - f0).abs() > (0.5 * width_est_hz).max(1.5 * df) || fit.area <= 0.0 {
        return None;
    }
    let var_scale = fit.chi2 / fit.dof.max(1) as f64;
    let su = (fit
        .covariance
        .get(3 * fit.n_params + 3)
        .copied()
        .unwrap_or(f64::INFINITY)
        * var_scale)
        .max(0.0)
        .sqrt();
    let resolved = su.is_finite() && su < 0.5 && fit.width_hz >= 0.5 * enbw;
    let width = if resolved { fit.width_hz } else { enbw };
    let line_peak = if plain {
        line.line_psd(c, fit.area, c, fit.width_hz)
    } else {
        line.at(c, fit.area, c, fit.width_hz)
    };
    let bg = fit.background + fit.slope.unwrap_or(0.0) * (c - f_ref);
    let kc = ((c / df).round() as usize).min(n - 1);
    let fl = floor[kc];
    // Not a line of its own (a noise bump on another line's wing): reject it outright.
    let significant = line_peak >= (prominence - 1.0) * bg;
    let height = if significant {
        10.0 * ((bg + line_peak) / fl).log10()
    } else {
        f64::NEG_INFINITY
    };
    Some((
        Peak {
            frequency_hz: c,
            height_over_floor_db: height,
            linewidth_hz: width,
            peak_psd: psd[kc],
            floor_psd: fl,
            new_since_reference: None,
        },
        Found {
            center_hz: c,
            width_hz: fit.width_hz,
            area: fit.area,
            convolved: !plain,
        },
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floor_of_a_constant_is_the_constant_over_bias() {
        let f = robust_floor(&[2.0; 1000], 65, 10.0);
        let want = 2.0 / chi2_median_ratio(20.0);
        assert!(f.iter().all(|v| (v / want - 1.0).abs() < 1e-12));
    }
}
