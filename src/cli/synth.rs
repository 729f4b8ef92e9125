//! `stillpoint synth SCENARIO -o OUT.wav`: an invented record of a named scenario from
//! [`crate::synth`], written as WAV with its `.truth.json` sidecar (both atomically).

use std::io::{self, Write};
use std::process::ExitCode;

use anyhow::{Context, Result};

use crate::synth::{self, ScenarioConfig, WavFormat};

use super::InputError;
use super::args::{SynthArgs, WavFormatArg};
use super::output;

/// Runs `stillpoint synth`.
///
/// # Errors
/// Unknown scenario or parameter, a value out of range, clipping of an integer format, an
/// unwritable output.
pub fn run(args: &SynthArgs) -> Result<ExitCode> {
    let config = scenario_config(args)?;
    output::check_output_path(&args.output)?;
    if args.output.as_os_str() == "-" {
        return Err(InputError("synth writes a WAV file; give a file name with -o".into()).into());
    }
    let truth = synth::write_wav(&config, &args.output)?;
    let stdout = io::stdout();
    let mut out = stdout.lock();
    writeln!(
        out,
        "wrote {} ({} samples of {} at {} Hz, {} s, scenario {}, seed {}) and {}",
        args.output.display(),
        truth.samples,
        truth.format,
        truth.sample_rate_hz,
        truth.duration_secs,
        truth.scenario,
        truth.seed,
        synth::truth_path(&args.output).display()
    )
    .context("cannot write to stdout")?;
    Ok(ExitCode::SUCCESS)
}

/// The scenario's defaults with the command-line changes applied, validated.
fn scenario_config(args: &SynthArgs) -> Result<ScenarioConfig> {
    let mut config = ScenarioConfig::defaults(&args.scenario)?;
    if let Some(seed) = args.seed {
        config.seed = seed;
    }
    if let Some(duration) = args.duration {
        config.duration_secs = duration;
    }
    if let Some(rate) = args.rate {
        config.sample_rate_hz = rate;
    }
    if let Some(format) = args.format {
        config.format = match format {
            WavFormatArg::I16 => WavFormat::I16,
            WavFormatArg::I24 => WavFormat::I24,
            WavFormatArg::F32 => WavFormat::F32,
        };
    }
    for assignment in &args.set {
        let (key, value) = assignment.split_once('=').ok_or_else(|| {
            InputError(format!(
                "--set takes NAME=VALUE (e.g. temperature_k=4), got `{assignment}`"
            ))
        })?;
        config.set(key.trim(), value.trim())?;
    }
    config.validate()?;
    Ok(config)
}
