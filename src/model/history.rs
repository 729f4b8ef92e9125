//! Bounded history for hours-long sessions: the waterfall (rows of log10 PSD on a fixed
//! logarithmic frequency grid, a ring of fixed capacity) and the trend strips (fitted f_m, γ,
//! Q, n̄, m/V, T_eff against wall-clock time, thinned by half whenever full so the whole session
//! stays visible at coarser resolution). Memory never grows with session length.

use std::collections::VecDeque;

/// One waterfall row: log10 of the PSD (V²/Hz) on `columns` log-spaced frequency columns.
#[derive(Debug, Clone, PartialEq)]
pub struct WaterfallRow {
    /// Seconds since the engine started when the row was taken.
    pub time_s: f64,
    /// Frequency span of the columns, Hz (lower edge of the first, upper edge of the last).
    pub range_hz: (f64, f64),
    /// log10(PSD / (V²/Hz)) per column; NaN where there was no data.
    pub log_psd: Vec<f32>,
}

/// Values on `columns` log-spaced columns over `to`, read from log-spaced `values` over
/// `from` (the column holding each new column's centre; NaN outside `from`).
fn regrid(values: &[f32], from: (f64, f64), to: (f64, f64), columns: usize) -> Vec<f32> {
    let n = values.len();
    let span_from = (from.1 / from.0).ln();
    let span_to = (to.1 / to.0).ln();
    (0..columns)
        .map(|j| {
            let f = to.0 * (span_to * (j as f64 + 0.5) / columns as f64).exp();
            let u = (f / from.0).ln() / span_from;
            if !(u.is_finite() && (0.0..1.0).contains(&u)) {
                return f32::NAN;
            }
            let k = (u * n as f64) as usize;
            values.get(k).copied().unwrap_or(f32::NAN)
        })
        .collect()
}

/// A ring of the newest waterfall rows.
#[derive(Debug, Clone)]
pub struct Waterfall {
    capacity: usize,
    rows: VecDeque<WaterfallRow>,
    /// Total rows ever pushed (lets a texture update only what is new).
    pushed: u64,
    /// Bumped whenever the grid changes and old rows are discarded.
    epoch: u64,
}

impl Waterfall {
    /// An empty waterfall keeping at most `capacity` rows (at least 1).
    pub fn new(capacity: usize) -> Self {
        Self {
            capacity: capacity.max(1),
            rows: VecDeque::with_capacity(capacity.max(1)),
            pushed: 0,
            epoch: 0,
        }
    }

    /// Adds a row. A row on a different grid (span or column count) than the ones held
    /// keeps the history: the rows held are resampled onto the new grid (NaN where they
    /// have no data) and the epoch changes (a texture repaints in full).
    pub fn push(&mut self, row: WaterfallRow) {
        if let Some(last) = self.rows.back()
            && (last.range_hz != row.range_hz || last.log_psd.len() != row.log_psd.len())
        {
            for r in &mut self.rows {
                r.log_psd = regrid(&r.log_psd, r.range_hz, row.range_hz, row.log_psd.len());
                r.range_hz = row.range_hz;
            }
            self.epoch += 1;
        }
        if self.rows.len() == self.capacity {
            self.rows.pop_front();
        }
        self.rows.push_back(row);
        self.pushed += 1;
    }

    /// Forgets every row.
    pub fn clear(&mut self) {
        self.rows.clear();
        self.epoch += 1;
    }

    /// Rows held, oldest first.
    pub fn rows(&self) -> &VecDeque<WaterfallRow> {
        &self.rows
    }

    /// Maximum rows held.
    pub fn capacity(&self) -> usize {
        self.capacity
    }

    /// Rows pushed since creation.
    pub fn pushed(&self) -> u64 {
        self.pushed
    }

    /// Changes whenever the history is cleared.
    pub(crate) fn epoch(&self) -> u64 {
        self.epoch
    }

    /// Robust colour range (2nd percentile, maximum) of log10 PSD over the held rows, or
    /// `None` with no finite data.
    pub(crate) fn value_range(&self) -> Option<(f32, f32)> {
        let mut all: Vec<f32> = self
            .rows
            .iter()
            .flat_map(|r| r.log_psd.iter().copied())
            .filter(|v| v.is_finite())
            .collect();
        if all.is_empty() {
            return None;
        }
        all.sort_by(f32::total_cmp);
        let lo = all.get(all.len() / 50).copied()?;
        let hi = all.last().copied()?;
        Some((lo, hi.max(lo + 1e-3)))
    }
}

/// How much the calibration moved over the session ([`TrendBuffer::calibration_drift`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CalibrationDrift {
    /// (newest / oldest − 1) × 100.
    pub percent: f64,
    /// Its 1σ, percent; `None` if a reading had no uncertainty.
    pub sigma_percent: Option<f64>,
    /// Seconds between the first and the last calibrated point.
    pub span_s: f64,
}

impl CalibrationDrift {
    /// More than 3σ away from no drift.
    pub(crate) fn is_significant(&self) -> bool {
        self.sigma_percent
            .is_some_and(|s| self.percent.abs() > 3.0 * s)
    }
}

/// One trend sample (any value may be missing when the fit or an input was missing).
#[derive(Debug, Clone, Copy, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct TrendPoint {
    /// Seconds since the engine started.
    pub time_s: f64,
    /// Fitted mode frequency f_m.
    pub frequency_hz: Option<f64>,
    /// Fitted FWHM linewidth γ.
    pub linewidth_hz: Option<f64>,
    /// Phonon occupancy n̄ from the calibrated area.
    pub occupancy: Option<f64>,
    /// Calibration, metres per volt.
    pub m_per_v: Option<f64>,
    /// Its statistical 1σ (m/V), as the report gives it.
    #[serde(default)]
    pub m_per_v_uncertainty: Option<f64>,
    /// Mode temperature T_eff.
    pub effective_temperature_k: Option<f64>,
    /// Quality factor Q = f_m/γ.
    #[serde(default)]
    pub quality_factor: Option<f64>,
}

/// Trend history with fixed capacity: when full, every other point is dropped, so the
/// strips always span the whole session and memory stays bounded.
#[derive(Debug, Clone)]
pub struct TrendBuffer {
    capacity: usize,
    points: Vec<TrendPoint>,
    /// Current thinning: keep one point in `stride` of those offered.
    stride: u64,
    offered: u64,
}

impl TrendBuffer {
    /// An empty buffer of at most `capacity` points (at least 4).
    pub fn new(capacity: usize) -> Self {
        let capacity = capacity.max(4);
        Self {
            capacity,
            points: Vec::with_capacity(capacity),
            stride: 1,
            offered: 0,
        }
    }

    /// Offers a point; kept according to the current thinning.
    pub fn push(&mut self, point: TrendPoint) {
        let keep = self.offered.is_multiple_of(self.stride);
        self.offered += 1;
        if !keep {
            return;
        }
        if self.points.len() >= self.capacity {
            let mut i = 0usize;
            self.points.retain(|_| {
                i += 1;
                i % 2 == 1
            });
            self.stride *= 2;
        }
        self.points.push(point);
    }

    /// Points held, oldest first.
    pub fn points(&self) -> &[TrendPoint] {
        &self.points
    }

    /// Maximum points held.
    pub fn capacity(&self) -> usize {
        self.capacity
    }

    /// Forgets all points and resets the thinning.
    pub fn clear(&mut self) {
        self.points.clear();
        self.stride = 1;
        self.offered = 0;
    }

    /// Drift of the calibration over the session: the median reading of the newest tenth of
    /// the points against that of the oldest tenth (robust to single bad fits), with 1σ from
    /// the two readings' reported uncertainties. `None` with fewer than 20 calibrated points.
    pub(crate) fn calibration_drift(&self) -> Option<CalibrationDrift> {
        let calibrated: Vec<&TrendPoint> = self
            .points
            .iter()
            .filter(|p| p.m_per_v.is_some_and(|c| c.is_finite() && c > 0.0))
            .collect();
        if calibrated.len() < 20 {
            return None;
        }
        let tenth = calibrated.len() / 10;
        let median_point = |part: &[&TrendPoint]| -> Option<TrendPoint> {
            let mut part = part.to_vec();
            part.sort_by(|a, b| {
                a.m_per_v
                    .unwrap_or(0.0)
                    .total_cmp(&b.m_per_v.unwrap_or(0.0))
            });
            part.get(part.len() / 2).map(|p| **p)
        };
        let first = median_point(calibrated.get(..tenth)?)?;
        let last = median_point(calibrated.get(calibrated.len() - tenth..)?)?;
        let (c0, c1) = (first.m_per_v?, last.m_per_v?);
        let ratio = c1 / c0;
        // σ of a ratio of two independent readings (first-order propagation; common
        // practice). Readings of a cumulative average share data, so this is an upper bound.
        let sigma_percent = match (first.m_per_v_uncertainty, last.m_per_v_uncertainty) {
            (Some(s0), Some(s1)) if s0.is_finite() && s1.is_finite() => {
                Some(100.0 * ratio * ((s0 / c0).powi(2) + (s1 / c1).powi(2)).sqrt())
            }
            _ => None,
        };
        let span_s = calibrated.last()?.time_s - calibrated.first()?.time_s;
        Some(CalibrationDrift {
            percent: 100.0 * (ratio - 1.0),
            sigma_percent,
            span_s,
        })
    }

    /// `[time_s, value]` series of one quantity, skipping missing and non-finite values.
    pub fn series(&self, pick: impl Fn(&TrendPoint) -> Option<f64>) -> Vec<[f64; 2]> {
        self.points
            .iter()
            .filter_map(|p| pick(p).filter(|v| v.is_finite()).map(|v| [p.time_s, v]))
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(t: f64, cols: usize) -> WaterfallRow {
        WaterfallRow {
            time_s: t,
            range_hz: (1.0, 1e3),
            log_psd: vec![t as f32; cols],
        }
    }

    #[test]
    fn regrid_reads_the_column_of_each_new_centre() {
        // three decades in three columns onto six decades in six columns
        let v = regrid(&[0.0, 1.0, 2.0], (1.0, 1e3), (1.0, 1e6), 6);
        assert_eq!(&v[..3], &[0.0, 1.0, 2.0]);
        assert!(v[3..].iter().all(|x| x.is_nan()));
    }

    #[test]
    fn waterfall_is_a_bounded_ring() {
        let mut w = Waterfall::new(10);
        for i in 0..25 {
            w.push(row(i as f64, 8));
        }
        assert_eq!(w.rows().len(), 10);
        assert_eq!(w.rows().front().unwrap().time_s, 15.0);
        assert_eq!(w.rows().back().unwrap().time_s, 24.0);
        assert_eq!(w.pushed(), 25);
        // a new grid keeps the history, resampled onto it
        let e = w.epoch();
        w.push(row(30.0, 16));
        assert_eq!(w.rows().len(), 10);
        assert!(w.rows().iter().all(|r| r.log_psd.len() == 16));
        assert_ne!(w.epoch(), e);
        let (lo, hi) = w.value_range().unwrap();
        assert!(lo <= hi);
    }

    #[test]
    fn calibration_drift_compares_the_newest_tenth_with_the_oldest() {
        // 40 points: the oldest four read 1.00 (±1 %) but one bad fit, the newest four 1.05
        // (±1 %). Drift = 5 %; σ = 1.05 × √(0.01² + (0.0105/1.05)²) × 100 = 1.485 %
        // (first-order error propagation of a ratio; common practice).
        let mut t = TrendBuffer::new(100);
        assert_eq!(t.calibration_drift(), None);
        for i in 0..40 {
            let c = match i {
                1 => 7.0,
                0..4 => 1.0,
                36.. => 1.05,
                _ => 1.02,
            };
            t.push(TrendPoint {
                time_s: i as f64,
                m_per_v: Some(c),
                m_per_v_uncertainty: Some(0.01 * c),
                ..TrendPoint::default()
            });
        }
        let d = t.calibration_drift().unwrap();
        assert!((d.percent - 5.0).abs() < 1e-9, "{d:?}");
        let sigma = 105.0 * (2.0f64 * 1e-4).sqrt();
        assert!((d.sigma_percent.unwrap() - sigma).abs() < 1e-9, "{d:?}");
        assert_eq!(d.span_s, 39.0);
        assert!(d.is_significant());
        // The same drift with ±3 % readings is within 3σ: not significant.
        let mut noisy = TrendBuffer::new(100);
        for p in t.points() {
            noisy.push(TrendPoint {
                m_per_v_uncertainty: p.m_per_v.map(|c| 0.03 * c),
                ..*p
            });
        }
        assert!(!noisy.calibration_drift().unwrap().is_significant());
    }

    #[test]
    fn trends_stay_bounded_and_span_the_session() {
        let mut t = TrendBuffer::new(100);
        for i in 0..100_000 {
            t.push(TrendPoint {
                time_s: i as f64,
                frequency_hz: Some(1e6 - i as f64),
                ..TrendPoint::default()
            });
        }
        assert!(t.points().len() <= 100);
        assert!(t.points().len() >= 50);
        assert_eq!(t.points()[0].time_s, 0.0);
        let last = t.points().last().unwrap().time_s;
        assert!(last > 90_000.0, "last kept point at {last}");
        assert!(t.points().windows(2).all(|w| w[0].time_s < w[1].time_s));
        let s = t.series(|p| p.frequency_hz);
        assert_eq!(s.len(), t.points().len());
        assert!(t.series(|p| p.occupancy).is_empty());
    }
}
