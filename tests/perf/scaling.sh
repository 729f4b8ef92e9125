#!/usr/bin/env bash
# Time and peak RSS of `stillpoint spectrum` for record lengths 2^22, 2^24, 2^26 (f32 WAV,
# 250 kHz) and segments 2^12, 2^16, 2^20 (Hann, 50 %): a markdown table for the README.
# Whole process (reading, averaging, writing the CSV), median of RUNS runs (default 3).
#
#   tests/perf/scaling.sh            # builds release first
#   NO_BUILD=1 RUNS=1 tests/perf/scaling.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
RUNS=${RUNS:-3}
LENGTHS=${LENGTHS:-"22 24 26"}
SEGMENTS=${SEGMENTS:-"12 16 20"}
WORK=${WORK:-$(mktemp -d)}
mkdir -p "$WORK"
TOOL="python3 tests/perf/perf_tool.py"
BIN=${BIN:-target/release/stillpoint}

if [ -z "${NO_BUILD:-}" ]; then
    cargo build --release --bin stillpoint
fi

rows=()
for l in $LENGTHS; do
    n=$((1 << l))
    [ -f "$WORK/rec$l.wav" ] || $TOOL make "$WORK/rec$l.wav" "$n"
    for g in $SEGMENTS; do
        seg=$((1 << g))
        ts=(); ms=()
        for _ in $(seq "$RUNS"); do
            /usr/bin/time -v "$BIN" spectrum "$WORK/rec$l.wav" --segment "$seg" \
                -o "$WORK/out.csv" 2> "$WORK/t.txt"
            read -r t m < <($TOOL time "$WORK/t.txt"); ts+=("$t"); ms+=("$m")
        done
        t=$($TOOL median "${ts[@]}"); m=$($TOOL median "${ms[@]}")
        rows+=("$(python3 -c "import sys; n,seg,t,m=int(sys.argv[1]),int(sys.argv[2]),float(sys.argv[3]),float(sys.argv[4]); print(f'| 2^{sys.argv[5]} ({n/250e3:.0f} s at 250 kHz) | 2^{sys.argv[6]} | {t:.2f} | {n/t/1e6:.0f} | {m/1024:.0f} |')" "$n" "$seg" "$t" "$m" "$l" "$g")")
        echo "${rows[-1]}" >&2
    done
    rm -f "$WORK/rec$l.wav"
done
echo
echo "| record (samples) | segment | wall time (s) | throughput (MS/s) | peak RSS (MiB) |"
echo "|---|---|---|---|---|"
printf '%s\n' "${rows[@]}"
