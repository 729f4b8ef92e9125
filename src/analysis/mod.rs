//! The analysis pipeline: spectrum → calibration → mode fit → quantum references → sidebands →
//! stray peaks → band rms, filling a [`Report`] (the contract types live in [`crate::report`]).
//! Used by `stillpoint analyze`/`track`/`spectrum` and by the window (on every spectrum
//! update, so it is fast: a few ms for 32 769 bins).
//!
//! A value that needs an input that was not given is `null`, and [`Report::notes`] says why.

mod sanitize;
pub mod stream;

pub(crate) use sanitize::sanitize;

use serde::{Deserialize, Serialize};

use crate::dsp::{Spectrum, units};
use crate::physics::calibration::{self, Calibration, CalibrationMethod, ToneOptions, ToneReading};
use crate::physics::fit::{self, FitOptions, ModeFit};
use crate::physics::oscillator::Oscillator;
use crate::physics::peaks::{self, PeakOptions};
use crate::physics::sideband::{self, SidebandOptions};
use crate::physics::{Estimate, PhysicsError, occupancy, quantum};
use crate::report::{
    ModeReport, PeakReport, QuantumReport, Report, RmsReport, SidebandLine, SidebandReport,
    WelchReport,
};

/// Everything `analyze` needs besides the spectrum (the calibration/mode/heterodyne options).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct AnalysisOptions {
    /// `--m-per-v`: a given calibration.
    pub m_per_v: Option<f64>,
    /// `--tone-freq`: calibration tone frequency.
    pub tone_frequency_hz: Option<f64>,
    /// `--tone-rms-m`: the tone's equivalent rms displacement.
    pub tone_rms_m: Option<f64>,
    /// `--pm-depth`: phase-modulation depth β (rad).
    pub pm_depth_rad: Option<f64>,
    /// `--freq-pull`: frequency pull G/2π (Hz/m).
    pub freq_pull_hz_per_m: Option<f64>,
    /// `--bath-temperature`: for equipartition calibration (K).
    pub bath_temperature_k: Option<f64>,
    /// `--mode-band LO:HI` (Hz). With a carrier: band of f_m itself.
    pub mode_band_hz: Option<(f64, f64)>,
    /// `--mass`: effective mass (kg).
    pub mass_kg: Option<f64>,
    /// `--mass-uncertainty`: 1σ of the effective mass (kg); `None`: taken as exact.
    pub mass_uncertainty_kg: Option<f64>,
    /// `--bath-temperature-uncertainty`: 1σ of the bath temperature (K); `None`: exact.
    pub bath_temperature_uncertainty_k: Option<f64>,
    /// `--carrier`: heterodyne intermediate frequency (Hz).
    pub carrier_hz: Option<f64>,
    /// `--lo-side`: true if the local oscillator is above the laser.
    pub lo_above: Option<bool>,
    /// Stray-peak threshold over the floor (dB); default 10 dB when `None`.
    pub peak_threshold_db: Option<f64>,
    /// Heterodyne detection-efficiency ratio η_red/η_blue (given), applied as
    /// R = (A_red/A_blue)/(η_red/η_blue).
    pub sideband_imbalance: Option<f64>,
    /// Two injected tones of equal power (Hz), (beside the red line, beside the blue line):
    /// their power ratio measures η_red/η_blue (used when `sideband_imbalance` is not given).
    pub imbalance_tones_hz: Option<(f64, f64)>,
    /// Peak frequencies (Hz) of a reference snapshot: peaks are marked new or known.
    pub reference_peaks_hz: Vec<f64>,
    /// Fit a linear slope of the background under the mode.
    pub sloped_background: bool,
    /// `--rms-band LO:HI` (Hz): band of the integrated rms (`rms.*`). `None`: the rms over
    /// `mode_band_hz` (with a carrier: over both sideband bands, carrier ± the band).
    pub rms_band_hz: Option<(f64, f64)>,
}

/// Why an analysis could not run at all. Messages name quantities ("the mode band"), never
/// command-line options: the window shows them too. The CLI adds the option's name to a
/// [`AnalysisError::Setting`] (`cli::option_of`).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum AnalysisError {
    /// A physically impossible or inconsistent input (the message names it).
    #[error("{0}")]
    Input(String),
    /// An impossible value or combination of one analysis setting.
    #[error("{message}")]
    Setting {
        /// The setting at fault.
        setting: Setting,
        /// What is wrong, in words.
        message: String,
    },
}

/// An analysis setting, as an error names it: each face says it its own way (the CLI by its
/// option, the window by its field).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum Setting {
    /// [`AnalysisOptions::mass_kg`].
    Mass,
    /// [`AnalysisOptions::mass_uncertainty_kg`].
    MassUncertainty,
    /// [`AnalysisOptions::bath_temperature_k`].
    BathTemperature,
    /// [`AnalysisOptions::bath_temperature_uncertainty_k`].
    BathTemperatureUncertainty,
    /// [`AnalysisOptions::m_per_v`].
    MPerV,
    /// [`AnalysisOptions::tone_frequency_hz`].
    ToneFrequency,
    /// [`AnalysisOptions::tone_rms_m`].
    ToneRms,
    /// [`AnalysisOptions::pm_depth_rad`].
    PmDepth,
    /// [`AnalysisOptions::freq_pull_hz_per_m`].
    FreqPull,
    /// [`AnalysisOptions::sideband_imbalance`].
    SidebandImbalance,
    /// [`AnalysisOptions::imbalance_tones_hz`].
    ImbalanceTones,
    /// [`AnalysisOptions::peak_threshold_db`].
    PeakThreshold,
    /// [`AnalysisOptions::carrier_hz`].
    Carrier,
    /// [`AnalysisOptions::lo_above`].
    LoSide,
    /// [`AnalysisOptions::mode_band_hz`].
    ModeBand,
    /// [`AnalysisOptions::rms_band_hz`].
    RmsBand,
}

impl Setting {
    /// The quantity in words, as messages name it ("the effective mass (kg)").
    pub fn name(self) -> &'static str {
        match self {
            Self::Mass => "the effective mass (kg)",
            Self::MassUncertainty => "the 1σ of the effective mass (kg)",
            Self::BathTemperature => "the bath temperature (K)",
            Self::BathTemperatureUncertainty => "the 1σ of the bath temperature (K)",
            Self::MPerV => "the calibration (m/V)",
            Self::ToneFrequency => "the tone frequency",
            Self::ToneRms => "the tone's rms displacement (m)",
            Self::PmDepth => "the phase-modulation depth (rad)",
            Self::FreqPull => "the frequency pull",
            Self::SidebandImbalance => "the sideband imbalance",
            Self::ImbalanceTones => "the imbalance tones",
            Self::PeakThreshold => "the peak threshold",
            Self::Carrier => "the carrier",
            Self::LoSide => "the LO side",
            Self::ModeBand => "the mode band",
            Self::RmsBand => "the rms band",
        }
    }
}

/// An [`AnalysisError::Setting`] of `setting`.
fn bad(setting: Setting, message: String) -> AnalysisError {
    AnalysisError::Setting { setting, message }
}

/// Runs the whole analysis on one spectrum.
///
/// # Errors
/// [`AnalysisError::Input`] for impossible inputs (negative mass or temperature, a band
/// outside the spectrum or LO ≥ HI, a tone outside the spectrum, `--carrier` without
/// `--lo-side`, a tone without its amplitude options).
/// A mode that is simply not found is *not* an error: its keys are null with a note.
pub fn analyze(spectrum: &Spectrum, options: &AnalysisOptions) -> Result<Report, AnalysisError> {
    analyze_with(spectrum, options, true)
}

/// [`analyze`] without the stray-peak search (the last step: nothing else depends on it;
/// `peaks` is left empty). The window's history intervals use it: a trend point needs the
/// mode, calibration, quantum and sideband results only, and the search is the costliest
/// step on a long spectrum.
///
/// # Errors
/// As [`analyze`].
pub fn analyze_without_peaks(
    spectrum: &Spectrum,
    options: &AnalysisOptions,
) -> Result<Report, AnalysisError> {
    analyze_with(spectrum, options, false)
}

fn analyze_with(
    spectrum: &Spectrum,
    options: &AnalysisOptions,
    with_peaks: bool,
) -> Result<Report, AnalysisError> {
    validate(spectrum, options)?;

    let mut report = Report {
        generator: format!("stillpoint {}", env!("CARGO_PKG_VERSION")),
        welch: WelchReport {
            segment: spectrum.segment,
            window: spectrum.window.name().to_string(),
            overlap: spectrum.overlap,
            averages: spectrum.averages,
            resolution_hz: spectrum.resolution_hz,
            enbw_hz: spectrum.enbw_hz,
            sample_rate_hz: spectrum.sample_rate_hz,
            detrend: spectrum.detrend.name().to_string(),
            k_eff: spectrum.k_eff,
        },
        ..Report::default()
    };
    let notes = &mut report.notes;
    let tone_exclusion = options.tone_frequency_hz.map(|f| {
        let half = (spectrum.window.tone_half_width_bins() + 2) as f64 * spectrum.resolution_hz;
        (
            f - half - 5.0 * spectrum.resolution_hz,
            f + half + 5.0 * spectrum.resolution_hz,
        )
    });
    let heterodyne = options.carrier_hz.is_some();

    // --- Mode fit (direct detection) ---
    let mut mode_fit: Option<ModeFit> = None;
    if let (Some(band), false) = (options.mode_band_hz, heterodyne) {
        let fit_options = FitOptions {
            sloped_background: options.sloped_background,
            exclude_hz: tone_exclusion.into_iter().collect(),
            ..FitOptions::default()
        };
        match fit::fit_mode_with(spectrum, band, &fit_options) {
            Ok(f) => mode_fit = Some(f),
            Err(PhysicsError::Input(m)) => return Err(AnalysisError::Input(m)),
            Err(e) => notes.push(format!("mode: {e}; mode keys are null")),
        }
    } else if !heterodyne {
        notes.push("mode: no --mode-band given; mode and quantum keys are null".into());
    }

    // --- Calibration ---
    let mut cal: Option<Calibration> = None;
    let mut tone_reading: Option<ToneReading> = None;
    if let Some(c) = options.m_per_v {
        cal = Some(calibration::given(c).map_err(input)?);
        if options.tone_frequency_hz.is_some() || options.bath_temperature_k.is_some() {
            notes.push("calibration: --m-per-v given; the tone/equipartition calibration was not used for m/V".into());
        }
    }
    if let Some(f_tone) = options.tone_frequency_hz {
        let baseline = mode_fit.clone();
        let line = move |f: f64| baseline.as_ref().map_or(0.0, |m| m.line_psd_at(f));
        // Heterodyne: the tone is the pair of PM lines at carrier ± f_tone (their summed power).
        let reading = match options.carrier_hz {
            Some(fc) => sideband::read_pm_lines(spectrum, fc, f_tone),
            None => calibration::read_tone(spectrum, f_tone, &ToneOptions::default(), Some(&line)),
        };
        match reading {
            Ok(r) => tone_reading = Some(r),
            Err(PhysicsError::Input(m)) => return Err(AnalysisError::Input(m)),
            Err(e) => notes.push(format!("calibration: {e}")),
        }
    }
    let tone_rms = tone_rms_m(options)?;
    if let (Some(r), Some(x)) = (&tone_reading, tone_rms) {
        report.calibration.tone_rms_m = Some(x);
        if cal.is_none() {
            cal = Some(calibration::from_tone(r, x).map_err(input)?);
        }
    }
    if let Some(t) = options.bath_temperature_k {
        match (&mode_fit, options.mass_kg) {
            (Some(m), Some(mass)) if cal.is_none() => {
                cal = Some(
                    calibration::equipartition(
                        m.area,
                        m.frequency_hz.value,
                        Estimate::new(mass, options.mass_uncertainty_kg.unwrap_or(0.0)),
                        Estimate::new(t, options.bath_temperature_uncertainty_k.unwrap_or(0.0)),
                    )
                    .map_err(input)?,
                );
                if options.mass_uncertainty_kg.is_none()
                    || options.bath_temperature_uncertainty_k.is_none()
                {
                    notes.push("calibration: the m/V uncertainty leaves out the error of the effective mass and/or of the bath temperature (give --mass-uncertainty and --bath-temperature-uncertainty to include them)".into());
                }
                notes.push("calibration: equipartition assumes the mode is thermalised to the bath (no optical or feedback heating/cooling), a linear flat transduction across the peak and an isolated peak; the occupancy then equals the bath occupancy by construction".into());
            }
            (None, _) if cal.is_none() => {
                notes.push("calibration: equipartition needs a fitted mode (--mode-band)".into())
            }
            (_, None) if cal.is_none() => {
                notes.push("calibration: equipartition needs --mass".into());
            }
            _ => {}
        }
    }
    if cal.is_none() {
        notes.push("calibration: none (give --m-per-v, a tone, or --bath-temperature with --mass); calibrated keys are null".into());
    }
    if let Some(r) = &tone_reading {
        report.calibration.tone_frequency_hz = Some(r.frequency_hz);
        report.calibration.tone_power_v2 = Some(r.power.value);
        report.calibration.tone_power_v2_uncertainty = Some(r.power.sigma);
        report.calibration.tone_floor_psd_v2_per_hz = Some(r.floor_psd);
    }
    if let Some(c) = &cal {
        report.calibration.method = Some(c.method.name().to_string());
        report.calibration.m_per_v = Some(c.m_per_v.value);
        report.calibration.m_per_v_uncertainty = Some(c.m_per_v.sigma);
    }
    // g₀ from a phase-modulation tone, the mode area and the bath temperature [G10].
    if let (Some(beta), Some(r), Some(m), Some(t)) = (
        options.pm_depth_rad,
        &tone_reading,
        &mode_fit,
        options.bath_temperature_k,
    ) {
        if let Ok(g) = calibration::g0_hz_at_temperature(
            beta,
            r.frequency_hz,
            m.area,
            r.power,
            m.frequency_hz.value,
            t,
        ) {
            report.calibration.g0_hz = Some(g.value);
            report.calibration.g0_hz_uncertainty = Some(g.sigma);
            notes.push("calibration: g0 assumes the mode is thermalised at --bath-temperature and equal transduction at the tone and the mode".into());
        }
    } else if options.pm_depth_rad.is_some() {
        notes.push("calibration: g0 needs a PM tone, a fitted mode and --bath-temperature".into());
    }

    // --- Mode report ---
    if let Some(m) = &mode_fit {
        fill_mode(&mut report.mode, m, cal.as_ref());
        if m.resolution_limited {
            report.notes.push(match m.linewidth_fit_hz {
                Some(g) => format!(
                    "mode: the line is narrower than the resolution (ENBW {:.4} Hz): fitted convolved with the window's kernel, γ = {:.4} ± {:.4} Hz; linewidth_hz is the upper bound γ + 2σ = {:.4} Hz and Q its lower bound; area, frequency, occupancy and temperature are measured, their σ include the line's own scatter over the record",
                    spectrum.enbw_hz, g.value, g.sigma, m.linewidth_hz.value
                ),
                None => format!(
                    "mode: the line is narrower than the resolution and its width is not measurable: linewidth_hz is the ENBW {:.4} Hz as an upper bound and Q a lower bound; the area's σ is 100 % (a line narrower than 1/T is one draw of its thermal energy)",
                    spectrum.enbw_hz
                ),
            });
        }
    }

    // --- Band rms ---
    report.rms = band_rms(spectrum, options, cal.as_ref());

    // --- Quantum references ---
    fill_quantum(&mut report, mode_fit.as_ref(), cal.as_ref(), options);

    // --- Sidebands ---
    if let (Some(fc), Some(above)) = (options.carrier_hz, options.lo_above) {
        report.sidebands = Some(sidebands(
            spectrum,
            options,
            fc,
            above,
            cal.as_ref(),
            &mut report,
        )?);
    }

    // --- Stray peaks ---
    let mut exclude: Vec<(f64, f64)> = tone_exclusion.into_iter().collect();
    if let (Some(fc), Some((a, b))) = (options.carrier_hz, tone_exclusion) {
        // Heterodyne: the tone's PM lines sit at carrier ± f_tone.
        exclude.push((fc + a, fc + b));
        exclude.push((fc - b, fc - a));
    }
    if let Some(band) = options.mode_band_hz {
        if let Some(fc) = options.carrier_hz {
            exclude.push((fc + band.0, fc + band.1));
            exclude.push((fc - band.1, fc - band.0));
            let half = (spectrum.window.tone_half_width_bins() + 3) as f64 * spectrum.resolution_hz;
            exclude.push((fc - half, fc + half));
        } else {
            exclude.push(band);
        }
    }
    if let Some((a, b)) = options.imbalance_tones_hz {
        let half = (spectrum.window.tone_half_width_bins() + 3) as f64 * spectrum.resolution_hz;
        exclude.push((a - half, a + half));
        exclude.push((b - half, b + half));
    }
    // The fitted mode's wings reach out of its band (a 30 dB line stands 10 dB over the
    // floor five linewidths away): exclude where its Lorentzian wing A·γ/(2πd²) exceeds three
    // times the background, d = √(A γ/(6π B)).
    if let (Some(m), None) = (&mode_fit, options.carrier_hz) {
        let (a, g, b) = (m.area.value, m.linewidth_hz.value, m.background_psd.value);
        if a > 0.0 && g > 0.0 && b > 0.0 {
            let d = (a * g / (6.0 * std::f64::consts::PI * b)).sqrt();
            let f = m.frequency_hz.value;
            if d.is_finite() {
                exclude.push((f - d, f + d));
            }
        }
    }
    let peak_options = PeakOptions {
        threshold_db: options.peak_threshold_db.unwrap_or(10.0),
        exclude_hz: exclude,
        reference_hz: options.reference_peaks_hz.clone(),
        ..PeakOptions::default()
    };
    let found = if with_peaks {
        peaks::find_peaks(spectrum, &peak_options)
    } else {
        Vec::new()
    };
    report.peaks = found
        .into_iter()
        .map(|p| PeakReport {
            frequency_hz: p.frequency_hz,
            height_over_floor_db: p.height_over_floor_db,
            linewidth_hz: p.linewidth_hz,
            new_since_reference: p.new_since_reference,
        })
        .collect();

    sanitize(&mut report);
    Ok(report)
}

/// The `rms.*` section: over `--rms-band`, else over the mode band. With `--carrier` the mode
/// band holds offsets from the carrier, so the rms is over both sideband bands,
/// carrier ± [lo, hi] (bins counted once; `source` = `sideband-bands`).
fn band_rms(
    spectrum: &Spectrum,
    options: &AnalysisOptions,
    cal: Option<&Calibration>,
) -> Option<RmsReport> {
    let (band, source, ranges) = match (options.rms_band_hz, options.mode_band_hz) {
        (Some(b), _) => (
            b,
            "rms-band",
            vec![units::band_bins(spectrum, b.0, b.1).ok()?],
        ),
        (None, Some(b)) => match options.carrier_hz {
            None => (
                b,
                "mode-band",
                vec![units::band_bins(spectrum, b.0, b.1).ok()?],
            ),
            Some(fc) => {
                let lower = units::band_bins(spectrum, (fc - b.1).max(0.0), fc - b.0).ok();
                let upper = units::band_bins(spectrum, fc + b.0, fc + b.1).ok();
                match (lower, upper) {
                    (Some(l), Some(u)) if l.1 >= u.0 => (b, "sideband-bands", vec![(l.0, u.1)]),
                    (l, u) => (
                        b,
                        "sideband-bands",
                        l.into_iter().chain(u).collect::<Vec<_>>(),
                    ),
                }
            }
        },
        _ => return None,
    };
    if ranges.is_empty() {
        return None;
    }
    let mut sum = 0.0;
    let mut bins = 0;
    for (first, last) in ranges {
        let part = spectrum.psd_v2_per_hz.get(first..=last)?;
        sum += part.iter().sum::<f64>();
        bins += part.len();
    }
    let v = (sum * spectrum.resolution_hz).max(0.0).sqrt();
    Some(RmsReport {
        band_hz: [band.0, band.1],
        source: source.to_string(),
        bins,
        v,
        m: cal.map(|c| c.m_per_v.value * v).filter(|m| m.is_finite()),
    })
}

pub(crate) fn input(e: PhysicsError) -> AnalysisError {
    AnalysisError::Input(e.to_string())
}

fn positive(setting: Setting, v: Option<f64>) -> Result<(), AnalysisError> {
    match v {
        Some(x) if !(x.is_finite() && x > 0.0) => Err(bad(
            setting,
            format!(
                "{} must be a positive finite number, got {x}",
                setting.name()
            ),
        )),
        _ => Ok(()),
    }
}

/// Checks the options against the spectrum: the one validation of the analysis settings
/// (the CLI and the window both get these errors).
///
/// # Errors
/// [`AnalysisError::Setting`] naming the setting at fault; [`AnalysisError::Input`] for an
/// unusable spectrum.
pub(crate) fn validate(
    spectrum: &Spectrum,
    options: &AnalysisOptions,
) -> Result<(), AnalysisError> {
    let usable = spectrum.len() >= 2
        && spectrum.resolution_hz.is_finite()
        && spectrum.resolution_hz > 0.0
        && spectrum.enbw_hz.is_finite()
        && spectrum.k_eff.is_finite();
    if !usable {
        return Err(AnalysisError::Input(
            "the spectrum is empty or its resolution is not a positive number".into(),
        ));
    }
    positive(Setting::Mass, options.mass_kg)?;
    positive(Setting::BathTemperature, options.bath_temperature_k)?;
    for (setting, v) in [
        (Setting::MassUncertainty, options.mass_uncertainty_kg),
        (
            Setting::BathTemperatureUncertainty,
            options.bath_temperature_uncertainty_k,
        ),
    ] {
        if let Some(x) = v
            && !(x.is_finite() && x >= 0.0)
        {
            return Err(bad(
                setting,
                format!("{} must be a finite number ≥ 0, got {x}", setting.name()),
            ));
        }
    }
    positive(Setting::MPerV, options.m_per_v)?;
    positive(Setting::ToneRms, options.tone_rms_m)?;
    positive(Setting::PmDepth, options.pm_depth_rad)?;
    positive(Setting::SidebandImbalance, options.sideband_imbalance)?;
    if let Some(g) = options.freq_pull_hz_per_m
        && !(g.is_finite() && g != 0.0)
    {
        return Err(bad(
            Setting::FreqPull,
            format!("the frequency pull must be a non-zero finite number of Hz/m, got {g}"),
        ));
    }
    if let Some(t) = options.peak_threshold_db
        && !t.is_finite()
    {
        return Err(bad(
            Setting::PeakThreshold,
            format!("the peak threshold must be finite, got {t}"),
        ));
    }
    let nyquist = spectrum.resolution_hz * (spectrum.len() - 1) as f64;
    let outside = |what: &str, f: f64| {
        format!(
            "{what} {} Hz lies outside the spectrum (0 to {} Hz)",
            crate::acquire::compact_number(f),
            crate::acquire::compact_number(nyquist)
        )
    };
    if let Some(f) = options.tone_frequency_hz
        && !(f.is_finite() && f > 0.0 && f <= nyquist)
    {
        return Err(bad(
            Setting::ToneFrequency,
            outside("the tone frequency", f),
        ));
    }
    if let Some((red, blue)) = options.imbalance_tones_hz {
        for f in [red, blue] {
            if !(f.is_finite() && f > 0.0 && f <= nyquist) {
                return Err(bad(
                    Setting::ImbalanceTones,
                    outside("the imbalance tone at", f),
                ));
            }
        }
    }
    if options.tone_frequency_hz.is_some()
        && options.tone_rms_m.is_none()
        && (options.pm_depth_rad.is_none() || options.freq_pull_hz_per_m.is_none())
    {
        return Err(bad(
            Setting::ToneRms,
            "a calibration tone needs its rms displacement, or the phase-modulation depth with the frequency pull".into(),
        ));
    }
    if (options.tone_rms_m.is_some() || options.pm_depth_rad.is_some())
        && options.tone_frequency_hz.is_none()
    {
        return Err(bad(
            Setting::ToneFrequency,
            "the tone's rms displacement or phase-modulation depth needs the tone frequency".into(),
        ));
    }
    if options.pm_depth_rad.is_some() != options.freq_pull_hz_per_m.is_some() {
        return Err(bad(
            Setting::PmDepth,
            "the phase-modulation depth and the frequency pull go together".into(),
        ));
    }
    if let Some(fc) = options.carrier_hz {
        if options.lo_above.is_none() {
            return Err(bad(
                Setting::LoSide,
                "a heterodyne carrier needs the LO side (above or below the laser)".into(),
            ));
        }
        if !(fc.is_finite() && fc > 0.0 && fc < nyquist) {
            return Err(bad(Setting::Carrier, outside("the carrier", fc)));
        }
        if options.mode_band_hz.is_none() {
            return Err(bad(
                Setting::ModeBand,
                "a heterodyne carrier needs the mode band (the band of f_m, as offsets from the carrier)".into(),
            ));
        }
    }
    if let Some((lo, hi)) = options.rms_band_hz {
        if !(lo.is_finite() && hi.is_finite() && lo >= 0.0 && lo < hi) {
            return Err(bad(
                Setting::RmsBand,
                format!("the rms band needs 0 ≤ its low edge < its high edge, got {lo} … {hi} Hz"),
            ));
        }
        let half_rate = 0.5 * spectrum.sample_rate_hz;
        if hi > half_rate {
            return Err(bad(
                Setting::RmsBand,
                format!(
                    "the rms band {}:{} Hz reaches above the Nyquist frequency {} Hz",
                    crate::acquire::compact_number(lo),
                    crate::acquire::compact_number(hi),
                    crate::acquire::compact_number(half_rate)
                ),
            ));
        }
        units::band_rms(spectrum, lo, hi)
            .map_err(|e| bad(Setting::RmsBand, format!("the rms band: {e}")))?;
    }
    if let Some((lo, hi)) = options.mode_band_hz {
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(bad(
                Setting::ModeBand,
                format!("the mode band needs its low edge below its high edge, got {lo} … {hi} Hz"),
            ));
        }
        if options.carrier_hz.is_none() {
            fit::band_bins(spectrum, (lo, hi), "the mode band")
                .map_err(|e| bad(Setting::ModeBand, e.to_string()))?;
        }
    }
    Ok(())
}

/// The tone's equivalent rms displacement from `--tone-rms-m` or the PM options.
pub(crate) fn tone_rms_m(options: &AnalysisOptions) -> Result<Option<f64>, AnalysisError> {
    if let Some(x) = options.tone_rms_m {
        return Ok(Some(x));
    }
    match (
        options.tone_frequency_hz,
        options.pm_depth_rad,
        options.freq_pull_hz_per_m,
    ) {
        (Some(f), Some(b), Some(g)) => calibration::pm_tone_rms_m(b, f, g).map(Some).map_err(input),
        _ => Ok(None),
    }
}

/// value·k with σ combining the value's σ and the factor's relative σ.
fn times(x: Estimate, k: Estimate) -> Estimate {
    let v = x.value * k.value;
    let rel = (x.relative().powi(2) + k.relative().powi(2)).sqrt();
    Estimate::new(v, if v == 0.0 { 0.0 } else { v.abs() * rel })
}

pub(crate) fn fill_mode(r: &mut ModeReport, m: &ModeFit, cal: Option<&Calibration>) {
    r.frequency_hz = Some(m.frequency_hz.value);
    r.frequency_hz_uncertainty = Some(m.frequency_hz.sigma);
    r.linewidth_hz = Some(m.linewidth_hz.value);
    r.linewidth_hz_uncertainty = Some(m.linewidth_hz.sigma);
    r.quality_factor = Some(m.quality_factor.value);
    r.quality_factor_uncertainty = Some(m.quality_factor.sigma);
    r.variance_v2 = Some(m.area.value);
    r.variance_v2_uncertainty = Some(m.area.sigma);
    r.peak_psd_v2_per_hz = Some(m.peak_psd.value);
    r.background_psd_v2_per_hz = Some(m.background_psd.value);
    r.fit_band_hz = Some(m.band_hz);
    r.reduced_chi2 = Some(m.reduced_chi2);
    r.damping_rad_s = Some(m.damping_rad_s().value);
    r.line_shape = Some(
        match m.line_shape {
            fit::LineShape::Oscillator => "oscillator",
            fit::LineShape::Lorentzian => "lorentzian",
        }
        .to_string(),
    );
    r.resolution_limited = Some(m.resolution_limited);
    if m.resolution_limited {
        r.linewidth_kernel_fit_hz = m.linewidth_fit_hz.map(|e| e.value);
        r.linewidth_kernel_fit_hz_uncertainty = m.linewidth_fit_hz.map(|e| e.sigma);
    }
    r.error_inflation = Some(m.error_inflation);
    r.bins = Some(m.bins);
    if let Some(c) = cal {
        let c2 = c.m2_per_v2();
        let var = if c.method == CalibrationMethod::Equipartition {
            // ⟨x²⟩ = c² A_V is the bath value by construction (T and m taken as exact).
            Estimate::new(c2.value * m.area.value, 0.0)
        } else {
            times(m.area, c2)
        };
        let peak = times(m.peak_psd, c2);
        let bg = times(m.background_psd, c2);
        r.variance_m2 = Some(var.value);
        r.variance_m2_uncertainty = Some(var.sigma);
        r.peak_psd_m2_per_hz = Some(peak.value);
        r.peak_psd_m2_per_hz_uncertainty = Some(peak.sigma);
        r.background_psd_m2_per_hz = Some(bg.value);
        r.background_psd_m2_per_hz_uncertainty = Some(bg.sigma);
    }
}

pub(crate) fn fill_quantum(
    report: &mut Report,
    mode: Option<&ModeFit>,
    cal: Option<&Calibration>,
    options: &AnalysisOptions,
) {
    let heterodyne = options.carrier_hz.is_some();
    // The inputs, so that a saved report says what its quantum numbers assumed.
    report.quantum.mass_kg = options.mass_kg;
    report.quantum.mass_kg_uncertainty = options.mass_kg.and(options.mass_uncertainty_kg);
    report.quantum.bath_temperature_k = options.bath_temperature_k;
    report.quantum.bath_temperature_k_uncertainty = options
        .bath_temperature_k
        .and(options.bath_temperature_uncertainty_k);
    let Some(mass) = options.mass_kg else {
        report
            .notes
            .push("quantum: needs --mass (effective mass, kg); quantum keys are null".into());
        return;
    };
    let (f_m, gamma) = match mode {
        Some(m) => (m.frequency_hz.value, m.linewidth_hz.value),
        None if heterodyne => return, // filled from the sideband fit
        None => {
            report
                .notes
                .push("quantum: needs a fitted mode; quantum keys are null".into());
            return;
        }
    };
    fill_quantum_levels(
        &mut report.quantum,
        mass,
        f_m,
        gamma,
        options.bath_temperature_k,
    );
    let Some(m) = mode else { return };
    let Some(c) = cal else {
        report.notes.push(
            "quantum: occupancy needs a calibration; occupancy and effective temperature are null"
                .into(),
        );
        return;
    };
    let Ok(osc) = Oscillator::new(mass, f_m, gamma) else {
        return;
    };
    let c2 = c.m2_per_v2();
    let var = if c.method == CalibrationMethod::Equipartition {
        Estimate::new(c2.value * m.area.value, 0.0)
    } else {
        times(m.area, c2)
    };
    let mut n = occupancy::occupancy_from_variance(var, osc.x_zpf_m());
    if c.method == CalibrationMethod::Equipartition {
        // n̄ = n̄_BE(T) by construction: its error is the bath temperature's.
        if let (Some(t), Some(sigma_t)) = (
            options.bath_temperature_k,
            options.bath_temperature_uncertainty_k,
        ) {
            let extra = occupancy::bose_einstein_dn_dt(f_m, t) * sigma_t;
            n = Estimate::new(n.value, n.sigma.hypot(extra));
        }
    } else if let Some(sigma_m) = options.mass_uncertainty_kg {
        // n̄ + ½ = ⟨x²⟩/(2 x_zpf²) ∝ m at a fixed calibrated ⟨x²⟩.
        let extra = (n.value + 0.5) * sigma_m / mass;
        n = Estimate::new(n.value, n.sigma.hypot(extra));
    }
    report.quantum.occupancy = Some(n.value);
    report.quantum.occupancy_uncertainty = Some(n.sigma);
    match occupancy::effective_temperature(f_m, n) {
        Some(t) => {
            report.quantum.effective_temperature_k = Some(t.value);
            report.quantum.effective_temperature_k_uncertainty = Some(t.sigma);
        }
        None => report.notes.push(format!(
            "quantum: occupancy {:.3} ≤ 0 (area below the zero-point level): no effective temperature",
            n.value
        )),
    }
}

fn fill_quantum_levels(
    q: &mut QuantumReport,
    mass: f64,
    f_m: f64,
    gamma: f64,
    bath_k: Option<f64>,
) {
    let Ok(osc) = Oscillator::new(mass, f_m, gamma) else {
        return;
    };
    q.x_zpf_m = Some(osc.x_zpf_m());
    q.zero_point_peak_psd_m2_per_hz = Some(quantum::zero_point_peak_psd(&osc));
    q.sql_psd_at_resonance_m2_per_hz = Some(quantum::sql_psd_at_resonance(&osc));
    if let Some(t) = bath_k {
        q.bath_occupancy = Some(occupancy::bose_einstein(f_m, t));
        q.thermal_peak_psd_at_bath_m2_per_hz = Some(quantum::thermal_peak_psd(&osc, t));
    }
}

fn sidebands(
    spectrum: &Spectrum,
    options: &AnalysisOptions,
    carrier_hz: f64,
    lo_above: bool,
    cal: Option<&Calibration>,
    report: &mut Report,
) -> Result<SidebandReport, AnalysisError> {
    let band = options.mode_band_hz.unwrap_or((0.0, 0.0));
    let imbalance = if let Some(v) = options.sideband_imbalance {
        Estimate::new(v, 0.0)
    } else if let Some((red_tone, blue_tone)) = options.imbalance_tones_hz {
        match sideband::imbalance_from_tones(spectrum, red_tone, blue_tone) {
            Ok(e) => e,
            Err(PhysicsError::Input(m)) => return Err(AnalysisError::Input(m)),
            Err(e) => {
                report.notes.push(format!(
                    "sidebands: imbalance tones not read ({e}); no correction"
                ));
                Estimate::new(1.0, 0.0)
            }
        }
    } else {
        report.notes.push(
            "sidebands: no imbalance correction given; equal detection efficiency of the two sidebands assumed".into(),
        );
        Estimate::new(1.0, 0.0)
    };
    let opts = SidebandOptions {
        carrier_hz,
        band_hz: band,
        lo_above,
        imbalance,
    };
    let mut out = SidebandReport {
        imbalance_correction: Some(1.0 / imbalance.value),
        imbalance_correction_uncertainty: Some(
            imbalance.sigma / (imbalance.value * imbalance.value),
        ),
        ..SidebandReport::default()
    };
    match sideband::fit_sidebands(spectrum, &opts) {
        Ok(f) => {
            let line = |l: &sideband::SidebandLineFit| SidebandLine {
                frequency_hz: Some(l.frequency_hz.value),
                area_v2: Some(l.area.value),
                area_v2_uncertainty: Some(l.area.sigma),
                background_psd_v2_per_hz: Some(l.background_psd.value),
            };
            out.red = line(&f.red);
            out.blue = line(&f.blue);
            out.ratio = Some(f.ratio.value);
            out.ratio_uncertainty = Some(f.ratio.sigma);
            out.occupancy = f.occupancy.map(|n| n.value);
            out.occupancy_uncertainty = f.occupancy.map(|n| n.sigma);
            if !f.resolution_limited {
                out.linewidth_hz = Some(f.linewidth_hz.value);
                out.linewidth_hz_uncertainty = Some(f.linewidth_hz.sigma);
            }
            out.mechanical_frequency_hz = Some(f.mechanical_frequency_hz.value);
            out.mechanical_frequency_hz_uncertainty = Some(f.mechanical_frequency_hz.sigma);
            out.convention = Some(f.convention.clone());
            report.notes.extend(f.notes.iter().cloned());
            // The mode seen through its sidebands: frequency and linewidth.
            let fm = f.mechanical_frequency_hz;
            let g = f.linewidth_hz;
            report.mode.frequency_hz = Some(fm.value);
            report.mode.frequency_hz_uncertainty = Some(fm.sigma);
            if !f.resolution_limited {
                report.mode.linewidth_hz = Some(g.value);
                report.mode.linewidth_hz_uncertainty = Some(g.sigma);
                let q = fm.value / g.value;
                report.mode.quality_factor = Some(q);
                report.mode.quality_factor_uncertainty =
                    Some(q * (fm.relative().powi(2) + g.relative().powi(2)).sqrt());
                report.mode.line_shape = Some("lorentzian".into());
            }
            report.notes.push("mode: heterodyne record: frequency and linewidth from the sideband pair; areas are per sideband (sidebands.*)".into());
            if let Some(mass) = options.mass_kg {
                fill_quantum_levels(
                    &mut report.quantum,
                    mass,
                    fm.value,
                    g.value,
                    options.bath_temperature_k,
                );
                if f.resolution_limited {
                    // The zero-point peak needs the linewidth, which is not measured.
                    report.quantum.zero_point_peak_psd_m2_per_hz = None;
                    report.quantum.sql_psd_at_resonance_m2_per_hz = None;
                    report.quantum.thermal_peak_psd_at_bath_m2_per_hz = None;
                }
                match (cal, report.quantum.x_zpf_m) {
                    (Some(c), Some(x_zpf)) => {
                        // METHODS §4: c²(A_red + A_blue) = x_zpf²(2n̄+1).
                        if let Some(n) =
                            sideband::occupancy_from_areas(f.red.area, f.blue.area, c.m2_per_v2(), x_zpf)
                        {
                            report.quantum.occupancy = Some(n.value);
                            report.quantum.occupancy_uncertainty = Some(n.sigma);
                            if let Some(t) = occupancy::effective_temperature(fm.value, n) {
                                report.quantum.effective_temperature_k = Some(t.value);
                                report.quantum.effective_temperature_k_uncertainty = Some(t.sigma);
                            }
                        }
                        report.notes.push("quantum: heterodyne record: occupancy from the calibrated sideband areas, c²(A_red + A_blue) = x_zpf²(2n+1); sidebands.occupancy is the calibration-free value from their ratio".into());
                    }
                    _ => report.notes.push("quantum: heterodyne record: occupancy from the sideband ratio (sidebands.occupancy); quantum.occupancy needs a calibration (--m-per-v or a PM tone at carrier ± --tone-freq)".into()),
                }
            }
        }
        Err(PhysicsError::Input(m)) => return Err(AnalysisError::Input(m)),
        Err(e) => report
            .notes
            .push(format!("sidebands: {e}; sideband keys are null")),
    }
    if out.convention.is_none() {
        out.convention = Some(if lo_above {
            "LO above the laser: red (Stokes, n+1) = f_IF + f_m".to_string()
        } else {
            "LO below the laser: red (Stokes, n+1) = f_IF − f_m".to_string()
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Averaging, Detrend, WindowKind};

    fn flat(n: usize) -> Spectrum {
        Spectrum {
            sample_rate_hz: 1000.0,
            segment: 2 * (n - 1),
            overlap: 0.5,
            window: WindowKind::Hann,
            detrend: Detrend::Mean,
            averaging: Averaging::Linear,
            averages: 10,
            k_eff: 9.5,
            resolution_hz: 1000.0 / (2 * (n - 1)) as f64,
            enbw_hz: 1.5 * 1000.0 / (2 * (n - 1)) as f64,
            psd_v2_per_hz: vec![1e-6; n],
        }
    }

    #[test]
    fn impossible_inputs_are_refused() {
        let s = flat(513);
        let bad = [
            AnalysisOptions {
                mass_kg: Some(-1.0),
                ..Default::default()
            },
            AnalysisOptions {
                bath_temperature_k: Some(0.0),
                ..Default::default()
            },
            AnalysisOptions {
                mode_band_hz: Some((100.0, 50.0)),
                ..Default::default()
            },
            AnalysisOptions {
                mode_band_hz: Some((100.0, 900.0)),
                ..Default::default()
            },
            AnalysisOptions {
                tone_frequency_hz: Some(700.0),
                tone_rms_m: Some(1e-12),
                ..Default::default()
            },
            AnalysisOptions {
                carrier_hz: Some(200.0),
                mode_band_hz: Some((10.0, 20.0)),
                ..Default::default()
            },
        ];
        for o in bad {
            assert!(
                matches!(
                    analyze(&s, &o),
                    Err(AnalysisError::Input(_) | AnalysisError::Setting { .. })
                ),
                "{o:?}"
            );
        }
        let e = analyze(
            &s,
            &AnalysisOptions {
                carrier_hz: Some(200.0),
                mode_band_hz: Some((10.0, 20.0)),
                ..Default::default()
            },
        )
        .unwrap_err();
        assert_eq!(
            e.to_string(),
            "a heterodyne carrier needs the LO side (above or below the laser)"
        );
        assert!(matches!(
            e,
            AnalysisError::Setting {
                setting: Setting::LoSide,
                ..
            }
        ));
    }

    #[test]
    fn flat_noise_gives_nulls_with_notes() {
        let s = flat(513);
        let r = analyze(
            &s,
            &AnalysisOptions {
                mode_band_hz: Some((100.0, 200.0)),
                mass_kg: Some(1e-12),
                ..Default::default()
            },
        )
        .unwrap();
        assert!(r.mode.frequency_hz.is_none());
        assert!(
            r.notes.iter().any(|n| n.starts_with("mode:")),
            "{:?}",
            r.notes
        );
        assert!(r.quantum.x_zpf_m.is_none());
        let json = serde_json::to_string(&r).unwrap();
        assert!(!json.contains("NaN") && !json.contains("Infinity"));
    }
}
