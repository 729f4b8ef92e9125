//! The command-line interface (BRIEF.md contract): argument parsing ([`args`]), validated
//! configuration shared with the window ([`config`]), and the commands `monitor`,
//! `spectrum`, `analyze`, `synth`, `bench` and `track`.
//!
//! Errors are `anyhow` chains printed as one line, `stillpoint: error: …`. Exit status:
//! 0 success (also when stdout is a closed pipe), 1 a runtime failure, 2 bad options or
//! bad input (clap's own usage errors also exit 2).

mod analyze;
pub mod args;
mod bench;
mod bench_live;
pub mod config;
mod cross;
pub mod interrupt;
pub mod monitor;
mod output;
mod pipeline;
mod spectrum;
mod synth;
mod track;

use std::io::{self, Write};
use std::process::ExitCode;

use clap::{CommandFactory, FromArgMatches};

use crate::acquire::AcquireError;
use crate::analysis::AnalysisError;
use crate::dsp::DspError;
use crate::synth::SynthError;

pub use args::{Cli, Command};

/// Marks an error as caused by the user's options or input (exit status 2).
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct InputError(pub String);

/// Entry point of the binary: parses arguments, runs, prints errors as one line.
pub fn main() -> ExitCode {
    let parsed = Cli::command()
        .try_get_matches()
        .and_then(|matches| Cli::from_arg_matches(&matches).map(|cli| (cli, matches)));
    let (cli, matches) = match parsed {
        Ok(parsed) => parsed,
        Err(err) => {
            // --help and --version are "errors" to clap; print them and exit 0.
            let code = if err.use_stderr() { 2 } else { 0 };
            let _ = err.print();
            return ExitCode::from(code);
        }
    };
    match run(cli, Some(&matches)) {
        Ok(code) => code,
        Err(err) => {
            if is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            let _ = writeln!(io::stderr().lock(), "stillpoint: error: {}", one_line(&err));
            ExitCode::from(exit_status(&err))
        }
    }
}

/// Runs one parsed command line; `matches` (when given) tells typed options from defaults.
///
/// # Errors
/// Everything that stops the command; [`main`] prints it and picks the exit status.
pub fn run(cli: Cli, matches: Option<&clap::ArgMatches>) -> anyhow::Result<ExitCode> {
    match cli.command {
        None => monitor::run_demo(&cli.window),
        Some(Command::Monitor(args)) => {
            monitor::run(&args, matches.and_then(|m| m.subcommand_matches("monitor")))
        }
        Some(Command::Spectrum(args)) => spectrum::run(&args),
        Some(Command::Analyze(args)) => analyze::run(&args),
        Some(Command::Synth(args)) => synth::run(&args),
        Some(Command::Bench(args)) => bench::run(&args),
        Some(Command::Track(args)) => track::run(&args),
    }
}

/// Prints one warning line on stderr (`stillpoint: warning: …`).
pub(crate) fn warn(message: &str) {
    let _ = writeln!(
        io::stderr().lock(),
        "stillpoint: warning: {}",
        message.replace('\n', " ")
    );
}

/// Prints one note line on stderr (`stillpoint: note: …`).
pub(crate) fn note(message: &str) {
    let _ = writeln!(
        io::stderr().lock(),
        "stillpoint: note: {}",
        message.replace('\n', " ")
    );
}

/// The error chain as one line: causes joined by ": ", skipping a cause whose text the
/// previous one already contains (thiserror's transparent `{0}` wrappers repeat it).
fn one_line(err: &anyhow::Error) -> String {
    let mut parts: Vec<String> = Vec::new();
    for cause in err.chain() {
        let text = cause.to_string().replace(['\n', '\r'], " ");
        let mut text = text.trim().to_string();
        // The library names the setting; the command line names its option too.
        if let Some(AnalysisError::Setting { setting, .. }) = cause.downcast_ref::<AnalysisError>()
        {
            text = format!("{}: {text}", config::option_of(*setting));
        }
        if text.is_empty() {
            continue;
        }
        if parts.last().is_some_and(|last| last.contains(&text)) {
            continue;
        }
        parts.push(text);
    }
    parts.join(": ")
}

/// True if the chain holds a broken pipe (the reader of our stdout went away).
fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|cause| {
        cause
            .downcast_ref::<io::Error>()
            .is_some_and(|e| e.kind() == io::ErrorKind::BrokenPipe)
    })
}

/// 2 for errors of the user's options or input, 1 for runtime failures.
fn exit_status(err: &anyhow::Error) -> u8 {
    for cause in err.chain() {
        if let Some(stop) = cause.downcast_ref::<interrupt::Interrupted>() {
            return stop.status();
        }
        if cause.is::<InputError>() || cause.is::<DspError>() || cause.is::<AnalysisError>() {
            return 2;
        }
        if let Some(acq) = cause.downcast_ref::<AcquireError>() {
            return match acq {
                AcquireError::Io(e) => io_status(e),
                AcquireError::Thread(_) => 1,
                _ => 2,
            };
        }
        if let Some(synth) = cause.downcast_ref::<SynthError>() {
            return match synth {
                SynthError::Io { source, .. } => io_status(source),
                SynthError::Wav { .. } => 1,
                _ => 2,
            };
        }
        if let Some(e) = cause.downcast_ref::<io::Error>() {
            return io_status(e);
        }
    }
    1
}

/// I/O errors that mean "your path/host/data is wrong" are input errors.
fn io_status(err: &io::Error) -> u8 {
    use io::ErrorKind as K;
    match err.kind() {
        K::NotFound
        | K::PermissionDenied
        | K::ConnectionRefused
        | K::AddrNotAvailable
        | K::InvalidInput
        | K::InvalidData
        | K::UnexpectedEof
        | K::IsADirectory
        | K::NotADirectory
        | K::HostUnreachable
        | K::NetworkUnreachable => 2,
        _ => 1,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use anyhow::Context;

    #[test]
    fn one_line_skips_repeated_causes() {
        let io_err = io::Error::new(io::ErrorKind::NotFound, "No such file or directory");
        let err = anyhow::Error::from(AcquireError::Io(io_err)).context("cannot open x.wav");
        assert_eq!(
            one_line(&err),
            "cannot open x.wav: No such file or directory"
        );
    }

    #[test]
    fn statuses() {
        let not_found =
            anyhow::Error::from(AcquireError::Io(io::Error::from(io::ErrorKind::NotFound)));
        assert_eq!(exit_status(&not_found), 2);
        let other = anyhow::Error::from(io::Error::other("disk on fire"));
        assert_eq!(exit_status(&other), 1);
        let input: anyhow::Result<()> = Err(InputError("bad".into())).context("while x");
        assert_eq!(exit_status(&input.unwrap_err()), 2);
        let pipe = anyhow::Error::from(io::Error::from(io::ErrorKind::BrokenPipe));
        assert!(is_broken_pipe(&pipe));
    }
}
