//! The command-line alphabet and a fast parser entry point shared by the property test
//! `tests/cli_parser.rs` (as `#[path = "common/cli_tokens.rs"] mod cli_tokens;`) and the fuzz
//! target `tests/fuzz/fuzz_targets/cli_args.rs` (as `#[path = "../../common/cli_tokens.rs"]`).
//! One list, so the two cannot drift apart; `tests/cli_parser.rs` checks, by walking
//! `Cli::command()`, that [`NAMES`] holds every subcommand and option name of the grammar and
//! nothing else, and that [`VALUES`] holds every enumerated value and synth scenario name.

use std::sync::{Mutex, OnceLock};

use clap::{CommandFactory, FromArgMatches};
use stillpoint::cli::args::Cli;

/// Every subcommand and option name of the grammar (src/cli/args.rs), `help` and hidden
/// options included. A name the grammar does not (or no longer) know is harmless: it is one
/// more unknown argument (`--live`, `--emit` and `--emit-paced` of `bench` were listed before
/// they were committed).
pub const NAMES: &[&str] = &[
    "spectrum",
    "analyze",
    "synth",
    "bench",
    "monitor",
    "track",
    "help",
    "--segment",
    "--overlap",
    "--window",
    "--rate",
    "--sample-format",
    "--endian",
    "--channels",
    "--channel",
    "--cross-channel",
    "--volts-per-unit",
    "--follow",
    "--stall-timeout",
    "--dataset",
    "--detrend",
    "--averages",
    "--averaging",
    "--rms-band",
    "--cumulative-rms",
    "--time-constant",
    "--m-per-v",
    "--tone-freq",
    "--tone-rms-m",
    "--pm-depth",
    "--freq-pull",
    "--bath-temperature",
    "--mode-band",
    "--mass",
    "--mass-uncertainty",
    "--bath-temperature-uncertainty",
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
    "--figure",
    "--figure-size",
    "--figure-band",
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
    "--live",
    "--emit",
    "--emit-paced",
    "--json",
    "--every",
    "--waterfall",
    "--waterfall-band",
    "--fixed-band",
    "--help",
    "--version",
    "-h",
    "-V",
];

/// Plausible and hostile values, every enumerated value (`--sample-format`, `--endian`,
/// `--window`, `--detrend`, `--averaging`, `--lo-side`, `synth --format`, `bench --live`,
/// `bench --emit`, `analyze --figure-size`) and every synth scenario name among them.
pub const VALUES: &[&str] = &[
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
    "thermal",
    "cooldown",
    "quantum",
    "two-detector",
    "heterodyne",
    "strays",
    "pipe",
    "tcp",
    "both",
    "temperature_k=4",
    "=",
    "out.csv",
    "out.json",
    "x.npy",
    "x.h5",
    "/raw/x",
    "fig.svg",
    "fig.png",
    "column",
    "slide",
];

/// Token `i` of [`NAMES`] followed by [`VALUES`], `i` taken modulo their total length.
pub fn token(i: usize) -> &'static str {
    let i = i % (NAMES.len() + VALUES.len());
    NAMES
        .get(i)
        .copied()
        .unwrap_or_else(|| VALUES[i - NAMES.len()])
}

/// The grammar, built once by one parse of the bare program name and one per subcommand.
/// A parse builds (and, with debug assertions on, runs clap's consistency checks over) the
/// top-level command and each subcommand it enters, and keeps them built in the `Command` it
/// was given; `Cli::try_parse_from` starts from a fresh `Cli::command()` every call and so
/// repeats that work every time. (`Command::build` is not used: it expands the `help`
/// subcommand's tree, which parses `help …` differently.)
fn build_grammar() -> clap::Command {
    let mut command = Cli::command();
    let _ = command.try_get_matches_from_mut(["stillpoint"]);
    let subcommands: Vec<String> = command
        .get_subcommands()
        .map(|s| s.get_name().to_string())
        .collect();
    for name in subcommands {
        let _ = command.try_get_matches_from_mut(["stillpoint", name.as_str()]);
    }
    command
}

/// Same result as `Cli::try_parse_from(argv)` for an `argv` whose first item is
/// `stillpoint` (checked in `tests/cli_parser.rs`: same parsed `Cli`, or an error of the same
/// kind and text, on a few hundred argument vectors), without rebuilding the
/// grammar: one built `Command` is parsed with again and again (neither rebuilt nor cloned,
/// which cost ~1 ms an input in the fuzz build). A parse that panicked may have left it half
/// updated, so it is rebuilt after one.
pub fn parse(argv: &[String]) -> Result<Cli, clap::Error> {
    static GRAMMAR: OnceLock<Mutex<clap::Command>> = OnceLock::new();
    let lock = GRAMMAR.get_or_init(|| Mutex::new(build_grammar()));
    let mut command = lock.lock().unwrap_or_else(|poisoned| {
        lock.clear_poison();
        let mut command = poisoned.into_inner();
        *command = build_grammar();
        command
    });
    let mut matches = command.try_get_matches_from_mut(argv)?;
    Cli::from_arg_matches_mut(&mut matches).map_err(|e| e.format(&mut command))
}
