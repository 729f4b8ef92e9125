//! Validated configuration built from the parsed arguments: the source, the Welch settings
//! and the analysis options, with every cross-option check the grammar cannot express.
//! Shared by the headless commands and `monitor` (the window).

use crate::acquire::{SourceConfig, SourceSpec};
use crate::analysis::{AnalysisOptions, Setting};
use crate::dsp::{Averaging, WelchConfig};

use super::InputError;
use super::args::{
    AveragingArg, CalibrationArgs, HeterodyneArgs, LoSideArg, SourceArgs, WelchArgs,
};

/// Result of a configuration check.
pub type Result<T> = std::result::Result<T, InputError>;

/// The source options as an [`SourceConfig`], with the raw-source requirements checked.
///
/// # Errors
/// Raw source without `--sample-format` or `--rate`; `--channel` not below `--channels`.
pub fn source_config(args: &SourceArgs) -> Result<SourceConfig> {
    let spec = SourceSpec::parse(&args.source);
    if let SourceSpec::Path(path) = &spec
        && path.as_os_str().is_empty()
    {
        return Err(InputError("SOURCE is an empty path".into()));
    }
    if let SourceSpec::Tcp(addr) = &spec
        && !addr.contains(':')
    {
        return Err(InputError(format!(
            "`{}` needs a port: tcp://HOST:PORT",
            args.source
        )));
    }
    if spec.is_hdf5() {
        if args.dataset.is_none() {
            return Err(InputError(format!(
                "`{}` is an HDF5 file: say which dataset with --dataset /PATH",
                args.source
            )));
        }
    } else if args.dataset.is_some() {
        return Err(InputError(format!(
            "--dataset applies to an HDF5 file (.h5, .hdf5), not to `{}`",
            args.source
        )));
    }
    if spec.is_npy() && args.rate.is_none() {
        return Err(InputError(format!(
            "`{}` is a NumPy array, which holds no sample rate: give --rate HZ",
            args.source
        )));
    }
    let wav = spec.is_self_describing();
    if !wav {
        let what = match &spec {
            SourceSpec::Stdin => "raw samples on stdin".to_string(),
            SourceSpec::Tcp(a) => format!("raw samples from tcp://{a}"),
            _ => format!("`{}` (not .wav, so read as raw samples)", args.source),
        };
        if args.sample_format.is_none() {
            return Err(InputError(format!(
                "{what} need --sample-format i16|i24|i32|f32|f64"
            )));
        }
        if args.rate.is_none() {
            return Err(InputError(format!("{what} need --rate HZ")));
        }
        if let Some(j) = args.cross_channel
            && j >= args.channels
        {
            return Err(InputError(format!(
                "--cross-channel {j} is out of range: the stream has {} channel{} (0-based, so 0..={}); give --channels",
                args.channels,
                if args.channels == 1 { "" } else { "s" },
                args.channels - 1
            )));
        }
        if args.channel >= args.channels {
            return Err(InputError(format!(
                "--channel {} is out of range: the stream has {} channel{} (0-based, so 0..={})",
                args.channel,
                args.channels,
                if args.channels == 1 { "" } else { "s" },
                args.channels - 1
            )));
        }
    }
    if args.follow && !matches!(spec, SourceSpec::Path(_)) {
        return Err(InputError(
            "--follow applies to a file that is still being written, not to stdin or TCP".into(),
        ));
    }
    let mut config = SourceConfig::new(spec);
    config.sample_format = args.sample_format.map(Into::into);
    config.endian = args.endian.into();
    config.channels = args.channels as usize;
    config.channel = args.channel as usize;
    config.rate_hz = args.rate;
    config.volts_per_unit = args.volts_per_unit;
    config.follow = args.follow;
    config.dataset.clone_from(&args.dataset);
    config.cross_channel = args.cross_channel.map(|j| j as usize);
    Ok(config)
}

/// Longest segment accepted (2²⁷ samples: ~3 GB of working buffers).
pub const MAX_SEGMENT: usize = 1 << 27;

/// The default segment: [`crate::dsp::DEFAULT_SEGMENT`], or the largest power of two ≤ L/8 when the
/// record length L is known and shorter (never below 2).
pub fn default_segment(record_samples: Option<u64>) -> usize {
    crate::dsp::default_segment(record_samples)
}

/// Worker threads for the averager: one per core (at most 64).
pub(crate) fn worker_threads() -> usize {
    std::thread::available_parallelism()
        .map_or(1, std::num::NonZero::get)
        .min(64)
}

/// Welch settings for a stream of `sample_rate_hz`.
///
/// # Errors
/// A segment shorter than 2 samples or not addressable; an invalid rate.
pub fn welch_config(
    args: &WelchArgs,
    sample_rate_hz: f64,
    record_samples: Option<u64>,
) -> Result<WelchConfig> {
    let segment = match args.segment {
        Some(n) => usize::try_from(n)
            .map_err(|_| InputError(format!("--segment {n} is too large for this machine")))?,
        None => default_segment(record_samples),
    };
    if segment > MAX_SEGMENT {
        return Err(InputError(format!(
            "--segment {segment} is more than this program handles ({MAX_SEGMENT} samples)"
        )));
    }
    if segment < 2 {
        return Err(InputError(format!(
            "--segment must be at least 2 samples, got {segment}"
        )));
    }
    let mut config = WelchConfig::new(sample_rate_hz, segment);
    config.overlap = args.overlap;
    config.window = args.window.into();
    config.detrend = args.detrend.into();
    config.averaging = match args.averaging {
        AveragingArg::Mean => Averaging::Linear,
        AveragingArg::Median => Averaging::Median,
        AveragingArg::MaxHold => Averaging::MaxHold,
        AveragingArg::Exponential => Averaging::Exponential {
            time_constant_segments: args.time_constant,
        },
    };
    config.max_averages = match args.averages {
        Some(k) => Some(
            usize::try_from(k).map_err(|_| InputError(format!("--averages {k} is too large")))?,
        ),
        None => None,
    };
    config.validate().map_err(|e| InputError(e.to_string()))?;
    Ok(config)
}

/// Checks the calibration options for completeness. Which calibration they select is read
/// from the analysis options they make ([`crate::model::CalibrationMethod::of`], the one
/// enum of the requested method for both faces).
///
/// # Errors
/// A tone frequency without its amplitude, equipartition without a mode band or mass.
pub fn check_calibration(args: &CalibrationArgs) -> Result<()> {
    if args.m_per_v.is_some() {
        return Ok(());
    }
    if args.tone_freq.is_some() {
        if args.tone_rms_m.is_none() && args.pm_depth.is_none() {
            return Err(InputError(
                "--tone-freq needs the tone's size: --tone-rms-m X, or --pm-depth RAD with \
                 --freq-pull HZ_PER_M"
                    .into(),
            ));
        }
        return Ok(());
    }
    if args.bath_temperature.is_some() {
        if args.mode_band.is_none() {
            return Err(InputError(
                "--bath-temperature calibrates by equipartition on the mode and needs \
                 --mode-band LO:HI"
                    .into(),
            ));
        }
        if args.mass.is_none() {
            return Err(InputError(
                "--bath-temperature calibrates by equipartition on the mode and needs --mass KG"
                    .into(),
            ));
        }
        return Ok(());
    }
    Ok(())
}

/// The analysis options for [`crate::analysis::analyze`].
///
/// # Errors
/// Incomplete calibration options (see [`check_calibration`]).
pub fn analysis_options(
    calibration: &CalibrationArgs,
    heterodyne: &HeterodyneArgs,
    peak_threshold_db: Option<f64>,
) -> Result<AnalysisOptions> {
    check_calibration(calibration)?;
    if heterodyne.carrier.is_some() != heterodyne.lo_side.is_some() {
        return Err(InputError(
            "--carrier and --lo-side above|below go together (the LO side decides which \
             sideband is the optical red one)"
                .into(),
        ));
    }
    Ok(AnalysisOptions {
        m_per_v: calibration.m_per_v,
        tone_frequency_hz: calibration.tone_freq,
        tone_rms_m: calibration.tone_rms_m,
        pm_depth_rad: calibration.pm_depth,
        freq_pull_hz_per_m: calibration.freq_pull,
        bath_temperature_k: calibration.bath_temperature,
        mode_band_hz: calibration.mode_band,
        mass_kg: calibration.mass,
        mass_uncertainty_kg: calibration.mass_uncertainty,
        bath_temperature_uncertainty_k: calibration.bath_temperature_uncertainty,
        carrier_hz: heterodyne.carrier,
        lo_above: heterodyne.lo_side.map(|side| side == LoSideArg::Above),
        peak_threshold_db,
        sideband_imbalance: heterodyne.sideband_imbalance,
        imbalance_tones_hz: heterodyne.imbalance_tones,
        sloped_background: calibration.sloped_background,
        ..AnalysisOptions::default()
    })
}

/// The command-line option of an analysis setting, which the CLI puts before a
/// [`crate::analysis::AnalysisError::Setting`] message (the library names quantities, not
/// options).
pub(crate) fn option_of(setting: Setting) -> &'static str {
    match setting {
        Setting::Mass => "--mass",
        Setting::MassUncertainty => "--mass-uncertainty",
        Setting::BathTemperature => "--bath-temperature",
        Setting::BathTemperatureUncertainty => "--bath-temperature-uncertainty",
        Setting::MPerV => "--m-per-v",
        Setting::ToneFrequency => "--tone-freq",
        Setting::ToneRms => "--tone-rms-m",
        Setting::PmDepth => "--pm-depth",
        Setting::FreqPull => "--freq-pull",
        Setting::SidebandImbalance => "--sideband-imbalance",
        Setting::ImbalanceTones => "--imbalance-tones",
        Setting::PeakThreshold => "--peak-threshold",
        Setting::Carrier => "--carrier",
        Setting::LoSide => "--lo-side",
        Setting::ModeBand => "--mode-band",
        Setting::RmsBand => "--rms-band",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_segment_rule() {
        assert_eq!(default_segment(None), 65536);
        assert_eq!(default_segment(Some(1 << 30)), 65536);
        assert_eq!(default_segment(Some(8 * 65536)), 65536);
        assert_eq!(default_segment(Some(8 * 65536 - 1)), 32768);
        assert_eq!(default_segment(Some(8000)), 512);
        assert_eq!(default_segment(Some(3)), 2);
    }
}
