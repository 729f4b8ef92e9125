//! Logarithmic axes for egui_plot (which has none): the plot holds log10 values, and these
//! grid spacers and formatters put ticks at decades (or at round frequencies when zoomed in
//! to less than about a decade) and label them in Hz or as powers of ten.

use std::ops::RangeInclusive;

use egui_plot::{GridInput, GridMark};

/// A "nice" step (1, 2 or 5 × 10ⁿ) near `raw`.
fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let p = 10f64.powf(raw.log10().floor());
    let m = raw / p;
    let k = if m < 1.5 {
        1.0
    } else if m < 3.5 {
        2.0
    } else if m < 7.5 {
        5.0
    } else {
        10.0
    };
    k * p
}

/// Step (Hz) of the round-frequency ticks used when the view spans less than ~1.2 decades.
fn linear_step_hz(range: (f64, f64)) -> Option<f64> {
    let (lo, hi) = range;
    if !(hi - lo < 1.2 && hi > lo) {
        return None;
    }
    let (f_lo, f_hi) = (10f64.powf(lo), 10f64.powf(hi));
    Some(nice_step((f_hi - f_lo) / 5.0))
}

/// Grid marks for a log10 axis.
pub fn log_spacer(input: GridInput) -> Vec<GridMark> {
    let (lo, hi) = input.bounds;
    let mut marks = Vec::new();
    if !(lo.is_finite() && hi.is_finite() && hi > lo) {
        return marks;
    }
    if let Some(step) = linear_step_hz((lo, hi)) {
        let (f_lo, f_hi) = (10f64.powf(lo), 10f64.powf(hi));
        let f_mid = 0.5 * (f_lo + f_hi);
        let major = step / (f_mid * std::f64::consts::LN_10);
        let minor_step = step / 5.0;
        let first = (f_lo / minor_step).ceil() as i64;
        let last = (f_hi / minor_step).floor() as i64;
        if last - first > 400 {
            return marks;
        }
        for i in first..=last {
            let f = i as f64 * minor_step;
            if f <= 0.0 {
                continue;
            }
            let is_major = i % 5 == 0;
            marks.push(GridMark {
                value: f.log10(),
                step_size: if is_major { major } else { major / 5.0 },
            });
        }
        return marks;
    }
    let first = lo.floor() as i64;
    let last = hi.ceil() as i64;
    if last - first > 60 {
        return marks;
    }
    for d in first..=last {
        let base = d as f64;
        if base >= lo && base <= hi {
            marks.push(GridMark {
                value: base,
                step_size: 1.0,
            });
        }
        for k in 2..10 {
            let v = base + (k as f64).log10();
            if v >= lo && v <= hi {
                marks.push(GridMark {
                    value: v,
                    step_size: 0.1,
                });
            }
        }
    }
    marks
}

/// A frequency in Hz, kHz or MHz with just enough decimals for `step_hz`.
pub fn format_hz(f_hz: f64, step_hz: f64) -> String {
    let (scale, unit) = if f_hz.abs() >= 1e6 {
        (1e6, "MHz")
    } else if f_hz.abs() >= 1e3 {
        (1e3, "kHz")
    } else {
        (1.0, "Hz")
    };
    let step = (step_hz / scale).abs();
    let decimals = if step > 0.0 && step < 1.0 {
        (-step.log10().floor()) as usize
    } else {
        0
    };
    format!("{:.*} {unit}", decimals.min(6), f_hz / scale)
}

/// Digits as Unicode superscripts ("−27" → "⁻²⁷"): the figures' rule.
pub fn superscript(n: i64) -> String {
    crate::figure::format::superscript(i32::try_from(n).unwrap_or(if n < 0 {
        i32::MIN
    } else {
        i32::MAX
    }))
}

/// A positive number as a power of ten: "10⁻²⁷", or "2×10⁻²⁷".
pub fn format_power(value: f64) -> String {
    if !(value.is_finite() && value > 0.0) {
        return String::new();
    }
    let e = value.log10().floor();
    let m = value / 10f64.powf(e);
    let (m, e) = if (m - 10.0).abs() < 1e-6 {
        (1.0, e + 1.0)
    } else {
        (m, e)
    };
    if (m - 1.0).abs() < 1e-6 {
        format!("10{}", superscript(e as i64))
    } else {
        format!("{}×10{}", format_mantissa(m), superscript(e as i64))
    }
}

fn format_mantissa(m: f64) -> String {
    let s = format!("{m:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// Tick label of the log10-frequency axis: decades ("10 kHz") or round frequencies when
/// zoomed in; empty for minor marks, and for marks so close to the right end of the axis
/// that a label centred on them would be cut off ("6.0 kH").
pub fn frequency_tick(mark: GridMark, range: &RangeInclusive<f64>) -> String {
    let (lo, hi) = (*range.start(), *range.end());
    if mark.value > hi - 0.04 * (hi - lo) {
        return String::new();
    }
    let f = 10f64.powf(mark.value);
    if let Some(step) = linear_step_hz((lo, hi)) {
        let k = f / step;
        if (k - k.round()).abs() < 1e-6 {
            return format_hz(f, step);
        }
        return String::new();
    }
    if (mark.value - mark.value.round()).abs() < 1e-9 {
        format_hz(f, f)
    } else if hi - lo < 2.5 {
        // label 2× and 5× between decades when only a couple of decades are shown
        let m = f / 10f64.powf(mark.value.floor());
        if (m - 2.0).abs() < 1e-6 || (m - 5.0).abs() < 1e-6 {
            format_hz(f, f)
        } else {
            String::new()
        }
    } else {
        String::new()
    }
}

/// Tick label of a log10 density axis: powers of ten at decades, 2× and 5× when zoomed in.
pub fn power_tick(mark: GridMark, range: &RangeInclusive<f64>) -> String {
    let (lo, hi) = (*range.start(), *range.end());
    let v = 10f64.powf(mark.value);
    if (mark.value - mark.value.round()).abs() < 1e-9 {
        return format_power(v);
    }
    if hi - lo < 2.5 {
        let m = v / 10f64.powf(mark.value.floor());
        if (m - 2.0).abs() < 1e-6 || (m - 5.0).abs() < 1e-6 {
            return format_power(v);
        }
    }
    String::new()
}

/// A value with a unit and its 1σ, both with three significant figures ("86.21 kHz ± 3 Hz"
/// style is left to callers; this prints "1.23e-12 ± 4.5e-14").
pub fn format_sig(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return "—".into();
    }
    let a = value.abs();
    if a != 0.0 && !(1e-3..1e5).contains(&a) {
        format!("{value:.*e}", digits.saturating_sub(1))
    } else {
        let decimals = if a == 0.0 {
            0
        } else {
            (digits as i32 - 1 - a.log10().floor() as i32).max(0) as usize
        };
        format!("{value:.decimals$}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels() {
        assert_eq!(format_hz(86_400.0, 100.0), "86.4 kHz");
        assert_eq!(format_hz(1e6, 1e6), "1 MHz");
        assert_eq!(format_hz(50.0, 10.0), "50 Hz");
        assert_eq!(format_power(1e-27), "10⁻²⁷");
        assert_eq!(format_power(2e-27), "2×10⁻²⁷");
        assert_eq!(superscript(-12), "⁻¹²");
        assert_eq!(format_sig(0.012345, 3), "0.0123");
        assert_eq!(format_sig(1.2345e-12, 3), "1.23e-12");
    }

    #[test]
    fn decade_and_zoomed_marks() {
        let m = log_spacer(GridInput {
            bounds: (1.0, 5.0),
            base_step_size: 0.01,
        });
        assert!(m.iter().any(|g| g.value == 3.0 && g.step_size == 1.0));
        let r = 1.0..=5.0;
        assert_eq!(frequency_tick(m[0], &r), "10 Hz");
        // zoomed to 86.0–86.5 kHz: round-frequency ticks, labelled every 100 Hz
        let lo = 86_000f64.log10();
        let hi = 86_500f64.log10();
        let z = log_spacer(GridInput {
            bounds: (lo, hi),
            base_step_size: 1e-6,
        });
        assert!(!z.is_empty());
        let labels: Vec<String> = z
            .iter()
            .map(|g| frequency_tick(*g, &(lo..=hi)))
            .filter(|s| !s.is_empty())
            .collect();
        assert!(labels.contains(&"86.2 kHz".to_string()), "{labels:?}");
        // a mark at the very right end gets no label (it would be cut off)
        let end = GridMark {
            value: hi - 0.01 * (hi - lo),
            step_size: 1.0,
        };
        assert_eq!(frequency_tick(end, &(lo..=hi)), "");
    }
}
