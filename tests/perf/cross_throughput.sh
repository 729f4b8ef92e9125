#!/usr/bin/env bash
# Two channels with cross-spectrum vs one channel: `stillpoint spectrum` on the same
# 2-channel f32 WAV (2^24 frames, 128 MiB), segment 65536, Hann, 50 %; whole process,
# median of 5 runs each. Needs python3 with numpy and scipy (to write the WAV) and a
# release build (cargo build --release).
set -euo pipefail
BIN=${BIN:-target/release/stillpoint}
DIR=$(mktemp -d)
trap 'rm -rf "$DIR"' EXIT
python3 - "$DIR/two.wav" <<'PY'
import sys
import numpy as np
import scipy.io.wavfile
rng = np.random.default_rng(1)
n = 1 << 24
x = rng.standard_normal((n, 2)).astype(np.float32) * 0.1
scipy.io.wavfile.write(sys.argv[1], 1_000_000, x)
PY
median() { sort -n | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
time_run() {
  for _ in 1 2 3 4 5; do
    /usr/bin/time -f %e "$BIN" spectrum "$DIR/two.wav" --segment 65536 "$@" -o "$DIR/out.csv" 2>&1 >/dev/null | tail -1
  done | median
}
one=$(time_run --channel 0)
two=$(time_run --channel 0 --cross-channel 1)
echo "one channel:            $one s ($(awk -v t="$one" 'BEGIN{printf "%.0f", 16.777216/t}') MS/s per channel)"
echo "two channels + cross:   $two s ($(awk -v t="$two" 'BEGIN{printf "%.0f", 16.777216/t}') MS/s per channel)"
echo "throughput ratio (two/one, same samples per channel): $(awk -v a="$one" -v b="$two" 'BEGIN{printf "%.2f", a/b}')"
