//! The `stillpoint` binary: a thin layer over the library (see `stillpoint::cli`).

use std::process::ExitCode;

fn main() -> ExitCode {
    stillpoint::cli::main()
}
