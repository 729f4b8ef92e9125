//! stillpoint: calibrated displacement spectra of mechanical resonators, live.
//!
//! The library holds every piece of logic; the `stillpoint` binary only parses arguments and
//! calls [`cli::run`] (headless commands) or `ui::run` (the window, `gui` feature).
//!
//! Pipeline: [`acquire`] reads detector voltage (WAV, raw binary, growing file, stdin, TCP,
//! the built-in demo) on its own thread → [`dsp`] Welch averager (one-sided PSD, V²/Hz) →
//! [`physics`] calibration, mode fit, quantum references, sidebands, stray peaks →
//! [`analysis`] (the `analyze` pipeline, filling the [`report`] contract types) and
//! [`snapshot`] (saved spectra) → [`model`] (live state for the window, no egui) → `ui`
//! (eframe/egui_plot, only with the `gui` feature).
//!
//! Conventions: SI units everywhere, names carry their unit (`frequency_hz`, `mass_kg`);
//! every spectral density is single-sided in ordinary frequency (∫₀^∞ S df = variance).

// Module docs link to crate-internal (`pub(crate)`) items on purpose: they are written for
// contributors, and `cargo doc --document-private-items` (what .ci/run builds) renders them as
// links. Unresolved links are still errors there (`-D warnings`).
#![allow(rustdoc::private_intra_doc_links)]

pub mod acquire;
pub mod analysis;
pub mod cli;
pub mod dsp;
pub mod figure;
pub mod io;
pub mod model;
pub mod npy_writer;
pub mod physics;
pub mod report;
pub mod snapshot;
pub mod synth;
#[cfg(feature = "gui")]
pub mod ui;
