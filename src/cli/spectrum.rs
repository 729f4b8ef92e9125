//! `stillpoint spectrum`: the Welch PSD of a source as CSV (`frequency_hz`,
//! `psd_v2_per_hz`, and with a calibration `psd_m2_per_hz`; with `--cumulative-rms` also
//! `cumulative_rms_v` and `cumulative_rms_m`), written atomically.

use std::process::ExitCode;

use anyhow::Result;

use crate::analysis::{self, AnalysisOptions};
use crate::snapshot;

use super::args::{HeterodyneArgs, SpectrumArgs};
use super::config;
use super::{InputError, note, output, pipeline, warn};
use crate::model::CalibrationMethod;

/// Runs `stillpoint spectrum`.
///
/// # Errors
/// Bad options or input, a failed calibration, an unwritable output.
pub fn run(args: &SpectrumArgs) -> Result<ExitCode> {
    if args.source.cross_channel.is_some() {
        if args.cumulative_rms {
            return Err(InputError(
                "--cumulative-rms works on one channel: give it without --cross-channel".into(),
            )
            .into());
        }
        return super::cross::run_spectrum(args);
    }
    let options = config::analysis_options(&args.calibration, &HeterodyneArgs::default(), None)?;
    let kind = CalibrationMethod::of(&options);
    output::check_output_for(&args.output, &args.source.source)?;
    let run = pipeline::compute_spectrum(&args.source, &args.welch)?;
    for warning in &run.warnings {
        warn(warning);
    }
    for text in &run.notes {
        note(text);
    }
    let m_per_v = calibrate(&run.spectrum, kind, &options)?;
    if let Some(c2) = m_per_v.map(|c| c * c)
        && run
            .spectrum
            .psd_v2_per_hz
            .iter()
            .any(|p| !(p * c2).is_finite())
    {
        return Err(InputError(format!(
            "the calibrated spectrum overflows (m/V = {m_per_v:?}); check the calibration"
        ))
        .into());
    }
    output::write_atomically(&args.output, |out| {
        snapshot::write_spectrum_csv_with(out, &run.spectrum, m_per_v, args.cumulative_rms)
    })?;
    Ok(ExitCode::SUCCESS)
}

/// Metres per volt for the chosen calibration (`None`: uncalibrated).
fn calibrate(
    spectrum: &crate::dsp::Spectrum,
    kind: CalibrationMethod,
    options: &AnalysisOptions,
) -> Result<Option<f64>> {
    match kind {
        CalibrationMethod::None => Ok(None),
        CalibrationMethod::Given => Ok(options.m_per_v),
        CalibrationMethod::ToneDisplacement
        | CalibrationMethod::TonePhaseModulation
        | CalibrationMethod::Equipartition => {
            let report = analysis::analyze(spectrum, options)?;
            match report.calibration.m_per_v {
                Some(c) if c.is_finite() && c > 0.0 => Ok(Some(c)),
                _ => {
                    let why = if report.notes.is_empty() {
                        "no reason given".to_string()
                    } else {
                        report.notes.join("; ")
                    };
                    Err(InputError(format!("the calibration failed: {why}")).into())
                }
            }
        }
    }
}
