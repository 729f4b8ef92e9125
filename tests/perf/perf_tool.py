#!/usr/bin/env python3
"""Helpers of the performance scripts in tests/perf (numpy 2.4.6, scipy 1.17.1 were used).

  perf_tool.py make OUT.wav SAMPLES [RATE]      f32 WAV: white noise + a tone, fixed seed
  perf_tool.py welch IN.wav OUT.csv SEGMENT     scipy wavfile.read + signal.welch (Hann, 50 %)
  perf_tool.py compare OURS.csv THEIRS.csv TOL  max relative difference of the PSD columns
  perf_tool.py time TIME_V_OUTPUT               'seconds rss_kib' from /usr/bin/time -v output
  perf_tool.py median X...                      median of numbers
"""
import re
import statistics
import sys


def make(path, samples, rate=250000):
    import numpy as np
    import scipy.io.wavfile as wavfile

    rng = np.random.default_rng(20261202)
    out = np.empty(samples, dtype=np.float32)
    chunk = 1 << 22
    for start in range(0, samples, chunk):
        n = min(chunk, samples - start)
        t = (start + np.arange(n)) / rate
        out[start:start + n] = (0.1 * rng.standard_normal(n)
                                + 0.01 * np.sin(2 * np.pi * 12345.6 * t)).astype(np.float32)
    wavfile.write(path, rate, out)


def welch(path, out_csv, segment):
    # Exactly what a user of the scientific Python stack would write.
    import numpy as np
    import scipy.io.wavfile as wavfile
    import scipy.signal as signal

    rate, x = wavfile.read(path)
    f, p = signal.welch(x.astype(np.float64), fs=rate, window="hann", nperseg=segment,
                        noverlap=segment // 2, detrend="constant", scaling="density")
    np.savetxt(out_csv, np.column_stack([f, p]), delimiter=",", fmt="%.17g",
               header="frequency_hz,psd_v2_per_hz", comments="")


def compare(ours, theirs, tol):
    import numpy as np

    a = np.loadtxt(ours, delimiter=",", skiprows=1)
    b = np.loadtxt(theirs, delimiter=",", skiprows=1)
    if a.shape != b.shape:
        print(f"shape differs: {a.shape} vs {b.shape}")
        sys.exit(1)
    rel_f = np.max(np.abs(a[:, 0] - b[:, 0]) / np.maximum(np.abs(b[:, 0]), 1e-300))
    rel_p = np.max(np.abs(a[:, 1] - b[:, 1]) / np.abs(b[:, 1]))
    print(f"bins {len(a)}; max relative difference: frequency {rel_f:.2e}, PSD {rel_p:.2e}")
    if rel_p > tol or rel_f > tol:
        print(f"FAIL: more than {tol:g}")
        sys.exit(1)


def parse_time(path):
    text = open(path).read()
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (\S+)", text).group(1)
    parts = [float(p) for p in wall.split(":")]
    seconds = 0.0
    for p in parts:
        seconds = seconds * 60 + p
    rss = int(re.search(r"Maximum resident set size \(kbytes\): (\d+)", text).group(1))
    print(f"{seconds:.3f} {rss}")


def main():
    cmd = sys.argv[1]
    if cmd == "make":
        make(sys.argv[2], int(sys.argv[3]), int(sys.argv[4]) if len(sys.argv) > 4 else 250000)
    elif cmd == "welch":
        welch(sys.argv[2], sys.argv[3], int(sys.argv[4]))
    elif cmd == "compare":
        compare(sys.argv[2], sys.argv[3], float(sys.argv[4]))
    elif cmd == "time":
        parse_time(sys.argv[2])
    elif cmd == "median":
        print(statistics.median(float(v) for v in sys.argv[2:]))
    else:
        sys.exit(f"unknown command {cmd}")


if __name__ == "__main__":
    main()
