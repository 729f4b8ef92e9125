//! Property test of the command-line grammar (`cli::args::Cli`) and the public conversions
//! of `cli::config`: argument vectors drawn from every subcommand and option name, plausible
//! and hostile values and random strings never make parsing or conversion panic, and every
//! error is one non-empty line (clap's usage errors: one `error:` line followed only by
//! clap's usage/tip/"For more information" lines). Nothing is run (no I/O, no window).
//! Same property as the fuzz target `tests/fuzz/fuzz_targets/cli_args.rs`.

use clap::Parser;
use clap::error::ErrorKind;
use proptest::prelude::*;
use stillpoint::cli::args::{AveragingArg, Cli, Command, DetrendArg, HeterodyneArgs, WelchArgs};
use stillpoint::cli::config::{
    MAX_SEGMENT, analysis_options, calibration_kind, default_segment, source_config, welch_config,
};

/// Every subcommand and option name of the grammar (src/cli/args.rs).
const NAMES: &[&str] = &[
    "spectrum",
    "analyze",
    "synth",
    "bench",
    "monitor",
    "--segment",
    "--overlap",
    "--window",
    "--rate",
    "--sample-format",
    "--endian",
    "--channels",
    "--channel",
    "--volts-per-unit",
    "--follow",
    "--detrend",
    "--averages",
    "--averaging",
    "--time-constant",
    "--m-per-v",
    "--tone-freq",
    "--tone-rms-m",
    "--pm-depth",
    "--freq-pull",
    "--bath-temperature",
    "--mode-band",
    "--mass",
    "--sloped-background",
    "--carrier",
    "--lo-side",
    "--sideband-imbalance",
    "--imbalance-tones",
    "--speed",
    "--screenshot",
    "--screenshot-after",
    "--fresh-settings",
    "-o",
    "--output",
    "--peak-threshold",
    "--reference-peaks",
    "--reference",
    "-q",
    "--quiet",
    "--seed",
    "--duration",
    "--format",
    "--set",
    "--seconds",
    "--threads",
    "--json",
    "--help",
    "--version",
    "-h",
    "-V",
];

/// Plausible and hostile values.
const VALUES: &[&str] = &[
    "0",
    "-1",
    "1",
    "2",
    "0.5",
    "0.999999",
    "1e308",
    "-1e308",
    "1e309",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "",
    " ",
    "5:3",
    "3:5",
    "0:1",
    "-1:2",
    "a:b",
    ":",
    "1e6:",
    "0.99e6:1.01e6",
    "1e-300",
    "4.9e-324",
    "65536",
    "1048576",
    "134217728",
    "134217729",
    "4294967295",
    "4294967296",
    "18446744073709551615",
    "18446744073709551616",
    "99999999999999999999999999999",
    "1,2,3",
    "1,,2",
    "µ",
    "Ω",
    "１",
    "\u{202e}",
    "日本",
    "-",
    "--",
    "x.wav",
    "X.WAV",
    "x.bin",
    "tcp://h:1",
    "tcp://h",
    "tcp://",
    "i16",
    "i24",
    "i32",
    "f32",
    "f64",
    "u8",
    "little",
    "big",
    "rect",
    "hann",
    "hamming",
    "blackman-harris",
    "flattop",
    "none",
    "mean",
    "linear",
    "median",
    "max-hold",
    "exponential",
    "above",
    "below",
    "cooldown",
    "temperature_k=4",
    "=",
    "out.csv",
    "out.json",
];

fn token() -> impl Strategy<Value = String> {
    prop_oneof![
        4 => prop::sample::select(NAMES).prop_map(str::to_string),
        4 => prop::sample::select(VALUES).prop_map(str::to_string),
        // `--name=value` forms.
        1 => (prop::sample::select(NAMES), prop::sample::select(VALUES))
            .prop_map(|(n, v)| format!("{n}={v}")),
        1 => any::<String>(),
        1 => "[-a-z0-9.:=,e]{0,12}",
    ]
}

/// Clap's usage-error format (see the module doc). `echo`: an argument holds a line break,
/// which clap and our messages quote, so only the first line is checked (the binary flattens
/// line breaks of its own messages, `cli::one_line`).
fn check_clap_error(err: &clap::Error, echo: bool) -> Result<(), TestCaseError> {
    let text = err.to_string();
    prop_assert!(!text.trim().is_empty());
    if matches!(
        err.kind(),
        ErrorKind::DisplayHelp
            | ErrorKind::DisplayVersion
            | ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand
    ) {
        return Ok(());
    }
    let mut lines = text.lines();
    let first = lines.next().unwrap_or_default();
    prop_assert!(
        first.starts_with("error: ") && first.len() > "error: ".len(),
        "{:?}",
        text
    );
    if echo {
        return Ok(());
    }
    for line in lines {
        prop_assert!(
            line.is_empty()
                || line.starts_with("  ")
                || line.starts_with("Usage: ")
                || line.starts_with("tip: ")
                || line.starts_with("For more information"),
            "{:?}",
            text
        );
    }
    Ok(())
}

fn check_one_line(err: &dyn std::fmt::Display, echo: bool) -> Result<(), TestCaseError> {
    let text = err.to_string();
    prop_assert!(!text.trim().is_empty(), "{:?}", text);
    prop_assert!(echo || !text.contains(['\n', '\r']), "{:?}", text);
    Ok(())
}

fn exercise_welch(
    args: &WelchArgs,
    rate_hz: f64,
    record: Option<u64>,
    echo: bool,
) -> Result<(), TestCaseError> {
    match welch_config(args, rate_hz, record) {
        Ok(c) => {
            prop_assert!(c.validate().is_ok());
            prop_assert!(c.segment >= 2 && c.segment <= MAX_SEGMENT);
            prop_assert!(c.hop() >= 1 && c.hop() <= c.segment);
            Ok(())
        }
        Err(e) => check_one_line(&e, echo),
    }
}

fn exercise(cli: &Cli, record: Option<u64>, echo: bool) -> Result<(), TestCaseError> {
    let segment = default_segment(record);
    prop_assert!(segment.is_power_of_two() && segment >= 2);
    prop_assert!(cli.window.screenshot_after.is_finite() && cli.window.screenshot_after > 0.0);
    let Some(command) = &cli.command else {
        return Ok(());
    };
    let default_het = HeterodyneArgs::default();
    let (source, welch, calibration, heterodyne, threshold) = match command {
        Command::Monitor(a) => (&a.source, &a.welch, &a.calibration, &a.heterodyne, None),
        Command::Spectrum(a) => (&a.source, &a.welch, &a.calibration, &default_het, None),
        Command::Analyze(a) => (
            &a.source,
            &a.welch,
            &a.calibration,
            &a.heterodyne,
            a.peak_threshold,
        ),
        Command::Bench(b) => {
            prop_assert!(b.rate.is_finite() && b.rate > 0.0);
            let welch = WelchArgs {
                segment: Some(b.segment),
                overlap: b.overlap,
                window: b.window,
                detrend: DetrendArg::Mean,
                averages: None,
                averaging: AveragingArg::Mean,
                time_constant: 16.0,
            };
            return exercise_welch(&welch, b.rate, None, echo);
        }
        Command::Synth(s) => {
            prop_assert!(s.rate.is_none_or(|r| r.is_finite() && r > 0.0));
            prop_assert!(s.duration.is_none_or(|d| d.is_finite() && d > 0.0));
            return Ok(());
        }
    };
    match source_config(source) {
        Ok(c) => {
            prop_assert!(c.volts_per_unit.is_finite() && c.volts_per_unit != 0.0);
            prop_assert!(c.rate_hz.is_none_or(|r| r.is_finite() && r > 0.0));
        }
        Err(e) => check_one_line(&e, echo)?,
    }
    exercise_welch(welch, source.rate.unwrap_or(48_000.0), record, echo)?;
    exercise_welch(welch, source.rate.unwrap_or(1.0), None, echo)?;
    if let Err(e) = calibration_kind(calibration) {
        check_one_line(&e, echo)?;
    }
    match analysis_options(calibration, heterodyne, threshold) {
        Ok(o) => {
            if let Some((lo, hi)) = o.mode_band_hz {
                prop_assert!(lo.is_finite() && hi.is_finite() && 0.0 <= lo && lo < hi);
            }
            let given = [
                o.m_per_v,
                o.tone_frequency_hz,
                o.tone_rms_m,
                o.pm_depth_rad,
                o.freq_pull_hz_per_m,
                o.bath_temperature_k,
                o.mass_kg,
                o.carrier_hz,
                o.peak_threshold_db,
                o.sideband_imbalance,
            ];
            prop_assert!(given.iter().flatten().all(|v| v.is_finite() && *v > 0.0));
            Ok(())
        }
        Err(e) => check_one_line(&e, echo),
    }
}

proptest! {
    // 10000 cases: 4.1 s in the dev profile with a fuzzer busy on the other core (2026-12-02).
    #![proptest_config(ProptestConfig::with_cases(10000))]

    #[test]
    fn parser_and_config_never_panic_and_errors_are_one_line(
        tokens in prop::collection::vec(token(), 0..14),
        record in prop::option::of(0u64..u64::MAX),
    ) {
        let mut argv = vec!["stillpoint".to_string()];
        argv.extend(tokens);
        let echo = argv.iter().any(|a| a.contains(['\n', '\r']));
        match Cli::try_parse_from(&argv) {
            Ok(cli) => exercise(&cli, record, echo)?,
            Err(e) => check_clap_error(&e, echo)?,
        }
    }
}

/// The alphabet covers the deeper grammar: a hand-picked full command line of each kind
/// parses and converts (guards against a test that only ever sees usage errors).
#[test]
fn known_good_command_lines_convert() {
    let lines: &[&[&str]] = &[
        &[
            "stillpoint",
            "spectrum",
            "x.bin",
            "--sample-format",
            "i16",
            "--rate",
            "2e6",
            "--segment",
            "4096",
            "-o",
            "o.csv",
        ],
        &[
            "stillpoint",
            "analyze",
            "x.wav",
            "--mode-band",
            "0.99e6:1.01e6",
            "--mass",
            "1e-13",
            "--bath-temperature",
            "4",
            "-o",
            "o.json",
        ],
        &["stillpoint", "bench", "--rate", "1e6", "--segment", "1024"],
    ];
    for argv in lines {
        let cli = Cli::try_parse_from(*argv).unwrap();
        exercise(&cli, Some(100_000), false).unwrap();
        match &cli.command {
            Some(Command::Spectrum(a)) => {
                assert!(source_config(&a.source).is_ok());
                assert_eq!(welch_config(&a.welch, 2e6, None).unwrap().segment, 4096);
            }
            Some(Command::Analyze(a)) => {
                assert!(analysis_options(&a.calibration, &a.heterodyne, None).is_ok());
            }
            _ => {}
        }
    }
}
