//! The command-line grammar (BRIEF.md "Command-line contract"), as clap derive structs.
//!
//! Only parsing and per-value checks live here; cross-option checks and the conversion into
//! library configurations are in [`super::config`].

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand, ValueEnum};

use crate::acquire::{Endian, SampleFormat};
use crate::dsp::{Detrend, WindowKind};

/// Default segment length when the record length is not known in advance (samples).
pub(crate) const DEFAULT_SEGMENT: usize = crate::dsp::DEFAULT_SEGMENT;

const LONG_ABOUT: &str = "\
stillpoint turns a photodetector voltage (a live stream or a recording) into a calibrated \
displacement spectral density of a mechanical resonator, fits the mode, and compares it with \
the zero-point and standard-quantum-limit references.

All spectral densities are single-sided in ordinary frequency (the integral over 0..inf Hz \
is the variance). Without a subcommand the window opens on the built-in demo stream.";

const EXAMPLES: &str = "\
Examples:
  stillpoint                                        window on the built-in demo cooldown
  stillpoint monitor run.wav                        window on a recording
  stillpoint spectrum run.wav --segment 65536 -o run.csv
  stillpoint spectrum adc.bin --sample-format i16 --endian big --channels 2 --channel 1 \\
      --rate 2e6 --volts-per-unit 3.05e-5 -o adc.csv
  my-daq --stream | stillpoint spectrum - --sample-format f32 --rate 1e6 \\
      --averages 200 -o live.csv
  stillpoint spectrum tcp://192.168.1.20:5000 --sample-format i16 --rate 2e6 --averages 500 \\
      --m-per-v 2e-9 -o live.csv
  stillpoint analyze run.wav --mode-band 0.99e6:1.01e6 --mass 1e-13 --bath-temperature 4 -o run.json
  stillpoint analyze het.wav --carrier 5e6 --lo-side above --mode-band 0.99e6:1.01e6 \\
      --tone-freq 1.05e6 --pm-depth 1e-3 --freq-pull 1e18 --mass 1e-13 -o het.json
  stillpoint track cooldown.wav --every 0.5 --mode-band 85.5e3:86.7e3 --m-per-v 2e-9 \\
      --mass 2e-12 -o trend.csv --waterfall wf.npy
  stillpoint synth cooldown --duration 10 -o demo.wav
  stillpoint bench --rate 10e6 --segment 1048576

Exit status: 0 success, 1 a runtime failure (I/O while running), 2 bad options or bad input.";

/// `stillpoint`: calibrated displacement spectra, mode fits and quantum references.
#[derive(Debug, Parser)]
#[command(
    name = "stillpoint",
    version,
    about = "Calibrated displacement spectra, mode fits and quantum references for mechanical \
             resonators near their ground state",
    long_about = LONG_ABOUT,
    after_long_help = EXAMPLES,
    propagate_version = true
)]
pub struct Cli {
    /// What to do; none opens the window on the built-in demo stream.
    #[command(subcommand)]
    pub command: Option<Command>,
    /// Window options for the demo (plain `stillpoint`).
    #[command(flatten)]
    pub window: WindowOptions,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Open the window on SOURCE (live spectrum, fit, waterfall, trends).
    #[command(after_long_help = EXAMPLES)]
    Monitor(MonitorArgs),
    /// Welch PSD of SOURCE, written as CSV (frequency_hz, psd_v2_per_hz[, psd_m2_per_hz]).
    #[command(
        long_about = "Welch PSD of SOURCE, written as CSV with a header row and one row per \
                      bin from DC to Nyquist inclusive: frequency_hz, psd_v2_per_hz and, when \
                      a calibration is given, psd_m2_per_hz. Numbers are written in the \
                      shortest form that reads back to the same double. The recording is \
                      read as fast as possible (no real-time pacing).",
        after_long_help = EXAMPLES
    )]
    Spectrum(SpectrumArgs),
    /// Spectrum → calibration → mode fit → quantum references → sidebands → stray peaks, as JSON.
    #[command(
        long_about = "Computes the Welch PSD of SOURCE, calibrates it (given m/V, a tone of \
                      known displacement, a phase-modulation tone, or equipartition at a known \
                      bath temperature), fits the mechanical mode, derives x_zpf, the \
                      occupancy, the effective temperature, the zero-point and SQL levels, \
                      sideband-asymmetry thermometry (heterodyne) and a list of stray \
                      resonances, and writes them as pretty JSON. A short summary goes to \
                      stdout, notes and warnings to stderr.",
        after_long_help = EXAMPLES
    )]
    Analyze(AnalyzeArgs),
    /// Write an invented detector-voltage record of a named scenario as WAV (+ truth sidecar).
    #[command(long_about = synth_long_about(), after_long_help = EXAMPLES)]
    Synth(SynthArgs),
    /// Can this machine keep up with a given sample rate and segment length?
    #[command(
        long_about = "Measures the sustained Welch throughput (mega-samples per second) for \
                      the given segment, window and overlap, compares it with the requested \
                      sample rate (headroom = throughput / rate; it keeps up when headroom > \
                      1), and with the FFT-only floor (the same FFTs with no windowing, \
                      detrending or averaging). Figures are medians of several runs. Then \
                      (--live, default both) it streams raw f32 samples from a generator \
                      process through a pipe and over loopback TCP into the same path \
                      `spectrum` uses: once as fast as it goes, once paced at --rate like a \
                      digitiser with a 50 ms FIFO, counting samples lost at the source and \
                      blocks dropped.",
        after_long_help = EXAMPLES
    )]
    Bench(BenchArgs),
    /// Time-resolved analysis: one row of fits per interval of --every seconds, as CSV.
    #[command(
        long_about = "Cuts SOURCE into consecutive intervals of --every seconds of samples \
                      and analyses each one on its own exactly as `analyze` would analyse that \
                      stretch (its own Welch average, calibration and mode fit), writing one \
                      CSV row per interval (columns in the order of the contract; an empty cell \
                      is a value that could not be computed, `status` says why). The mode band \
                      follows the fitted mode from interval to interval unless --fixed-band. \
                      A recording is written atomically at the end; a live source (stdin, TCP, \
                      --follow) writes and flushes each row as its interval completes. \
                      --waterfall writes each interval's PSD as a float32 .npy plus a .json of \
                      its axes.",
        after_long_help = EXAMPLES
    )]
    Track(TrackArgs),
}

/// Raw sample layout (`--sample-format`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SampleFormatArg {
    /// signed 16-bit integer
    I16,
    /// signed 24-bit integer, 3 bytes
    I24,
    /// signed 32-bit integer
    I32,
    /// IEEE 754 binary32 float
    F32,
    /// IEEE 754 binary64 float
    F64,
}

impl From<SampleFormatArg> for SampleFormat {
    fn from(value: SampleFormatArg) -> Self {
        match value {
            SampleFormatArg::I16 => Self::I16,
            SampleFormatArg::I24 => Self::I24,
            SampleFormatArg::I32 => Self::I32,
            SampleFormatArg::F32 => Self::F32,
            SampleFormatArg::F64 => Self::F64,
        }
    }
}

/// Raw byte order (`--endian`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum EndianArg {
    /// least significant byte first
    Little,
    /// most significant byte first
    Big,
}

impl From<EndianArg> for Endian {
    fn from(value: EndianArg) -> Self {
        match value {
            EndianArg::Little => Self::Little,
            EndianArg::Big => Self::Big,
        }
    }
}

/// Window (`--window`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum WindowArg {
    /// rectangular (NENBW 1.00 bin)
    Rect,
    /// Hann (NENBW 1.50 bins)
    Hann,
    /// Hamming (NENBW 1.36 bins)
    Hamming,
    /// 4-term Blackman-Harris, -92 dB sidelobes (NENBW 2.00 bins)
    BlackmanHarris,
    /// flat-top HFT95, amplitude error <= 0.0044 dB (NENBW 3.81 bins)
    Flattop,
}

impl From<WindowArg> for WindowKind {
    fn from(value: WindowArg) -> Self {
        match value {
            WindowArg::Rect => Self::Rectangular,
            WindowArg::Hann => Self::Hann,
            WindowArg::Hamming => Self::Hamming,
            WindowArg::BlackmanHarris => Self::BlackmanHarris,
            WindowArg::Flattop => Self::FlatTop,
        }
    }
}

/// Detrending (`--detrend`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum DetrendArg {
    /// nothing removed
    None,
    /// segment mean removed before windowing
    Mean,
    /// least-squares line removed before windowing
    Linear,
}

impl From<DetrendArg> for Detrend {
    fn from(value: DetrendArg) -> Self {
        match value {
            DetrendArg::None => Self::None,
            DetrendArg::Mean => Self::Mean,
            DetrendArg::Linear => Self::Linear,
        }
    }
}

/// How segment periodograms are combined (`--averaging`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum AveragingArg {
    /// arithmetic mean of the segment powers (Welch)
    Mean,
    /// bin-wise median, bias-corrected as scipy's average='median'
    Median,
    /// bin-wise maximum (transients; not a noise PSD)
    MaxHold,
    /// running exponential average with time constant --time-constant (live watching)
    Exponential,
}

/// Local-oscillator side of a heterodyne detection (`--lo-side`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum LoSideArg {
    /// LO frequency above the laser
    Above,
    /// LO frequency below the laser
    Below,
}

/// Sample format of a synthesised WAV (`synth --format`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum WavFormatArg {
    /// 16-bit integer PCM, full scale ±1 V
    I16,
    /// 24-bit integer PCM, full scale ±1 V
    I24,
    /// 32-bit float, volts as written
    F32,
}

/// Source options shared by every command that reads samples.
#[derive(Debug, Clone, Args)]
#[command(next_help_heading = "Source")]
pub struct SourceArgs {
    /// The samples: a path (.wav read as WAV, .npy as a NumPy array, .h5/.hdf5 as HDF5 with
    /// --dataset, anything else as raw binary), `-` for raw samples on stdin, or
    /// tcp://HOST:PORT for raw samples over TCP.
    #[arg(value_name = "SOURCE")]
    pub source: String,

    /// Raw sample layout (required for raw sources; ignored for WAV).
    #[arg(long, value_enum, value_name = "FORMAT")]
    pub sample_format: Option<SampleFormatArg>,

    /// Raw byte order.
    #[arg(long, value_enum, default_value = "little", value_name = "ORDER")]
    pub endian: EndianArg,

    /// Interleaved channels in a raw stream (WAV: taken from the header).
    #[arg(long, default_value_t = 1, value_name = "N",
          value_parser = clap::value_parser!(u32).range(1..=65535))]
    pub channels: u32,

    /// Channel to analyse, 0-based.
    #[arg(long, default_value_t = 0, value_name = "K")]
    pub channel: u32,

    /// Sample rate in Hz (required for raw sources; overrides the WAV header when given).
    #[arg(long, value_name = "HZ", value_parser = parse_positive)]
    pub rate: Option<f64>,

    /// Volts per unit: WAV integers of b bits are first divided by 2^(b-1) (full scale ±1),
    /// raw integers are not (volts = count × V), floats are multiplied by V.
    #[arg(long, default_value_t = 1.0, value_name = "V", value_parser = parse_nonzero_finite)]
    pub volts_per_unit: f64,

    /// Keep reading as the file grows (a recording still being written); headless commands
    /// then need --averages to know when to stop.
    #[arg(long)]
    pub follow: bool,

    /// Live sources (stdin, TCP, a pipe, --follow): give up after this many seconds without
    /// a sample and write what was averaged so far (0: wait forever). A stall is reported on
    /// stderr every 10 s before that.
    #[arg(long, default_value_t = 60.0, value_name = "SECS", value_parser = parse_non_negative)]
    pub stall_timeout: f64,
    /// HDF5 source: the dataset to read, /GROUP/NAME (1-D, or 2-D [samples, channels]).
    /// The rate is --rate, else the dataset's sample_rate_hz, fs or rate attribute.
    #[arg(long, value_name = "/PATH")]
    pub dataset: Option<String>,
    /// A second channel J (0-based, called b) of the same interleaved source, read in the
    /// same pass as --channel K (called a): `spectrum` adds channel b's PSD, the
    /// cross-spectral density and the coherence; `analyze` fits the mode on Re P_ab
    /// (spectrum and analyze only; mean averaging).
    #[arg(long, value_name = "J")]
    pub cross_channel: Option<u32>,
}

/// Welch averager options.
#[derive(Debug, Clone, Args)]
#[command(next_help_heading = "Welch averager")]
pub struct WelchArgs {
    /// Segment length in samples (FFT size; resolution = rate / N). Default: 65536, or the
    /// largest power of two not above record length / 8 for a shorter recording of known
    /// length.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..))]
    pub segment: Option<u64>,

    /// Overlap of consecutive segments as a fraction, 0 <= F < 1 (hop = N - round(F·N)).
    #[arg(long, default_value_t = 0.5, value_name = "F", value_parser = parse_overlap)]
    pub overlap: f64,

    /// Window applied to each segment.
    #[arg(long, value_enum, default_value = "hann", value_name = "WINDOW")]
    pub window: WindowArg,

    /// Trend removed from each segment before windowing.
    #[arg(long, value_enum, default_value = "mean", value_name = "TREND")]
    pub detrend: DetrendArg,

    /// Use at most K segments (default: all segments of the record).
    #[arg(long, value_name = "K", value_parser = clap::value_parser!(u64).range(1..))]
    pub averages: Option<u64>,

    /// How segment periodograms are combined.
    #[arg(long, value_enum, default_value = "mean", value_name = "HOW")]
    pub averaging: AveragingArg,

    /// Time constant of --averaging exponential, in segments (>= 1).
    #[arg(long, default_value_t = 16.0, value_name = "SEGMENTS", value_parser = parse_at_least_one)]
    pub time_constant: f64,
}

/// Ids of the Welch options (to tell which ones were given on the command line).
pub(crate) const WELCH_IDS: &[&str] = &[
    "segment",
    "overlap",
    "window",
    "detrend",
    "averages",
    "averaging",
    "time_constant",
];

/// Ids of the calibration, mode and heterodyne options.
pub(crate) const ANALYSIS_IDS: &[&str] = &[
    "m_per_v",
    "tone_freq",
    "tone_rms_m",
    "pm_depth",
    "freq_pull",
    "bath_temperature",
    "bath_temperature_uncertainty",
    "mode_band",
    "mass",
    "mass_uncertainty",
    "carrier",
    "lo_side",
    "sloped_background",
    "sideband_imbalance",
    "imbalance_tones",
];

/// Calibration and mode options (volts → metres).
#[derive(Debug, Clone, Default, Args)]
#[command(next_help_heading = "Calibration and mode")]
pub struct CalibrationArgs {
    /// Given calibration in metres per volt (m/V).
    #[arg(long, value_name = "X", value_parser = parse_positive,
          conflicts_with_all = ["tone_freq", "tone_rms_m", "pm_depth", "freq_pull", "bath_temperature"])]
    pub m_per_v: Option<f64>,

    /// Frequency of the calibration tone in Hz (with --tone-rms-m, or --pm-depth and
    /// --freq-pull).
    #[arg(long, value_name = "HZ", value_parser = parse_positive)]
    pub tone_freq: Option<f64>,

    /// Equivalent rms displacement of the calibration tone in metres.
    #[arg(long, value_name = "X", value_parser = parse_positive, requires = "tone_freq",
          conflicts_with_all = ["pm_depth", "freq_pull"])]
    pub tone_rms_m: Option<f64>,

    /// Phase-modulation depth β of the tone in radians (with --freq-pull).
    #[arg(long, value_name = "RAD", value_parser = parse_positive,
          requires_all = ["tone_freq", "freq_pull"])]
    pub pm_depth: Option<f64>,

    /// Frequency pull G/2π of the cavity in Hz per metre (with --pm-depth). A signed G
    /// (often quoted negative) is accepted: only |G| enters the calibration; 0 is refused.
    #[arg(long, value_name = "HZ_PER_M", value_parser = parse_nonzero_finite,
          allow_negative_numbers = true, requires_all = ["tone_freq", "pm_depth"])]
    pub freq_pull: Option<f64>,

    /// Bath temperature in kelvin: calibrates by equipartition on the mode (needs
    /// --mode-band and --mass).
    #[arg(long, value_name = "K", value_parser = parse_positive)]
    pub bath_temperature: Option<f64>,

    /// Band in Hz that contains the mechanical mode, LO:HI (with --carrier: band of the
    /// mechanical frequency itself, not of the sideband positions).
    #[arg(long, value_name = "LO:HI", value_parser = parse_band)]
    pub mode_band: Option<(f64, f64)>,

    /// Effective mass of the mode in kg (1 pg = 1e-15 kg, 1 fg = 1e-18 kg).
    #[arg(long, value_name = "KG", value_parser = parse_positive)]
    pub mass: Option<f64>,

    /// 1σ uncertainty of the effective mass in kg: included in the m/V uncertainty of an
    /// equipartition calibration and in the occupancy uncertainty otherwise (default: the
    /// mass is taken as exact).
    #[arg(long, value_name = "KG", value_parser = parse_non_negative, requires = "mass")]
    pub mass_uncertainty: Option<f64>,

    /// 1σ uncertainty of the bath temperature in kelvin: included in the m/V and occupancy
    /// uncertainties of an equipartition calibration (default: taken as exact).
    #[arg(long, value_name = "K", value_parser = parse_non_negative,
          requires = "bath_temperature")]
    pub bath_temperature_uncertainty: Option<f64>,

    /// Fit a linear slope of the background under the mode (default: flat background).
    #[arg(long)]
    pub sloped_background: bool,
}

/// Heterodyne (sideband-asymmetry) options.
#[derive(Debug, Clone, Default, Args)]
#[command(next_help_heading = "Heterodyne")]
pub struct HeterodyneArgs {
    /// Intermediate (carrier) frequency in Hz; motional sidebands at carrier ± f_m.
    #[arg(long, value_name = "HZ", value_parser = parse_positive, requires = "lo_side")]
    pub carrier: Option<f64>,

    /// Is the local oscillator above or below the laser? Decides which electronic sideband
    /// is the optical red (Stokes) one, carrying n+1. Required with --carrier.
    #[arg(long, value_enum, value_name = "SIDE", requires = "carrier")]
    pub lo_side: Option<LoSideArg>,

    /// Detection-efficiency ratio η_red/η_blue of the two sidebands (given); the ratio is
    /// corrected as R = (A_red/A_blue)/(η_red/η_blue). Default: 1, or from --imbalance-tones.
    #[arg(long, value_name = "RATIO", value_parser = parse_positive, requires = "carrier",
          conflicts_with = "imbalance_tones")]
    pub sideband_imbalance: Option<f64>,

    /// Two injected tones of equal power, RED_HZ:BLUE_HZ (beside the red and the blue
    /// line, electronic frequencies in Hz): their power ratio measures η_red/η_blue.
    #[arg(long, value_name = "RED_HZ:BLUE_HZ", value_parser = parse_pair, requires = "carrier")]
    pub imbalance_tones: Option<(f64, f64)>,
}

/// `stillpoint monitor`.
#[derive(Debug, Clone, Args)]
pub struct MonitorArgs {
    /// Source options.
    #[command(flatten)]
    pub source: SourceArgs,
    /// Welch options.
    #[command(flatten)]
    pub welch: WelchArgs,
    /// Calibration options.
    #[command(flatten)]
    pub calibration: CalibrationArgs,
    /// Heterodyne options.
    #[command(flatten)]
    pub heterodyne: HeterodyneArgs,
    /// Playback speed of a recording relative to real time (1 = real time; default: the
    /// remembered speed, else 1).
    #[arg(long, value_name = "FACTOR", value_parser = parse_positive, help_heading = "Source")]
    pub speed: Option<f64>,
    /// Window options.
    #[command(flatten)]
    pub window: WindowOptions,
}

/// Options of the window itself (also accepted by plain `stillpoint`).
#[derive(Debug, Clone, Default, Args)]
#[command(next_help_heading = "Window")]
pub struct WindowOptions {
    /// Save a PNG picture of the window to PATH after --screenshot-after seconds, then quit.
    #[arg(long, value_name = "PATH")]
    pub screenshot: Option<PathBuf>,
    /// Seconds to run before --screenshot is taken.
    #[arg(long, default_value_t = 12.0, value_name = "SECS", value_parser = parse_positive)]
    pub screenshot_after: f64,
    /// Start from default settings instead of the ones remembered from the last session.
    #[arg(long)]
    pub fresh_settings: bool,
}

/// `stillpoint spectrum`.
#[derive(Debug, Clone, Args)]
pub struct SpectrumArgs {
    /// Source options.
    #[command(flatten)]
    pub source: SourceArgs,
    /// Welch options.
    #[command(flatten)]
    pub welch: WelchArgs,
    /// Calibration options (adds the psd_m2_per_hz column).
    #[command(flatten)]
    pub calibration: CalibrationArgs,
    /// Add the column cumulative_rms_v (and cumulative_rms_m when calibrated) after the
    /// others: √(Σ_{j ≤ k} PSD_j Δf), the rms of everything at and below each bin's
    /// frequency (DC bin included), rising to the total rms at Nyquist.
    #[arg(long, help_heading = "Output")]
    pub cumulative_rms: bool,
    /// Output CSV file (`-` for stdout). Written atomically: an existing file is replaced
    /// only by a complete, successful result.
    #[arg(short, long, value_name = "OUT.csv", help_heading = "Output")]
    pub output: PathBuf,
}

/// `stillpoint analyze`.
#[derive(Debug, Clone, Args)]
pub struct AnalyzeArgs {
    /// Source options.
    #[command(flatten)]
    pub source: SourceArgs,
    /// Welch options.
    #[command(flatten)]
    pub welch: WelchArgs,
    /// Calibration options.
    #[command(flatten)]
    pub calibration: CalibrationArgs,
    /// Heterodyne options.
    #[command(flatten)]
    pub heterodyne: HeterodyneArgs,
    /// Integrated rms over the band LO:HI in Hz (0 <= LO < HI <= Nyquist): rms.v =
    /// √(Σ PSD_k Δf) over the bins whose frequency lies in the band, in V, and rms.m in m when
    /// calibrated. Without it, rms.* is over --mode-band (with --carrier: over both sideband
    /// bands, carrier ± the band).
    #[arg(long, value_name = "LO:HI", value_parser = parse_band, help_heading = "Band rms")]
    pub rms_band: Option<(f64, f64)>,
    /// Stray-peak threshold: height over the robust noise floor in dB (default 10 dB).
    #[arg(long, value_name = "DB", value_parser = parse_positive, help_heading = "Stray peaks")]
    pub peak_threshold: Option<f64>,
    /// Known peak frequencies in Hz, comma separated: each stray peak found is then marked
    /// new or known (new_since_reference).
    #[arg(long, value_name = "HZ,HZ,...", value_delimiter = ',', value_parser = parse_positive,
          help_heading = "Stray peaks")]
    pub reference_peaks: Vec<f64>,
    /// An earlier `analyze` report (JSON) whose peaks[] are the reference list.
    #[arg(long, value_name = "OLD.json", help_heading = "Stray peaks")]
    pub reference: Option<PathBuf>,
    /// Do not print the summary on stdout.
    #[arg(short, long, help_heading = "Output")]
    pub quiet: bool,
    /// Output JSON file (`-` for stdout). Written atomically.
    #[arg(short, long, value_name = "OUT.json", help_heading = "Output")]
    pub output: PathBuf,
    /// Also write a log-log figure of the calibrated spectrum with the fit, zero-point, SQL
    /// and thermal curves and a caption box (f_m, γ, Q, n̄ ± σ), as SVG or PNG (by extension).
    #[arg(long, value_name = "OUT.svg|OUT.png", help_heading = "Output")]
    pub figure: Option<PathBuf>,
    /// Size of --figure: one journal column (3.4 in, 7 pt text) or a 16:9 slide.
    #[arg(
        long,
        value_enum,
        default_value = "column",
        value_name = "SIZE",
        requires = "figure",
        help_heading = "Output"
    )]
    pub figure_size: FigureSizeArg,
    /// Frequency range of --figure in Hz, LO:HI (default: around the fitted mode, else the
    /// whole span).
    #[arg(long, value_name = "LO:HI", value_parser = parse_band, requires = "figure",
          help_heading = "Output")]
    pub figure_band: Option<(f64, f64)>,
}

/// Size of an `analyze --figure` (`--figure-size`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FigureSizeArg {
    /// 3.4 in × 2.6 in, 7 pt text (PNG 2040 × 1560 px)
    Column,
    /// 10 in × 5.625 in, 16 pt text (PNG 1920 × 1080 px)
    Slide,
}

/// `stillpoint track`.
#[derive(Debug, Clone, Args)]
pub struct TrackArgs {
    /// Source options.
    #[command(flatten)]
    pub source: SourceArgs,
    /// Welch options (per interval; the default segment is chosen for one interval).
    #[command(flatten)]
    pub welch: WelchArgs,
    /// Calibration options.
    #[command(flatten)]
    pub calibration: CalibrationArgs,
    /// Heterodyne options.
    #[command(flatten)]
    pub heterodyne: HeterodyneArgs,
    /// Length of each interval in seconds of samples (round(SECS × rate) samples).
    #[arg(long, value_name = "SECS", value_parser = parse_positive, help_heading = "Intervals")]
    pub every: f64,
    /// Stop after this many seconds of samples.
    #[arg(long, value_name = "SECS", value_parser = parse_positive, help_heading = "Intervals")]
    pub duration: Option<f64>,
    /// Keep --mode-band where it is (default: the band follows the fitted mode, same width).
    #[arg(long, help_heading = "Intervals")]
    pub fixed_band: bool,
    /// Waterfall of the interval PSDs as a NumPy .npy (float32, [intervals, bins]), with
    /// OUT.json (frequency_hz, t_start_s, t_end_s, unit) beside it.
    #[arg(long, value_name = "OUT.npy", help_heading = "Output")]
    pub waterfall: Option<PathBuf>,
    /// Band of the waterfall in Hz, LO:HI (default: DC to Nyquist).
    #[arg(long, value_name = "LO:HI", value_parser = parse_band, requires = "waterfall",
          help_heading = "Output")]
    pub waterfall_band: Option<(f64, f64)>,
    /// Output CSV file, one row per interval.
    #[arg(short, long, value_name = "OUT.csv", help_heading = "Output")]
    pub output: PathBuf,
}

/// `stillpoint synth`.
#[derive(Debug, Clone, Args)]
pub struct SynthArgs {
    /// Scenario name (listed in `stillpoint synth --help`).
    #[arg(value_name = "SCENARIO")]
    pub scenario: String,
    /// Seed of the random-number generator (same seed, same record).
    #[arg(long, value_name = "SEED")]
    pub seed: Option<u64>,
    /// Length of the record in seconds (default: the scenario's own).
    #[arg(long, value_name = "SECS", value_parser = parse_positive)]
    pub duration: Option<f64>,
    /// Sample rate in Hz, an integer for WAV (default: the scenario's own).
    #[arg(long, value_name = "HZ", value_parser = parse_positive)]
    pub rate: Option<f64>,
    /// WAV sample format (default: the scenario's own, i16).
    #[arg(long, value_enum, value_name = "FORMAT")]
    pub format: Option<WavFormatArg>,
    /// Change one scenario parameter, e.g. `--set temperature_k=4` (repeatable; an unknown
    /// name lists the scenario's parameters with their units).
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Output WAV file; the truth sidecar is written next to it as OUT.truth.json. Both are
    /// written atomically.
    #[arg(short, long, value_name = "OUT.wav", help_heading = "Output")]
    pub output: PathBuf,
}

/// Long help of `synth`: the scenarios this build knows.
pub(crate) fn synth_long_about() -> String {
    let mut text = String::from(
        "Writes an invented detector-voltage record of a named scenario as WAV, and beside it \
         a .truth.json sidecar with every true value (mode frequency, linewidth, area, \
         occupancy, calibration, lines). Nothing is real data; the same seed gives the same \
         file.\n\nScenarios:",
    );
    for (name, help) in crate::synth::SCENARIO_HELP {
        text.push_str(&format!("\n  {name:<12} {help}"));
    }
    text
}

/// `stillpoint bench`.
#[derive(Debug, Clone, Args)]
pub struct BenchArgs {
    /// Sample rate to keep up with, in Hz.
    #[arg(long, default_value_t = 1.0e6, value_name = "HZ", value_parser = parse_positive)]
    pub rate: f64,
    /// Segment length in samples.
    #[arg(long, default_value_t = DEFAULT_SEGMENT as u64, value_name = "N",
          value_parser = clap::value_parser!(u64).range(2..))]
    pub segment: u64,
    /// Window.
    #[arg(long, value_enum, default_value = "hann", value_name = "WINDOW")]
    pub window: WindowArg,
    /// Overlap fraction, 0 <= F < 1.
    #[arg(long, default_value_t = 0.5, value_name = "F", value_parser = parse_overlap)]
    pub overlap: f64,
    /// Seconds of measurement in total (split over several runs; the median is quoted).
    #[arg(long, default_value_t = 3.0, value_name = "S", value_parser = parse_positive)]
    pub seconds: f64,
    /// Worker threads of the averager (default: one per core, as spectrum/analyze use).
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..=64))]
    pub threads: Option<u64>,
    /// Also measure the whole live path (raw f32 from a generator process through a pipe,
    /// as `stillpoint spectrum -` reads it, and/or loopback TCP): as fast as it goes, and
    /// paced at --rate with a 50 ms FIFO at the source, counting lost samples.
    #[arg(long, value_enum, default_value = "both", value_name = "WHICH")]
    pub live: LiveChoice,
    /// Channels: 1, or 2 for two interleaved channels averaged with their cross-spectrum
    /// (as `--cross-channel 1` reads them); --rate is then the rate of each channel.
    #[arg(long, default_value_t = 1, value_name = "N",
          value_parser = clap::value_parser!(u64).range(1..=2))]
    pub channels: u64,
    /// Internal: be the generator process of another `stillpoint bench` (raw little-endian
    /// f32 to stdout, or to the first client of a loopback TCP listener whose port is
    /// printed on stdout first) for --seconds.
    #[arg(long, value_enum, hide = true)]
    pub emit: Option<LiveTransport>,
    /// Internal, with --emit: pace at --rate like a digitiser with a 50 ms FIFO, counting
    /// the samples it loses; without it, as fast as possible.
    #[arg(long, hide = true, requires = "emit")]
    pub emit_paced: bool,
    /// Print machine-readable JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Which live paths `stillpoint bench` measures (`--live`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum LiveChoice {
    /// the averager alone
    None,
    /// a pipe (standard input of `spectrum -`)
    Pipe,
    /// loopback TCP
    Tcp,
    /// pipe and TCP
    Both,
}

/// The byte stream of the bench generator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum LiveTransport {
    /// standard output
    Pipe,
    /// a loopback TCP listener (its port is printed on standard output first)
    Tcp,
}

/// A number in SI or plain notation (`1e6`, `250000`, `2.5e-3`).
fn parse_number(text: &str) -> Result<f64, String> {
    let value: f64 = text
        .trim()
        .parse()
        .map_err(|_| format!("`{text}` is not a number"))?;
    if value.is_finite() {
        Ok(value)
    } else {
        Err(format!("`{text}` is not a finite number"))
    }
}

/// A finite number that `accept` takes; else the error `RULE, got TEXT`.
fn parse_where(text: &str, accept: impl Fn(f64) -> bool, rule: &str) -> Result<f64, String> {
    let value = parse_number(text)?;
    if accept(value) {
        Ok(value)
    } else {
        Err(format!("{rule}, got {text}"))
    }
}

/// A finite number > 0.
fn parse_positive(text: &str) -> Result<f64, String> {
    parse_where(text, |v| v > 0.0, "must be greater than 0")
}

/// A finite number ≥ 0.
fn parse_non_negative(text: &str) -> Result<f64, String> {
    parse_where(text, |v| v >= 0.0, "must be 0 or more")
}

/// A finite number ≥ 1.
fn parse_at_least_one(text: &str) -> Result<f64, String> {
    parse_where(text, |v| v >= 1.0, "must be at least 1")
}

/// A finite number ≠ 0 (volts per unit may be negative: an inverting amplifier; the
/// frequency pull G may be quoted signed).
fn parse_nonzero_finite(text: &str) -> Result<f64, String> {
    parse_number(text).and_then(|v| {
        if v != 0.0 {
            Ok(v)
        } else {
            Err("must not be 0".to_string())
        }
    })
}

/// An overlap fraction 0 ≤ F < 1.
fn parse_overlap(text: &str) -> Result<f64, String> {
    parse_where(
        text,
        |v| (0.0..1.0).contains(&v),
        "overlap is a fraction with 0 <= F < 1 (0.5 = 50 %)",
    )
}

/// Two positive frequencies `A:B` in Hz.
fn parse_pair(text: &str) -> Result<(f64, f64), String> {
    let (a, b) = text
        .split_once(':')
        .ok_or_else(|| format!("expected RED_HZ:BLUE_HZ, got `{text}`"))?;
    Ok((parse_positive(a)?, parse_positive(b)?))
}

/// A frequency band `LO:HI` in Hz with 0 ≤ LO < HI.
fn parse_band(text: &str) -> Result<(f64, f64), String> {
    let (lo, hi) = text
        .split_once(':')
        .ok_or_else(|| format!("expected LO:HI in Hz (e.g. 0.99e6:1.01e6), got `{text}`"))?;
    let lo = parse_number(lo)?;
    let hi = parse_number(hi)?;
    if lo < 0.0 {
        return Err(format!("band edges must be >= 0 Hz, got {lo}"));
    }
    if lo >= hi {
        return Err(format!(
            "band LO:HI needs LO < HI, got {lo}:{hi} (e.g. 0.99e6:1.01e6)"
        ));
    }
    Ok((lo, hi))
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn grammar_is_consistent() {
        Cli::command().debug_assert();
    }

    #[test]
    fn band_parser_accepts_and_rejects() {
        assert_eq!(parse_band("1e3:2e3"), Ok((1000.0, 2000.0)));
        assert!(parse_band("2e3:1e3").is_err());
        assert!(parse_band("-1:2").is_err());
        assert!(parse_band("1e3").is_err());
        assert!(parse_band("a:b").is_err());
        assert!(parse_band("0:inf").is_err());
    }

    #[test]
    fn overlap_parser_bounds() {
        assert_eq!(parse_overlap("0"), Ok(0.0));
        assert_eq!(parse_overlap("0.75"), Ok(0.75));
        assert!(parse_overlap("1").is_err());
        assert!(parse_overlap("-0.1").is_err());
        assert!(parse_overlap("nan").is_err());
    }

    #[test]
    fn positive_parser_rejects_zero_negative_nonfinite() {
        assert_eq!(parse_positive("2.5e6"), Ok(2.5e6));
        assert!(parse_positive("0").is_err());
        assert!(parse_positive("-1").is_err());
        assert!(parse_positive("inf").is_err());
        assert!(parse_positive("x").is_err());
    }

    #[test]
    fn conflicting_calibrations_are_usage_errors() {
        let bad = [
            &[
                "stillpoint",
                "analyze",
                "x.wav",
                "-o",
                "o.json",
                "--m-per-v",
                "1",
                "--bath-temperature",
                "4",
            ][..],
            &[
                "stillpoint",
                "analyze",
                "x.wav",
                "-o",
                "o.json",
                "--tone-rms-m",
                "1e-12",
            ][..],
            &[
                "stillpoint",
                "analyze",
                "x.wav",
                "-o",
                "o.json",
                "--tone-freq",
                "1e3",
                "--tone-rms-m",
                "1e-12",
                "--pm-depth",
                "1e-3",
            ][..],
            &[
                "stillpoint",
                "analyze",
                "x.wav",
                "-o",
                "o.json",
                "--carrier",
                "5e6",
            ][..],
            &[
                "stillpoint",
                "analyze",
                "x.wav",
                "-o",
                "o.json",
                "--pm-depth",
                "1e-3",
                "--tone-freq",
                "1e3",
            ][..],
        ];
        for argv in bad {
            assert!(Cli::try_parse_from(argv).is_err(), "{argv:?} parsed");
        }
        let good = Cli::try_parse_from([
            "stillpoint",
            "analyze",
            "x.wav",
            "-o",
            "o.json",
            "--tone-freq",
            "1e3",
            "--pm-depth",
            "1e-3",
            "--freq-pull",
            "1e18",
            "--carrier",
            "5e6",
            "--lo-side",
            "below",
        ]);
        assert!(good.is_ok(), "{good:?}");
    }
}
