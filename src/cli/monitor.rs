//! `stillpoint` (no arguments) and `stillpoint monitor SOURCE`: open the window
//! ([`crate::ui::run`]). Without the `gui` feature these explain that the build has no
//! window and exit with status 2.

use std::process::ExitCode;

use anyhow::Result;
use clap::ArgMatches;
use clap::parser::ValueSource;

use super::args::{ANALYSIS_IDS, MonitorArgs, WELCH_IDS, WindowOptions};
#[cfg(feature = "gui")]
use super::args::{AveragingArg, DEFAULT_SEGMENT};
use super::config;

/// Message of a build without the window.
#[cfg(not(feature = "gui"))]
const NO_WINDOW: &str =
    "this build has no window (built without the gui feature); use spectrum/analyze";

/// True if any of `ids` was typed on the command line (not a default).
fn any_given(matches: Option<&ArgMatches>, ids: &[&str]) -> bool {
    matches.is_some_and(|m| {
        ids.iter().any(|id| {
            m.try_get_raw(id).ok().flatten().is_some()
                && m.value_source(id) == Some(ValueSource::CommandLine)
        })
    })
}

/// Opens the window on the built-in demo stream.
///
/// # Errors
/// The window could not be created, or this build has none.
pub(crate) fn run_demo(window: &WindowOptions) -> Result<ExitCode> {
    #[cfg(feature = "gui")]
    {
        let mut options = crate::ui::MonitorOptions::demo();
        apply_window_options(&mut options, window);
        crate::ui::run(options)?;
        Ok(ExitCode::SUCCESS)
    }
    #[cfg(not(feature = "gui"))]
    {
        let _ = window;
        Err(super::InputError(NO_WINDOW.into()).into())
    }
}

/// Opens the window on a source. Options typed on the command line override the settings
/// remembered from the last session; the others keep them.
///
/// # Errors
/// Bad options, or the window could not be created, or this build has none.
pub fn run(args: &MonitorArgs, matches: Option<&ArgMatches>) -> Result<ExitCode> {
    #[cfg(feature = "gui")]
    {
        let options = monitor_options(args, matches)?;
        crate::ui::run(options)?;
        Ok(ExitCode::SUCCESS)
    }
    #[cfg(not(feature = "gui"))]
    {
        let _ = config::source_config(&args.source)?;
        let _ = config::analysis_options(&args.calibration, &args.heterodyne, None)?;
        let _ = (
            any_given(matches, WELCH_IDS),
            any_given(matches, ANALYSIS_IDS),
        );
        Err(super::InputError(NO_WINDOW.into()).into())
    }
}

/// The window's start-up options for `stillpoint monitor …`: the analysis options exactly
/// as `analyze` builds them (one type, handed to the engine unchanged), and the Welch
/// options typed; a segment or an averaging not typed stays automatic (chosen for the
/// source as the command line does on a recording).
///
/// # Errors
/// Bad source, Welch or calibration options.
#[cfg(feature = "gui")]
pub fn monitor_options(
    args: &MonitorArgs,
    matches: Option<&ArgMatches>,
) -> Result<crate::ui::MonitorOptions> {
    let source = config::source_config(&args.source)?;
    let analysis = config::analysis_options(&args.calibration, &args.heterodyne, None)?;
    let mut options = crate::ui::MonitorOptions::for_source(source);
    if any_given(matches, WELCH_IDS) {
        let mut welch = args.welch.clone();
        // The window takes the sample rate from the source; 1 Hz only passes validation.
        let segment_auto = welch.segment.is_none();
        welch.segment = Some(welch.segment.unwrap_or(DEFAULT_SEGMENT as u64));
        let averaging_auto = !any_given(matches, &["averaging"]);
        if averaging_auto {
            welch.averaging = AveragingArg::Mean;
        }
        let config = config::welch_config(&welch, 1.0, None)?;
        let mut settings = crate::model::WelchSettings::from_config(&config);
        settings.segment_auto = segment_auto;
        if averaging_auto {
            settings.averaging = crate::model::AveragingChoice::Auto;
        }
        options.welch = Some(settings);
    }
    if any_given(matches, ANALYSIS_IDS) {
        options.analysis = Some(analysis);
    }
    options.speed = args.speed;
    apply_window_options(&mut options, &args.window);
    Ok(options)
}

/// Copies the window options into the window's start-up options.
#[cfg(feature = "gui")]
fn apply_window_options(options: &mut crate::ui::MonitorOptions, window: &WindowOptions) {
    if let Some(path) = &window.screenshot {
        options.screenshot = Some(path.clone());
        options.screenshot_after_s = window.screenshot_after;
        options.fresh_settings = true;
    }
    if window.fresh_settings {
        options.fresh_settings = true;
    }
}
