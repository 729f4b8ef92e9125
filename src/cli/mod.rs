//! The command-line interface (BRIEF.md contract): argument parsing, validated configuration
//! shared with the window, and the headless commands `spectrum`, `analyze`, `synth`, `bench`.
//! SKELETON.

use std::process::ExitCode;

/// Entry point of the binary: parses arguments, runs, prints errors as one line.
pub fn main() -> ExitCode {
    eprintln!("stillpoint: not implemented yet");
    ExitCode::from(2)
}
