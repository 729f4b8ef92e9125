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
    if args.scenario == "two-detector" {
        return run_two_detector(args);
    }
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

/// `stillpoint synth two-detector`: two channels of one motion ([`synth::two_detector`]).
fn run_two_detector(args: &SynthArgs) -> Result<ExitCode> {
    use crate::synth::two_detector::{TwoDetectorConfig, write_two_detector_wav};
    let mut config = TwoDetectorConfig::default();
    if let Some(seed) = args.seed {
        config.seed = seed;
    }
    if let Some(duration) = args.duration {
        config.duration_secs = duration;
    }
    if let Some(rate) = args.rate {
        config.sample_rate_hz = rate;
    }
    if args.format.is_some_and(|f| !matches!(f, WavFormatArg::I16)) {
        return Err(InputError("two-detector writes 16-bit WAV only (--format i16)".into()).into());
    }
    for assignment in &args.set {
        let (key, value) = assignment
            .split_once('=')
            .ok_or_else(|| InputError(format!("--set takes NAME=VALUE, got `{assignment}`")))?;
        let v: f64 = value
            .trim()
            .parse()
            .map_err(|_| InputError(format!("--set {key}: `{value}` is not a number")))?;
        match key.trim() {
            "frequency_hz" => config.frequency_hz = v,
            "linewidth_hz" => config.linewidth_hz = v,
            "mass_kg" => config.mass_kg = v,
            "temperature_k" => config.temperature_k = v,
            "m_per_v_a" => config.m_per_v_a = v,
            "m_per_v_b" => config.m_per_v_b = v,
            "floor_over_peak_db" => config.floor_over_peak_db = v,
            "tone_frequency_hz" => config.tone_frequency_hz = v,
            "tone_rms_m" => config.tone_rms_m = v,
            other => {
                return Err(InputError(format!(
                    "scenario 'two-detector' has no option '{other}' (it takes: frequency_hz, linewidth_hz, mass_kg, temperature_k, m_per_v_a, m_per_v_b, floor_over_peak_db, tone_frequency_hz, tone_rms_m)"
                ))
                .into());
            }
        }
    }
    output::check_output_path(&args.output)?;
    if args.output.as_os_str() == "-" {
        return Err(InputError("synth writes a WAV file; give a file name with -o".into()).into());
    }
    let truth = write_two_detector_wav(&config, &args.output)?;
    let stdout = io::stdout();
    writeln!(
        stdout.lock(),
        "wrote {} (2 channels × {} samples at {} Hz, scenario two-detector, seed {}) and {}; analyse with: {}",
        args.output.display(),
        truth.samples,
        config.sample_rate_hz,
        config.seed,
        synth::truth_path(&args.output).display(),
        truth.command
    )
    .context("cannot write to stdout")?;
    Ok(ExitCode::SUCCESS)
}
