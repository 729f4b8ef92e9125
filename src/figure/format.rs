//! Number formatting and axis ticks for figures.
//!
//! Values with an uncertainty are written the way a paper does: σ rounded to two
//! significant digits and the value rounded to the same decimal place
//! (`83400 ± 1200`, `1.23 ± 0.45`), with a shared power of ten when the value is tiny, or
//! large and rounded above the units (`(2.35 ± 0.12)×10⁵`).

/// Superscript form of an integer exponent (`-12` → `⁻¹²`).
pub(crate) fn superscript(exponent: i32) -> String {
    exponent
        .to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect()
}

/// `-1.5` → `−1.5` (the typographic minus sign).
fn minus(text: &str) -> String {
    text.replace('-', "−")
}

/// Decimal exponent of |x| (floor of log10), 0 for 0 or non-finite.
#[allow(clippy::cast_possible_truncation)] // |log10| of a finite f64 is < 400
fn decade(x: f64) -> i32 {
    if x == 0.0 || !x.is_finite() {
        0
    } else {
        x.abs().log10().floor() as i32
    }
}

/// `value` with `digits` significant digits, plain for 10⁻² ≤ |v| < 10⁵, else `m×10ᵉ`.
pub fn significant(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return "—".to_string();
    }
    if value == 0.0 {
        return "0".to_string();
    }
    let e = decade(value);
    let digits = digits.max(1);
    if (-2..5).contains(&e) {
        #[allow(clippy::cast_sign_loss)] // clamped at 0
        let decimals = (digits as i32 - 1 - e).max(0) as usize;
        minus(&format!("{value:.decimals$}"))
    } else {
        let mantissa = value / 10_f64.powi(e);
        // Rounding may carry into the next decade (9.99 → 10.0).
        let text = format!("{mantissa:.*}", digits - 1);
        if text.trim_start_matches('-').starts_with("10") {
            return significant(value.signum() * 10_f64.powi(e + 1), digits);
        }
        minus(&format!("{text}×10{}", superscript(e)))
    }
}

/// The rounding rule for a value with its uncertainty (common practice in physics
/// reporting): σ to two significant digits, the value to the same decimal place. Returns
/// (value, σ, place) with both rounded at 10^place, the place of σ's second significant
/// digit; a σ that rounds up to three digits (0.996 → 1.0) moves the place one up. Used by
/// the figures ([`with_uncertainty`]) and the window (`model::format::format_uncertain`).
/// `sigma` must be finite and positive.
#[allow(clippy::cast_possible_truncation)] // |log10| of a finite f64 is < 400
pub(crate) fn round_to_uncertainty(value: f64, sigma: f64) -> (f64, f64, i32) {
    let mut place = decade(sigma) - 1;
    if (sigma / 10_f64.powi(place)).round() >= 100.0 {
        place += 1;
    }
    let step = 10_f64.powi(place);
    (
        (value / step).round() * step,
        (sigma / step).round() * step,
        place,
    )
}

/// `value ± sigma` with σ to two significant digits and the value to the same place;
/// `value` alone (6 significant digits) when σ is missing, zero or not finite.
pub(crate) fn with_uncertainty(value: f64, sigma: Option<f64>) -> String {
    let Some(sigma) = sigma.filter(|s| s.is_finite() && *s > 0.0) else {
        return significant(value, 6);
    };
    if !value.is_finite() {
        return "—".to_string();
    }
    let (rounded_value, rounded_sigma, place) = round_to_uncertainty(value, sigma);
    let e = if value == 0.0 {
        decade(sigma)
    } else {
        decade(value).max(decade(sigma))
    };
    // Plain unless tiny, or large with zeros standing in for rounded-off digits.
    let scaled = e < -2 || (e >= 5 && place >= 1);
    let shift = if scaled { e } else { 0 };
    let unit = 10_f64.powi(shift);
    #[allow(clippy::cast_sign_loss)] // clamped at 0
    let decimals = (shift - place).max(0) as usize;
    let v = rounded_value / unit;
    let s = rounded_sigma / unit;
    let body = format!("{v:.decimals$} ± {s:.decimals$}");
    if scaled {
        minus(&format!("({body})×10{}", superscript(shift)))
    } else {
        minus(&body)
    }
}

/// A frequency axis unit for values up to `max_hz`: (divisor, label).
pub(crate) fn frequency_unit(max_hz: f64) -> (f64, &'static str) {
    if max_hz >= 2e9 {
        (1e9, "GHz")
    } else if max_hz >= 2e6 {
        (1e6, "MHz")
    } else if max_hz >= 2e3 {
        (1e3, "kHz")
    } else {
        (1.0, "Hz")
    }
}

/// Ticks of a logarithmic axis over `[lo, hi]` (both > 0): `(value, label)`.
///
/// Spanning a decade or more: powers of ten (every k-th so at most 7 are labelled),
/// labelled `10ᵏ` (`as_power`) or plainly after dividing by `divisor`. Less than a decade:
/// 1-2-5 steps chosen like a linear axis, labelled plainly.
pub(crate) fn log_ticks(lo: f64, hi: f64, divisor: f64, as_power: bool) -> Vec<(f64, String)> {
    if !(lo > 0.0 && hi > lo && lo.is_finite() && hi.is_finite()) {
        return Vec::new();
    }
    let (a, b) = (lo.log10(), hi.log10());
    #[allow(clippy::cast_possible_truncation)] // finite logs
    let (first, last) = (a.ceil() as i32, b.floor() as i32);
    if last - first >= 1 {
        let count = last - first + 1;
        let every = (count + 6) / 7;
        return (first..=last)
            .filter(|k| k.rem_euclid(every) == 0)
            .map(|k| {
                let v = 10_f64.powi(k);
                let label = if as_power {
                    format!("10{}", superscript(k))
                } else {
                    plain(v / divisor)
                };
                (v, label)
            })
            .collect();
    }
    linear_ticks(lo, hi, 5)
        .into_iter()
        .map(|v| (v, plain(v / divisor)))
        .collect()
}

/// "Nice" ticks (1, 2, 5 × 10ᵏ steps) of a linear range, about `target` of them.
pub(crate) fn linear_ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    let span = hi - lo;
    if !(span > 0.0 && span.is_finite()) {
        return Vec::new();
    }
    let raw = span / target.max(1) as f64;
    let base = 10_f64.powi(decade(raw));
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * base)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * base);
    let start = (lo / step).ceil();
    let mut ticks = Vec::new();
    let mut k = start;
    while k * step <= hi * (1.0 + 1e-12) && ticks.len() < 50 {
        ticks.push(k * step);
        k += 1.0;
    }
    ticks
}

/// A tick value written plainly with no more digits than needed (`0.5`, `1000`, `1.005`).
pub fn plain(value: f64) -> String {
    if value == 0.0 {
        return "0".to_string();
    }
    for decimals in 0..10 {
        let text = format!("{value:.decimals$}");
        if let Ok(back) = text.parse::<f64>()
            && (back - value).abs() <= 1e-9 * value.abs()
        {
            return minus(&text);
        }
    }
    significant(value, 6)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uncertainty_to_two_digits() {
        assert_eq!(with_uncertainty(83_412.7, Some(1234.0)), "83400 ± 1200");
        assert_eq!(with_uncertainty(1.2345, Some(0.4567)), "1.23 ± 0.46");
        assert_eq!(with_uncertainty(10.31, Some(0.996)), "10.3 ± 1.0");
        assert_eq!(with_uncertainty(97_123.0, Some(1_100.0)), "97100 ± 1100");
        assert_eq!(
            with_uncertainty(1_000_012.34, Some(0.35)),
            "1000012.34 ± 0.35"
        );
        assert_eq!(with_uncertainty(1.0e7, Some(2.0e5)), "(1.000 ± 0.020)×10⁷");
        assert_eq!(
            with_uncertainty(234_567.0, Some(12_000.0)),
            "(2.35 ± 0.12)×10⁵"
        );
        assert_eq!(with_uncertainty(2.5e-3, Some(1.5e-4)), "(2.50 ± 0.15)×10⁻³");
        assert_eq!(with_uncertainty(-0.5, Some(0.25)), "−0.50 ± 0.25");
        assert_eq!(with_uncertainty(3.0, None), "3.00000");
        assert_eq!(with_uncertainty(3.0, Some(0.0)), "3.00000");
    }

    #[test]
    fn significant_digits_and_powers() {
        assert_eq!(significant(5.343e-30, 3), "5.34×10⁻³⁰");
        assert_eq!(significant(9.999e-8, 2), "1.0×10⁻⁷");
        assert_eq!(significant(123.456, 4), "123.5");
        assert_eq!(significant(0.0, 3), "0");
        assert_eq!(superscript(-12), "⁻¹²");
    }

    #[test]
    fn ticks() {
        let t = log_ticks(1e-3, 1e3, 1.0, true);
        assert_eq!(t.len(), 7);
        assert_eq!(t[0].1, "10⁻³");
        let t = log_ticks(1e-30, 1e-10, 1.0, true);
        assert!(t.len() <= 7 && t.len() >= 4, "{t:?}");
        let t = log_ticks(0.99e6, 1.01e6, 1e6, false);
        assert!(t.len() >= 3, "{t:?}");
        assert!(t.iter().any(|(_, l)| l == "1"), "{t:?}");
        assert_eq!(
            linear_ticks(0.0, 1.0, 5),
            vec![0.0, 0.2, 0.4, 0.6000000000000001, 0.8, 1.0]
        );
        assert_eq!(plain(1.005), "1.005");
        assert_eq!(frequency_unit(1.2e6), (1e3, "kHz"));
        assert_eq!(frequency_unit(5e6).1, "MHz");
    }
}
