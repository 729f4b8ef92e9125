#!/usr/bin/env python3
"""Records made outside stillpoint's synthesiser for tests/lines.rs (issue "Real lines").

Made with numpy 2.4.6 and scipy 1.17.1 (written into index.json). Run from the repository
root:

    python3 tests/reference/make_lines_refs.py

Every line is an exact discrete-time AR(2) oscillator x[n] = a1 x[n-1] - a2 x[n-2] + s e[n]
(e standard normal) with poles r exp(+-i theta), r = exp(-pi gamma / FS) (amplitude decay
Gamma/2 = pi gamma, gamma the FWHM in Hz of the power spectrum) and
theta = sqrt(w0^2 - (pi gamma)^2) / FS, w0 = 2 pi f_m. Its exact one-sided PSD is
S(f) = (2/FS) s^2 / |1 - a1 z^-1 + a2 z^-2|^2 at z = exp(2 pi i f / FS), and its stationary
variance s^2 (1 + a2) / ((1 - a2)((1 + a2)^2 - a1^2)) (Box & Jenkins, AR(2) variance; the
script checks it against the integral of S). The floor is white Gaussian noise of one-sided
density FLOOR (V^2/Hz) = 2 sigma^2 / FS. x[0], x[1] are drawn from the exact stationary
covariance, so every record is stationary from its first sample (no burn-in).

Writes into tests/data/lines/:
  narrow.f32   FS = 8192 Hz, 2^18 samples (32 s): one line at 2500.3 Hz, gamma = 0.25 Hz
               (Q = 10001), variance VAR_NARROW, on FLOOR; at --segment 1024 (8 Hz bins,
               ENBW 12 Hz) the line is 1/48 of the ENBW wide and its smeared peak stands
               about 26 dB above the floor;
  strays.f32   FS = 262144 Hz, 2^19 samples (2 s): FLOOR plus the lines of strays
               (frequency, FWHM, height of the true peak over the floor in dB), from 60 Hz
               (a near-DC line) to 2000 Hz wide;
  expected_welch.csv
               the exact expected Welch estimate (periodic Hann, N = 1024, one-sided
               density) of an AR(2) line alone (FS = 8192 Hz, f_m = 2500.3 Hz, variance 1)
               for FWHM gamma in GAMMAS, at the bins 300..325: from the autocovariance of
               the recursion, E[P_k] = (2/(FS S2)) sum_m c_w(m) R(m) exp(-2 pi i k m/N), c_w
               the window's autocorrelation (Percival & Walden 1993, the expectation of a
               tapered periodogram); columns gamma_hz, bin, frequency_hz, expected_psd;
  truth.json   every number above, per line: frequency_hz, linewidth_hz, variance_v2
               (expected), variance_realised_v2 (mean of x^2 over the record),
               height_over_floor_db = 10 log10((FLOOR + S_max)/FLOOR) with S_max the exact
               AR(2) PSD at its maximum; and the library versions.
"""

import json
import os

import numpy as np
import scipy
from scipy import signal

OUT = os.path.join("tests", "data", "lines")
FLOOR = 1e-6  # V^2/Hz one-sided
GAMMAS = [0.01, 0.5, 2.0, 8.0, 40.0]  # FWHM (Hz) for the expected-Welch reference


def ar2(f_m, gamma, fs):
    r = np.exp(-np.pi * gamma / fs)
    w0 = 2 * np.pi * f_m
    theta = np.sqrt(w0**2 - (np.pi * gamma) ** 2) / fs
    return 2 * r * np.cos(theta), r * r


def ar2_variance(a1, a2, s):
    return s * s * (1 + a2) / ((1 - a2) * ((1 + a2) ** 2 - a1 * a1))


def ar2_psd(f, a1, a2, s, fs):
    z = np.exp(-2j * np.pi * f / fs)
    return (2.0 / fs) * s * s / np.abs(1 - a1 * z + a2 * z * z) ** 2


def make_line(rng, n, fs, f_m, gamma, var):
    a1, a2 = ar2(f_m, gamma, fs)
    s = np.sqrt(var / ar2_variance(a1, a2, 1.0))
    # Stationary start: x[0], x[1] from the exact stationary covariance (gamma0, gamma1).
    g0 = var
    g1 = a1 / (1 + a2) * g0
    cov = np.array([[g0, g1], [g1, g0]])
    x01 = rng.multivariate_normal([0.0, 0.0], cov)
    e = rng.standard_normal(n) * s
    e[0] = x01[0]
    e[1] = x01[1] - a1 * x01[0]
    x = signal.lfilter([1.0], [1.0, -a1, a2], e)
    # Check: x[0], x[1] reproduced, variance formula against the PSD integral.
    assert abs(x[0] - x01[0]) < 1e-12 and abs(x[1] - x01[1]) < 1e-9
    f = np.linspace(0, fs / 2, 2_000_001)
    integral = np.trapezoid(ar2_psd(f, a1, a2, s, fs), f)
    assert abs(integral / var - 1) < 2e-3, (integral, var)
    fine = np.linspace(max(f_m - 5 * gamma, 0), f_m + 5 * gamma, 200_001)
    s_max = ar2_psd(fine, a1, a2, s, fs).max()
    return x, s_max


def floor_noise(rng, n, fs):
    return rng.standard_normal(n) * np.sqrt(FLOOR * fs / 2)


def main():
    os.makedirs(OUT, exist_ok=True)
    truth = {"numpy": np.__version__, "scipy": scipy.__version__, "floor_v2_per_hz": FLOOR}

    # --- narrow: Q = 10^4 line, 1/48 of the ENBW at segment 1024 ---
    rng = np.random.default_rng(20261203)
    fs, n = 8192.0, 2**18
    f_m, gamma = 2500.3, 0.25
    enbw = 1.5 * fs / 1024
    # Smeared peak ~ var/ENBW about 26 dB over the floor.
    var_narrow = FLOOR * enbw * 10 ** 2.6
    x, _ = make_line(rng, n, fs, f_m, gamma, var_narrow)
    v = x + floor_noise(rng, n, fs)
    v.astype("<f4").tofile(os.path.join(OUT, "narrow.f32"))
    truth["narrow"] = {
        "sample_rate_hz": fs,
        "samples": n,
        "frequency_hz": f_m,
        "linewidth_hz": gamma,
        "variance_v2": var_narrow,
        "variance_realised_v2": float(np.mean(x * x)),
        "gamma_t": 2 * np.pi * gamma * n / fs,
    }

    # --- strays: six lines (60 Hz near DC to 2000 Hz wide) spread over the span ---
    rng = np.random.default_rng(7)
    fs, n = 262144.0, 2**19
    strays = [
        # f (Hz), FWHM (Hz), true peak over floor (dB, line alone)
        (60.0, 4.0, 20.0),
        (15000.0, 350.0, 14.0),
        (40000.0, 2000.0, 22.0),
        (70000.0, 600.0, 32.0),
        (100000.0, 1200.0, 18.0),
        (120000.0, 80.0, 26.0),
    ]
    v = floor_noise(rng, n, fs)
    lines = []
    for f_m, gamma, db in strays:
        peak = FLOOR * 10 ** (db / 10)
        var = peak * np.pi * gamma / 2  # Lorentzian area = peak * pi * gamma / 2
        x, s_max = make_line(rng, n, fs, f_m, gamma, var)
        v += x
        lines.append(
            {
                "frequency_hz": f_m,
                "linewidth_hz": gamma,
                "variance_v2": var,
                "variance_realised_v2": float(np.mean(x * x)),
                "height_over_floor_db": float(10 * np.log10((FLOOR + s_max) / FLOOR)),
            }
        )
    v.astype("<f4").tofile(os.path.join(OUT, "strays.f32"))
    truth["strays"] = {"sample_rate_hz": fs, "samples": n, "lines": lines}

    # --- exact expected Welch estimate of a line (the kernel convolution, METHODS 2c) ---
    fs, nseg, f_m = 8192.0, 1024, 2500.3
    w = signal.windows.hann(nseg, sym=False)
    s2 = np.sum(w * w)
    cw = np.correlate(w, w, mode="full")  # lags -(N-1)..(N-1)
    lags = np.arange(-(nseg - 1), nseg)
    rows = []
    for gamma in GAMMAS:
        a1, a2 = ar2(f_m, gamma, fs)
        s = np.sqrt(1.0 / ar2_variance(a1, a2, 1.0))
        r = np.empty(nseg)
        r[0] = 1.0
        r[1] = a1 / (1 + a2)
        for m in range(2, nseg):
            r[m] = a1 * r[m - 1] - a2 * r[m - 2]
        rr = r[np.abs(lags)]
        for k in range(300, 326):
            ph = np.exp(-2j * np.pi * k * lags / nseg)
            val = 2.0 / (fs * s2) * np.real(np.sum(cw * rr * ph))
            rows.append((float(gamma), k, float(k * fs / nseg), float(val)))
        del s
    with open(os.path.join(OUT, "expected_welch.csv"), "w") as fh:
        fh.write("gamma_hz,bin,frequency_hz,expected_psd\n")
        for g, k, f, v in rows:
            fh.write(f"{g!r},{k},{f!r},{v!r}\n")

    with open(os.path.join(OUT, "truth.json"), "w") as fh:
        json.dump(truth, fh, indent=1)
    print(json.dumps(truth, indent=1))


if __name__ == "__main__":
    main()
