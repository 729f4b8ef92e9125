#!/usr/bin/env bash
# Two channels with cross-spectrum vs one channel: `stillpoint spectrum` on the same
# 2-channel f32 WAV (2^26 frames, 512 MiB; LOG2_FRAMES=24 for a quick run), segment 65536,
# Hann, 50 %; whole process, median of 5 runs each, the two commands alternating so both see
# the same machine load. The record is long enough that the fixed costs (start, FFT plan,
# writing 32769 CSV rows of 2 or 6 columns) do not set the ratio: at 2^24 frames they are
# about a tenth of the two-channel run and pull the ratio from 0.47 to 0.42. Needs python3 with numpy and scipy (to write the WAV) and a
# release build (cargo build --release).
set -euo pipefail
BIN=${BIN:-target/release/stillpoint}
DIR=$(mktemp -d)
trap 'rm -rf "$DIR"' EXIT
LOG2_FRAMES=${LOG2_FRAMES:-26}
FRAMES=$((1 << LOG2_FRAMES))
python3 - "$DIR/two.wav" "$FRAMES" <<'PY'
import sys
import numpy as np
import scipy.io.wavfile
rng = np.random.default_rng(1)
n = int(sys.argv[2])
x = rng.standard_normal((n, 2), dtype=np.float32) * 0.1
scipy.io.wavfile.write(sys.argv[1], 1_000_000, x)
PY
median() { sort -n | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }
# One line per run: wall seconds, CPU seconds (user + system).
once() {
  /usr/bin/time -f "%e %U %S" "$BIN" spectrum "$DIR/two.wav" --segment 65536 "$@" -o "$DIR/out.csv" 2>&1 >/dev/null |
    tail -1 | awk '{printf "%s %.3f\n", $1, $2 + $3}'
}
: >"$DIR/one.t"
: >"$DIR/two.t"
for _ in 1 2 3 4 5; do
  once --channel 0 >>"$DIR/one.t"
  once --channel 0 --cross-channel 1 >>"$DIR/two.t"
done
one=$(cut -d' ' -f1 "$DIR/one.t" | median)
two=$(cut -d' ' -f1 "$DIR/two.t" | median)
one_cpu=$(cut -d' ' -f2 "$DIR/one.t" | median)
two_cpu=$(cut -d' ' -f2 "$DIR/two.t" | median)
echo "record: $FRAMES frames of 2 channels"
echo "one channel:            $one s ($(awk -v t="$one" -v n="$FRAMES" 'BEGIN{printf "%.0f", n/1e6/t}') MS/s per channel)"
echo "two channels + cross:   $two s ($(awk -v t="$two" -v n="$FRAMES" 'BEGIN{printf "%.0f", n/1e6/t}') MS/s per channel)"
echo "throughput ratio (two/one, same samples per channel): $(awk -v a="$one" -v b="$two" 'BEGIN{printf "%.2f", a/b}') by wall time"
echo "CPU time (user + system): one $one_cpu s, two $two_cpu s → ratio $(awk -v a="$one_cpu" -v b="$two_cpu" 'BEGIN{printf "%.2f", a/b}') (what a loaded machine cannot blur)"
