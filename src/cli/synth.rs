//! `stillpoint synth SCENARIO -o OUT.wav`: an invented record of a named scenario.

use std::process::ExitCode;

use anyhow::Result;

use super::InputError;
use super::args::SynthArgs;

/// Runs `stillpoint synth`.
///
/// # Errors
/// Unknown scenario, bad options, unwritable output.
pub fn run(args: &SynthArgs) -> Result<ExitCode> {
    let _ = args;
    Err(InputError("synth: waiting for the synthesiser (crate::synth)".into()).into())
}
