//! Comparing a spectrum with a reference: ratio and difference ([`compare`]), the bands
//! standing out ([`excess_bands`]) and the peaks that are new ([`mark_new_peaks`]).

use serde::{Deserialize, Serialize};

use super::{Result, SnapshotError};
use crate::dsp::Spectrum;
use crate::report::PeakReport;

/// Ratio and difference of a spectrum against a reference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Comparison {
    /// Frequencies of the compared bins (the current spectrum's grid).
    pub frequency_hz: Vec<f64>,
    /// current / reference (bins where the reference is zero are left out).
    pub ratio: Vec<f64>,
    /// current − reference (V²/Hz).
    pub difference_v2_per_hz: Vec<f64>,
    /// True if the reference was linearly interpolated onto the current grid.
    pub interpolated: bool,
    /// Bins of the current spectrum left out (outside the reference's range, or zero
    /// reference).
    pub bins_left_out: usize,
}

/// Compares `current` with `reference` bin by bin when the grids match (same Δf within
/// 1e-9 relative), else by linear interpolation of the reference onto the current bins that
/// lie inside the reference's frequency range.
///
/// # Errors
/// [`SnapshotError::Incompatible`] if the frequency ranges do not overlap or a spectrum is
/// empty or has a bad resolution.
pub fn compare(current: &Spectrum, reference: &Spectrum) -> Result<Comparison> {
    let bad = |m: &str| Err(SnapshotError::Incompatible(m.to_string()));
    if current.is_empty() || reference.is_empty() {
        return bad("a spectrum is empty");
    }
    if !(current.resolution_hz > 0.0 && reference.resolution_hz > 0.0) {
        return bad("a spectrum has no valid resolution");
    }
    let same_grid =
        (current.resolution_hz - reference.resolution_hz).abs() <= 1e-9 * current.resolution_hz;
    let ref_max = reference.frequency_hz(reference.len() - 1);
    let mut out = Comparison {
        frequency_hz: Vec::new(),
        ratio: Vec::new(),
        difference_v2_per_hz: Vec::new(),
        interpolated: !same_grid,
        bins_left_out: 0,
    };
    for (k, &c) in current.psd_v2_per_hz.iter().enumerate() {
        let f = current.frequency_hz(k);
        let r = if same_grid {
            reference.psd_v2_per_hz.get(k).copied()
        } else if f <= ref_max {
            let x = f / reference.resolution_hz;
            let i = x.floor() as usize;
            let t = x - i as f64;
            match (
                reference.psd_v2_per_hz.get(i),
                reference.psd_v2_per_hz.get(i + 1),
            ) {
                (Some(a), Some(b)) => Some(a + (b - a) * t),
                (Some(a), None) => Some(*a),
                _ => None,
            }
        } else {
            None
        };
        match r {
            Some(r) if r > 0.0 && r.is_finite() && c.is_finite() => {
                out.frequency_hz.push(f);
                out.ratio.push(c / r);
                out.difference_v2_per_hz.push(c - r);
            }
            _ => out.bins_left_out += 1,
        }
    }
    if out.frequency_hz.is_empty() {
        return bad("the spectra share no frequency range");
    }
    Ok(out)
}

/// A band of contiguous bins where the current spectrum exceeds the reference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ExcessBand {
    /// First frequency of the band (Hz).
    pub start_hz: f64,
    /// Last frequency of the band (Hz).
    pub end_hz: f64,
    /// Frequency of the largest ratio (Hz).
    pub peak_hz: f64,
    /// Largest ratio in dB, 10 log10(current/reference).
    pub peak_ratio_db: f64,
    /// Bins in the band.
    pub bins: usize,
}

/// Bands where `comparison.ratio` exceeds `threshold_db` (e.g. 6 dB): what is new or grown
/// since the reference. Noise alone exceeds a threshold T dB in a bin with probability that
/// falls with the number of averages (χ²/ν statistics, METHODS §1); choose T accordingly.
pub fn excess_bands(comparison: &Comparison, threshold_db: f64) -> Vec<ExcessBand> {
    let limit = 10_f64.powf(threshold_db / 10.0);
    let mut bands = Vec::new();
    let mut current: Option<ExcessBand> = None;
    for (&f, &r) in comparison.frequency_hz.iter().zip(&comparison.ratio) {
        if r > limit {
            let db = 10.0 * r.log10();
            match current.as_mut() {
                Some(b) => {
                    b.end_hz = f;
                    b.bins += 1;
                    if db > b.peak_ratio_db {
                        b.peak_ratio_db = db;
                        b.peak_hz = f;
                    }
                }
                None => {
                    current = Some(ExcessBand {
                        start_hz: f,
                        end_hz: f,
                        peak_hz: f,
                        peak_ratio_db: db,
                        bins: 1,
                    });
                }
            }
        } else if let Some(b) = current.take() {
            bands.push(b);
        }
    }
    if let Some(b) = current {
        bands.push(b);
    }
    bands
}

/// Marks each current peak `new_since_reference = Some(true)` unless a reference peak lies
/// within `max(tolerance_hz, (linewidth_a + linewidth_b)/2)` of it. Returns how many are new.
pub fn mark_new_peaks(
    current: &mut [PeakReport],
    reference: &[PeakReport],
    tolerance_hz: f64,
) -> usize {
    let mut new = 0;
    for p in current.iter_mut() {
        let known = reference.iter().any(|r| {
            let tol = tolerance_hz.max(0.5 * (p.linewidth_hz + r.linewidth_hz));
            (p.frequency_hz - r.frequency_hz).abs() <= tol
        });
        p.new_since_reference = Some(!known);
        if !known {
            new += 1;
        }
    }
    new
}
