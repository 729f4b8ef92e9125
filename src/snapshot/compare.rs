//! Comparing a spectrum with a reference: ratio and difference ([`compare`]), the bands
//! standing out ([`excess_bands`]) and the peaks that are new ([`mark_new_peaks`]).

use serde::{Deserialize, Serialize};

use super::{Result, SnapshotError};
use crate::dsp::Spectrum;
use crate::physics::peaks::new_since_reference;
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

/// Marks each current peak new or known against a reference snapshot's peaks by the one rule
/// [`crate::physics::peaks::new_since_reference`] (`min_tolerance_hz`: 3 Δf, as `analyze
/// --reference` uses). Returns how many are new.
pub fn mark_new_peaks(
    current: &mut [PeakReport],
    reference: &[PeakReport],
    min_tolerance_hz: f64,
) -> usize {
    let reference_hz: Vec<f64> = reference.iter().map(|r| r.frequency_hz).collect();
    let mut new = 0;
    for p in current.iter_mut() {
        let is_new = new_since_reference(
            p.frequency_hz,
            p.linewidth_hz,
            min_tolerance_hz,
            &reference_hz,
        );
        p.new_since_reference = Some(is_new);
        new += usize::from(is_new);
    }
    new
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Averaging, Detrend, WindowKind};
    use crate::physics::peaks::{PeakOptions, find_peaks};

    /// The window's marks (peaks found, then marked against a snapshot's peaks) equal
    /// `analyze --reference`'s (peaks found with the reference frequencies).
    #[test]
    fn window_and_cli_mark_the_same_peaks_new() {
        let bins = 8193;
        let mut psd = vec![1e-6; bins];
        // Lines of 1, 4 and 40 bins FWHM, 20–30 dB over the floor.
        for (centre, width, height) in [
            (1000.0, 1.0, 1e-3),
            (3000.0, 4.0, 1e-4),
            (6000.0, 40.0, 3e-4),
        ] {
            for (k, p) in psd.iter_mut().enumerate() {
                let x = (k as f64 - centre) / (0.5 * width);
                *p += height / (1.0 + x * x);
            }
        }
        let spectrum = Spectrum {
            sample_rate_hz: 2.0 * (bins - 1) as f64,
            segment: 2 * (bins - 1),
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: Detrend::Mean,
            averaging: Averaging::Linear,
            averages: 100,
            k_eff: 95.0,
            resolution_hz: 1.0,
            enbw_hz: 1.5,
            psd_v2_per_hz: psd,
        };
        // Reference peaks: one exactly there, one 2.5 bins off (within 3 Δf), one 30 bins off
        // a 40-bin line (within its width), one far from any line.
        let reference_hz = vec![1000.0, 3002.5, 6030.0, 7500.0];
        let cli = find_peaks(
            &spectrum,
            &PeakOptions {
                reference_hz: reference_hz.clone(),
                ..PeakOptions::default()
            },
        );
        assert_eq!(cli.len(), 3, "{cli:?}");
        let report = |p: &crate::physics::peaks::Peak| PeakReport {
            frequency_hz: p.frequency_hz,
            height_over_floor_db: p.height_over_floor_db,
            linewidth_hz: p.linewidth_hz,
            new_since_reference: None,
        };
        let mut window: Vec<PeakReport> = find_peaks(&spectrum, &PeakOptions::default())
            .iter()
            .map(report)
            .collect();
        let reference: Vec<PeakReport> = reference_hz
            .iter()
            .map(|&f| PeakReport {
                frequency_hz: f,
                linewidth_hz: 1.0,
                ..PeakReport::default()
            })
            .collect();
        mark_new_peaks(&mut window, &reference, 3.0 * spectrum.resolution_hz);
        let window_marks: Vec<Option<bool>> =
            window.iter().map(|p| p.new_since_reference).collect();
        let cli_marks: Vec<Option<bool>> = cli.iter().map(|p| p.new_since_reference).collect();
        assert_eq!(window_marks, cli_marks);
        assert!(cli.iter().all(|p| p.new_since_reference == Some(false)));
        // Without the matching reference lines all three are new, by both paths.
        let far = [7500.0];
        for p in &cli {
            assert!(new_since_reference(
                p.frequency_hz,
                p.linewidth_hz,
                3.0,
                &far
            ));
        }
    }
}
