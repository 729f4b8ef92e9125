#!/usr/bin/env bash
# Whole-process time and peak RSS of `stillpoint spectrum` against the scientific-Python
# way (scipy.io.wavfile.read + scipy.signal.welch) on the same 2^25-sample f32 WAV: segment
# 65536, Hann, 50 % overlap, mean (constant) detrend. Also checks that both PSDs agree to
# 1e-9 relative. Medians of RUNS runs (default 5). See tests/perf/README.md.
#
#   tests/perf/compare_scipy.sh            # builds release first (slow the first time)
#   SAMPLES=4194304 RUNS=3 tests/perf/compare_scipy.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
SAMPLES=${SAMPLES:-33554432}
SEGMENT=${SEGMENT:-65536}
RUNS=${RUNS:-5}
WORK=${WORK:-$(mktemp -d)}
mkdir -p "$WORK"
TOOL="python3 tests/perf/perf_tool.py"
BIN=${BIN:-target/release/stillpoint}

if [ -z "${NO_BUILD:-}" ]; then
    cargo build --release --bin stillpoint
fi
[ -x "$BIN" ] || { echo "no $BIN: build it with cargo build --release" >&2; exit 1; }

echo "record: $SAMPLES f32 samples at 250 kHz in $WORK/record.wav"
[ -f "$WORK/record.wav" ] || $TOOL make "$WORK/record.wav" "$SAMPLES"

ours_t=(); ours_m=(); theirs_t=(); theirs_m=()
for i in $(seq "$RUNS"); do
    /usr/bin/time -v "$BIN" spectrum "$WORK/record.wav" --segment "$SEGMENT" --overlap 0.5 \
        --window hann -o "$WORK/ours.csv" 2> "$WORK/ours.time"
    read -r t m < <($TOOL time "$WORK/ours.time"); ours_t+=("$t"); ours_m+=("$m")
    /usr/bin/time -v $TOOL welch "$WORK/record.wav" "$WORK/scipy.csv" "$SEGMENT" \
        2> "$WORK/scipy.time"
    read -r t m < <($TOOL time "$WORK/scipy.time"); theirs_t+=("$t"); theirs_m+=("$m")
    echo "run $i: stillpoint ${ours_t[-1]} s ${ours_m[-1]} KiB; scipy ${theirs_t[-1]} s ${theirs_m[-1]} KiB"
done

# The FFT-only floor on the same segments: realfft alone, one thread (`stillpoint bench`,
# median of its runs), as the time the record's segments need at that rate.
floor=$("$BIN" bench --segment "$SEGMENT" --overlap 0.5 --rate 1e6 --live none --json \
    | python3 -c 'import json,sys; print(json.load(sys.stdin)["fft_floor_samples_per_s"])')

ot=$($TOOL median "${ours_t[@]}"); om=$($TOOL median "${ours_m[@]}")
st=$($TOOL median "${theirs_t[@]}"); sm=$($TOOL median "${theirs_m[@]}")
$TOOL compare "$WORK/ours.csv" "$WORK/scipy.csv" 1e-9
python3 - "$ot" "$om" "$st" "$sm" "$SAMPLES" "$SEGMENT" "$RUNS" "$floor" <<'PY'
import sys
ot, om, st, sm = (float(v) for v in sys.argv[1:5])
n, seg, runs = sys.argv[5:8]
floor = float(sys.argv[8])
hop = int(seg) // 2
segments = (int(n) - int(seg)) // hop + 1
floor_s = segments * hop / floor
print(f"\n{n} samples, segment {seg}, Hann, 50 %: medians of {runs} runs (whole process)")
print(f"| program | wall time (s) | peak RSS (MiB) |")
print(f"|---|---|---|")
print(f"| stillpoint spectrum | {ot:.2f} | {om/1024:.0f} |")
print(f"| scipy wavfile.read + signal.welch | {st:.2f} | {sm/1024:.0f} |")
print(f"| FFT-only floor ({segments} real FFTs of {seg}, 1 thread) | {floor_s:.2f} | |")
print(f"\nstillpoint is {st/ot:.1f}x faster and uses {sm/om:.1f}x less memory;")
print(f"whole process at {ot/floor_s:.2f}x the FFT-only floor")
PY
