#!/usr/bin/env python3
"""Reference data for stillpoint's two-detector analysis (tests/cross.rs).

Made with numpy 2.4.6 and scipy 1.17.1 (pinned: scipy reimplemented csd in 1.16; the script
refuses other versions unless STILLPOINT_ANY_SCIPY=1). Run from the repository root:

    python3 tests/reference/make_cross_refs.py

Writes into tests/data/cross/:
  pair_f64.raw      2 interleaved channels, little-endian f64, fs = 1000 Hz, 1500 frames:
                    channel 0 = 0.7 * s(t - 1 sample) + own noise + 2 V DC,
                    channel 1 = s(t) + own noise + a drift (s: AR(2) line at 120 Hz + a tone);
  triple_f32.wav    3-channel IEEE-float WAV, fs = 2000 Hz, 1200 frames (channel 1 unrelated);
  refs.f64          per case: P_aa, P_bb, Re P_ab, Im P_ab, C_ab (5 x bins), little-endian f64;
  index.csv         one row per case (source, channel a, channel b, window, segment, overlap,
                    noverlap, detrend, first, used, offset into refs.f64, bins);
  coherence_mc.csv  Monte Carlo of the 5 % noise threshold of the coherence of two
                    independent white noises (Bendat & Piersol ch. 9; METHODS.md §10);
  below_floor.wav   2-channel 16-bit WAV (2^17 frames at 4 kHz) made *outside* stillpoint's synthesiser: a common
                    AR(2) mechanical line read by two detectors with gains 1.0 and 0.6 V/V and
                    independent white floors, each floor 10 dB above the line's peak in that
                    channel; below_floor.truth.json holds the truth.

Each reference is P_aa = scipy.signal.welch(a), P_bb = welch(b), P_ab = scipy.signal.csd(a, b)
and C_ab = scipy.signal.coherence(a, b), all with fs, window=<periodic window array with the
same coefficients as src/dsp/window.rs>, nperseg=N, noverlap=floor(r N + 0.5),
detrend=False|'constant'|'linear', return_onesided=True, scaling='density', average='mean'.
"""

import csv
import json
import os
import sys

import numpy as np
import scipy
import scipy.io.wavfile
import scipy.optimize
import scipy.signal

OUT = os.path.join("tests", "data", "cross")

WINDOWS = {
    "rect": [1.0],
    "hann": [0.5, -0.5],
    "hamming": [0.54, -0.46],
    "blackman-harris": [0.35875, -0.48829, 0.14128, -0.01168],
    "flattop": [1.0, -1.9383379, 1.3045202, -0.4028270, 0.0350665],
}
DETRENDS = {"none": False, "mean": "constant", "linear": "linear"}


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


def ar2_line(rng, length, fs, f_m, gamma, sigma_e=1.0):
    """AR(2) damped oscillator driven by white noise (pole radius exp(-pi gamma/fs))."""
    r = np.exp(-np.pi * gamma / fs)
    f_d = np.sqrt(max(f_m**2 - gamma**2 / 4.0, 0.0))
    theta = 2 * np.pi * f_d / fs
    e = sigma_e * rng.standard_normal(length + 4000)
    x = scipy.signal.lfilter([1.0], [1.0, -2 * r * np.cos(theta), r * r], e)
    return x[4000:], r, theta


def ar2_variance(r, theta, sigma_e=1.0):
    """Exact variance of the AR(2) process x_n = 2r cos(theta) x_{n-1} - r^2 x_{n-2} + e_n."""
    a1, a2 = 2 * r * np.cos(theta), -r * r
    return sigma_e**2 * (1 - a2) / ((1 + a2) * ((1 - a2) ** 2 - a1**2))


def ar2_psd(f, fs, r, theta, sigma_e=1.0):
    """One-sided PSD of the AR(2) process (V^2/Hz)."""
    a1, a2 = 2 * r * np.cos(theta), -r * r
    z = np.exp(-2j * np.pi * f / fs)
    return 2.0 * sigma_e**2 / fs / np.abs(1 - a1 * z - a2 * z * z) ** 2


def oscillator(f, area, f_m, gamma):
    """METHODS.md §2 damped-oscillator line in Hz units (area = integral over f > 0)."""
    return area * (2 / np.pi) * f_m**2 * gamma / ((f_m**2 - f**2) ** 2 + gamma**2 * f**2)


def scipy_refs(rows, blob, offset, source, a, b, fs, cases):
    for wname, n, r, dname, first, used in cases:
        kw = dict(fs=fs, window=window(wname, n), nperseg=n, noverlap=noverlap(n, r),
                  detrend=DETRENDS[dname])
        one = dict(return_onesided=True, scaling="density")
        xa, xb = a[first:first + used], b[first:first + used]
        _, paa = scipy.signal.welch(xa, average="mean", **kw, **one)
        _, pbb = scipy.signal.welch(xb, average="mean", **kw, **one)
        _, pab = scipy.signal.csd(xa, xb, average="mean", **kw, **one)
        _, coh = scipy.signal.coherence(xa, xb, **kw)
        for v in (paa, pbb, pab.real, pab.imag, coh):
            blob.append(np.asarray(v, dtype="<f8"))
        rows.append([source[0], source[1], source[2], wname, n, r, noverlap(n, r), dname,
                     first, used, offset, len(paa)])
        offset += 5 * len(paa)
    return offset


def coherence_monte_carlo(rng):
    """Fraction of bins where two independent white noises exceed c0 = 1 - 0.05^(1/(K-1))."""
    rows = []
    for wname, n, r, segments in [("rect", 64, 0.0, 8), ("rect", 64, 0.0, 40),
                                  ("hann", 64, 0.5, 20), ("hann", 64, 0.5, 80)]:
        w = window(wname, n)
        d = n - noverlap(n, r)
        length = (segments - 1) * d + n
        # K_eff of METHODS.md §1 (overlap correlation of the window).
        rho2 = []
        lag = 1
        while lag * d < n:
            rho2.append(((w[:n - lag * d] * w[lag * d:]).sum() / (w * w).sum()) ** 2)
            lag += 1
        k_eff = segments / (1 + 2 * sum((1 - l / segments) * p for l, p in enumerate(rho2, 1)))
        c0 = 1 - 0.05 ** (1 / (k_eff - 1))
        exceed = 0
        total = 0
        for _ in range(2000):
            a = rng.standard_normal(length)
            b = rng.standard_normal(length)
            _, c = scipy.signal.coherence(a, b, fs=1.0, window=w, nperseg=n,
                                          noverlap=noverlap(n, r), detrend="constant")
            c = c[1:-1]
            exceed += int((c > c0).sum())
            total += c.size
        rows.append([wname, n, r, segments, k_eff, c0, exceed / total, total])
    return rows


def below_floor_record(rng):
    """Two detectors, one AR(2) line 10 dB below each detector's floor."""
    fs, length = 4000.0, 1 << 17
    f_m, gamma = 800.0, 200.0
    gains = (1.0, 0.6)
    x, r, theta = ar2_line(rng, length, fs, f_m, gamma)
    x *= 1e-3
    peak = ar2_psd(f_m, fs, r, theta) * 1e-6
    # Each detector's white floor (one-sided 2 sigma^2/fs) 10 dB above the line's peak there.
    sig = [np.sqrt(10.0 * g * g * peak * fs / 2.0) for g in gains]
    a = gains[0] * x + sig[0] * rng.standard_normal(length)
    b = gains[1] * x + sig[1] * rng.standard_normal(length)
    full = 32767 / (1.2 * max(np.abs(a).max(), np.abs(b).max()))
    codes = np.stack([np.round(a * full), np.round(b * full)], axis=1).astype("<i2")
    scipy.io.wavfile.write(os.path.join(OUT, "below_floor.wav"), int(fs), codes)
    volts_per_code = 1.0 / 32768.0  # WAV integers are read as code / 2^15
    to_v = volts_per_code * full  # volts read = true * to_v
    # Best continuous-model description of the exact AR(2) spectrum (what a fit should find).
    # (over the band the test fits, f_m ± 3 gamma)
    f = np.linspace(f_m - 3 * gamma, f_m + 3 * gamma, 4001)
    exact = ar2_psd(f, fs, r, theta) * 1e-6
    popt, _ = scipy.optimize.curve_fit(oscillator, f, exact, p0=[exact.max() * np.pi * gamma / 2,
                                                                 f_m, gamma])
    truth = {
        "generator": "tests/reference/make_cross_refs.py (numpy AR(2) line, white floors)",
        "sample_rate_hz": fs,
        "frames": length,
        "channel_gains_v_per_unit": [gains[0] * to_v, gains[1] * to_v],
        "quantisation_floor_v2_per_hz": 2 * (volts_per_code**2 / 12) / fs,
        "floor_psd_v2_per_hz": [2 * (s * to_v) ** 2 / fs for s in sig],
        "line_variance_unit2": float(ar2_variance(r, theta) * 1e-6),
        "line_peak_psd_unit2_per_hz": float(peak),
        "model_fit_area_unit2": float(popt[0]),
        "model_fit_frequency_hz": float(popt[1]),
        "model_fit_linewidth_hz": float(popt[2]),
        "floor_over_peak_db": 10.0,
        "cross_v2_per_unit2": gains[0] * gains[1] * to_v * to_v,
    }
    with open(os.path.join(OUT, "below_floor.truth.json"), "w") as fh:
        json.dump(truth, fh, indent=2)
    return truth


def main():
    print(f"numpy {np.__version__}, scipy {scipy.__version__}, python {sys.version.split()[0]}")
    if (np.__version__, scipy.__version__) != ("2.4.6", "1.17.1") and not os.environ.get(
            "STILLPOINT_ANY_SCIPY"):
        sys.exit("needs numpy 2.4.6 and scipy 1.17.1 (pip install numpy==2.4.6 scipy==1.17.1)")
    os.makedirs(OUT, exist_ok=True)
    rng = np.random.default_rng(20261203)

    # Record 1: raw f64, 2 channels.
    fs1, n1 = 1000.0, 1500
    t = np.arange(n1 + 1)
    s, _, _ = ar2_line(rng, n1 + 1, fs1, 120.0, 6.0)
    s = s / s.std() + 0.8 * np.sin(2 * np.pi * 237.3 * t / fs1)
    ch0 = 0.7 * s[:-1] + 0.5 * rng.standard_normal(n1) + 2.0
    ch1 = s[1:] + 0.8 * rng.standard_normal(n1) + 1e-3 * t[1:]
    np.stack([ch0, ch1], axis=1).astype("<f8").tofile(os.path.join(OUT, "pair_f64.raw"))

    # Record 2: float32 WAV, 3 channels (read back so the references use the stored values).
    fs2, n2 = 2000, 1200
    u, _, _ = ar2_line(rng, n2, fs2, 300.0, 20.0)
    u = u / u.std()
    w0 = u + 0.3 * rng.standard_normal(n2)
    w1 = rng.standard_normal(n2)
    w2 = -0.5 * u + 0.4 * rng.standard_normal(n2) - 0.25
    scipy.io.wavfile.write(os.path.join(OUT, "triple_f32.wav"), fs2,
                           np.stack([w0, w1, w2], axis=1).astype("<f4"))
    _, back = scipy.io.wavfile.read(os.path.join(OUT, "triple_f32.wav"))
    back = back.astype(np.float64)

    rows, blob, offset = [], [], 0
    x0 = np.stack([ch0, ch1], axis=1).astype("<f8")
    # a = --channel 1, b = --cross-channel 0 (order swapped on purpose: conj on a).
    offset = scipy_refs(rows, blob, offset, ("pair_f64.raw", 1, 0), x0[:, 1], x0[:, 0], fs1, [
        ("hann", 256, 0.5, "mean", 0, n1),
        ("hamming", 255, 0.5, "linear", 0, n1),
        ("blackman-harris", 200, 0.75, "none", 0, n1),
        ("flattop", 128, 0.6, "mean", 0, n1),
        ("rect", 100, 0.0, "linear", 0, n1),
        # --averages 3: the first (K - 1) D + N samples.
        ("hann", 256, 0.5, "mean", 0, 2 * 128 + 256),
    ])
    offset = scipy_refs(rows, blob, offset, ("triple_f32.wav", 0, 2), back[:, 0], back[:, 2],
                        float(fs2), [
        ("hann", 128, 0.5, "mean", 0, n2),
        ("blackman-harris", 127, 0.5, "linear", 0, n2),
        ("hamming", 64, 0.25, "none", 0, n2),
    ])
    np.concatenate(blob).tofile(os.path.join(OUT, "refs.f64"))
    with open(os.path.join(OUT, "index.csv"), "w", newline="") as fh:
        out = csv.writer(fh)
        out.writerow([f"# numpy {np.__version__} scipy {scipy.__version__}"])
        out.writerow(["source", "channel_a", "channel_b", "window", "segment", "overlap",
                      "noverlap", "detrend", "first", "used", "offset", "bins"])
        out.writerows(rows)
    print(f"{len(rows)} cases, {offset} reference values")

    mc = coherence_monte_carlo(rng)
    with open(os.path.join(OUT, "coherence_mc.csv"), "w", newline="") as fh:
        out = csv.writer(fh)
        out.writerow([f"# numpy {np.__version__} scipy {scipy.__version__}"])
        out.writerow(["window", "segment", "overlap", "segments", "k_eff", "threshold",
                      "exceed_fraction", "bins_tried"])
        out.writerows(mc)
    for row in mc:
        print("coherence MC:", row)

    truth = below_floor_record(rng)
    print("below-floor truth:", json.dumps(truth))


if __name__ == "__main__":
    main()
