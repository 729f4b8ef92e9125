#!/usr/bin/env bash
# Read speed of the lab-file sources against the raw reader: `stillpoint spectrum` on the
# same 2^25 float32 samples stored as raw f32, as a NumPy .npy (np.save) and as an HDF5
# dataset (h5py, contiguous and chunked + gzip + shuffle), segment 65536, Hann, 50 %.
# Medians of RUNS runs (default 5), whole process, and checks that the CSVs are identical.
# Needs python3 with numpy (and h5py for the HDF5 rows). See tests/perf/README.md.
#
#   tests/perf/lab_files.sh              # builds release first
#   NO_BUILD=1 RUNS=3 SAMPLES=4194304 tests/perf/lab_files.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
SAMPLES=${SAMPLES:-33554432}
RUNS=${RUNS:-5}
WORK=${WORK:-$(mktemp -d)}
BIN=${BIN:-target/release/stillpoint}
mkdir -p "$WORK"
if [ -z "${NO_BUILD:-}" ]; then
    cargo build --release --bin stillpoint
fi
[ -x "$BIN" ] || { echo "no $BIN: build it with cargo build --release" >&2; exit 1; }

python3 - "$WORK" "$SAMPLES" <<'PY'
import sys, numpy as np
work, n = sys.argv[1], int(sys.argv[2])
x = np.random.default_rng(7).standard_normal(n).astype("<f4")
x.tofile(f"{work}/rec.f32")
np.save(f"{work}/rec.npy", x)
try:
    import h5py
    with h5py.File(f"{work}/rec.h5", "w") as f:
        f.create_dataset("contiguous", data=x).attrs["sample_rate_hz"] = 250000.0
        f.create_dataset("gzip", data=x, chunks=(65536,), compression="gzip",
                         shuffle=True).attrs["sample_rate_hz"] = 250000.0
except ImportError:
    print("no h5py: HDF5 rows skipped", file=sys.stderr)
PY

run() {  # name, args...
    local name=$1; shift
    local times=()
    for _ in $(seq "$RUNS"); do
        local t0 t1
        t0=$(date +%s.%N)
        "$BIN" spectrum "$@" --segment 65536 -o "$WORK/$name.csv"
        t1=$(date +%s.%N)
        times+=("$(python3 -c "print($t1 - $t0)")")
    done
    local med
    med=$(printf '%s\n' "${times[@]}" | sort -g | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}')
    printf '| %s | %.3f | %s |\n' "$name" "$med" "$(printf '%.3f ' "${times[@]}")"
}

echo "| source | median wall time (s) | runs |"
echo "|---|---|---|"
run raw "$WORK/rec.f32" --sample-format f32 --rate 250000
run npy "$WORK/rec.npy" --rate 250000
cmp "$WORK/raw.csv" "$WORK/npy.csv" && echo "(npy CSV identical to raw)"
if [ -f "$WORK/rec.h5" ]; then
    run hdf5_contiguous "$WORK/rec.h5" --dataset /contiguous
    run hdf5_gzip_shuffle "$WORK/rec.h5" --dataset /gzip
    cmp "$WORK/raw.csv" "$WORK/hdf5_contiguous.csv" && echo "(HDF5 contiguous CSV identical)"
    cmp "$WORK/raw.csv" "$WORK/hdf5_gzip_shuffle.csv" && echo "(HDF5 gzip CSV identical)"
fi
