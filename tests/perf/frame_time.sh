#!/usr/bin/env bash
# Frame time of the window at 10⁶ bins (tests/perf/frame_time.rs): the real app driven
# headless by egui_kittest, fed 1 048 577-bin spectra by hand, at 1600×900. Prints the median
# CPU per frame (ms) of three scenarios: a new spectrum every frame, the same spectrum with
# the pointer moving over the plot, two 10⁶-bin snapshots overlaid. Release build.
#
#   tests/perf/frame_time.sh            # 120 frames per scenario
#   FRAMES=300 tests/perf/frame_time.sh
#   CARGO_TARGET_DIR=/elsewhere tests/perf/frame_time.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
cargo run --quiet --release --example frame_time -- "${FRAMES:-120}"
