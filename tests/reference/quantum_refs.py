#!/usr/bin/env python3
"""Independent check values for the `quantum` demo scenario (tests/quantum_demo.rs reads them).

Written again here from the sources, not from the Rust code (numpy 2.4.6, scipy 1.17.1):
  - Bose-Einstein occupancy n = 1/(exp(hbar*Omega/kB*T) - 1) (METHODS §4);
  - resolved-sideband laser cooling: Gamma_eff = Gamma_m + Gamma_opt and
    n_f = (Gamma_m n_bath + Gamma_opt n_min)/(Gamma_m + Gamma_opt), n_min = (kappa/4 Omega_m)^2
    [Aspelmeyer, Kippenberg & Marquardt, RMP 86, 1391 (2014), sec. VII.A, from memory;
    Marquardt et al., PRL 99, 093902 (2007), from memory];
  - heterodyne sideband areas x_zpf^2 (n+1) (red, Stokes) and x_zpf^2 n (blue), R = (n+1)/n
    (METHODS §6; Safavi-Naeini et al., PRL 108, 033602 (2012)).
The scenario's stated schedule (src/synth/quantum.rs docs, also in the truth JSON) is
re-implemented from its description.

Also writes an independent heterodyne record (numpy resonators, not our synthesiser):
tests/data/quantum/numpy_sidebands.wav (f32, 100 kHz, 0.6 s) with its truth in the JSON.

Run:  python3 tests/reference/quantum_refs.py
"""
import json
import os
import struct
import sys

import numpy as np
import scipy
from scipy import constants as sc
from scipy import signal

hbar, kB = sc.hbar, sc.k
here = os.path.dirname(os.path.abspath(__file__))
out_dir = os.path.join(here, "..", "data", "quantum")
os.makedirs(out_dir, exist_ok=True)

# --- the scenario's defaults (src/synth/mod.rs "quantum", src/synth/quantum.rs) -------------
m_eff = 2.0e-12
T0, f0, Q0 = 295.0, 86_100.0, 5.0e4
Tb, fb, Qb = 4.0, 86_400.0, 2.0e7
g_opt_final = 2_000.0
kappa = 40_000.0
stages = [60.0, 20.0, 60.0, 60.0]


def bose(f, T):
    return 1.0 / np.expm1(hbar * 2 * np.pi * f / (kB * T))


def state(tc):
    s0, s1, s2, _ = stages
    k = 6.0
    u = min(max(tc / s0, 0.0), 1.0)
    w = (np.exp(-k * u) - np.exp(-k)) / (1 - np.exp(-k))
    T = Tb + (T0 - Tb) * w
    f = fb + (f0 - fb) * w
    Q = 1.0 / (1 / Qb + (1 / Q0 - 1 / Qb) * w)
    gm = f / Q
    if tc < s0 + s1:
        uc = 0.0
    elif tc < s0 + s1 + s2:
        uc = (tc - s0 - s1) / s2
    else:
        uc = 1.0
    go = gm * ((1 + g_opt_final / gm) ** uc - 1)
    ge = gm + go
    nb = bose(f, T)
    nmin = (kappa / (4 * f)) ** 2
    n = (gm * nb + go * nmin) / ge
    xz2 = hbar / (2 * m_eff * 2 * np.pi * f)
    return {
        "time_secs": tc, "bath_temperature_k": T, "frequency_hz": f,
        "intrinsic_linewidth_hz": gm, "optical_damping_hz": go, "linewidth_hz": ge,
        "bath_occupancy": nb, "minimum_occupancy": nmin, "occupancy": n,
        "x_zpf_m": np.sqrt(xz2), "red_area_m2": xz2 * (n + 1), "blue_area_m2": xz2 * n,
        "ratio": (n + 1) / n,
        "effective_temperature_k": hbar * 2 * np.pi * f / (kB * np.log1p(1 / n)),
    }


times = [0.0, 15.0, 30.0, 59.0, 60.0, 70.0, 80.0, 95.0, 110.0, 125.0, 139.0, 140.0, 170.0, 199.0]
refs = {
    "numpy": np.__version__, "scipy": scipy.__version__, "python": sys.version.split()[0],
    "states": [{k: float(v) for k, v in state(t).items()} for t in times],
}

# --- an independent heterodyne record ----------------------------------------------------------
# Each sideband: white noise through a two-pole resonator (poles r e^{+-i theta}, r = e^{-pi g/fs}),
# whose PSD near its peak is a Lorentzian of FWHM g; its variance is sigma_e^2 * sum(h^2) from
# the impulse response. Scaled to areas a_red = a (n+1), a_blue = a n. LO above: red = upper.
rng = np.random.default_rng(20261203)
fs, dur = 100_000.0, 0.6
N = int(fs * dur)
fc, fm, g, n_true, a_unit = 30_000.0, 12_000.0, 400.0, 2.0, 2.0e-4
floor = 2.0e-9  # V^2/Hz single-sided: white variance floor*fs/2


def resonator(f, var, burn=20_000):
    r = np.exp(-np.pi * g / fs)
    th = 2 * np.pi * f / fs
    a = [1.0, -2 * r * np.cos(th), r * r]
    imp = np.zeros(200_000)
    imp[0] = 1.0
    h = signal.lfilter([1.0], a, imp)
    gain = np.sum(h * h)
    e = rng.standard_normal(N + burn) * np.sqrt(var / gain)
    return signal.lfilter([1.0], a, e)[burn:]


red_var, blue_var = a_unit * (n_true + 1), a_unit * n_true
x = resonator(fc + fm, red_var) + resonator(fc - fm, blue_var)
t = np.arange(N) / fs
x += np.sqrt(2) * 0.05 * np.sin(2 * np.pi * fc * t + 0.3)
x += rng.standard_normal(N) * np.sqrt(floor * fs / 2)
data = x.astype("<f4").tobytes()
wav = os.path.join(out_dir, "numpy_sidebands.wav")
with open(wav, "wb") as fh:
    fh.write(b"RIFF" + struct.pack("<I", 36 + len(data)) + b"WAVE")
    fh.write(b"fmt " + struct.pack("<IHHIIHH", 16, 3, 1, int(fs), int(fs) * 4, 4, 32))
    fh.write(b"data" + struct.pack("<I", len(data)) + data)
refs["numpy_record"] = {
    "file": "numpy_sidebands.wav", "sample_rate_hz": fs, "duration_secs": dur,
    "carrier_hz": fc, "mechanical_frequency_hz": fm, "linewidth_hz": g, "lo_side": "above",
    "occupancy": n_true, "ratio": (n_true + 1) / n_true,
    "red_area_v2": red_var, "blue_area_v2": blue_var, "floor_v2_per_hz": floor,
    "area_scatter_per_line": float(np.sqrt(2 / (2 * np.pi * g * dur))),
}
with open(os.path.join(out_dir, "quantum_refs.json"), "w") as fh:
    json.dump(refs, fh, indent=1)
print("wrote", wav, "and quantum_refs.json")
