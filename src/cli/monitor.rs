//! `stillpoint` (no arguments) and `stillpoint monitor SOURCE`: open the window.
//! Without the `gui` feature these explain that the build has no window.

use std::process::ExitCode;

use anyhow::Result;

use super::args::MonitorArgs;
use super::config;

/// Message of a build without the window.
#[cfg(not(feature = "gui"))]
const NO_WINDOW: &str =
    "this build has no window (built without the gui feature); use spectrum/analyze";

/// Opens the window on the built-in demo stream.
///
/// # Errors
/// The window could not be created, or this build has none.
pub fn run_demo() -> Result<ExitCode> {
    #[cfg(feature = "gui")]
    {
        // GUI CALL SITE: switch on once `crate::ui::run` lands (helper E).
        Err(super::InputError(
            "the window is not available in this build yet; use spectrum/analyze".into(),
        )
        .into())
    }
    #[cfg(not(feature = "gui"))]
    {
        Err(super::InputError(NO_WINDOW.into()).into())
    }
}

/// Opens the window on a source.
///
/// # Errors
/// Bad options, or the window could not be created.
pub fn run(args: &MonitorArgs) -> Result<ExitCode> {
    let monitor = config::monitor_config(args)?;
    #[cfg(feature = "gui")]
    {
        // GUI CALL SITE: switch on once `crate::ui::run` lands (helper E).
        let _ = monitor;
        Err(super::InputError(
            "the window is not available in this build yet; use spectrum/analyze".into(),
        )
        .into())
    }
    #[cfg(not(feature = "gui"))]
    {
        let _ = monitor;
        Err(super::InputError(NO_WINDOW.into()).into())
    }
}
