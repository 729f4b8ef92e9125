//! Property test of the command-line grammar (`cli::args::Cli`) and the public conversions
//! of `cli::config`: argument vectors drawn from every subcommand and option name, plausible
//! and hostile values and random strings never make parsing or conversion panic, and every
//! error is one non-empty line (clap's usage errors: one `error:` line followed only by
//! clap's usage/tip/"For more information" lines). Nothing is run (no I/O, no window).
//! Same property as the fuzz target `tests/fuzz/fuzz_targets/cli_args.rs`, drawn from the
//! same alphabet (`tests/common/cli_tokens.rs`). Also checked here: that alphabet holds every
//! subcommand, option name and enumerated value of the grammar, and the fuzz target's fast
//! parser (`cli_tokens::parse`) gives the same result as `Cli::try_parse_from`.

#[path = "common/cli_tokens.rs"]
mod cli_tokens;

use std::collections::BTreeSet;

use clap::error::ErrorKind;
use clap::{CommandFactory, Parser};
use cli_tokens::{NAMES, VALUES};
use proptest::prelude::*;
use stillpoint::cli::args::{AveragingArg, Cli, Command, DetrendArg, HeterodyneArgs, WelchArgs};
use stillpoint::cli::config::{
    MAX_SEGMENT, analysis_options, check_calibration, default_segment, source_config, welch_config,
};

fn token() -> impl Strategy<Value = String> {
    prop_oneof![
        4 => prop::sample::select(NAMES).prop_map(str::to_string),
        4 => prop::sample::select(VALUES).prop_map(str::to_string),
        // The fuzz target's `0x01 k` token.
        1 => any::<u8>().prop_map(|k| cli_tokens::token(usize::from(k)).to_string()),
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
        Command::Track(a) => {
            prop_assert!(a.every.is_finite() && a.every > 0.0);
            prop_assert!(a.duration.is_none_or(|d| d.is_finite() && d > 0.0));
            (&a.source, &a.welch, &a.calibration, &a.heterodyne, None)
        }
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
    if let Err(e) = check_calibration(calibration) {
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

/// Subcommand names (with aliases), `--long` and `-s` option names (with aliases) and
/// enumerated possible values (with aliases) of `command` and of every command under it.
fn walk_grammar(
    command: &clap::Command,
    names: &mut BTreeSet<String>,
    values: &mut BTreeSet<String>,
) {
    for arg in command.get_arguments() {
        if let Some(long) = arg.get_long() {
            names.insert(format!("--{long}"));
        }
        for alias in arg.get_all_aliases().unwrap_or_default() {
            names.insert(format!("--{alias}"));
        }
        if let Some(short) = arg.get_short() {
            names.insert(format!("-{short}"));
        }
        for alias in arg.get_all_short_aliases().unwrap_or_default() {
            names.insert(format!("-{alias}"));
        }
        for value in arg.get_possible_values() {
            values.extend(value.get_name_and_aliases().map(str::to_string));
        }
    }
    for sub in command.get_subcommands() {
        names.insert(sub.get_name().to_string());
        names.extend(sub.get_all_aliases().map(str::to_string));
        walk_grammar(sub, names, values);
    }
}

/// The shared alphabet cannot fall behind the grammar: NAMES holds every subcommand and option
/// name of the built command (hidden ones, the generated `help` subcommand, `--help` and
/// `--version` included); VALUES holds every enumerated value and every synth scenario.
#[test]
fn token_alphabet_covers_the_grammar() {
    let mut command = Cli::command();
    command.build();
    let (mut names, mut values) = (BTreeSet::new(), BTreeSet::new());
    walk_grammar(&command, &mut names, &mut values);
    values.extend(
        stillpoint::synth::SCENARIO_HELP
            .iter()
            .map(|(name, _)| name.to_string()),
    );
    // Guards against a walk that finds nothing (and so checks nothing).
    for expected in ["synth", "help", "--mode-band", "-o", "--version"] {
        assert!(
            names.contains(expected),
            "walk missed {expected}: {names:?}"
        );
    }
    for expected in ["blackman-harris", "max-hold", "big", "cooldown"] {
        assert!(
            values.contains(expected),
            "walk missed {expected}: {values:?}"
        );
    }

    let listed: BTreeSet<String> = NAMES.iter().map(|s| s.to_string()).collect();
    let missing: Vec<_> = names.difference(&listed).collect();
    assert!(
        missing.is_empty(),
        "missing from cli_tokens::NAMES: {missing:?}"
    );
    assert_eq!(listed.len(), NAMES.len(), "duplicate in cli_tokens::NAMES");

    let listed: BTreeSet<&str> = VALUES.iter().copied().collect();
    let missing: Vec<_> = values
        .iter()
        .filter(|v| !listed.contains(v.as_str()))
        .collect();
    assert!(
        missing.is_empty(),
        "missing from cli_tokens::VALUES: {missing:?}"
    );
    assert_eq!(
        listed.len(),
        VALUES.len(),
        "duplicate in cli_tokens::VALUES"
    );
}

/// Starts of the equivalence check's argument vectors: each subcommand with its required
/// arguments (parses on its own), none, and the `help` subcommand (whose own subcommand tree
/// the fast parser must not expand).
const STARTS: &[&[&str]] = &[
    &[],
    &["monitor", "x.wav"],
    &["spectrum", "x.bin", "-o", "o.csv"],
    &["analyze", "x.wav", "-o", "o.json"],
    &["synth", "cooldown", "-o", "o.wav"],
    &["bench"],
    &["help"],
    &["help", "help"],
];

/// Hand-picked corners of the equivalence check: help and version in every place, `help`
/// nested, errors of each kind, `--` and values that look like options.
const TRICKY: &[&[&str]] = &[
    &[],
    &["help"],
    &["help", "help"],
    &["help", "help", "synth"],
    &["help", "synth"],
    &["help", "synth", "x"],
    &["help", "bogus"],
    &["help", "--rate"],
    &["synth", "help"],
    &["bench", "help"],
    &["-h"],
    &["--help"],
    &["-V"],
    &["--version"],
    &["bench", "-V"],
    &["bench", "-h"],
    &["analyze", "--help"],
    &["bench", "--rate"],
    &["bench", "--rate", "0"],
    &["bench", "--window", "hann", "--window", "rect"],
    &["bench", "--", "--rate"],
    &["spectrum", "--", "-o", "o.csv"],
    &["spectrum", "-", "-o", "-"],
    &["spectrum", "x.bin", "-oo.csv"],
    &["spectrum", "x.bin", "--output=o.csv", "--rate=-1"],
    &[
        "analyze",
        "x.wav",
        "-qo",
        "o.json",
        "--reference-peaks",
        "1,2,3",
    ],
    &["analyze", "x.wav", "-o", "o.json", "--carrier", "5e6"],
    &["monitor"],
    &["monitor", "x.wav", "--speed", "2", "--screenshot", "s.png"],
    &[
        "synth", "cooldown", "-o", "o.wav", "--set", "a=1", "--set", "b=2",
    ],
    &["--screenshot-after", "nan"],
    &["--fresh-settings", "bench"],
    &["bogus"],
    &["--bogus"],
];

/// Argument vectors for the equivalence check: half from a start followed by option and value
/// pairs (so that a fair share parses), half from the free-form tokens above.
fn argv_for_equivalence() -> impl Strategy<Value = Vec<String>> {
    let pair = (prop::sample::select(NAMES), prop::sample::select(VALUES))
        .prop_map(|(n, v)| vec![n.to_string(), v.to_string()]);
    let from_start = (
        prop::sample::select(STARTS),
        prop::collection::vec(pair, 0..4),
    )
        .prop_map(|(start, pairs)| {
            start
                .iter()
                .map(|s| s.to_string())
                .chain(pairs.into_iter().flatten())
                .collect::<Vec<_>>()
        });
    let free = prop::collection::vec(token(), 0..14);
    prop_oneof![from_start, free].prop_map(|tokens| {
        let mut argv = vec!["stillpoint".to_string()];
        argv.extend(tokens);
        argv
    })
}

/// `cli_tokens::parse` and `Cli::try_parse_from` on `argv`: the same parsed `Cli` (by its
/// Debug form; returns true), or errors of the same kind and text (returns false).
fn fast_and_slow_agree(argv: &[String]) -> Result<bool, TestCaseError> {
    match (cli_tokens::parse(argv), Cli::try_parse_from(argv)) {
        (Ok(fast), Ok(slow)) => {
            prop_assert_eq!(format!("{fast:?}"), format!("{slow:?}"), "{:?}", argv);
            Ok(true)
        }
        (Err(fast), Err(slow)) => {
            prop_assert_eq!(fast.kind(), slow.kind(), "{:?}", argv);
            prop_assert_eq!(fast.to_string(), slow.to_string(), "{:?}", argv);
            Ok(false)
        }
        (fast, slow) => Err(TestCaseError::fail(format!(
            "{argv:?}\nfast {fast:?}\nslow {slow:?}"
        ))),
    }
}

/// The fuzz target's fast parser (`cli_tokens::parse`: one grammar built once and parsed with
/// again and again, after errors too) gives what `Cli::try_parse_from` gives: the same parsed
/// `Cli` (by its Debug form), or an error of the same kind and text. The hand-picked corners
/// twice over (the second time after every kind of outcome), then 400 generated vectors.
#[test]
fn fast_parse_agrees_with_try_parse_from() {
    use proptest::test_runner::{Config, TestRunner};
    use std::sync::atomic::{AtomicUsize, Ordering};

    for _ in 0..2 {
        for argv in TRICKY {
            let argv: Vec<String> = std::iter::once("stillpoint")
                .chain(argv.iter().copied())
                .map(str::to_string)
                .collect();
            if let Err(e) = fast_and_slow_agree(&argv) {
                panic!("{e}");
            }
        }
    }

    // 400 cases: well under 1 s in the dev profile.
    let mut runner = TestRunner::new(Config {
        cases: 400,
        failure_persistence: None,
        ..Config::default()
    });
    let (parsed, failed) = (AtomicUsize::new(0), AtomicUsize::new(0));
    let result = runner.run(&argv_for_equivalence(), |argv| {
        let counter = if fast_and_slow_agree(&argv)? {
            &parsed
        } else {
            &failed
        };
        counter.fetch_add(1, Ordering::Relaxed);
        Ok(())
    });
    if let Err(e) = result {
        panic!("{e}");
    }
    // Both outcomes were compared often enough to mean something (about 70 parse).
    let (parsed, failed) = (parsed.into_inner(), failed.into_inner());
    assert!(
        parsed >= 30 && failed >= 30,
        "parsed {parsed}, failed {failed}"
    );
}
