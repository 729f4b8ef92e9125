#!/usr/bin/env python3
"""Reference band rms and cumulative rms for stillpoint (tests/cli.rs, `rms_*` tests).

Made with numpy 2.4.6 and scipy 1.17.1 (the versions it ran with are written into the output).
Run from the repository root:

    python3 tests/reference/make_rms_refs.py

Input: the committed Welch test record tests/data/welch/input.f64 (little-endian f64, fs =
2000 Hz, 20000 samples: white noise sigma = 1 + a tone of amplitude 2 at 123.4 Hz + DC 3 +
drift; see make_welch_refs.py). For each case the PSD is scipy.signal.welch(x, fs,
window=<periodic window>, nperseg=N, noverlap=floor(rN + 1/2), detrend=..., scaling='density',
return_onesided=True, average='mean'), df = fs/N, and (numpy integration, the rule of
METHODS.md §1: sum of PSD_k df, the DC and Nyquist bins as scipy returns them):

  band rms        sqrt(sum(psd[lo <= f_k <= hi]) * df)      (closed band, bin centres)
  cumulative rms  sqrt(cumsum(psd) * df)                     (from DC upwards, rising)

Writes tests/data/rms/rms_refs.json.
"""

import json
import os
import sys

import numpy as np
import scipy
import scipy.signal

FS = 2000.0
INPUT = os.path.join("tests", "data", "welch", "input.f64")
OUT = os.path.join("tests", "data", "rms", "rms_refs.json")

WINDOWS = {
    "hann": [0.5, -0.5],
    "blackman-harris": [0.35875, -0.48829, 0.14128, -0.01168],
}
DETRENDS = {"none": False, "mean": "constant", "linear": "linear"}


def window(name, n):
    """Periodic cosine sum (as make_welch_refs.py, METHODS.md §1 table)."""
    j = np.arange(n, dtype=np.int64)
    w = np.zeros(n)
    for m, c in enumerate(WINDOWS[name]):
        r = (m * j) % n
        r = np.minimum(r, n - r).astype(np.float64)
        w += c * np.cos(2.0 * np.pi * r / n)
    return w


def main():
    x = np.fromfile(INPUT, dtype="<f8")
    out = {"numpy": np.__version__, "scipy": scipy.__version__,
           "python": sys.version.split()[0], "input": INPUT.replace(os.sep, "/"),
           "sample_rate_hz": FS, "cases": []}
    # (window, segment, overlap, detrend, bands)
    cases = [
        ("hann", 1000, 0.5, "mean",
         [(100.0, 150.0), (100.5, 149.9), (0.0, 1000.0), (123.0, 124.0), (0.0, 0.5), (900.0, 1000.0),
          (350.0, 400.0), (600.0, 650.0)]),
        ("blackman-harris", 999, 0.75, "linear",
         [(100.0, 150.0), (0.0, 1000.0), (500.0, 700.0)]),
    ]
    for wname, n, r, dname, bands in cases:
        nov = int(np.floor(r * n + 0.5))
        f, p = scipy.signal.welch(x, FS, window=window(wname, n), nperseg=n, noverlap=nov,
                                  detrend=DETRENDS[dname], return_onesided=True,
                                  scaling="density", average="mean")
        df = FS / n
        rows = []
        for lo, hi in bands:
            sel = (f >= lo) & (f <= hi)
            rows.append({"band_hz": [lo, hi], "bins": int(np.count_nonzero(sel)),
                         "rms_v": float(np.sqrt(np.sum(p[sel]) * df))})
        out["cases"].append({
            "window": wname, "segment": n, "overlap": r, "noverlap": nov, "detrend": dname,
            "bins": len(p), "resolution_hz": df, "bands": rows,
            "cumulative_rms_v": [float(v) for v in np.sqrt(np.cumsum(p) * df)],
        })
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as fh:
        json.dump(out, fh, indent=0)
        fh.write("\n")
    print(f"numpy {np.__version__}, scipy {scipy.__version__}: wrote {OUT}")


if __name__ == "__main__":
    main()
