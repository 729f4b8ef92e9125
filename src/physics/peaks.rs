//! Stray-resonance finder (BRIEF "stray resonances", METHODS.md §8b): lines standing above a
//! floor that is wide in hertz and iteratively clipped ([`clipped_floor`]), each measured by a
//! fit of a line (damped oscillator, its Lorentzian core convolved with the window's kernel) plus a local floor, strongest first,
//! with the lines already measured subtracted (their wings raise the floor far away), one entry
//! per line. Medians are taken on power and divided by the median/mean ratio of χ²_ν/ν with
//! ν = 2K_eff.

use super::calibration::chi2_median_ratio;
use super::fit::LineShape;
use super::kernel::Kernel;
use super::narrow;
use super::oscillator::oscillator_psd;
use crate::dsp::{Detrend, Spectrum};

/// Settings of the peak finder.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct PeakOptions {
    /// Threshold over the floor (dB); default 10.
    pub threshold_db: f64,
    /// Running-median window (bins); default 129.
    pub floor_window_bins: usize,
    /// Frequency ranges (Hz) not searched (the mode band, the tone, sideband windows).
    pub exclude_hz: Vec<(f64, f64)>,
    /// Frequencies (Hz) of a reference snapshot's peaks; when non-empty each peak is marked
    /// new or not ([`new_since_reference`] with a tolerance floor of 3 Δf).
    pub reference_hz: Vec<f64>,
    /// Keep at most this many peaks (the highest); default 500.
    pub max_peaks: usize,
}

impl Default for PeakOptions {
    fn default() -> Self {
        Self {
            threshold_db: 10.0,
            floor_window_bins: 129,
            exclude_hz: Vec::new(),
            reference_hz: Vec::new(),
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
    /// FWHM (Hz), at least NENBW·Δf.
    pub linewidth_hz: f64,
    /// PSD at the peak bin.
    pub peak_psd: f64,
    /// Floor at the peak.
    pub floor_psd: f64,
    /// `Some(true)` when no reference peak lies within the tolerance; `None` without reference.
    pub new_since_reference: Option<bool>,
}

/// The upper middle value (element n/2 of the sorted values), not numpy's mean of the two
/// middle values ([`crate::dsp::median::median`]): the running floor's estimator as written,
/// kept so that the reported stray-peak heights do not move.
fn median_in_place(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let mid = v.len() / 2;
    v.select_nth_unstable_by(mid, f64::total_cmp);
    v[mid]
}

/// Whether a peak at `frequency_hz` (FWHM `linewidth_hz`) is new since a reference: no
/// reference peak frequency lies within `max(min_tolerance_hz, linewidth_hz)` of it. The one
/// rule for `analyze`'s `peaks[].new_since_reference` and the window's marks against a
/// reference snapshot (both with `min_tolerance_hz` = 3 Δf).
pub fn new_since_reference(
    frequency_hz: f64,
    linewidth_hz: f64,
    min_tolerance_hz: f64,
    reference_hz: &[f64],
) -> bool {
    let tolerance = min_tolerance_hz.max(linewidth_hz);
    !reference_hz
        .iter()
        .any(|r| (r - frequency_hz).abs() <= tolerance)
}

/// Bins a spectrum's floor and lines may not use: outside the finite positive values, the
/// excluded ranges, and DC (and bin 1 when the segments were detrended, which empties them).
fn base_mask(spectrum: &Spectrum, exclude_hz: &[(f64, f64)]) -> Vec<bool> {
    let df = spectrum.resolution_hz;
    let dc_bins = if spectrum.detrend == Detrend::None {
        1
    } else {
        2
    };
    spectrum
        .psd_v2_per_hz
        .iter()
        .enumerate()
        .map(|(k, &p)| {
            let f = k as f64 * df;
            k < dc_bins
                || !(p.is_finite() && p > 0.0)
                || exclude_hz.iter().any(|&(a, b)| f >= a && f <= b)
        })
        .collect()
}

/// Median of the unmasked bins around each node, the window widening (up to 16×) until it
/// holds enough unmasked bins; half-width `clamp(k/2, 16, half_max)` so the floor follows a
/// steep floor near DC. Evaluated every few bins and interpolated in log power.
fn masked_running_median(psd: &[f64], mask: &[bool], half_max: usize, bias: f64) -> Vec<f64> {
    let n = psd.len();
    let mut nodes: Vec<(usize, f64)> = Vec::new();
    let mut scratch = Vec::new();
    let mut k = 0usize;
    loop {
        let half = (k / 2).clamp(16, half_max.max(16));
        let need = half.max(8);
        let mut h = half;
        loop {
            scratch.clear();
            let lo = k.saturating_sub(h);
            let hi = (k + h).min(n - 1);
            scratch.extend((lo..=hi).filter(|&i| !mask[i]).map(|i| psd[i]));
            if scratch.len() >= need || (lo == 0 && hi == n - 1) || h >= 16 * half {
                break;
            }
            h *= 2;
        }
        let m = if scratch.is_empty() {
            f64::NAN
        } else {
            median_in_place(&mut scratch) / bias
        };
        nodes.push((k, m));
        if k == n - 1 {
            break;
        }
        let step = (half / 4).max(1);
        k = (k + step).min(n - 1);
    }
    // Nodes without data take their neighbours' value.
    let fallback = nodes
        .iter()
        .map(|n| n.1)
        .find(|v| v.is_finite() && *v > 0.0)
        .unwrap_or(f64::MIN_POSITIVE);
    let mut last = fallback;
    for node in &mut nodes {
        if node.1.is_finite() && node.1 > 0.0 {
            last = node.1;
        } else {
            node.1 = last;
        }
    }
    let mut out = vec![nodes[0].1; n];
    for pair in nodes.windows(2) {
        let (k0, v0) = pair[0];
        let (k1, v1) = pair[1];
        let (l0, l1) = (v0.ln(), v1.ln());
        for (j, o) in out[k0..=k1].iter_mut().enumerate() {
            let t = j as f64 / (k1 - k0).max(1) as f64;
            *o = (l0 + t * (l1 - l0)).exp();
        }
    }
    out
}

/// The floor under lines (METHODS.md §8b): a running median over a window that is wide in
/// hertz compared with the lines (it widens over masked stretches), iteratively clipped:
/// bins whose 5-bin mean stands more than 4σ above the current floor are masked, each
/// stretch widened by half its length, and the median recomputed, until the mask stops
/// growing.
pub(crate) fn clipped_floor(
    spectrum: &Spectrum,
    window_bins: usize,
    exclude_hz: &[(f64, f64)],
) -> Vec<f64> {
    let psd = &spectrum.psd_v2_per_hz;
    let n = psd.len();
    if n == 0 {
        return Vec::new();
    }
    let k_eff = spectrum.k_eff.max(1.0);
    let bias = chi2_median_ratio(2.0 * k_eff);
    let base = base_mask(spectrum, exclude_hz);
    let half_max = (window_bins / 2).max(8);
    let mut mask = base.clone();
    let mut floor = masked_running_median(psd, &mask, half_max, bias);
    let smooth_half = 2usize;
    // 1σ of a 5-bin mean relative to its expectation (Hann bins correlate; conservative).
    let sigma = 1.0 / (k_eff * 2.5).sqrt();
    let clip = 1.0 + (4.0 * sigma).max(0.02);
    let margin = spectrum.window.terms() + 1;
    for _ in 0..16 {
        // Bins standing above the floor, each stretch widened by half its length on both
        // sides (a line's wings reach out in proportion to its width), added to the mask.
        let mut above = vec![false; n];
        for (k, a) in above.iter_mut().enumerate() {
            let lo = k.saturating_sub(smooth_half);
            let hi = (k + smooth_half).min(n - 1);
            let (sum, count) = (lo..=hi)
                .filter(|&i| psd[i].is_finite())
                .fold((0.0, 0usize), |(s, c), i| (s + psd[i], c + 1));
            *a = count > 0 && sum / count as f64 > clip * floor[k];
        }
        let mut next = mask.clone();
        let mut k = 0;
        while k < n {
            if !above[k] {
                k += 1;
                continue;
            }
            let start = k;
            while k < n && above[k] {
                k += 1;
            }
            let grow = margin + (k - start) / 2;
            let a = start.saturating_sub(grow);
            let b = (k - 1 + grow).min(n - 1);
            next[a..=b].iter_mut().for_each(|m| *m = true);
        }
        // Keep at least a fifth of the usable bins for the floor.
        let usable = base.iter().filter(|m| !**m).count();
        let left = next.iter().filter(|m| !**m).count();
        if next == mask || left * 5 < usable {
            break;
        }
        mask = next;
        floor = masked_running_median(psd, &mask, half_max, bias);
    }
    floor
}

/// Finds stray lines in a spectrum (METHODS.md §8b). Candidates are local maxima standing
/// `threshold_db` over the clipped floor; they are measured from the highest down, each by a
/// fit of a Lorentzian convolved with the window's kernel plus a flat local floor, on the
/// spectrum with the lines already measured subtracted (their wings included). A maximum
/// inside a measured line's width is part of that line (one entry per line). Height is
/// 10 log₁₀((floor + peak)/floor) of the fitted line (the smeared peak when narrower than the
/// ENBW), width the fitted FWHM (the ENBW when narrower). A candidate whose fit fails keeps
/// the interpolated reading of the bins.
pub fn find_peaks(spectrum: &Spectrum, options: &PeakOptions) -> Vec<Peak> {
    let psd = &spectrum.psd_v2_per_hz;
    let n = psd.len();
    if n < 8 {
        return Vec::new();
    }
    let df = spectrum.resolution_hz;
    let enbw = spectrum.enbw_hz.max(df);
    // Wide in hertz: at least the option's bins and 1/16 of the spectrum.
    let window = options.floor_window_bins.max(n / 16).max(33);
    let floor = clipped_floor(spectrum, window, &options.exclude_hz);
    let max_width_hz = 0.5 * window as f64 * df;
    let ratio = 10f64.powf(options.threshold_db / 10.0);
    let base = base_mask(spectrum, &options.exclude_hz);
    // Candidates: local maxima over the threshold.
    let mut cands: Vec<usize> = (1..n - 1)
        .filter(|&k| {
            let p = psd[k];
            !base[k] && p > ratio * floor[k] && p >= psd[k - 1] && p > psd[k + 1]
        })
        .collect();
    cands.sort_by(|&a, &b| (psd[b] / floor[b]).total_cmp(&(psd[a] / floor[a])));
    let kernel = Kernel::new(spectrum.window, spectrum.segment.max(2));
    let mut residual = psd.clone();
    let mut lines: Vec<Measured> = Vec::new();
    let mut fits = 0usize;
    for k in cands {
        let f_k = k as f64 * df;
        if lines
            .iter()
            .any(|m| (m.peak.frequency_hz - f_k).abs() <= m.merge_half_hz)
        {
            continue;
        }
        // What is left at this maximum once the lines measured so far are taken out.
        // ... and significantly: the noise of a bin is its expected level (floor plus the
        // lines taken out) over √K_eff, large on the shoulder of a strong line.
        let expected = psd[k] - residual[k] + floor[k];
        if !(residual[k] > ratio * floor[k]
            && residual[k] - floor[k] > 5.0 * expected / spectrum.k_eff.max(1.0).sqrt())
        {
            continue;
        }
        // Below a few averages the shape of a line is noise: read the bins only.
        let fitted = if fits < MAX_LINE_FITS && spectrum.k_eff >= MIN_K_EFF_FOR_FITS {
            fits += 1;
            fit_line(spectrum, &residual, &floor, &base, &kernel, k, max_width_hz)
        } else {
            None
        };
        let m = fitted.unwrap_or_else(|| Measured {
            peak: interpolated_line(psd, &floor, k, df, enbw),
            model: None,
            bin: k,
            merge_half_hz: 0.0,
        });
        let f_line = m.peak.frequency_hz;
        // Wider than the floor's window is the floor's own shape (a resonance's far skirt, a
        // 1/f rise), not a line.
        if m.peak.linewidth_hz > max_width_hz {
            continue;
        }
        if !(m.peak.height_over_floor_db.is_finite() && f_line.is_finite())
            || m.peak.height_over_floor_db < options.threshold_db
            // A maximum on the flank of an excluded line (the mode) is that line.
            || options
                .exclude_hz
                .iter()
                .any(|&(a, b)| f_line >= a && f_line <= b)
        {
            continue;
        }
        m.apply(&mut residual, -1.0);
        let merge_half_hz = m.peak.linewidth_hz.max(1.5 * enbw);
        lines.push(Measured { merge_half_hz, ..m });
    }
    // Second pass: each line again, on the spectrum minus all the *other* lines, so a line
    // measured early no longer carries its later neighbours' wings (and one whose first fit
    // failed on them gets another chance).
    let fitted_lines = lines.iter().filter(|m| m.model.is_some()).count();
    for line in lines.iter_mut().filter(|_| fitted_lines > 1) {
        line.apply(&mut residual, 1.0);
        if let Some(m) = fit_line(
            spectrum,
            &residual,
            &floor,
            &base,
            &kernel,
            line.bin,
            max_width_hz,
        )
        .filter(|m| m.peak.height_over_floor_db.is_finite())
        {
            let merge_half_hz = line.merge_half_hz;
            *line = Measured { merge_half_hz, ..m };
        }
        line.apply(&mut residual, -1.0);
    }
    lines.retain(|m| m.peak.height_over_floor_db >= options.threshold_db);
    let mut peaks: Vec<Peak> = lines.into_iter().map(|m| m.peak).collect();
    if peaks.len() > options.max_peaks {
        peaks.sort_by(|a, b| b.height_over_floor_db.total_cmp(&a.height_over_floor_db));
        peaks.truncate(options.max_peaks);
    }
    peaks.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    if !options.reference_hz.is_empty() {
        for p in &mut peaks {
            p.new_since_reference = Some(new_since_reference(
                p.frequency_hz,
                p.linewidth_hz,
                3.0 * df,
                &options.reference_hz,
            ));
        }
    }
    peaks
}

/// A line as measured: the reported peak, its model (first bin, line values) for
/// subtraction, the bin it was found at, and the half-width (Hz) within which other maxima
/// belong to it.
struct Measured {
    peak: Peak,
    model: Option<LineModel>,
    bin: usize,
    merge_half_hz: f64,
}

/// A fitted line for subtraction: the kernel-convolved values over its fit window and, beyond
/// it, the damped oscillator's wings (METHODS.md §2) to the ends of the spectrum (a strong
/// broad line lifts the floor far away).
struct LineModel {
    lo: usize,
    values: Vec<f64>,
    area: f64,
    centre_hz: f64,
    width_hz: f64,
    df: f64,
}

impl Measured {
    /// Adds `sign ×` the line's model to `spectrum`.
    fn apply(&self, spectrum: &mut [f64], sign: f64) {
        let Some(m) = &self.model else {
            return;
        };
        let hi = m.lo + m.values.len();
        for (k, r) in spectrum.iter_mut().enumerate() {
            let v = if k >= m.lo && k < hi {
                m.values[k - m.lo]
            } else {
                oscillator_psd(k as f64 * m.df, m.area, m.centre_hz, m.width_hz)
            };
            *r += sign * v;
        }
    }
}

/// Fewest effective averages at which lines are fitted.
const MIN_K_EFF_FOR_FITS: f64 = 8.0;

/// Bins a line fit uses at most (more are thinned to every n-th bin).
const FIT_BINS_MAX: usize = 4000;

/// Largest reduced χ² of a line fit that is taken as one line.
const MAX_LINE_CHI2_RED: f64 = 25.0;

/// At most this many lines are fitted per spectrum (the highest); the rest are read from
/// their bins.
const MAX_LINE_FITS: usize = 32;

/// The old reading of a line from its bins: parabolic peak in log power, half-maximum
/// crossings over the floor (at least the ENBW).
fn interpolated_line(psd: &[f64], floor: &[f64], k: usize, df: f64, enbw: f64) -> Peak {
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
    let fl = floor[k];
    let (left, right) = half_max_crossings(psd, fl, peak, k);
    Peak {
        frequency_hz: (k as f64 + delta) * df,
        height_over_floor_db: 10.0 * (peak / fl).log10(),
        linewidth_hz: ((right - left) * df).max(enbw),
        peak_psd: psd[k],
        floor_psd: fl,
        new_since_reference: None,
    }
}

/// Fractional bins where the PSD crosses half the line's height over `fl` on each side of k.
fn half_max_crossings(psd: &[f64], fl: f64, peak: f64, k: usize) -> (f64, f64) {
    let n = psd.len();
    let half = fl + 0.5 * (peak - fl);
    let mut left = k as f64;
    let mut i = k;
    while i > 0 && psd[i] > half {
        i -= 1;
    }
    if psd[i] <= half && i < k {
        left = i as f64 + (half - psd[i]) / (psd[i + 1] - psd[i]);
    }
    let mut right = k as f64;
    let mut j = k;
    while j + 1 < n && psd[j] > half {
        j += 1;
    }
    if psd[j] <= half && j > k {
        right = j as f64 - (half - psd[j]) / (psd[j - 1] - psd[j]);
    }
    (left, right)
}

/// Fits one line at bin k on `residual` (the spectrum minus the other lines measured):
/// the damped-oscillator line (its Lorentzian core ⊛ kernel) plus a sloped local floor (it takes up what is left of neighbours'
/// wings), over the stretch where the line's wings stand above the floor (10 to 40 FWHM, at
/// least ±12 bins).
fn fit_line(
    spectrum: &Spectrum,
    residual: &[f64],
    floor: &[f64],
    base: &[bool],
    kernel: &Kernel,
    k: usize,
    max_width_hz: f64,
) -> Option<Measured> {
    let n = residual.len();
    let df = spectrum.resolution_hz;
    let enbw = spectrum.enbw_hz.max(df);
    let fl = floor[k];
    let peak_bin = residual[k];
    if peak_bin.is_nan() || peak_bin <= fl {
        return None;
    }
    // Half-maximum crossings on a running mean, so that noise (K_eff small) does not end the
    // line at its first low bin.
    let h_s = if spectrum.k_eff >= 10.0 { 2 } else { 4 };
    let smooth: Vec<f64> = (0..n)
        .map(|i| {
            let (a, b) = (i.saturating_sub(h_s), (i + h_s).min(n - 1));
            residual[a..=b].iter().sum::<f64>() / (b - a + 1) as f64
        })
        .collect();
    let (left, right) = half_max_crossings(&smooth, fl, smooth[k], k);
    let w_bins = (right - left).max(1.0);
    if w_bins * df > max_width_hz {
        return None;
    }
    // Far enough that the line's wing falls to about the floor (x = (γ/2)√H for a height H
    // over the floor), so the floor is measured rather than traded against the wings.
    let h = (peak_bin / fl - 1.0).max(1.0);
    let reach = (w_bins * h.sqrt())
        .clamp(10.0 * w_bins, 40.0 * w_bins)
        .max(12.0)
        .ceil() as usize;
    let lo = k.saturating_sub(reach).max(1);
    let hi = (k + reach).min(n - 1);
    let mut freqs = Vec::new();
    let mut bins = Vec::new();
    let mut data = Vec::new();
    // A broad line at fine resolution spans thousands of bins: fit every `stride`-th bin of
    // the stretch (its shape is smooth on that scale), at least ~8 per FWHM.
    let stride = ((hi - lo + 1) / FIT_BINS_MAX + 1)
        .min((w_bins / 8.0).max(1.0) as usize)
        .max(1);
    for i in (lo..=hi).step_by(stride) {
        if !base[i] && residual[i].is_finite() && residual[i] > 0.0 {
            freqs.push(i as f64 * df);
            bins.push(i);
            data.push(residual[i]);
        }
    }
    if data.len() < 10 {
        return None;
    }
    let k_eff = spectrum.k_eff.max(1.0);
    let gamma0 = (w_bins * df - 0.8 * enbw).max(0.3 * enbw);
    let area0 = (peak_bin - fl) * std::f64::consts::PI * (w_bins * df).max(enbw) / 2.0;
    let f_ref = k as f64 * df;
    let outcome = narrow::fit_convolved(
        &freqs,
        &bins,
        &data,
        k_eff,
        df,
        enbw,
        kernel,
        LineShape::Oscillator,
        true,
        f_ref,
        (fl, area0, f_ref),
        Some(gamma0),
        false,
        true,
    )
    .ok()?;
    let p = &outcome.solution.params;
    let (b0, a, c) = (p[0], p[1], p[2]);
    let (gamma, slope) = match outcome.fixed_width {
        None => (p[3], p[4]),
        Some(_) => (0.0, p[3]),
    };
    // A comb of unresolved lines (mains harmonics a few bins apart) or a line that is no
    // Lorentzian is not one line: leave it to the reading of the bins.
    let chi2_red = outcome.solution.chi2 / outcome.solution.dof.max(1) as f64;
    if chi2_red.is_nan() || chi2_red > MAX_LINE_CHI2_RED {
        return None;
    }
    // The local floor at the line's centre.
    let b = b0 + slope * (c - f_ref);
    // A floor fitted far below the clipped one means the fit traded it against the wings.
    if !(b > 0.2 * fl && a > 0.0 && c >= lo as f64 * df && c <= hi as f64 * df) {
        return None;
    }
    // Every bin of the stretch (the fit may have used every n-th), for subtraction.
    let all_bins: Vec<usize> = (lo..=hi).collect();
    let all_freqs: Vec<f64> = all_bins.iter().map(|&i| i as f64 * df).collect();
    let model = narrow::ConvolvedModel::new(
        &all_freqs,
        &all_bins,
        df,
        kernel,
        LineShape::Oscillator,
        false,
        f_ref,
        Some(gamma.max(1e-6 * df)),
    );
    // The line alone at every bin of the window (model minus floor), for subtraction.
    let mut values = vec![0.0; hi - lo + 1];
    let mut smeared_max = 0.0f64;
    let mut grad = [0.0; 3];
    for (i, v) in values.iter_mut().enumerate() {
        *v = model.eval_line(&[b0, a, c], i, &mut grad);
        smeared_max = smeared_max.max(*v);
    }
    let resolved = gamma >= enbw;
    let line_peak = if resolved {
        2.0 * a / (std::f64::consts::PI * gamma)
    } else {
        smeared_max
    };
    let height = 10.0 * ((b + line_peak) / b).log10();
    let peak = Peak {
        frequency_hz: c,
        height_over_floor_db: height,
        linewidth_hz: if resolved { gamma } else { enbw },
        peak_psd: spectrum.psd_v2_per_hz[k],
        floor_psd: b,
        new_since_reference: None,
    };
    Some(Measured {
        peak,
        model: Some(LineModel {
            lo,
            values,
            area: a,
            centre_hz: c,
            width_hz: gamma,
            df,
        }),
        bin: k,
        merge_half_hz: 0.0,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Averaging, WindowKind};

    fn flat(level: f64, bins: usize, k_eff: f64) -> Spectrum {
        Spectrum {
            sample_rate_hz: 2.0 * (bins - 1) as f64,
            segment: 2 * (bins - 1),
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: Detrend::Mean,
            averaging: Averaging::Linear,
            averages: 10,
            k_eff,
            resolution_hz: 1.0,
            enbw_hz: 1.5,
            psd_v2_per_hz: vec![level; bins],
        }
    }

    /// A constant spectrum's floor is the constant divided by the χ² median/mean ratio.
    #[test]
    fn floor_of_a_constant_is_the_constant_over_bias() {
        let s = flat(2.0, 1000, 10.0);
        let f = clipped_floor(&s, 65, &[]);
        let want = 2.0 / chi2_median_ratio(20.0);
        assert!(f.iter().all(|v| (v / want - 1.0).abs() < 1e-12));
    }

    /// A line far wider than the median window (FWHM 100 bins, 20 dB; window 129 bins) does
    /// not lift the clipped floor: under it the floor is set by bins beyond the clipped
    /// stretch, where the wings add ~10 %.
    #[test]
    fn a_wide_line_does_not_lift_the_floor() {
        let mut s = flat(1.0, 20_001, 100.0);
        for (k, p) in s.psd_v2_per_hz.iter_mut().enumerate() {
            let x = (k as f64 - 10_000.0) / 50.0;
            *p += 100.0 / (1.0 + x * x);
        }
        let f = clipped_floor(&s, 129, &[]);
        let bias = chi2_median_ratio(200.0);
        assert!(
            f[10_000] * bias < 1.5,
            "floor under the line {}",
            f[10_000] * bias
        );
        assert!((f[500] * bias - 1.0).abs() < 0.05, "{}", f[500] * bias);
    }
}
