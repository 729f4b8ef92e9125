//! How the window writes numbers: a value with its uncertainty (σ to two significant
//! digits, the value to the same decimal — common practice in physics reporting), sample
//! rates one way ("250 kS/s"), large counts grouped by thousands, and the readable UTC
//! date-time used to name files. No egui here, so the rules are unit-tested.

use crate::figure::format::{round_to_uncertainty, superscript};

/// `value` with `sig` significant digits: plain between 10⁻³ and 10⁷, else `m × 10ⁿ`.
pub(crate) fn format_significant(value: f64, sig: usize) -> String {
    if !value.is_finite() {
        return "—".into();
    }
    if value == 0.0 {
        return "0".into();
    }
    let sig = sig.max(1);
    let e = value.abs().log10().floor() as i32;
    if (-3..7).contains(&e) {
        let decimals = (sig as i32 - 1 - e).max(0) as usize;
        let step = 10f64.powi(e + 1 - sig as i32);
        let rounded = if decimals == 0 {
            (value / step).round() * step
        } else {
            value
        };
        format!("{rounded:.decimals$}")
    } else {
        let m = value / 10f64.powi(e);
        format!("{m:.*} × 10{}", sig - 1, superscript(e))
    }
}

/// `value ± sigma` with σ rounded to two significant digits and the value to the same
/// decimal place: 15085 ± 1895 → "15100 ± 1900", 9.04e5 ± 92724 → "904000 ± 93000",
/// 1.957e−9 ± 2.1e−11 → "(1.957 ± 0.021) × 10⁻⁹". Plain notation between 10⁻³ and 10⁷,
/// else a common power of ten. Without a usable σ: four significant digits.
pub(crate) fn format_uncertain(value: f64, sigma: Option<f64>) -> String {
    if !value.is_finite() {
        return "—".into();
    }
    let Some(sigma) = sigma.filter(|s| s.is_finite() && *s > 0.0) else {
        return format_significant(value, 4);
    };
    let (v, s, d) = round_to_uncertainty(value, sigma);
    let top = v.abs().max(s);
    let e = top.log10().floor() as i32;
    if (-3..7).contains(&e) {
        let decimals = (-d).max(0) as usize;
        format!("{v:.decimals$} ± {s:.decimals$}")
    } else {
        let scale = 10f64.powi(e);
        let decimals = (e - d).max(0) as usize;
        format!(
            "({:.decimals$} ± {:.decimals$}) × 10{}",
            v / scale,
            s / scale,
            superscript(e)
        )
    }
}

/// A sample rate with an SI prefix and at most four significant digits, trailing zeros
/// dropped: 250000 → "250 kS/s", 44100 → "44.1 kS/s", 1.25e6 → "1.25 MS/s".
pub(crate) fn format_rate(rate_hz: f64) -> String {
    if !(rate_hz.is_finite() && rate_hz > 0.0) {
        return "— S/s".into();
    }
    let (scale, prefix) = if rate_hz >= 1e9 {
        (1e9, "G")
    } else if rate_hz >= 1e6 {
        (1e6, "M")
    } else if rate_hz >= 1e3 {
        (1e3, "k")
    } else {
        (1.0, "")
    };
    let v = rate_hz / scale;
    let decimals = if v >= 100.0 {
        1
    } else if v >= 10.0 {
        2
    } else {
        3
    };
    let text = format!("{v:.decimals$}");
    let text = text.trim_end_matches('0').trim_end_matches('.');
    format!("{text} {prefix}S/s")
}

/// A frequency difference in words for one plain line: "300 Hz", "4.5 Hz", "1.25 kHz".
pub(crate) fn hz_words(hz: f64) -> String {
    let a = hz.abs();
    if a >= 1000.0 {
        let text = format!("{:.2}", hz / 1000.0);
        format!("{} kHz", text.trim_end_matches('0').trim_end_matches('.'))
    } else if a >= 10.0 {
        format!("{hz:.0} Hz")
    } else {
        format!("{hz:.1} Hz")
    }
}

/// A duration in seconds for one plain line: "1.2" below 10 s, else whole seconds.
pub(crate) fn seconds_words(s: f64) -> String {
    if s.abs() < 10.0 {
        format!("{s:.1}")
    } else {
        format!("{s:.0}")
    }
}

/// A count rounded to a whole number, grouped by thousands with spaces ("320 000").
pub(crate) fn group_thousands(count: f64) -> String {
    if !count.is_finite() {
        return "—".into();
    }
    let n = count.round().abs() as u64;
    let digits = n.to_string();
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(' ');
        }
        out.push(c);
    }
    if count < -0.5 {
        format!("−{out}")
    } else {
        out
    }
}

/// Seconds since 1970-01-01 00:00 UTC as "YYYY-MM-DD_HH-MM-SS" (UTC; no characters that
/// file systems refuse). The civil-date conversion is the days-from-civil inverse of
/// H. Hinnant's "chrono-Compatible Low-Level Date Algorithms" (common practice).
pub(crate) fn utc_file_stamp(unix_s: u64) -> String {
    let days = (unix_s / 86_400) as i64;
    let rem = unix_s % 86_400;
    let (h, m, s) = (rem / 3600, (rem % 3600) / 60, rem % 60);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!("{year:04}-{month:02}-{day:02}_{h:02}-{m:02}-{s:02}")
}

/// Lower layers (the analysis, the readers) word their notes and errors for the command
/// line; the window shows them in the names of its own controls. Longest names first, so
/// `--bath-temperature-uncertainty` is not read as `--bath-temperature`.
const WINDOW_WORDS: [(&str, &str); 24] = [
    ("--bath-temperature-uncertainty (K)", "bath T 1σ (K)"),
    ("--bath-temperature-uncertainty", "bath T 1σ"),
    ("--mass-uncertainty (kg)", "mass 1σ (kg)"),
    ("--mass-uncertainty", "mass 1σ"),
    ("--bath-temperature (K)", "bath T (K)"),
    ("--bath-temperature", "bath T"),
    ("--mode-band LO:HI", "a fit band (band low, band high)"),
    ("--mode-band", "the fit band"),
    ("--lo-side above|below", "LO above/below the laser"),
    ("--lo-side", "LO above/below"),
    ("--tone-rms-m", "tone rms"),
    ("--tone-freq", "tone frequency"),
    ("--pm-depth (rad)", "depth β (rad)"),
    ("--pm-depth", "depth β"),
    ("--freq-pull", "pull G/2π"),
    ("--m-per-v", "m/V"),
    ("--mass (kg)", "effective mass (kg)"),
    ("--mass", "the effective mass"),
    ("--carrier", "carrier"),
    ("--sample-format", "sample format"),
    ("--volts-per-unit", "volts per unit"),
    ("--channels", "channels"),
    ("--channel", "channel"),
    ("--rate", "rate (Hz)"),
];

/// Whole phrases of the command line's wording (option syntax, JSON keys) and what the
/// window says instead, applied before the single option names of [`WINDOW_WORDS`].
const WINDOW_PHRASES: [(&str, &str); 15] = [
    (
        "areas are per sideband (sidebands.*)",
        "areas are per sideband (the Sidebands section)",
    ),
    (
        "mode: no --mode-band given; mode and quantum keys are null",
        "mode: no fit band (set band low and band high, or let the band follow the mode); no mode fit and no quantum values",
    ),
    (
        "calibration: none (give --m-per-v, a tone, or --bath-temperature with --mass); calibrated keys are null",
        "calibration: none (choose a calibration method); nothing is shown in metres",
    ),
    (
        "--mode-band with --carrier must be LO:HI offsets with 0 <= LO < HI, got",
        "with a carrier the fit band is of f_m (offsets from the carrier) and needs 0 ≤ band low < band high; got",
    ),
    (
        "--mode-band must be LO:HI with LO < HI, got",
        "the fit band needs band low below band high; got",
    ),
    (
        "--carrier needs --mode-band LO:HI (the band of f_m, offsets from the carrier)",
        "carrier needs a fit band: band low and band high of f_m (offsets from the carrier)",
    ),
    (
        "--carrier needs --lo-side above|below",
        "carrier needs 'LO is above/below the laser'",
    ),
    (
        "needs --mass (effective mass, kg)",
        "needs the effective mass (kg)",
    ),
    (
        "occupancy from the sideband ratio (sidebands.occupancy); quantum.occupancy needs a calibration",
        "occupancy from the sideband ratio; the occupancy from the line areas needs a calibration",
    ),
    (
        "--rms-band must be LO:HI in Hz with 0 <= LO < HI, got",
        "the rms band needs 0 ≤ low < high; got",
    ),
    ("--rms-band", "the rms band"),
    ("--imbalance-tones", "the imbalance tones"),
    ("--follow", "follow growing file"),
    ("--sloped-background", "sloped background under the mode"),
    ("--sideband-imbalance", "imbalance η_r/η_b"),
];

/// `text` in the window's words: command-line option names become the labels of the
/// window's controls, and JSON wording ("keys are null") becomes what the window shows.
pub(crate) fn window_words(text: &str) -> String {
    let mut out = text.to_string();
    for (phrase, words) in WINDOW_PHRASES {
        if out.contains(phrase) {
            out = out.replace(phrase, words);
        }
    }
    for (flag, label) in WINDOW_WORDS {
        if out.contains(flag) {
            out = out.replace(flag, label);
        }
    }
    out.replace("calibrated keys are null", "nothing is shown in metres")
        .replace(
            "mode and quantum keys are null",
            "no mode fit and no quantum values",
        )
        .replace("quantum keys are null", "no quantum values")
        .replace("keys are null", "values are not shown")
}

/// The band-rms readout of the mode panel: (label, value). In metres when the axis shows a
/// displacement unit and the report is calibrated, else in volts. The band itself is the fit
/// band the plot shades and the band fields show.
pub(crate) fn band_rms_readout(
    rms: &crate::report::RmsReport,
    displacement_axis: bool,
) -> (String, String) {
    let (value, unit) = match rms.m {
        Some(m) if displacement_axis => (m, "m"),
        _ => (rms.v, "V"),
    };
    // The mode band, or in heterodyne the two sideband bands it places around the carrier.
    let which = if rms.source == "rms-band" {
        "band"
    } else {
        "fit band"
    };
    (
        format!("rms in {which} ({unit})"),
        format_significant(value, 4),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uncertainty_two_significant_digits_value_to_the_same_decimal() {
        // The examples of the rule (σ to 2 significant digits; common practice).
        assert_eq!(format_uncertain(15085.0, Some(1895.0)), "15100 ± 1900");
        assert_eq!(format_uncertain(9.04e5, Some(92_724.0)), "904000 ± 93000");
        assert_eq!(format_uncertain(86_102.03, Some(0.8123)), "86102.03 ± 0.81");
        assert_eq!(format_uncertain(28.64, Some(1.71)), "28.6 ± 1.7");
        assert_eq!(format_uncertain(2.4412, Some(0.3104)), "2.44 ± 0.31");
        assert_eq!(
            format_uncertain(1.957e-9, Some(0.021e-9)),
            "(1.957 ± 0.021) × 10⁻⁹"
        );
        assert_eq!(
            format_uncertain(3.2e12, Some(4.4e10)),
            "(3.200 ± 0.044) × 10¹²"
        );
        // σ rounding up to three digits moves the decimal: 0.0996 → 0.10.
        assert_eq!(format_uncertain(0.5, Some(0.0996)), "0.50 ± 0.10");
        assert_eq!(format_uncertain(287.3, Some(16.96)), "287 ± 17");
        // σ larger than the value
        assert_eq!(format_uncertain(0.3, Some(1.26)), "0.3 ± 1.3");
        // no σ: four significant digits
        assert_eq!(format_uncertain(86_102.034, None), "86100");
        assert_eq!(
            format_uncertain(1.23456e-15, Some(f64::NAN)),
            "1.235 × 10⁻¹⁵"
        );
        assert_eq!(format_uncertain(f64::NAN, Some(1.0)), "—");
        assert_eq!(format_uncertain(-12.346, Some(0.25)), "-12.35 ± 0.25");
    }

    #[test]
    fn window_words_name_the_controls_not_the_flags() {
        assert_eq!(
            window_words(
                "calibration: none (give --m-per-v, a tone, or --bath-temperature with --mass); calibrated keys are null"
            ),
            "calibration: none (choose a calibration method); nothing is shown in metres"
        );
        assert_eq!(
            window_words("--bath-temperature-uncertainty (K) must be ≥ 0"),
            "bath T 1σ (K) must be ≥ 0"
        );
        assert_eq!(
            window_words("--carrier needs --lo-side above|below"),
            "carrier needs 'LO is above/below the laser'"
        );
        assert!(
            !window_words("no --mode-band given; mode and quantum keys are null").contains("--")
        );
    }

    /// Every note, warning and error the analysis gives for a range of settings reads in
    /// the window's words: no option name, no option syntax, no JSON key wording.
    #[test]
    fn analysis_messages_in_the_window_name_no_flags() {
        use crate::analysis::{AnalysisOptions, analyze};
        use crate::dsp::{Averaging, Detrend, Spectrum, WindowKind};
        let n = 8193;
        let psd: Vec<f64> = (0..n)
            .map(|k| {
                let f = k as f64 * 10.0;
                let line = |f0: f64, a: f64| a * 100.0 / ((f - f0).powi(2) + 100.0);
                1e-12 + line(30_000.0, 1e-9) + line(24_000.0, 1e-10) + line(36_000.0, 2e-10)
            })
            .collect();
        let spectrum = Spectrum {
            sample_rate_hz: 163_840.0,
            segment: 16_384,
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: Detrend::Mean,
            averaging: Averaging::Linear,
            averages: 20,
            k_eff: 18.0,
            resolution_hz: 10.0,
            enbw_hz: 15.0,
            psd_v2_per_hz: psd,
        };
        let band = Some((29_000.0, 31_000.0));
        let base = AnalysisOptions::default;
        let cases = [
            base(),
            AnalysisOptions {
                mode_band_hz: band,
                ..base()
            },
            AnalysisOptions {
                mode_band_hz: band,
                m_per_v: Some(1e-9),
                tone_frequency_hz: Some(24_000.0),
                tone_rms_m: Some(1e-12),
                ..base()
            },
            AnalysisOptions {
                mode_band_hz: band,
                bath_temperature_k: Some(4.0),
                ..base()
            },
            AnalysisOptions {
                mode_band_hz: band,
                bath_temperature_k: Some(4.0),
                mass_kg: Some(1e-12),
                ..base()
            },
            AnalysisOptions {
                tone_frequency_hz: Some(24_000.0),
                ..base()
            },
            AnalysisOptions {
                tone_rms_m: Some(1e-12),
                ..base()
            },
            AnalysisOptions {
                pm_depth_rad: Some(0.1),
                ..base()
            },
            AnalysisOptions {
                carrier_hz: Some(30_000.0),
                ..base()
            },
            AnalysisOptions {
                carrier_hz: Some(30_000.0),
                lo_above: Some(true),
                ..base()
            },
            AnalysisOptions {
                carrier_hz: Some(30_000.0),
                lo_above: Some(true),
                mode_band_hz: Some((5_000.0, 7_000.0)),
                ..base()
            },
            AnalysisOptions {
                carrier_hz: Some(30_000.0),
                lo_above: Some(true),
                mode_band_hz: Some((5_000.0, 40_000.0)),
                ..base()
            },
            AnalysisOptions {
                mode_band_hz: Some((31_000.0, 29_000.0)),
                ..base()
            },
            AnalysisOptions {
                mass_kg: Some(-1.0),
                ..base()
            },
            AnalysisOptions {
                m_per_v: Some(0.0),
                ..base()
            },
            AnalysisOptions {
                tone_frequency_hz: Some(1e9),
                tone_rms_m: Some(1e-12),
                ..base()
            },
        ];
        let mut seen = 0;
        let mut wrong: Vec<String> = Vec::new();
        for options in &cases {
            let texts: Vec<String> = match analyze(&spectrum, options) {
                Ok(r) => r.notes.iter().chain(&r.warnings).cloned().collect(),
                Err(e) => vec![e.to_string()],
            };
            for t in texts {
                seen += 1;
                let w = window_words(&t);
                if ["--", "keys are null", "LO:HI", "sidebands.", "quantum."]
                    .iter()
                    .any(|bad| w.contains(bad))
                {
                    wrong.push(format!("{w}    (from: {t})"));
                }
            }
        }
        wrong.dedup();
        assert!(
            wrong.is_empty(),
            "not in the window's words:\n{}",
            wrong.join("\n")
        );
        assert!(seen >= 20, "only {seen} messages");
    }

    #[test]
    fn rates_one_way() {
        assert_eq!(format_rate(250_000.0), "250 kS/s");
        assert_eq!(format_rate(20_000.0), "20 kS/s");
        assert_eq!(format_rate(44_100.0), "44.1 kS/s");
        assert_eq!(format_rate(1.25e6), "1.25 MS/s");
        assert_eq!(format_rate(1e8), "100 MS/s");
        assert_eq!(format_rate(800.0), "800 S/s");
        assert_eq!(format_rate(0.0), "— S/s");
    }

    #[test]
    fn thousands_grouped() {
        assert_eq!(group_thousands(320_000.0), "320 000");
        assert_eq!(group_thousands(1_234_567.4), "1 234 567");
        assert_eq!(group_thousands(999.0), "999");
        assert_eq!(group_thousands(0.0), "0");
    }

    #[test]
    fn file_stamps_are_utc_calendar_dates() {
        // Reference instants from Python's datetime.fromtimestamp(t, timezone.utc).
        assert_eq!(utc_file_stamp(0), "1970-01-01_00-00-00");
        assert_eq!(utc_file_stamp(1_700_000_000), "2023-11-14_22-13-20");
        assert_eq!(utc_file_stamp(951_782_400), "2000-02-29_00-00-00");
        assert_eq!(utc_file_stamp(4_102_444_799), "2099-12-31_23-59-59");
    }

    #[test]
    fn band_rms_readout_follows_the_axis_unit() {
        let r = crate::report::RmsReport {
            band_hz: [85_000.0, 87_200.0],
            source: "mode-band".into(),
            bins: 10,
            v: 2.5e-3,
            m: Some(5e-12),
        };
        let (label, value) = band_rms_readout(&r, true);
        assert!(
            label.contains("fit band") && label.ends_with("(m)"),
            "{label}"
        );
        assert_eq!(value, format_significant(5e-12, 4));
        let (label, value) = band_rms_readout(&r, false);
        assert!(label.ends_with("(V)"), "{label}");
        assert_eq!(value, format_significant(2.5e-3, 4));
        let uncalibrated = crate::report::RmsReport { m: None, ..r };
        assert!(band_rms_readout(&uncalibrated, true).0.ends_with("(V)"));
    }
}
