#!/usr/bin/env python3
"""Records made OUTSIDE stillpoint's synthesiser, with their truth, for tests/lines.rs.

Independent of the Rust code: numpy/scipy only, written from the physics (METHODS.md §2, §2c,
§8b), not from the program.

1. Mechanical lines (16-bit WAV, volts = counts / 2^15): the exact discrete-time sampling of
   a thermally driven damped oscillator m x'' + m Gamma x' + m Omega0^2 x = F (white force):
   the state (x, v) is advanced by Phi = expm(A h) (scipy.linalg.expm) with Gaussian noise of
   covariance Q = Sigma - Phi Sigma Phi^T (the stationary covariance Sigma = diag(s2, Omega0^2
   s2) is preserved), drawn through an eigen-decomposition of Q. Its x is the AR(2)-pole
   (ARMA(2,1)) process whose autocovariance at the sample times equals the continuous one
   exactly (Norrelykke & Flyvbjerg, PRE 83, 041103 (2011), from memory). White Gaussian
   floor added. Truth: f_m, linewidth, Q, ensemble area s2, and the realised area of THIS
   record as scipy.signal.welch holds it (line component alone, sum(psd)*df), so a single
   record can be checked tightly as well as against the ensemble value.
     narrow    Q = 1e3 at 310.37 Hz, fs 1024 Hz, segment 256: linewidth 0.05 ENBW, 26 dB
     ultra     Q = 1e6 at 310.37 Hz, same resolution: linewidth 5e-5 ENBW (one coherent line)
     lowq      Q = 3 at 100 Hz: damped-oscillator form, far from Lorentzian
     neardc    Q = 4 at 6.2 Hz, segment 1024 (1 Hz bins): the line reaches DC
   For `narrow`, a mass and a calibration (m/V) are chosen so that the ensemble occupancy is
   n = 1 exactly: x_zpf^2 (2n+1) = c^2 s2_V, x_zpf = sqrt(hbar / 2 m Omega_m).
2. Stray lines on a flat floor (16-bit WAV, fs = 262144 Hz, 131072 samples): Gaussian noise
   with an exactly prescribed one-sided PSD (circulant method: independent complex Gaussian
   Fourier amplitudes, inverse real FFT; Percival & Walden 1993, from memory) = flat floor +
   five Lorentzians 350-2000 Hz wide, 14-32 dB over the floor, plus pure tones (mains 50,
   100, 150 Hz and one narrow line at 30 kHz). Reference heights of the EXPECTED Welch
   spectrum (Hann, 50 %, segments 8192, 32768, 65536) computed here by the exact convolution
   E[S](f) = sum_l S(f_l) df_L K_w(f - f_l) (+ the negative-frequency image), K_w(f) =
   |sum_j w_j exp(-2 pi i f j/fs)|^2/(fs S2) (Heinzel et al. 2002 §9; METHODS §2c), with the
   window transform at the record's 1/16..1/2-bin offsets from a zero-padded FFT.
3. Thermal expectation at any temperature (METHODS §2b): 2 hbar coth(hbar Omega / 2 kB T)
   Im chi(Omega) versus the classical 4 kB T Im chi/Omega at hbar Omega/kB T = 0.01, 1, 10.
4. Band rms and cumulative rms of a PSD (np.sum(psd)*df, np.cumsum) for one small record.

Run:  python3 tests/reference/make_lines_refs.py     (numpy 2.4.6, scipy 1.17.1)
Writes tests/data/lines/*.wav and tests/data/lines/truth.json.
"""
import json
import os
import sys

import numpy as np
import scipy
from scipy import constants as sc
from scipy import linalg, signal
from scipy.io import wavfile

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "data", "lines")
os.makedirs(OUT, exist_ok=True)
FULL = 32768.0  # volts = counts / 2^15


def oscillator_record(rng, fs, n, fm, q, s2):
    """x of an exactly sampled thermal oscillator (variance s2), n samples."""
    w0 = 2 * np.pi * fm
    gam = w0 / q
    h = 1.0 / fs
    a = np.array([[0.0, 1.0], [-w0 * w0, -gam]])
    phi = linalg.expm(a * h)
    sig = np.diag([s2, w0 * w0 * s2])
    qd = sig - phi @ sig @ phi.T
    qd = 0.5 * (qd + qd.T)
    lam, vec = np.linalg.eigh(qd)
    root = vec @ np.diag(np.sqrt(np.clip(lam, 0.0, None)))
    s = np.linalg.cholesky(sig) @ rng.standard_normal(2)
    noise = rng.standard_normal((n, 2)) @ root.T
    x = np.empty(n)
    for i in range(n):
        x[i] = s[0]
        s = phi @ s + noise[i]
    return x


def welch_area(x, fs, nseg):
    f, p = signal.welch(x, fs=fs, window="hann", nperseg=nseg, noverlap=nseg // 2,
                        detrend="constant", scaling="density")
    return float(np.sum(p) * (f[1] - f[0]))


def to_counts(v):
    c = np.round(v * FULL)
    if np.max(np.abs(c)) > 32767:
        raise SystemExit("clipping: lower the levels")
    return c.astype(np.int16)


truth = {"numpy": np.__version__, "scipy": scipy.__version__,
         "python": sys.version.split()[0], "volts_per_count": 1.0 / FULL, "lines": {}}
rng = np.random.default_rng(20261203)

# ---------------------------------------------------------------- 1. mechanical lines
FS = 1024.0
N_REC = 32768
floor_sigma_v = 300.0 / FULL                        # white floor, volts rms
floor_psd = 2 * floor_sigma_v**2 / FS + 2 * (1 / 12) / FULL**2 / FS   # + quantisation
cases = {
    # name: (fm, Q, segment, level) ; level: peak of the expected spectrum over the floor
    "narrow": (310.37, 1e3, 256, "26 dB over the floor at A/ENBW"),
    "ultra": (310.37, 1e6, 256, "26 dB over the floor at A/ENBW"),
    "lowq": (100.0, 3.0, 256, "20 dB: 2A/(pi gamma) = 100 floor"),
    "neardc": (6.2, 4.0, 1024, "20 dB: 2A/(pi gamma) = 100 floor"),
}
for name, (fm, q, seg, level) in cases.items():
    gam = fm / q
    enbw = 1.5 * FS / seg
    if level.startswith("26"):
        s2 = 10**2.6 * floor_psd * enbw
    else:
        s2 = 100 * floor_psd * np.pi * gam / 2
    line = oscillator_record(rng, FS, N_REC, fm, q, s2)
    rec = line + floor_sigma_v * rng.standard_normal(N_REC)
    counts = to_counts(rec)
    wavfile.write(os.path.join(OUT, f"{name}.wav"), int(FS), counts)
    entry = {
        "file": f"{name}.wav", "sample_rate_hz": FS, "samples": N_REC, "segment": seg,
        "frequency_hz": fm, "quality_factor": q, "linewidth_hz": gam,
        "area_v2": s2, "realised_area_v2": welch_area(line, FS, seg),
        "floor_psd_v2_per_hz": floor_psd, "enbw_hz": enbw,
        "record_secs": N_REC / FS, "gamma_t": 2 * np.pi * gam * N_REC / FS,
        "level": level,
    }
    truth["lines"][name] = entry

# quantum numbers for `narrow`: choose c (m/V) and m so that n = 1 exactly (ensemble).
nar = truth["lines"]["narrow"]
c = 1.0e-9
n_true = 1.0
xzpf2 = c * c * nar["area_v2"] / (2 * n_true + 1)
omega = 2 * np.pi * nar["frequency_hz"]
mass = sc.hbar / (2 * omega * xzpf2)
nar["quantum"] = {
    "m_per_v": c, "mass_kg": mass, "x_zpf_m": float(np.sqrt(xzpf2)), "occupancy": n_true,
    "realised_occupancy": (c * c * nar["realised_area_v2"] / xzpf2 - 1) / 2,
    "effective_temperature_k": sc.hbar * omega / (sc.k * np.log1p(1 / n_true)),
}

# ---------------------------------------------------------------- 2. strays
FS2 = 262144.0
L = 131072
dfl = FS2 / L
fl = np.arange(L // 2 + 1) * dfl
floor2 = 2 * (800.0 / FULL) ** 2 / FS2
strays = [  # (centre Hz, FWHM Hz, true height dB over floor)
    (21000.0, 350.0, 14.0), (37000.0, 800.0, 32.0), (55000.0, 2000.0, 24.0),
    (78000.0, 1200.0, 18.0), (96000.0, 500.0, 28.0),
]


def lor(f, f0, w, peak):
    return peak * (w / 2) ** 2 / ((f - f0) ** 2 + (w / 2) ** 2)


psd = np.full_like(fl, floor2)
for f0, w, hdb in strays:
    psd += lor(fl, f0, w, floor2 * (10 ** (hdb / 10) - 1))
amp = np.sqrt(psd * FS2 * L / 4)
spec = amp * (rng.standard_normal(fl.size) + 1j * rng.standard_normal(fl.size))
spec[0] = 0.0
spec[-1] = 0.0
x = np.fft.irfft(spec, n=L)
tones = [  # (Hz, rms volts)
    (50.0, 0.006), (100.0, 0.002), (150.0, 0.003), (30000.0, 0.0015),
]
t = np.arange(L) / FS2
phases = rng.uniform(0, 2 * np.pi, len(tones))
for (f0, rms), ph in zip(tones, phases):
    x += rms * np.sqrt(2) * np.sin(2 * np.pi * f0 * t + ph)
wavfile.write(os.path.join(OUT, "strays.wav"), int(FS2), to_counts(x))
quant = 2 * (1 / 12) / FULL**2 / FS2


def expected_welch(nseg):
    """Expected one-sided Hann Welch PSD at the record grid (offsets of df_L)."""
    j = np.arange(nseg)
    w = 0.5 - 0.5 * np.cos(2 * np.pi * j / nseg)
    s2w = np.sum(w * w)
    wf = np.fft.fft(w, n=L)                      # W at multiples of df_L
    kern = np.abs(wf) ** 2 / (FS2 * s2w)         # K_w at l*df_L (periodic in L)
    full = np.concatenate([psd, psd[-2:0:-1]]) / 2 + quant / 2   # two-sided on the L grid
    for f0, rms in tones:                         # a tone: power rms^2, half at each sign
        k = int(round(f0 / dfl))
        full[k] += rms**2 / 2 / dfl
        full[L - k] += rms**2 / 2 / dfl
    # circular convolution: E[S2](f_m) = sum_l S2(f_l) df_L K(f_m - f_l)
    e2 = np.real(np.fft.ifft(np.fft.fft(full) * np.fft.fft(kern))) * dfl
    return 2 * e2[: L // 2 + 1]


refs = {}
for nseg in (8192, 32768, 65536):
    e = expected_welch(nseg)
    enbw = 1.5 * FS2 / nseg
    rows = []
    for f0, w, hdb in strays:
        i = int(round(f0 / dfl))
        lo, hi = i - int(4 * w / dfl), i + int(4 * w / dfl)
        pk = np.max(e[lo:hi])
        rows.append({"frequency_hz": f0, "linewidth_hz": w, "true_height_db": hdb,
                     "expected_height_db": float(10 * np.log10(pk / (floor2 + quant))),
                     "resolved": bool(w >= enbw)})
    for f0, rms in tones:
        i = int(round(f0 / dfl))
        span = int(3 * FS2 / nseg / dfl)
        pk = np.max(e[max(i - span, 0):i + span])
        rows.append({"frequency_hz": f0, "linewidth_hz": 0.0, "tone_rms_v": rms,
                     "expected_height_db": float(10 * np.log10(pk / (floor2 + quant))),
                     "resolved": False})
    refs[str(nseg)] = {"enbw_hz": enbw, "resolution_hz": FS2 / nseg, "lines": rows}
truth["strays"] = {"file": "strays.wav", "sample_rate_hz": FS2, "samples": L,
                   "floor_psd_v2_per_hz": floor2 + quant, "segments": refs}

# ---------------------------------------------------------------- 3. thermal at T
m3, f3, q3 = 1.0e-13, 600e3, 1.0e5
w3 = 2 * np.pi * f3
rows = []
for ratio in (0.01, 1.0, 10.0):
    temp = sc.hbar * w3 / (sc.k * ratio)
    for fr in (1.0, 1.0 + 0.5 / q3, 0.999):
        f = f3 * fr
        wv = 2 * np.pi * f
        chi = 1.0 / (m3 * (w3**2 - wv**2 - 1j * (w3 / q3) * wv))
        x = sc.hbar * wv / (2 * sc.k * temp)
        rows.append({"hbar_omega_over_kt": ratio, "temperature_k": temp, "frequency_hz": f,
                     "quantum_m2_per_hz": 2 * sc.hbar / np.tanh(x) * chi.imag,
                     "classical_m2_per_hz": 4 * sc.k * temp * chi.imag / wv})
truth["thermal"] = {"mass_kg": m3, "frequency_hz": f3, "quality_factor": q3, "rows": rows}

# ---------------------------------------------------------------- 4. band / cumulative rms
fs4 = 1000.0
x4 = rng.standard_normal(4096) * 0.1 + 0.05 * np.sin(2 * np.pi * 123.4 * np.arange(4096) / fs4)
f4, p4 = signal.welch(x4, fs=fs4, window="hann", nperseg=512, noverlap=256,
                      detrend="constant", scaling="density")
df4 = f4[1] - f4[0]
band = (f4 >= 100.0) & (f4 <= 150.0)
np.asarray(x4, dtype="<f8").tofile(os.path.join(OUT, "rms_input.f64"))
truth["rms"] = {
    "file": "rms_input.f64", "sample_rate_hz": fs4, "segment": 512, "band_hz": [100.0, 150.0],
    "band_rms_v": float(np.sqrt(np.sum(p4[band]) * df4)),
    "total_rms_v": float(np.sqrt(np.sum(p4) * df4)),
    "cumulative_rms_v": [float(v) for v in np.sqrt(np.cumsum(p4) * df4)],
}

with open(os.path.join(OUT, "truth.json"), "w") as fh:
    json.dump(truth, fh, indent=1)
    fh.write("\n")
print("wrote", OUT)
