//! `stillpoint bench`: can this machine keep up with a given rate and segment?

use std::process::ExitCode;

use anyhow::Result;

use super::InputError;
use super::args::BenchArgs;

/// Runs `stillpoint bench`.
///
/// # Errors
/// Bad options.
pub fn run(args: &BenchArgs) -> Result<ExitCode> {
    let _ = args;
    Err(InputError("bench: waiting for dsp::bench".into()).into())
}
