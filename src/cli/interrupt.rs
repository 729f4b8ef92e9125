//! Stop requests for long headless runs (`spectrum`, `analyze`, `track`): SIGINT (Ctrl-C) and
//! SIGTERM set a flag instead of killing the process, so a live run can finish the averages
//! it has, write them and remove its temporary files.
//!
//! Use: call [`install`] once before reading the source, then poll [`stop_requested`] between
//! blocks (it is one atomic load). [`stop_reason`] names the signal for messages. A *second*
//! SIGINT or SIGTERM ends the process at once (status 130 or 143), for a run that does not
//! react; its temporary output file is then cleaned up by the next run writing the same
//! output (see `cli/output.rs`).
//!
//! The signal handlers come from `signal-hook` (they only store to atomics, which is
//! async-signal-safe); this module has no unsafe code.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, OnceLock};

/// Exit status of a run stopped by SIGINT before it had anything to write (128 + 2).
pub(crate) const SIGINT_STATUS: u8 = 130;
/// Exit status of a run stopped by SIGTERM before it had anything to write (128 + 15).
pub(crate) const SIGTERM_STATUS: u8 = 143;

struct Flags {
    /// Any stop signal seen (a second one then exits at once).
    any: Arc<AtomicBool>,
    /// SIGINT seen.
    int: Arc<AtomicBool>,
    /// SIGTERM seen.
    term: Arc<AtomicBool>,
}

static FLAGS: OnceLock<Option<Flags>> = OnceLock::new();

/// Installs the SIGINT/SIGTERM handlers (once per process; later calls do nothing). Returns
/// false if the platform refused them (the signals then keep their default action).
pub(crate) fn install() -> bool {
    FLAGS.get_or_init(|| register().ok()).is_some()
}

fn register() -> std::io::Result<Flags> {
    use signal_hook::consts::{SIGINT, SIGTERM};
    use signal_hook::flag;
    let flags = Flags {
        any: Arc::new(AtomicBool::new(false)),
        int: Arc::new(AtomicBool::new(false)),
        term: Arc::new(AtomicBool::new(false)),
    };
    // Handlers run in the order registered: the conditional exit looks at `any` before the
    // first signal sets it, so only a second signal exits.
    for (signal, status, own) in [
        (SIGINT, SIGINT_STATUS, &flags.int),
        (SIGTERM, SIGTERM_STATUS, &flags.term),
    ] {
        flag::register_conditional_shutdown(signal, i32::from(status), Arc::clone(&flags.any))?;
        flag::register(signal, Arc::clone(&flags.any))?;
        flag::register(signal, Arc::clone(own))?;
    }
    Ok(flags)
}

/// True once SIGINT or SIGTERM has arrived (after [`install`]).
pub(crate) fn stop_requested() -> bool {
    FLAGS
        .get()
        .and_then(Option::as_ref)
        .is_some_and(|f| f.any.load(Ordering::SeqCst))
}

/// The signal that asked for the stop (`"SIGINT"`, `"SIGTERM"`), if any.
pub(crate) fn stop_reason() -> Option<&'static str> {
    let flags = FLAGS.get().and_then(Option::as_ref)?;
    if flags.int.load(Ordering::SeqCst) {
        Some("SIGINT")
    } else if flags.term.load(Ordering::SeqCst) {
        Some("SIGTERM")
    } else {
        None
    }
}

/// A run stopped by a signal before it had a result: nothing was written. The CLI exits with
/// 130 (SIGINT) or 143 (SIGTERM), as a shell does for a process killed by that signal.
#[derive(Debug, thiserror::Error)]
#[error("stopped by {signal} {what}; nothing was written")]
pub(crate) struct Interrupted {
    /// `"SIGINT"` or `"SIGTERM"`.
    pub signal: &'static str,
    /// What was going on ("while reading a recording", "before one segment was complete").
    pub what: String,
}

impl Interrupted {
    /// The exit status for this signal.
    pub fn status(&self) -> u8 {
        if self.signal == "SIGTERM" {
            SIGTERM_STATUS
        } else {
            SIGINT_STATUS
        }
    }
}
