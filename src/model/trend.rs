//! One row of a time-resolved analysis: what `stillpoint track` writes per interval and the
//! window's session journal keeps per trend point (BRIEF.md, `track`: the CSV columns in
//! the contract's order). Built from a [`Report`] of one interval's spectrum, written and read
//! back as one CSV line (numbers in shortest round-trip form, an empty cell for a value that
//! cannot be computed, `status` a short reason without commas).
//!
//! Uncertainties (METHODS.md §11): an interval's line area scatters by √(2/(Γ T_i)) around
//! the mode's mean variance whatever the estimator (the line's energy is correlated over
//! 1/Γ). The fit's σ of the area follows the Welch scatter of the bins, which for a line
//! narrower than a bin counts correlated segments as independent; a row's
//! `variance_m2_uncertainty` is therefore max(σ_fit, ⟨x²⟩·√(2/(Γ T_i))), and the occupancy
//! and effective-temperature uncertainties are widened to match (n̄ + ½ ∝ ⟨x²⟩). Intervals
//! with Γ T_i below [`MIN_GAMMA_T`] get status `short_for_linewidth` and no occupancy or
//! temperature.

use crate::physics::{Estimate, occupancy};
use crate::report::Report;

/// Γ·T_i below which an interval cannot measure the mode's energy (occupancy, temperature):
/// the area then scatters by more than √(2/10) ≈ 45 % (METHODS.md §11).
pub(crate) const MIN_GAMMA_T: f64 = 10.0;

/// The CSV header of `track` (BRIEF.md), in the contract's order: 22 columns.
pub const TRACK_HEADER: &str = "t_start_s,t_end_s,averages,frequency_hz,frequency_hz_uncertainty,\
linewidth_hz,linewidth_hz_uncertainty,quality_factor,quality_factor_uncertainty,variance_m2,\
variance_m2_uncertainty,m_per_v,m_per_v_uncertainty,occupancy,occupancy_uncertainty,\
effective_temperature_k,effective_temperature_k_uncertainty,sideband_occupancy,\
sideband_occupancy_uncertainty,band_low_hz,band_high_hz,status";

/// Number of columns of [`TRACK_HEADER`].
pub const TRACK_COLUMNS: usize = 22;

/// A value and its 1σ (either may be missing).
pub(crate) type Measured = Option<(f64, Option<f64>)>;

/// One interval's results (empty cells are `None`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TrendRow {
    /// Start of the interval, seconds of samples from the start of the stream.
    pub t_start_s: f64,
    /// End of the interval (exclusive).
    pub t_end_s: f64,
    /// Welch segments averaged.
    pub averages: Option<u64>,
    /// Mode frequency f_m (Hz).
    pub frequency_hz: Measured,
    /// FWHM linewidth γ (Hz).
    pub linewidth_hz: Measured,
    /// Q = f_m/γ.
    pub quality_factor: Measured,
    /// Mode variance ⟨x²⟩ (m²).
    pub variance_m2: Measured,
    /// Calibration (m/V).
    pub m_per_v: Measured,
    /// Occupancy n̄ from the area.
    pub occupancy: Measured,
    /// Effective temperature (K).
    pub effective_temperature_k: Measured,
    /// Sideband-asymmetry occupancy.
    pub sideband_occupancy: Measured,
    /// Mode band used for this interval (Hz).
    pub band_hz: Option<(f64, f64)>,
    /// `ok` or a short reason (lowercase words joined by `_`).
    pub status: String,
}

/// Relative scatter √(2/(Γ T)) of a line's area over an interval of `seconds` (METHODS.md
/// §11), Γ = 2π·FWHM.
pub(crate) fn area_scatter(linewidth_hz: f64, seconds: f64) -> f64 {
    (2.0 / (2.0 * std::f64::consts::PI * linewidth_hz * seconds)).sqrt()
}

/// A finite number in shortest round-trip form, or nothing, after a comma.
fn cell(out: &mut String, value: Option<f64>) {
    out.push(',');
    if let Some(v) = value.filter(|v| v.is_finite()) {
        out.push_str(&format!("{v:?}"));
    }
}

impl TrendRow {
    /// A row with only its times, averages, band and status (nothing measured).
    pub fn empty(
        t_start_s: f64,
        t_end_s: f64,
        averages: Option<u64>,
        band_hz: Option<(f64, f64)>,
        status: &str,
    ) -> Self {
        Self {
            t_start_s,
            t_end_s,
            averages,
            band_hz,
            status: status.to_string(),
            ..Self::default()
        }
    }

    /// The row of one analysed interval of `t_end_s − t_start_s` seconds; `band_hz` is the
    /// mode band the analysis used; `calibration_asked`: a calibration was requested, so a
    /// missing m/V is this interval's failure.
    pub(crate) fn from_report(
        report: &Report,
        t_start_s: f64,
        t_end_s: f64,
        band_hz: Option<(f64, f64)>,
        calibration_asked: bool,
    ) -> Self {
        let seconds = t_end_s - t_start_s;
        let pair = |v: Option<f64>, s: Option<f64>| v.map(|v| (v, s));
        let mode = &report.mode;
        let sb = report.sidebands.as_ref();
        let frequency = pair(mode.frequency_hz, mode.frequency_hz_uncertainty).or_else(|| {
            sb.and_then(|s| {
                pair(
                    s.mechanical_frequency_hz,
                    s.mechanical_frequency_hz_uncertainty,
                )
            })
        });
        let linewidth = pair(mode.linewidth_hz, mode.linewidth_hz_uncertainty)
            .or_else(|| sb.and_then(|s| pair(s.linewidth_hz, s.linewidth_hz_uncertainty)));
        let gamma_t = linewidth.map(|(g, _)| 2.0 * std::f64::consts::PI * g * seconds);
        let short = gamma_t.is_some_and(|gt| gt.is_nan() || gt < MIN_GAMMA_T);
        let scatter = linewidth.map(|(g, _)| area_scatter(g, seconds));
        let q = &report.quantum;
        let mut variance = pair(mode.variance_m2, mode.variance_m2_uncertainty);
        let mut extra_rel = 0.0;
        if let (Some((v, Some(s))), Some(r)) = (variance, scatter)
            && v > 0.0
            && r.is_finite()
        {
            let total = s.max(v * r);
            extra_rel = (total * total - s * s).max(0.0).sqrt() / v;
            variance = Some((v, Some(total)));
        }
        let mut occupancy_row = pair(q.occupancy, q.occupancy_uncertainty);
        let mut temperature = pair(
            q.effective_temperature_k,
            q.effective_temperature_k_uncertainty,
        );
        if extra_rel > 0.0
            && let Some((n, Some(sn))) = occupancy_row
        {
            let widened = Estimate::new(n, sn.hypot((n + 0.5) * extra_rel));
            occupancy_row = Some((n, Some(widened.sigma)));
            if let Some((f, _)) = frequency
                && let Some(t) = occupancy::effective_temperature(f, widened)
            {
                temperature = Some((t.value, Some(t.sigma)));
            }
        }
        let status = if band_hz.is_none() {
            "no_mode_band"
        } else if frequency.is_none() {
            "mode_not_found"
        } else if calibration_asked && report.calibration.m_per_v.is_none() {
            "calibration_failed"
        } else if short {
            "short_for_linewidth"
        } else {
            "ok"
        };
        if short {
            occupancy_row = None;
            temperature = None;
        }
        Self {
            t_start_s,
            t_end_s,
            averages: Some(report.welch.averages as u64),
            frequency_hz: frequency,
            linewidth_hz: linewidth,
            quality_factor: pair(mode.quality_factor, mode.quality_factor_uncertainty),
            variance_m2: variance,
            m_per_v: pair(
                report.calibration.m_per_v,
                report.calibration.m_per_v_uncertainty,
            ),
            occupancy: occupancy_row,
            effective_temperature_k: temperature,
            sideband_occupancy: sb.and_then(|s| pair(s.occupancy, s.occupancy_uncertainty)),
            band_hz,
            status: status.to_string(),
        }
    }

    /// The measured pairs in column order.
    fn pairs(&self) -> [Measured; 8] {
        [
            self.frequency_hz,
            self.linewidth_hz,
            self.quality_factor,
            self.variance_m2,
            self.m_per_v,
            self.occupancy,
            self.effective_temperature_k,
            self.sideband_occupancy,
        ]
    }

    /// One CSV line of [`TRACK_HEADER`]'s columns, ending in `\n`.
    pub(crate) fn to_csv_line(&self) -> String {
        let mut out = String::with_capacity(256);
        out.push_str(&format!("{:?}", self.t_start_s));
        cell(&mut out, Some(self.t_end_s));
        out.push(',');
        if let Some(k) = self.averages {
            out.push_str(&k.to_string());
        }
        for pair in self.pairs() {
            let value = pair.map(|p| p.0).filter(|v| v.is_finite());
            cell(&mut out, value);
            cell(&mut out, value.and(pair.and_then(|p| p.1)));
        }
        cell(&mut out, self.band_hz.map(|b| b.0));
        cell(&mut out, self.band_hz.map(|b| b.1));
        out.push(',');
        let status: String = self
            .status
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '_' {
                    c
                } else {
                    '_'
                }
            })
            .collect();
        out.push_str(if status.is_empty() {
            "unknown"
        } else {
            &status
        });
        out.push('\n');
        out
    }

    /// Reads a line written by [`TrendRow::to_csv_line`] (without or with its `\n`).
    ///
    /// # Errors
    /// Not 22 fields, or a cell that is not a number.
    pub fn parse_csv_line(line: &str) -> Result<Self, String> {
        let fields: Vec<&str> = line.trim_end_matches(['\n', '\r']).split(',').collect();
        if fields.len() != TRACK_COLUMNS {
            return Err(format!(
                "{} fields instead of {TRACK_COLUMNS}",
                fields.len()
            ));
        }
        let num = |i: usize| -> Result<Option<f64>, String> {
            let text = fields.get(i).copied().unwrap_or("");
            if text.is_empty() {
                return Ok(None);
            }
            text.parse::<f64>()
                .map(Some)
                .map_err(|_| format!("column {} is not a number: `{text}`", i + 1))
        };
        let measured = |i: usize| -> Result<Measured, String> {
            Ok(num(i)?.map(|v| (v, num(i + 1).ok().flatten())))
        };
        let t_start_s = num(0)?.ok_or("no t_start_s")?;
        let t_end_s = num(1)?.ok_or("no t_end_s")?;
        let averages = match fields.get(2).copied().unwrap_or("") {
            "" => None,
            text => Some(
                text.parse::<u64>()
                    .map_err(|_| format!("averages is not a count: `{text}`"))?,
            ),
        };
        let band_hz = match (num(19)?, num(20)?) {
            (Some(a), Some(b)) => Some((a, b)),
            _ => None,
        };
        Ok(Self {
            t_start_s,
            t_end_s,
            averages,
            frequency_hz: measured(3)?,
            linewidth_hz: measured(5)?,
            quality_factor: measured(7)?,
            variance_m2: measured(9)?,
            m_per_v: measured(11)?,
            occupancy: measured(13)?,
            effective_temperature_k: measured(15)?,
            sideband_occupancy: measured(17)?,
            band_hz,
            status: fields.get(21).copied().unwrap_or("").to_string(),
        })
    }
}

/// The band of the next interval, moved onto this interval's fitted mode (same width,
/// inside 0 … Nyquist) when the fit is trustworthy: a frequency whose 1σ is below a quarter
/// of the band. `stillpoint track` and the window's history follow the mode by this one rule.
pub fn follow_band(
    band: Option<(f64, f64)>,
    report: &Report,
    nyquist_hz: f64,
) -> Option<(f64, f64)> {
    let (lo, hi) = band?;
    let width = hi - lo;
    let fitted = match (
        report.mode.frequency_hz,
        report.mode.frequency_hz_uncertainty,
    ) {
        (Some(f), Some(s)) => Some((f, s)),
        _ => report.sidebands.as_ref().and_then(|sb| {
            Some((
                sb.mechanical_frequency_hz?,
                sb.mechanical_frequency_hz_uncertainty?,
            ))
        }),
    };
    let Some((f, sigma)) = fitted else {
        return band;
    };
    if !(f.is_finite() && sigma.is_finite() && sigma < width / 4.0) {
        return band;
    }
    let mut new_lo = f - width / 2.0;
    if new_lo < 0.0 {
        new_lo = 0.0;
    }
    if new_lo + width > nyquist_hz {
        new_lo = (nyquist_hz - width).max(0.0);
    }
    Some((new_lo, new_lo + width))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn header_has_the_contract_columns() {
        let columns: Vec<&str> = TRACK_HEADER.split(',').collect();
        assert_eq!(columns.len(), TRACK_COLUMNS);
        assert_eq!(columns[0], "t_start_s");
        assert_eq!(columns[19], "band_low_hz");
        assert_eq!(columns[21], "status");
    }

    #[test]
    fn line_round_trip_and_empty_cells() {
        let row = TrendRow {
            t_start_s: 0.0,
            t_end_s: 1.5,
            averages: Some(7),
            frequency_hz: Some((1000.123456789, Some(0.1))),
            variance_m2: Some((1e-24, None)),
            occupancy: Some((f64::NAN, Some(1.0))),
            band_hz: Some((960.0, 1040.0)),
            status: "short for, linewidth".into(),
            ..TrendRow::default()
        };
        let line = row.to_csv_line();
        assert_eq!(line.trim_end().split(',').count(), TRACK_COLUMNS);
        assert!(line.starts_with("0.0,1.5,7,1000.123456789,0.1,,,,,1e-24,,"));
        assert!(
            line.ends_with(",960.0,1040.0,short_for__linewidth\n"),
            "{line}"
        );
        let back = TrendRow::parse_csv_line(&line).unwrap();
        assert_eq!(back.frequency_hz, row.frequency_hz);
        assert_eq!(back.variance_m2, row.variance_m2);
        assert_eq!(back.occupancy, None);
        assert_eq!(back.band_hz, row.band_hz);
        assert!(TrendRow::parse_csv_line("1,2,3").is_err());
    }

    fn report(gamma_hz: f64, variance: f64, sigma: f64) -> Report {
        let mut r = Report::default();
        r.welch.averages = 7;
        r.mode.frequency_hz = Some(1000.0);
        r.mode.frequency_hz_uncertainty = Some(0.5);
        r.mode.linewidth_hz = Some(gamma_hz);
        r.mode.linewidth_hz_uncertainty = Some(1.0);
        r.mode.variance_m2 = Some(variance);
        r.mode.variance_m2_uncertainty = Some(sigma);
        r.calibration.m_per_v = Some(1.0);
        r.quantum.occupancy = Some(100.0);
        r.quantum.occupancy_uncertainty = Some(1.0);
        r.quantum.effective_temperature_k = Some(4.8e-3);
        r.quantum.effective_temperature_k_uncertainty = Some(1e-5);
        r
    }

    #[test]
    fn short_intervals_and_honest_sigma() {
        // Γ T = 2π · 3 Hz · 0.25 s = 4.7 < 10: short, no occupancy or temperature, and the
        // variance σ widened to ⟨x²⟩ √(2/(Γ T)) (METHODS §11).
        let short =
            TrendRow::from_report(&report(3.0, 1.0, 0.01), 0.0, 0.25, Some((0.0, 1.0)), true);
        assert_eq!(short.status, "short_for_linewidth");
        assert_eq!(short.occupancy, None);
        assert_eq!(short.effective_temperature_k, None);
        let want = (2.0 / (2.0 * std::f64::consts::PI * 3.0 * 0.25)).sqrt();
        assert!((short.variance_m2.unwrap().1.unwrap() - want).abs() < 1e-12);
        // Γ T = 2π · 3 · 10 = 188: ok; σ = max(0.01, √(2/188) = 0.103) and the occupancy σ
        // widened by (n̄ + ½) · √(0.103² − 0.01²).
        let long =
            TrendRow::from_report(&report(3.0, 1.0, 0.01), 0.0, 10.0, Some((0.0, 1.0)), true);
        assert_eq!(long.status, "ok");
        let r = (2.0 / (2.0 * std::f64::consts::PI * 30.0)).sqrt();
        assert!((long.variance_m2.unwrap().1.unwrap() - r).abs() < 1e-12);
        let extra = (r * r - 1e-4).sqrt() * 100.5;
        let sn = long.occupancy.unwrap().1.unwrap();
        assert!((sn - extra.hypot(1.0)).abs() < 1e-9, "{sn}");
        // T_eff recomputed from the widened n̄ (d ln T / d ln n̄ ≈ 1 at n̄ = 100).
        let (t, st) = long.effective_temperature_k.unwrap();
        assert!(st.unwrap() / t > 0.9 * sn / 100.0, "{t} ± {st:?}");
        // A fit σ already larger than the line scatter is kept.
        let wide = TrendRow::from_report(&report(3.0, 1.0, 0.5), 0.0, 10.0, Some((0.0, 1.0)), true);
        assert_eq!(wide.variance_m2, Some((1.0, Some(0.5))));
        assert_eq!(wide.occupancy, Some((100.0, Some(1.0))));
        // Missing pieces.
        let mut none = report(3.0, 1.0, 0.5);
        none.mode = Default::default();
        let row = TrendRow::from_report(&none, 0.0, 10.0, Some((0.0, 1.0)), true);
        assert_eq!(row.status, "mode_not_found");
        assert_eq!(
            TrendRow::from_report(&none, 0.0, 10.0, None, true).status,
            "no_mode_band"
        );
        let mut uncal = report(3.0, 1.0, 0.5);
        uncal.calibration.m_per_v = None;
        assert_eq!(
            TrendRow::from_report(&uncal, 0.0, 10.0, Some((0.0, 1.0)), true).status,
            "calibration_failed"
        );
    }

    #[test]
    fn area_scatter_formula() {
        // METHODS.md §11: √(2/(Γ T)), Γ = 2π γ.
        let r = area_scatter(1.0 / (2.0 * std::f64::consts::PI), 2.0);
        assert!((r - 1.0).abs() < 1e-15);
    }
}
