//! Plot preparation: reduce a spectrum of up to millions of bins to at most two points per
//! pixel column of a logarithmic frequency axis, keeping each column's minimum and maximum so
//! that narrow peaks (and notches) never vanish from the drawn trace.
//!
//! The bins must be in ascending frequency (as [`crate::dsp::Spectrum`] stores them). Column
//! edges are computed once per call in Hz (one `powf` per column), and the bins are then walked
//! with a pointer, so the cost is linear in the number of bins inside the view with no
//! logarithm per bin.

use crate::synth::rng::splitmix64;
use std::time::{Duration, Instant};

/// Min/max decimation of `(freqs[k], values[k])` onto `pixel_columns` columns evenly spaced in
/// log10(frequency) between `x_range_hz.0` and `x_range_hz.1`.
///
/// Returns points `[log10(f), value]` in ascending frequency. A column holding one or two
/// bins keeps them as they are; a column holding more keeps its minimum and its maximum, in
/// the order they occur. The nearest bin outside each end of the range is included so the
/// trace reaches the plot edges. Bins at f ≤ 0 (DC) and non-finite values are skipped.
/// An empty or inverted range, zero columns or mismatched slice lengths give an empty vector.
pub fn decimate_minmax(
    freqs: &[f64],
    values: &[f64],
    x_range_hz: (f64, f64),
    pixel_columns: usize,
) -> Vec<[f64; 2]> {
    decimate_minmax_with(freqs, values, None, x_range_hz, pixel_columns)
}

/// Bins per block of [`MinMaxBlocks`].
pub const MINMAX_BLOCK: usize = 32;

/// The minimum and maximum (first occurrence, finite values only) of each block of
/// [`MINMAX_BLOCK`] consecutive values: made once per spectrum (on the engine thread, or when
/// a snapshot is loaded), it lets [`decimate_minmax_with`] read a wide pixel column from its
/// whole blocks instead of from every bin — about 30× fewer values per frame at 10⁶ bins,
/// with exactly the points [`decimate_minmax`] gives.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct MinMaxBlocks {
    /// Index of each block's minimum (`u32::MAX`: no finite value in the block).
    min_k: Vec<u32>,
    /// Index of each block's maximum (`u32::MAX`: no finite value).
    max_k: Vec<u32>,
    /// Number of values summarised.
    len: usize,
}

impl MinMaxBlocks {
    /// Summarises `values` (at most 2³² − 1 of them; longer input gives an empty summary,
    /// which [`decimate_minmax_with`] ignores).
    pub fn new(values: &[f64]) -> Self {
        if values.len() >= u32::MAX as usize {
            return Self::default();
        }
        let blocks = values.len().div_ceil(MINMAX_BLOCK);
        let mut min_k = Vec::with_capacity(blocks);
        let mut max_k = Vec::with_capacity(blocks);
        for (b, chunk) in values.chunks(MINMAX_BLOCK).enumerate() {
            let (lo, hi) = scan(chunk, b * MINMAX_BLOCK);
            min_k.push(lo.map_or(u32::MAX, |(k, _)| k as u32));
            max_k.push(hi.map_or(u32::MAX, |(k, _)| k as u32));
        }
        Self {
            min_k,
            max_k,
            len: values.len(),
        }
    }

    /// True if this summarises `n` values.
    fn covers(&self, n: usize) -> bool {
        self.len == n && self.min_k.len() == n.div_ceil(MINMAX_BLOCK)
    }
}

/// (index, value) of the first minimum and the first maximum of the finite values in
/// `values` (which start at index `offset`).
#[allow(clippy::type_complexity)]
fn scan(values: &[f64], offset: usize) -> (Option<(usize, f64)>, Option<(usize, f64)>) {
    let mut min: Option<(usize, f64)> = None;
    let mut max: Option<(usize, f64)> = None;
    let mut min_v = f64::INFINITY;
    let mut max_v = f64::NEG_INFINITY;
    for (j, &v) in values.iter().enumerate() {
        // NaN fails both comparisons; ±Inf is checked only when it would win.
        if v < min_v && v.is_finite() {
            min_v = v;
            min = Some((offset + j, v));
        }
        if v > max_v && v.is_finite() {
            max_v = v;
            max = Some((offset + j, v));
        }
    }
    (min, max)
}

/// Index of the first minimum and of the first maximum of the finite values in
/// `values[a..b]`, reading whole blocks from `blocks` when given.
fn column_minmax(
    values: &[f64],
    blocks: Option<&MinMaxBlocks>,
    a: usize,
    b: usize,
) -> Option<(usize, usize)> {
    let first_block = a.div_ceil(MINMAX_BLOCK);
    let end_block = b / MINMAX_BLOCK;
    let Some(blocks) = blocks.filter(|_| end_block > first_block) else {
        let (lo, hi) = scan(&values[a..b], a);
        return Some((lo?.0, hi?.0));
    };
    let mut lo: Option<(usize, f64)> = None;
    let mut hi: Option<(usize, f64)> = None;
    // Strict comparisons in index order keep the first occurrence, as a plain scan does.
    let mut merge = |l: Option<(usize, f64)>, h: Option<(usize, f64)>| {
        if let Some(l) = l
            && lo.is_none_or(|m| l.1 < m.1)
        {
            lo = Some(l);
        }
        if let Some(h) = h
            && hi.is_none_or(|m| h.1 > m.1)
        {
            hi = Some(h);
        }
    };
    let head_end = first_block * MINMAX_BLOCK;
    let (l, h) = scan(&values[a..head_end], a);
    merge(l, h);
    for blk in first_block..end_block {
        let at = |k: u32| (k != u32::MAX).then(|| (k as usize, values[k as usize]));
        merge(at(blocks.min_k[blk]), at(blocks.max_k[blk]));
    }
    let tail_start = end_block * MINMAX_BLOCK;
    let (l, h) = scan(&values[tail_start..b], tail_start);
    merge(l, h);
    Some((lo?.0, hi?.0))
}

/// [`decimate_minmax`] reading wide columns from `blocks` (made by [`MinMaxBlocks::new`]
/// from the same `values`; ignored when it does not match them). Same points, faster.
pub fn decimate_minmax_with(
    freqs: &[f64],
    values: &[f64],
    blocks: Option<&MinMaxBlocks>,
    x_range_hz: (f64, f64),
    pixel_columns: usize,
) -> Vec<[f64; 2]> {
    let blocks = blocks.filter(|b| b.covers(values.len()));
    let (lo_hz, hi_hz) = x_range_hz;
    let n = freqs.len().min(values.len());
    if pixel_columns == 0
        || n == 0
        || !(lo_hz.is_finite() && hi_hz.is_finite() && lo_hz > 0.0 && hi_hz > lo_hz)
    {
        return Vec::new();
    }
    let freqs = &freqs[..n];
    let values = &values[..n];
    let log_lo = lo_hz.log10();
    let log_hi = hi_hz.log10();
    let step = (log_hi - log_lo) / pixel_columns as f64;

    // First bin at or above lo, last bin at or below hi; widen by one on each side.
    let first_in = freqs.partition_point(|&f| f < lo_hz);
    let end_in = freqs.partition_point(|&f| f <= hi_hz);
    let start = first_in.saturating_sub(1);
    let end = (end_in + 1).min(n);

    let mut out = Vec::with_capacity(2 * pixel_columns + 4);
    let push_point = |out: &mut Vec<[f64; 2]>, k: usize| {
        if let (Some(&f), Some(&v)) = (freqs.get(k), values.get(k))
            && f > 0.0
            && v.is_finite()
        {
            out.push([f.log10(), v]);
        }
    };
    if start < first_in {
        push_point(&mut out, start);
    }

    // Columns are found by binary search on the (ascending) frequencies, so the per-bin work
    // is a bare min/max scan of a slice. Bins here are all above lo > 0 Hz.
    let mut k = first_in;
    let mut column = 0usize;
    while k < end_in && column < pixel_columns {
        // Upper edge of this column in Hz; the last column ends exactly at hi.
        let edge_hz = if column + 1 == pixel_columns {
            hi_hz
        } else {
            10f64.powf(log_lo + step * (column + 1) as f64)
        };
        let col_start = k;
        let col_end = k + freqs[k..end_in].partition_point(|&f| f <= edge_hz);
        k = col_end;
        column += 1;
        let count = col_end - col_start;
        if count == 0 {
            continue;
        }
        if count <= 2 {
            for j in col_start..col_end {
                push_point(&mut out, j);
            }
            continue;
        }
        if let Some((min_k, max_k)) = column_minmax(values, blocks, col_start, col_end) {
            let (a, b) = if min_k <= max_k {
                (min_k, max_k)
            } else {
                (max_k, min_k)
            };
            push_point(&mut out, a);
            if b != a {
                push_point(&mut out, b);
            }
        }
    }
    if end > end_in {
        push_point(&mut out, end_in);
    }
    out
}

/// Reduces a spectrum to `columns` values of log10(value) over columns evenly spaced in
/// log10(frequency) between `x_range_hz.0` and `x_range_hz.1` (a waterfall row).
///
/// Each column takes the maximum of the bins that fall in it (so narrow lines stay visible);
/// a column with no bin takes the bin nearest to its centre frequency. Columns with no finite
/// positive value are `NaN` (the caller draws them as "no data").
pub fn log_columns_max(
    freqs: &[f64],
    values: &[f64],
    x_range_hz: (f64, f64),
    columns: usize,
) -> Vec<f32> {
    let n = freqs.len().min(values.len());
    let (lo_hz, hi_hz) = x_range_hz;
    let mut out = vec![f32::NAN; columns];
    if columns == 0
        || n == 0
        || !(lo_hz.is_finite() && hi_hz.is_finite() && lo_hz > 0.0 && hi_hz > lo_hz)
    {
        return out;
    }
    let log_lo = lo_hz.log10();
    let step = (hi_hz.log10() - log_lo) / columns as f64;
    let mut k = freqs[..n].partition_point(|&f| f < lo_hz);
    for (c, slot) in out.iter_mut().enumerate() {
        let edge_hz = 10f64.powf(log_lo + step * (c + 1) as f64);
        let mut best = f64::NEG_INFINITY;
        let mut any = false;
        while k < n && freqs[k] <= edge_hz {
            let v = values[k];
            if v.is_finite() && v > 0.0 && v > best {
                best = v;
            }
            any = true;
            k += 1;
        }
        if !any {
            let centre_hz = 10f64.powf(log_lo + step * (c as f64 + 0.5));
            let j = freqs[..n].partition_point(|&f| f < centre_hz);
            let candidates = [j.checked_sub(1), Some(j)];
            let nearest = candidates
                .into_iter()
                .flatten()
                .filter(|&i| i < n)
                .min_by(|&a, &b| {
                    (freqs[a] - centre_hz)
                        .abs()
                        .total_cmp(&(freqs[b] - centre_hz).abs())
                });
            if let Some(i) = nearest {
                best = values[i];
            }
        }
        if best.is_finite() && best > 0.0 {
            *slot = best.log10() as f32;
        }
    }
    out
}

/// Median wall time of [`decimate_minmax_with`] (with the spectrum's [`MinMaxBlocks`], as the
/// window draws a new spectrum) on a 10⁶-bin spectrum (noise floor with a few
/// narrow lines, log10 values as the window draws them) onto 1600 pixel columns spanning the
/// whole band, over `runs` runs (at least 1). This is the per-frame cost of drawing the
/// rolling spectrum; the budget is 8 ms.
pub fn bench_plot_prep(runs: usize) -> Duration {
    let n = 1_000_001usize;
    let resolution_hz = 1.0;
    let freqs: Vec<f64> = (0..n).map(|k| k as f64 * resolution_hz).collect();
    let mut state = 0x9E37_79B9_7F4A_7C15u64;
    let values: Vec<f64> = (0..n)
        .map(|k| {
            // splitmix64 noise, a few narrow lines
            let z = splitmix64(&mut state);
            let u = (z >> 11) as f64 / (1u64 << 53) as f64;
            let line = if k % 99_991 == 0 { 1e3 } else { 1.0 };
            (1e-12 * line * (0.5 + u)).log10()
        })
        .collect();
    // Made once per spectrum on the engine thread, not per frame.
    let blocks = MinMaxBlocks::new(&values);
    let mut times: Vec<Duration> = (0..runs.max(1))
        .map(|_| {
            let t0 = Instant::now();
            let pts = decimate_minmax_with(&freqs, &values, Some(&blocks), (1.0, 1e6), 1600);
            let dt = t0.elapsed();
            std::hint::black_box(pts);
            dt
        })
        .collect();
    times.sort();
    times.get(times.len() / 2).copied().unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn uniform(n: usize, df: f64) -> Vec<f64> {
        (0..n).map(|k| k as f64 * df).collect()
    }

    #[test]
    fn blocks_give_the_same_points_as_a_plain_scan() {
        // Noise with NaN holes, ties and ±Inf, on a uniform grid; many ranges and widths.
        let n = 20_011;
        let freqs = uniform(n, 0.5);
        let mut state = 7u64;
        let values: Vec<f64> = (0..n)
            .map(|k| {
                state = state
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                let u = (state >> 11) as f64 / (1u64 << 53) as f64;
                match k % 997 {
                    0 => f64::NAN,
                    1 => f64::INFINITY,
                    2 => f64::NEG_INFINITY,
                    _ if k % 5 == 0 => 0.25,
                    _ => (u * 8.0).floor() / 8.0,
                }
            })
            .collect();
        let mut holes = values.clone();
        for v in holes.iter_mut().skip(3000).take(200) {
            *v = f64::NAN;
        }
        for v in [&values, &holes] {
            let blocks = MinMaxBlocks::new(v);
            for (lo, hi) in [
                (0.5, 10_005.0),
                (3.0, 900.0),
                (100.0, 9000.0),
                (1400.0, 1700.0),
            ] {
                for columns in [1, 7, 50, 333, 1600] {
                    assert_eq!(
                        decimate_minmax_with(&freqs, v, Some(&blocks), (lo, hi), columns),
                        decimate_minmax(&freqs, v, (lo, hi), columns),
                        "{lo}…{hi} Hz, {columns} columns"
                    );
                }
            }
        }
        // A summary of other data is ignored.
        let other = MinMaxBlocks::new(&values[..100]);
        assert_eq!(
            decimate_minmax_with(&freqs, &values, Some(&other), (1.0, 9000.0), 80),
            decimate_minmax(&freqs, &values, (1.0, 9000.0), 80)
        );
    }

    #[test]
    fn narrow_peak_survives_heavy_decimation() {
        let freqs = uniform(200_001, 1.0);
        let mut values = vec![1.0; freqs.len()];
        values[123_457] = 1e6; // one-bin line
        values[54_321] = 1e-6; // one-bin notch
        let pts = decimate_minmax(&freqs, &values, (1.0, 2e5), 100);
        assert!(pts.len() <= 2 * 100 + 2, "too many points: {}", pts.len());
        assert!(pts.iter().any(|p| p[1] == 1e6), "peak lost");
        assert!(pts.iter().any(|p| p[1] == 1e-6), "notch lost");
        let peak = pts.iter().find(|p| p[1] == 1e6).unwrap();
        assert!((peak[0] - 123_457f64.log10()).abs() < 1e-12);
    }

    #[test]
    fn ascending_and_within_one_bin_of_range() {
        let freqs = uniform(10_001, 0.5);
        let values: Vec<f64> = freqs.iter().map(|f| 1.0 + f).collect();
        let pts = decimate_minmax(&freqs, &values, (10.0, 1000.0), 50);
        assert!(pts.windows(2).all(|w| w[0][0] < w[1][0]));
        // includes the bin just below 10 Hz and just above 1000 Hz
        assert!((pts[0][0] - 9.5f64.log10()).abs() < 1e-12);
        assert!((pts.last().unwrap()[0] - 1000.5f64.log10()).abs() < 1e-12);
    }

    #[test]
    fn sparse_low_frequencies_are_kept_verbatim() {
        // Below ~100 Hz, with 1 Hz bins and 400 columns per 4 decades, every bin has its own
        // column: all of them must be kept.
        let freqs = uniform(10_001, 1.0);
        let values: Vec<f64> = (0..freqs.len()).map(|k| (k % 7) as f64 + 1.0).collect();
        let pts = decimate_minmax(&freqs, &values, (1.0, 1e4), 400);
        for k in 1..=20usize {
            let x = (k as f64).log10();
            assert!(pts.iter().any(|p| (p[0] - x).abs() < 1e-12), "bin {k} lost");
        }
    }

    #[test]
    fn skips_dc_and_non_finite_and_bad_ranges() {
        let freqs = uniform(100, 1.0);
        let mut values = vec![1.0; 100];
        values[5] = f64::NAN;
        values[6] = f64::NEG_INFINITY;
        let pts = decimate_minmax(&freqs, &values, (0.5, 99.0), 1000);
        assert!(pts.iter().all(|p| p[0].is_finite() && p[1].is_finite()));
        assert!(!pts.iter().any(|p| p[0] == 0.0 && p[1].is_nan()));
        assert!(decimate_minmax(&freqs, &values, (10.0, 1.0), 10).is_empty());
        assert!(decimate_minmax(&freqs, &values, (0.0, 10.0), 10).is_empty());
        assert!(decimate_minmax(&freqs, &values, (1.0, 10.0), 0).is_empty());
        assert!(decimate_minmax(&[], &[], (1.0, 10.0), 10).is_empty());
    }

    #[test]
    fn log_columns_keep_line_and_fill_gaps() {
        let freqs = uniform(100_001, 1.0);
        let mut values = vec![1e-10; freqs.len()];
        values[50_000] = 1e-4;
        let row = log_columns_max(&freqs, &values, (1.0, 1e5), 300);
        assert_eq!(row.len(), 300);
        assert!(row.iter().all(|v| v.is_finite()), "gap left unfilled");
        let max = row.iter().copied().fold(f32::MIN, f32::max);
        assert!((max - (-4.0)).abs() < 1e-5);
        let floor = row.iter().filter(|&&v| (v + 10.0).abs() < 1e-5).count();
        assert!(floor >= 298);
    }

    #[test]
    fn bench_runs() {
        // Not a timing assertion (debug builds are slow); the figure is measured in release.
        assert!(bench_plot_prep(1) > Duration::ZERO);
    }
}
