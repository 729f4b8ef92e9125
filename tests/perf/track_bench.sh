#!/usr/bin/env bash
# Throughput and peak RSS of `stillpoint track` against `stillpoint spectrum` on the same raw
# f32 record (250 kHz, a resonance at 12 kHz over white noise), segment 65536, Hann, 50 %.
# track cuts the record into intervals of INTERVAL samples (default 2^22, i.e. 64 intervals
# of 127 segments at 2^28) and writes the trend CSV and a waterfall .npy of the mode band.
# Whole process, /usr/bin/time -v, median of RUNS runs (default 3) for each record length
# in LENGTHS (log2, default "26 28"; 2^28 f32 = 1 GiB in WORK, deleted afterwards).
#
#   tests/perf/track_bench.sh                 # builds release first
#   NO_BUILD=1 RUNS=3 LENGTHS="28" tests/perf/track_bench.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
RUNS=${RUNS:-3}
LENGTHS=${LENGTHS:-"26 28"}
INTERVAL=${INTERVAL:-4194304}
SEGMENT=${SEGMENT:-65536}
WORK=${WORK:-$(mktemp -d)}
mkdir -p "$WORK"
TOOL="python3 tests/perf/perf_tool.py"
BIN=${BIN:-target/release/stillpoint}
RATE=250000

if [ -z "${NO_BUILD:-}" ]; then
    cargo build --release --bin stillpoint
fi

make_record() {
    # A damped resonance (a two-pole filter of white noise, f 12 kHz, FWHM ~ 40 Hz) plus
    # white noise, written in chunks so memory stays small.
    python3 - "$1" "$2" <<'PY'
import sys
import numpy as np
import scipy.signal as sg
path, n = sys.argv[1], int(sys.argv[2])
fs, f0, g = 250000.0, 12000.0, 40.0
r = np.exp(-np.pi * g / fs)
a = [1.0, -2 * r * np.cos(2 * np.pi * f0 / fs), r * r]
zi = np.zeros(2)
rng = np.random.default_rng(20261203)
chunk = 1 << 22
with open(path, "wb") as fh:
    for start in range(0, n, chunk):
        m = min(chunk, n - start)
        y, zi = sg.lfilter([0.05], a, rng.standard_normal(m), zi=zi)
        (y + 0.1 * rng.standard_normal(m)).astype("<f4").tofile(fh)
PY
}

every=$(python3 -c "print($INTERVAL / $RATE)")
echo "| record (samples) | command | wall time (s) | throughput (MS/s) | peak RSS (MiB) |"
echo "|---|---|---|---|---|"
for l in $LENGTHS; do
    n=$((1 << l))
    rec="$WORK/rec$l.f32"
    [ -f "$rec" ] || make_record "$rec" "$n"
    declare -A T M
    for cmd in spectrum track; do
        ts=(); ms=()
        for _ in $(seq "$RUNS"); do
            if [ "$cmd" = spectrum ]; then
                /usr/bin/time -v "$BIN" spectrum "$rec" --sample-format f32 --rate $RATE \
                    --segment "$SEGMENT" -o "$WORK/out.csv" 2> "$WORK/t.txt"
            else
                /usr/bin/time -v "$BIN" track "$rec" --sample-format f32 --rate $RATE \
                    --segment "$SEGMENT" --every "$every" --mode-band 11e3:13e3 --m-per-v 1e-9 \
                    -o "$WORK/trend.csv" --waterfall "$WORK/wf.npy" \
                    --waterfall-band 10e3:14e3 2> "$WORK/t.txt"
            fi
            read -r t m < <($TOOL time "$WORK/t.txt"); ts+=("$t"); ms+=("$m")
        done
        T[$cmd]=$($TOOL median "${ts[@]}"); M[$cmd]=$($TOOL median "${ms[@]}")
        python3 -c "import sys; n,t,m=int(sys.argv[1]),float(sys.argv[2]),float(sys.argv[3]); print(f'| 2^{sys.argv[4]} | {sys.argv[5]} | {t:.2f} | {n/t/1e6:.0f} | {m/1024:.0f} |')" \
            "$n" "${T[$cmd]}" "${M[$cmd]}" "$l" "$cmd"
    done
    python3 -c "import sys; print(f'2^{sys.argv[3]}: throughput track/spectrum = {float(sys.argv[1])/float(sys.argv[2]):.2f}')" \
        "${T[spectrum]}" "${T[track]}" "$l" >&2
    rm -f "$rec"
done
