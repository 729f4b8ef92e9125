//! Fuzz target: arbitrary bytes as a command line through the clap grammar
//! (`stillpoint::cli::args::Cli`) and, when it parses, through every public conversion of
//! `stillpoint::cli::config`. Nothing is run (no I/O, no window).
//!
//! The bytes are split at 0x00 into argv strings (lossy UTF-8). To let the fuzzer reach the
//! deeper grammar without a dictionary, a piece of exactly two bytes `0x01 k` stands for
//! token `k` of the shared alphabet (`tests/common/cli_tokens.rs`: every subcommand and
//! option name, enumerated and hostile values; the same list `tests/cli_parser.rs` draws from).
//! The grammar is built once and reused for every input (`cli_tokens::parse`, checked to give
//! the same result as `Cli::try_parse_from` in `tests/cli_parser.rs`): rebuilding it per
//! input, with clap's debug-assertion checks, held the target to ~500 exec/s.
//!
//! Property: never panics; every error is one line (clap's usage errors: one `error:` line
//! followed only by clap's usage/tip/"For more information" lines); a converted
//! configuration holds only finite, in-range values.
#![no_main]

#[path = "../../common/cli_tokens.rs"]
mod cli_tokens;

use clap::error::ErrorKind;
use libfuzzer_sys::fuzz_target;
use stillpoint::cli::args::{AveragingArg, Cli, Command, DetrendArg, WelchArgs};
use stillpoint::cli::config::{
    analysis_options, check_calibration, default_segment, source_config, welch_config,
};

/// Clap's usage-error format: one non-empty `error:` line, then only blank, indented, usage,
/// tip and "For more information" lines. When an argument itself holds a line break (`echo`),
/// clap and our messages quote it, so only the first line is checked (the binary flattens
/// line breaks of its own messages, `cli::one_line`).
fn check_clap_error(err: &clap::Error, echo: bool) {
    if matches!(
        err.kind(),
        ErrorKind::DisplayHelp | ErrorKind::DisplayVersion
    ) {
        return;
    }
    let text = err.to_string();
    if err.kind() == ErrorKind::DisplayHelpOnMissingArgumentOrSubcommand {
        assert!(!text.trim().is_empty());
        return;
    }
    let mut lines = text.lines();
    let first = lines.next().unwrap_or_default();
    assert!(
        first.starts_with("error: ") && first.len() > "error: ".len(),
        "{text:?}"
    );
    if echo {
        return;
    }
    for line in lines {
        assert!(
            line.is_empty()
                || line.starts_with("  ")
                || line.starts_with("Usage: ")
                || line.starts_with("tip: ")
                || line.starts_with("For more information"),
            "{text:?}"
        );
    }
}

fn check_one_line(err: &dyn std::fmt::Display, echo: bool) {
    let text = err.to_string();
    assert!(!text.trim().is_empty(), "{text:?}");
    assert!(echo || !text.contains(['\n', '\r']), "{text:?}");
}

fn exercise_welch(args: &WelchArgs, rate_hz: f64, record: Option<u64>, echo: bool) {
    match welch_config(args, rate_hz, record) {
        Ok(c) => {
            assert!(c.validate().is_ok());
            assert!(c.hop() >= 1 && c.hop() <= c.segment);
        }
        Err(e) => check_one_line(&e, echo),
    }
}

fn exercise(cli: &Cli, record: Option<u64>, echo: bool) {
    let _ = default_segment(record);
    let Some(command) = &cli.command else {
        return;
    };
    let (source, welch, calibration, heterodyne, threshold) = match command {
        Command::Monitor(a) => (
            &a.source,
            &a.welch,
            &a.calibration,
            Some(&a.heterodyne),
            None,
        ),
        Command::Spectrum(a) => (&a.source, &a.welch, &a.calibration, None, None),
        Command::Analyze(a) => (
            &a.source,
            &a.welch,
            &a.calibration,
            Some(&a.heterodyne),
            a.peak_threshold,
        ),
        Command::Bench(b) => {
            let welch = WelchArgs {
                segment: Some(b.segment),
                overlap: b.overlap,
                window: b.window,
                detrend: DetrendArg::Mean,
                averages: None,
                averaging: AveragingArg::Mean,
                time_constant: 16.0,
            };
            exercise_welch(&welch, b.rate, None, echo);
            return;
        }
        Command::Synth(_) => return,
    };
    match source_config(source) {
        Ok(c) => {
            assert!(c.volts_per_unit.is_finite() && c.volts_per_unit != 0.0);
            assert!(c.rate_hz.is_none_or(|r| r.is_finite() && r > 0.0));
        }
        Err(e) => check_one_line(&e, echo),
    }
    exercise_welch(welch, source.rate.unwrap_or(48_000.0), record, echo);
    exercise_welch(welch, source.rate.unwrap_or(1.0), None, echo);
    if let Err(e) = check_calibration(calibration) {
        check_one_line(&e, echo);
    }
    let default_het = Default::default();
    match analysis_options(calibration, heterodyne.unwrap_or(&default_het), threshold) {
        Ok(o) => {
            if let Some((lo, hi)) = o.mode_band_hz {
                assert!(lo.is_finite() && hi.is_finite() && 0.0 <= lo && lo < hi);
            }
        }
        Err(e) => check_one_line(&e, echo),
    }
}

fuzz_target!(|data: &[u8]| {
    let mut argv = vec!["stillpoint".to_string()];
    for piece in data.split(|b| *b == 0) {
        match piece {
            [1, k] => argv.push(cli_tokens::token(usize::from(*k)).to_string()),
            _ => argv.push(String::from_utf8_lossy(piece).into_owned()),
        }
    }
    let echo = argv.iter().any(|a| a.contains(['\n', '\r']));
    match cli_tokens::parse(&argv) {
        Ok(cli) => exercise(&cli, Some(data.len() as u64 * 1000), echo),
        Err(e) => check_clap_error(&e, echo),
    }
});
