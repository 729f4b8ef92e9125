//! `spectrum`/`analyze` with `--cross-channel J`: two channels of one source read in one pass
//! (the acquisition thread delivers both, see [`crate::acquire::SampleReader::pair_with`]),
//! averaged by [`crate::dsp::cross::CrossWelch`] (through the same loop as one channel,
//! [`crate::analysis::stream`]) into both PSDs, the cross-spectral density and the coherence.

use std::process::ExitCode;

use anyhow::Result;

use crate::dsp::cross::CrossSpectrum;
use crate::report::{self, cross::analyze_cross};

use super::args::{AnalyzeArgs, AveragingArg, HeterodyneArgs, SourceArgs, SpectrumArgs, WelchArgs};
use super::config;
use super::pipeline;
use super::{InputError, note, output, warn};
use crate::model::CalibrationMethod;

/// A finished two-channel average and what happened on the way.
#[derive(Debug)]
pub struct CrossRun {
    /// Both PSDs, the CSD (V²/Hz) and the settings; every value finite.
    pub cross: CrossSpectrum,
    /// Channels (a, b).
    pub channels: (usize, usize),
    /// One line per problem with the input.
    pub warnings: Vec<String>,
    /// Human description of the source.
    pub description: String,
    /// Status lines that are not problems.
    pub notes: Vec<String>,
}

/// Reads channels `--channel` (a) and `--cross-channel` (b) of the source in one pass and
/// averages them (the loop and its messages are `spectrum`'s, see
/// [`pipeline::average_source`]).
///
/// # Errors
/// Bad options or input, too little data, no usable segment, a non-finite result.
pub fn compute_cross(source: &SourceArgs, welch: &WelchArgs) -> Result<CrossRun> {
    let source_config = config::source_config(source)?;
    let Some(channel_b) = source_config.cross_channel else {
        return Err(InputError("--cross-channel J is needed for a cross-spectrum".into()).into());
    };
    if !matches!(welch.averaging, AveragingArg::Mean) {
        return Err(InputError(
            "--cross-channel averages the cross-spectrum linearly: use --averaging mean".into(),
        )
        .into());
    }
    let run = pipeline::average_source(source, welch, &source_config)?;
    let stats = &run.outcome.stats;
    let segment = run.averager.config().segment;
    let Some(cross) = run.averager.cross_spectrum() else {
        if stats.samples < segment as u64 {
            return Err(pipeline::too_short(stats.samples, segment).into());
        }
        return Err(InputError(format!(
            "no usable segment: all {} segments held non-finite samples in channel {} or {} \
             ({} NaN/Inf samples in the record)",
            run.averager.skipped_segments(),
            source_config.channel,
            channel_b,
            stats.non_finite_samples
        ))
        .into());
    };
    let all = [
        &cross.a.psd_v2_per_hz,
        &cross.psd_b_v2_per_hz,
        &cross.csd_re_v2_per_hz,
        &cross.csd_im_v2_per_hz,
    ];
    if let Some(k) = all
        .iter()
        .find_map(|column| column.iter().position(|p| !p.is_finite()))
    {
        return Err(InputError(format!(
            "the spectrum is not finite at {} Hz (overflow: check --volts-per-unit)",
            cross.a.frequency_hz(k)
        ))
        .into());
    }
    Ok(CrossRun {
        cross,
        channels: (source_config.channel, channel_b),
        warnings: run.warnings,
        description: run.description,
        notes: run.notes,
    })
}

/// `stillpoint spectrum --cross-channel J`.
///
/// # Errors
/// Bad options or input, a failed calibration, an unwritable output.
pub fn run_spectrum(args: &SpectrumArgs) -> Result<ExitCode> {
    let options = config::analysis_options(&args.calibration, &HeterodyneArgs::default(), None)?;
    let kind = CalibrationMethod::of(&options);
    output::check_output_for(&args.output, &args.source.source)?;
    let run = compute_cross(&args.source, &args.welch)?;
    for warning in &run.warnings {
        warn(warning);
    }
    for text in &run.notes {
        note(text);
    }
    // Calibrated columns: m²/Hz with each channel's own m/V (the CSD with c_a c_b).
    let factors = match kind {
        CalibrationMethod::None => None,
        CalibrationMethod::Given => options.m_per_v.map(|c| (c, c)),
        CalibrationMethod::ToneDisplacement
        | CalibrationMethod::TonePhaseModulation
        | CalibrationMethod::Equipartition => {
            let report = analyze_cross(&run.cross, &options, run.channels)?;
            let cross = report.cross.as_ref();
            match (
                cross.and_then(|c| c.m_per_v_a.zip(c.m_per_v_b)),
                report.calibration.m_per_v,
            ) {
                (Some(ab), _) => Some(ab),
                (None, Some(c)) if c.is_finite() && c > 0.0 => Some((c, c)),
                _ => {
                    return Err(InputError(format!(
                        "the calibration failed: {}",
                        report.notes.join("; ")
                    ))
                    .into());
                }
            }
        }
    };
    let text = cross_csv(&run.cross, factors)?;
    output::write_atomically(&args.output, |out| out.write_all(text.as_bytes()))?;
    Ok(ExitCode::SUCCESS)
}

/// The contract's columns (`frequency_hz, psd_v2_per_hz, psd_b_v2_per_hz, csd_re_v2_per_hz,
/// csd_im_v2_per_hz, coherence`), then with a calibration `psd_m2_per_hz, psd_b_m2_per_hz,
/// csd_re_m2_per_hz, csd_im_m2_per_hz`; shortest round-trip numbers.
///
/// # Errors
/// A value that is not finite (after calibration).
pub fn cross_csv(cross: &CrossSpectrum, m_per_v: Option<(f64, f64)>) -> Result<String> {
    let mut out = String::with_capacity(cross.len() * 120);
    out.push_str(
        "frequency_hz,psd_v2_per_hz,psd_b_v2_per_hz,csd_re_v2_per_hz,csd_im_v2_per_hz,coherence",
    );
    if m_per_v.is_some() {
        out.push_str(",psd_m2_per_hz,psd_b_m2_per_hz,csd_re_m2_per_hz,csd_im_m2_per_hz");
    }
    out.push('\n');
    for k in 0..cross.len() {
        let f = cross.a.frequency_hz(k);
        let paa = cross.a.psd_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let pbb = cross.psd_b_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let re = cross.csd_re_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let im = cross.csd_im_v2_per_hz.get(k).copied().unwrap_or(f64::NAN);
        let coh = cross.coherence_at(k);
        let mut row = vec![f, paa, pbb, re, im, coh];
        if let Some((ca, cb)) = m_per_v {
            let ab = ca * cb;
            row.extend([paa * ca * ca, pbb * cb * cb, re * ab, im * ab]);
        }
        if let Some(bad) = row.iter().find(|v| !v.is_finite()) {
            return Err(InputError(format!(
                "bin {k} ({f} Hz) is not finite ({bad}); check the calibration and --volts-per-unit"
            ))
            .into());
        }
        let line: Vec<String> = row.iter().map(|v| format!("{v:?}")).collect();
        out.push_str(&line.join(","));
        out.push('\n');
    }
    Ok(out)
}

/// `stillpoint analyze --cross-channel J`: the report of [`analyze_cross`] and the run (its
/// `spectrum` is channel a's PSD) for `analyze` to finish as usual.
///
/// # Errors
/// Bad options or input, an impossible analysis input.
pub fn run_analyze(
    args: &AnalyzeArgs,
    options: &crate::analysis::AnalysisOptions,
) -> Result<(report::Report, pipeline::SpectrumRun)> {
    let run = compute_cross(&args.source, &args.welch)?;
    let report = analyze_cross(&run.cross, options, run.channels)?;
    Ok((
        report,
        pipeline::SpectrumRun {
            spectrum: run.cross.a,
            warnings: run.warnings,
            description: run.description,
            notes: run.notes,
        },
    ))
}
