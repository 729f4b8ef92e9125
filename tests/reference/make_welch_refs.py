#!/usr/bin/env python3
"""Reference PSDs for stillpoint's Welch averager (tests/welch_reference.rs).

Made with numpy 2.4.6 and scipy 1.17.1 (the script prints the versions it ran with and writes
them into tests/data/welch/index.csv). Run from the repository root:

    python3 tests/reference/make_welch_refs.py

Writes into tests/data/welch/:
  input.f64    the test signal, little-endian f64 (white Gaussian noise sigma = 1, seed 20261202,
               + a tone of amplitude 2 at 123.4 Hz + a DC offset of 3 + a drift of 1e-3 per
               sample), fs = 2000 Hz, 20000 samples;
  refs.f64     every reference PSD, concatenated, little-endian f64;
  index.csv    one row per case: name, window, segment, overlap, noverlap, detrend, average,
               first sample, samples used, offset (in f64 values) into refs.f64, bins.

Each reference is scipy.signal.welch(x[first:first+used], fs, window=<periodic window array
computed with the same coefficients and the same exact angle reduction as
src/dsp/window.rs>, nperseg=N, noverlap=floor(r N + 0.5), detrend=False|'constant'|'linear',
return_onesided=True, scaling='density', average='mean'|'median').
"""

import csv
import os
import sys

import numpy as np
import scipy
import scipy.signal

OUT = os.path.join("tests", "data", "welch")
FS = 2000.0
LENGTH = 20000
SEED = 20261202

WINDOWS = {
    "rect": [1.0],
    "hann": [0.5, -0.5],
    "hamming": [0.54, -0.46],
    "blackman-harris": [0.35875, -0.48829, 0.14128, -0.01168],
    "flattop": [1.0, -1.9383379, 1.3045202, -0.4028270, 0.0350665],
}
DETRENDS = {"none": False, "mean": "constant", "linear": "linear"}
# (segment, overlap): powers of two, a non-power-of-two and an odd length.
GEOMETRIES = [(1000, 0.5), (1024, 0.0), (1024, 0.75), (4096, 0.5), (3000, 0.75), (999, 0.5)]


def window(name, n):
    """Periodic cosine sum, angle reduced exactly as in src/dsp/window.rs."""
    j = np.arange(n, dtype=np.int64)
    w = np.zeros(n)
    for m, c in enumerate(WINDOWS[name]):
        r = (m * j) % n
        r = np.minimum(r, n - r).astype(np.float64)
        w += c * np.cos(2.0 * np.pi * r / n)
    return w


def noverlap(n, r):
    return int(np.floor(r * n + 0.5))


def main():
    print(f"numpy {np.__version__}, scipy {scipy.__version__}, python {sys.version.split()[0]}")
    rng = np.random.default_rng(SEED)
    t = np.arange(LENGTH)
    x = rng.standard_normal(LENGTH) + 2.0 * np.sin(2 * np.pi * 123.4 * t / FS) + 3.0 + 1e-3 * t
    os.makedirs(OUT, exist_ok=True)
    x.astype("<f8").tofile(os.path.join(OUT, "input.f64"))

    rows = []
    blob = []
    offset = 0

    def add(name, wname, n, r, dname, average, first, used):
        nonlocal offset
        seg = x[first:first + used]
        _, p = scipy.signal.welch(seg, FS, window=window(wname, n), nperseg=n,
                                  noverlap=noverlap(n, r), detrend=DETRENDS[dname],
                                  return_onesided=True, scaling="density", average=average)
        blob.append(p.astype("<f8"))
        rows.append([name, wname, n, r, noverlap(n, r), dname, average, first, used, offset, len(p)])
        offset += len(p)

    for n, r in GEOMETRIES:
        for wname in WINDOWS:
            for dname in DETRENDS:
                add(f"mean-{wname}-{n}-{r}-{dname}", wname, n, r, dname, "mean", 0, LENGTH)
    # Median: odd and even segment counts, every window.
    for wname in WINDOWS:
        add(f"median-{wname}-1024-0.5-mean", wname, 1024, 0.5, "mean", "median", 0, LENGTH)
        add(f"median-{wname}-1000-0.0-linear", wname, 1000, 0.0, "linear", "median", 0, 8000)
    # Linear average limited to K = 7 segments: scipy on the first (K-1) D + N samples.
    n, r, k = 1024, 0.5, 7
    d = n - noverlap(n, r)
    add("mean-limit7-hann-1024-0.5-mean", "hann", n, r, "mean", "mean", 0, (k - 1) * d + n)
    # Median over a sliding window of the last K = 6 of all segments of the stream.
    total = (LENGTH - n) // d + 1
    first = (total - 6) * d
    add("median-last6-hann-1024-0.5-mean", "hann", n, r, "mean", "median", first,
        5 * d + n)

    np.concatenate(blob).tofile(os.path.join(OUT, "refs.f64"))
    with open(os.path.join(OUT, "index.csv"), "w", newline="") as f:
        out = csv.writer(f)
        out.writerow([f"# numpy {np.__version__} scipy {scipy.__version__}"])
        out.writerow(["name", "window", "segment", "overlap", "noverlap", "detrend", "average",
                      "first", "used", "offset", "bins"])
        out.writerows(rows)
    print(f"{len(rows)} cases, {offset} reference values")

    # Side check quoted in tests/window_table.rs: bin correlation of Blackman-Harris at N = 4096.
    w2 = window("blackman-harris", 4096) ** 2
    jj = np.arange(4096)
    rho = [abs((w2 * np.exp(-2j * np.pi * jj * l / 4096)).sum()) ** 2 / w2.sum() ** 2
           for l in range(1, 4)]
    print("blackman-harris rho_bin(1..3) at N=4096:", ", ".join(f"{v:.6f}" for v in rho))


if __name__ == "__main__":
    main()
