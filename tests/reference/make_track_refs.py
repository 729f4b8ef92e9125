#!/usr/bin/env python3
"""A cooldown record made outside stillpoint's synthesiser, for tests/track.rs.

Made with numpy 2.4.6 and scipy 1.17.1 (printed, and written into truth.csv's sidecar
index.json). Run from the repository root:

    python3 tests/reference/make_track_refs.py

Writes into tests/data/track/:
  record.f32     little-endian f32 raw, one channel, FS = 4096 Hz, 2^18 samples (64 s):
                 mode component x (an exact discrete-time AR(2) oscillator) plus white
                 Gaussian floor w of standard deviation FLOOR_SIGMA;
  truth.csv      one row per 1 s interval (4096 samples): t_start_s, t_end_s, frequency_hz,
                 linewidth_hz, variance_expected_v2 (mean over the interval of the exact
                 ensemble variance of x, from the covariance recursion of the AR(2) state, so
                 the lag of the mode's energy behind a changing drive is included),
                 variance_realised_v2 (mean of x[n]^2 over the interval), gamma_t (2 pi
                 linewidth T_i);
  waterfall.csv  scipy.signal.welch of each 1 s interval on its own (nperseg 1024, noverlap
                 512, periodic Hann, detrend 'constant', density, one-sided), the bins of
                 WF_BAND only: first row the bin frequencies, then one row per interval;
  index.json     the settings above and the library versions.

The schedule (t in seconds, sample n at t = n / FS):
  f_m(t)   = 1000 - 10 t / 64             (Hz, linear drift)
  gamma(t) = 20 * (3/20)^(t/64)           (FWHM Hz, narrowing 20 -> 3 Hz)
  var(t)   = 1.0 * (0.05)^(t/64)          (V^2, the temperature falling 20-fold)
The AR(2) recursion x[n] = a1 x[n-1] - a2 x[n-2] + s e[n] (e standard normal) has poles
r exp(+-i theta) with r = exp(-pi gamma / FS) (amplitude decay rate Gamma/2 = pi gamma) and
theta = sqrt(w0^2 - (pi gamma)^2) / FS, w0 = 2 pi f_m: the poles of the continuous damped
oscillator sampled at FS. s[n] is chosen so the stationary variance of the recursion with that
sample's coefficients is var(t); the true variance (P[n] below) follows with a lag ~ 1/Gamma.
"""

import csv
import json
import os

import numpy as np
import scipy
import scipy.signal

OUT = os.path.join("tests", "data", "track")
FS = 4096.0
LENGTH = 1 << 18
INTERVAL = 4096
SEED = 20261203
FLOOR_SIGMA = 0.5
WF_BAND = (960.0, 1040.0)


def schedule(t):
    f = 1000.0 - 10.0 * t / 64.0
    gamma = 20.0 * (3.0 / 20.0) ** (t / 64.0)
    var = 1.0 * 0.05 ** (t / 64.0)
    return f, gamma, var


def main():
    print("numpy", np.__version__, "scipy", scipy.__version__)
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(SEED)
    n = np.arange(LENGTH)
    t = n / FS
    f, gamma, var = schedule(t)
    r = np.exp(-np.pi * gamma / FS)
    w0 = 2 * np.pi * f
    theta = np.sqrt(w0**2 - (np.pi * gamma) ** 2) / FS
    a1 = 2 * r * np.cos(theta)
    a2 = r * r
    # Stationary variance of x[n] = a1 x[n-1] - a2 x[n-2] + e[n], var(e) = 1.
    unit = (1 + a2) / ((1 - a2) * ((1 + a2) ** 2 - a1**2))
    s = np.sqrt(var / unit)
    e = rng.standard_normal(LENGTH)
    w = FLOOR_SIGMA * rng.standard_normal(LENGTH)

    x = np.zeros(LENGTH)
    p = np.zeros(LENGTH)  # ensemble variance of x[n]
    # Start in the stationary state of the first sample's coefficients.
    g0 = var[0]
    g1 = a1[0] / (1 + a2[0]) * g0  # lag-1 autocovariance
    xm1 = np.sqrt(g0) * rng.standard_normal()
    # x[-2] given x[-1]: conditional normal.
    rho = g1 / g0
    xm2 = rho * xm1 + np.sqrt(g0 * (1 - rho * rho)) * rng.standard_normal()
    # State covariance [[var x[n-1], cov(x[n-1], x[n-2])], [., var x[n-2]]].
    c11, c12, c22 = g0, g1, g0
    for k in range(LENGTH):
        b1, b2, sk = a1[k], a2[k], s[k]
        xk = b1 * xm1 - b2 * xm2 + sk * e[k]
        v = b1 * b1 * c11 - 2 * b1 * b2 * c12 + b2 * b2 * c22 + sk * sk
        c = b1 * c11 - b2 * c12
        c11, c12, c22 = v, c, c11
        x[k] = xk
        p[k] = v
        xm1, xm2 = xk, xm1
    record = (x + w).astype("<f4")
    record.tofile(os.path.join(OUT, "record.f32"))
    stored = record.astype(np.float64)

    rows = []
    freqs = None
    wf_rows = []
    for i in range(LENGTH // INTERVAL):
        a, b = i * INTERVAL, (i + 1) * INTERVAL
        tc = (a + b - 1) / 2 / FS
        fi, gi, _ = schedule(np.arange(a, b) / FS)
        rows.append(
            [
                a / FS,
                b / FS,
                float(np.mean(fi)),
                float(np.mean(gi)),
                float(np.mean(p[a:b])),
                float(np.mean(x[a:b] ** 2)),
                float(2 * np.pi * np.mean(gi) * INTERVAL / FS),
            ]
        )
        fr, pxx = scipy.signal.welch(
            stored[a:b],
            fs=FS,
            window="hann",
            nperseg=1024,
            noverlap=512,
            detrend="constant",
            return_onesided=True,
            scaling="density",
            average="mean",
        )
        keep = (fr >= WF_BAND[0]) & (fr <= WF_BAND[1])
        freqs = fr[keep]
        wf_rows.append(pxx[keep])
        del tc
    with open(os.path.join(OUT, "truth.csv"), "w", newline="") as fh:
        out = csv.writer(fh, lineterminator="\n")
        out.writerow(
            [
                "t_start_s",
                "t_end_s",
                "frequency_hz",
                "linewidth_hz",
                "variance_expected_v2",
                "variance_realised_v2",
                "gamma_t",
            ]
        )
        for row in rows:
            out.writerow([repr(v) for v in row])
    with open(os.path.join(OUT, "waterfall.csv"), "w", newline="") as fh:
        out = csv.writer(fh, lineterminator="\n")
        out.writerow([repr(float(v)) for v in freqs])
        for row in wf_rows:
            out.writerow([repr(float(v)) for v in row])
    with open(os.path.join(OUT, "index.json"), "w") as fh:
        json.dump(
            {
                "numpy": np.__version__,
                "scipy": scipy.__version__,
                "sample_rate_hz": FS,
                "samples": LENGTH,
                "interval_samples": INTERVAL,
                "seed": SEED,
                "floor_sigma_v": FLOOR_SIGMA,
                "waterfall_band_hz": list(WF_BAND),
                "welch": "nperseg 1024, noverlap 512, hann (periodic), detrend constant",
            },
            fh,
            indent=1,
        )
        fh.write("\n")


if __name__ == "__main__":
    main()
