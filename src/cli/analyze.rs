//! `stillpoint analyze`: spectrum → calibration → mode fit → quantum references →
//! sidebands → stray peaks, written as pretty JSON (the BRIEF.md key paths), with a short
//! summary on stdout and the report's notes and warnings on stderr.

use std::fs;
use std::io::{self, Write};
use std::path::Path;
use std::process::ExitCode;

use anyhow::{Context, Result};

use crate::analysis;
use crate::figure;
use crate::report::Report;

use super::args::{AnalyzeArgs, FigureSizeArg};
use super::{InputError, config, note, output, pipeline, warn};

/// Runs `stillpoint analyze`.
///
/// # Errors
/// Bad options or input, an impossible analysis input, an unwritable output.
pub fn run(args: &AnalyzeArgs) -> Result<ExitCode> {
    let mut options =
        config::analysis_options(&args.calibration, &args.heterodyne, args.peak_threshold)?;
    options.reference_peaks_hz = args.reference_peaks.clone();
    options.rms_band_hz = args.rms_band;
    if args.rms_band.is_some() && args.source.cross_channel.is_some() {
        return Err(InputError(
            "--rms-band works on one channel: give it without --cross-channel".into(),
        )
        .into());
    }
    if let Some(path) = &args.reference {
        options.reference_peaks_hz.extend(reference_peaks(path)?);
    }
    output::check_output_for(&args.output, &args.source.source)?;
    if let Some(path) = &args.figure {
        figure::FigureFormat::from_path(path).map_err(|e| InputError(e.to_string()))?;
        output::check_output_for(path, &args.source.source)?;
    }
    let (mut report, run) = if args.source.cross_channel.is_some() {
        super::cross::run_analyze(args, &options)?
    } else {
        let run = pipeline::compute_spectrum(&args.source, &args.welch)?;
        (analysis::analyze(&run.spectrum, &options)?, run)
    };
    for warning in run.warnings.iter().rev() {
        if !report.warnings.contains(warning) {
            report.warnings.insert(0, warning.clone());
        }
    }
    for (i, text) in run.notes.iter().enumerate() {
        report.notes.insert(i, text.clone());
    }
    let json = serde_json::to_string_pretty(&report).context("cannot encode the report")?;
    // Render before writing anything, so a figure that cannot be made replaces no file.
    let figure_bytes = match &args.figure {
        Some(path) => Some((path, render_figure(path, &run.spectrum, &report, args)?)),
        None => None,
    };
    output::write_atomically(&args.output, |out| {
        out.write_all(json.as_bytes())?;
        out.write_all(b"\n")
    })?;
    if let Some((path, bytes)) = figure_bytes {
        output::write_atomically(path, |out| out.write_all(&bytes))?;
    }
    for warning in &report.warnings {
        warn(warning);
    }
    for text in &report.notes {
        note(text);
    }
    if !args.quiet && args.output.as_os_str() != "-" {
        let stdout = io::stdout();
        let mut out = stdout.lock();
        writeln!(out, "source: {}", run.description)
            .context("cannot write the summary to stdout")?;
        write_summary(&mut out, &report).context("cannot write the summary to stdout")?;
        out.flush().context("cannot write the summary to stdout")?;
    }
    Ok(ExitCode::SUCCESS)
}

/// Largest reference report read (an analyze report is a few KiB; 64 MiB holds a
/// million peaks).
const REFERENCE_MAX_BYTES: u64 = 64 << 20;

/// Reads at most `limit` bytes of `path` as text; a longer file is refused without reading
/// it whole.
fn read_bounded(path: &Path, limit: u64) -> Result<String> {
    use std::io::Read;
    let file = fs::File::open(path)?;
    let mut text = String::new();
    file.take(limit + 1).read_to_string(&mut text)?;
    if text.len() as u64 > limit {
        return Err(InputError(format!(
            "the reference {} is larger than {} MiB; an analyze report is a few KiB (is it \
             the right file?)",
            path.display(),
            limit >> 20
        ))
        .into());
    }
    Ok(text)
}

/// The `--figure` bytes (SVG or PNG by extension).
fn render_figure(
    path: &Path,
    spectrum: &crate::dsp::Spectrum,
    report: &Report,
    args: &AnalyzeArgs,
) -> Result<Vec<u8>> {
    let view = figure::FigureView {
        x_range_hz: args.figure_band,
        size: match args.figure_size {
            FigureSizeArg::Column => figure::FigureSize::Column,
            FigureSizeArg::Slide => figure::FigureSize::Slide,
        },
        ..figure::FigureView::default()
    };
    figure::render_for_path(path, spectrum, report, &view).map_err(|e| match e {
        figure::FigureError::Render(_) => anyhow::Error::from(e),
        other => InputError(other.to_string()).into(),
    })
}

/// Peak frequencies of an earlier `analyze` report (`peaks[].frequency_hz`).
fn reference_peaks(path: &Path) -> Result<Vec<f64>> {
    let text = read_bounded(path, REFERENCE_MAX_BYTES)
        .with_context(|| format!("cannot read the reference report {}", path.display()))?;
    let value: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| InputError(format!("the reference {} is not JSON: {e}", path.display())))?;
    let peaks = value
        .get("peaks")
        .and_then(serde_json::Value::as_array)
        .ok_or_else(|| {
            InputError(format!(
                "the reference {} has no peaks[] list (is it an analyze report?)",
                path.display()
            ))
        })?;
    Ok(peaks
        .iter()
        .filter_map(|p| p.get("frequency_hz").and_then(serde_json::Value::as_f64))
        .filter(|f| f.is_finite())
        .collect())
}

/// `value` with `digits` significant digits: plain between 1e-3 and 1e6, else exponent.
fn sig(value: f64, digits: usize) -> String {
    let magnitude = value.abs();
    if value == 0.0 || !value.is_finite() {
        return format!("{value}");
    }
    if (1e-3..1e6).contains(&magnitude) {
        let decimals = (digits as i32 - 1 - magnitude.log10().floor() as i32).max(0) as usize;
        format!("{value:.decimals$}")
    } else {
        format!("{:.*e}", digits.saturating_sub(1), value)
    }
}

/// `value ± err unit`, or `—` when absent.
fn with_error(value: Option<f64>, error: Option<f64>, unit: &str) -> String {
    let unit = if unit.is_empty() {
        String::new()
    } else {
        format!(" {unit}")
    };
    match (value, error) {
        (Some(v), Some(e)) => format!("{} ± {}{unit}", sig(v, 6), sig(e, 2)),
        (Some(v), None) => format!("{}{unit}", sig(v, 6)),
        _ => "—".to_string(),
    }
}

/// The short human summary.
fn write_summary(out: &mut dyn Write, report: &Report) -> io::Result<()> {
    let mode = &report.mode;
    let quantum = &report.quantum;
    let cal = &report.calibration;
    writeln!(
        out,
        "Welch: N = {}, {} window, {} % overlap, {} averages, RBW {} Hz, ENBW {} Hz",
        report.welch.segment,
        report.welch.window,
        report.welch.overlap * 100.0,
        report.welch.averages,
        sig(report.welch.resolution_hz, 5),
        sig(report.welch.enbw_hz, 5)
    )?;
    writeln!(
        out,
        "mode frequency f_m     {}",
        with_error(mode.frequency_hz, mode.frequency_hz_uncertainty, "Hz")
    )?;
    writeln!(
        out,
        "linewidth γ (FWHM)     {}",
        with_error(mode.linewidth_hz, mode.linewidth_hz_uncertainty, "Hz")
    )?;
    writeln!(
        out,
        "quality factor Q       {}",
        with_error(mode.quality_factor, mode.quality_factor_uncertainty, "")
    )?;
    let method = cal.method.as_deref().unwrap_or("none");
    writeln!(
        out,
        "calibration            {} ({method})",
        with_error(cal.m_per_v, cal.m_per_v_uncertainty, "m/V")
    )?;
    writeln!(
        out,
        "occupancy n̄ (area)     {}",
        with_error(quantum.occupancy, quantum.occupancy_uncertainty, "")
    )?;
    writeln!(
        out,
        "effective temperature  {}",
        with_error(
            quantum.effective_temperature_k,
            quantum.effective_temperature_k_uncertainty,
            "K"
        )
    )?;
    let sideband = report.sidebands.as_ref();
    writeln!(
        out,
        "occupancy n̄ (sideband) {}",
        with_error(
            sideband.and_then(|s| s.occupancy),
            sideband.and_then(|s| s.occupancy_uncertainty),
            ""
        )
    )?;
    if let Some(r) = &report.rms {
        let m = r.m.map_or(String::new(), |m| format!(" = {} m", sig(m, 6)));
        writeln!(
            out,
            "band rms               {} V{m} ({}–{} Hz, {})",
            sig(r.v, 6),
            crate::acquire::compact_number(r.band_hz[0]),
            crate::acquire::compact_number(r.band_hz[1]),
            r.source
        )?;
    }
    writeln!(out, "stray peaks            {}", report.peaks.len())?;
    if let Some(c) = &report.cross {
        writeln!(
            out,
            "two detectors          channels {} × {}, K_eff {}, coherence at mode {} (5 % noise level {})",
            c.channel_a,
            c.channel_b,
            sig(c.k_eff, 4),
            c.coherence_at_mode.map_or("—".to_string(), |v| sig(v, 3)),
            sig(c.coherence_noise_threshold, 3)
        )?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(sig(86099.54797, 6), "86099.5");
        assert_eq!(sig(1.0131, 2), "1.0");
        assert_eq!(sig(2.0054e-9, 4), "2.005e-9");
        assert_eq!(sig(7.56e7, 3), "7.56e7");
        assert_eq!(sig(0.0, 3), "0");
    }
}
