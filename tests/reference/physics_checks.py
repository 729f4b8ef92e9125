#!/usr/bin/env python3
"""Independent check values for stillpoint's physics (tests/physics.rs reads the JSON output).

Computed with numpy/scipy from the formulas of docs METHODS.md §2-§7, written out here again
from the sources (not from the Rust code):
  - CODATA 2018 constants (Tiesinga et al., RMP 93, 025010 (2021)) via scipy.constants;
  - damped oscillator, FDT, zero point and SQL (Aspelmeyer, Kippenberg & Marquardt, RMP 86,
    1391 (2014); Clerk et al., RMP 82, 1155 (2010)), single-sided (x2 of the two-sided forms);
  - Bose-Einstein occupancy and its inversion;
  - frequency-noise calibration (Gorodetsky et al., Opt. Express 18, 23236 (2010));
  - sideband asymmetry n = 1/(R-1) (Safavi-Naeini et al., PRL 108, 033602 (2012)).

Run:  python3 tests/reference/physics_checks.py > tests/data/physics/physics_checks.json
"""
import json
import sys

import numpy as np
import scipy
from scipy import constants as sc
from scipy import integrate

hbar = sc.hbar
kB = sc.k
out = {"numpy": np.__version__, "scipy": scipy.__version__, "python": sys.version.split()[0]}

# --- METHODS §7 invented example -------------------------------------------------------------
m = 1.0e-13
fm = 1.0e6
Q = 1.0e5
T = 4.0
Wm = 2 * np.pi * fm
Gam = Wm / Q
gam = Gam / (2 * np.pi)
xzpf = np.sqrt(hbar / (2 * m * Wm))
x = hbar * Wm / (kB * T)
nbe = 1.0 / np.expm1(x)
n_hi = kB * T / (hbar * Wm)
var_th = kB * T / (m * Wm**2)


def chi(f):
    W = 2 * np.pi * f
    return 1.0 / (m * (Wm**2 - W**2 - 1j * Gam * W))


thermal_peak = 4 * kB * T * chi(fm).imag / Wm
zp_peak = 2 * hbar * chi(fm).imag
sql_fm = 2 * hbar * abs(chi(fm))
s_imp = hbar * abs(chi(fm))
s_ff = hbar / abs(chi(fm))
out["example"] = {
    "mass_kg": m, "frequency_hz": fm, "quality_factor": Q, "temperature_k": T,
    "damping_rad_s": Gam, "linewidth_hz": gam,
    "x_zpf_m": xzpf, "hbar_omega_over_kt": x,
    "occupancy_be": nbe, "occupancy_high_t": n_hi,
    "variance_th_m2": var_th, "x_rms_m": np.sqrt(var_th),
    "variance_quantum_m2": xzpf**2 * (2 * nbe + 1),
    "thermal_peak_m2_per_hz": thermal_peak,
    "thermal_peak_formula_m2_per_hz": 4 * kB * T * Q / (m * Wm**3),
    "zero_point_peak_m2_per_hz": zp_peak,
    "zero_point_peak_formula_m2_per_hz": 2 * hbar * Q / (m * Wm**2),
    "sql_at_resonance_m2_per_hz": sql_fm,
    "sql_imprecision_m2_per_hz": s_imp, "sql_backaction_n2_per_hz": s_ff,
    "hbar_squared": hbar**2,
    "thermal_over_zero_point": thermal_peak / zp_peak,
    "g0_over_2pi_hz_for_1ghz_per_nm": 1e9 / 1e-9 * xzpf,
    "t_eff_for_n2_k": hbar * Wm / (kB * np.log(1 + 1 / 2.0)),
}

# Curves at a few frequencies (classical thermal, quantum symmetrised, zero point, SQL).
fs = [0.0, 1.0e5, 9.9999e5, 1.0e6, 1.00003e6, 3.0e6]
curves = []
for f in fs:
    W = 2 * np.pi * f
    c = chi(f)
    th = 4 * kB * T * (Gam / (m * ((Wm**2 - W**2) ** 2 + Gam**2 * W**2)))
    if f > 0:
        q = 2 * hbar / np.tanh(hbar * W / (2 * kB * T)) * c.imag
    else:
        q = th
    curves.append({"frequency_hz": f, "classical_thermal": th, "quantum_thermal": q,
                   "zero_point": 2 * hbar * c.imag, "sql": 2 * hbar * abs(c)})
out["curves"] = curves

# --- T5: numerical area of the HO form ------------------------------------------------------
def s_th(f):
    W = 2 * np.pi * f
    return 4 * kB * T * Gam / (m * ((Wm**2 - W**2) ** 2 + Gam**2 * W**2))

pts = [fm - 50 * gam, fm - 5 * gam, fm, fm + 5 * gam, fm + 50 * gam]
area = 0.0
edges = [0.0] + pts + [10 * fm]
for a, b in zip(edges[:-1], edges[1:]):
    area += integrate.quad(s_th, a, b, limit=500, epsabs=0, epsrel=1e-12)[0]
# tail beyond 10 f_m: substitute f = 1/u (S ~ f^-4 there), integrate u from 0 to 1/(10 f_m)
area += integrate.quad(lambda u: s_th(1 / u) / u**2 if u > 0 else 0.0, 0, 1 / (10 * fm), limit=500)[0]
out["t5"] = {"numerical_area_m2": area, "equipartition_m2": var_th}

# Hz-form with area 1: integral = 1 exactly for a low-Q case too.
def hz_form(f, A, f0, g):
    return A * (2 / np.pi) * f0**2 * g / ((f0**2 - f**2) ** 2 + g**2 * f**2)

a_low_q = integrate.quad(hz_form, 0, np.inf, args=(1.0, 1000.0, 100.0), limit=500)[0]
out["hz_form_area_q10"] = a_low_q

# --- Bose-Einstein inversion, 4 K bath, nanobeam -----------------------------------------------
out["bose_einstein"] = [
    {"frequency_hz": f, "temperature_k": t, "occupancy": 1.0 / np.expm1(hbar * 2 * np.pi * f / (kB * t))}
    for f, t in [(1e6, 4.0), (1e6, 1e-4), (3.7e9, 0.01), (3.7e9, 4.0), (5e3, 300.0)]
]
out["nanobeam"] = {"mass_kg": 300e-18, "frequency_hz": 3.7e9,
                   "x_zpf_m": np.sqrt(hbar / (2 * 300e-18 * 2 * np.pi * 3.7e9)),
                   "x_zpf_1ghz_m": np.sqrt(hbar / (2 * 300e-18 * 2 * np.pi * 1e9)),
                   "x_zpf_5ghz_m": np.sqrt(hbar / (2 * 300e-18 * 2 * np.pi * 5e9))}

# --- T7: PM-tone calibration round trip (Gorodetsky et al. 2010) ---------------------------------
beta = 1e-3
fmod = 1.05e6
G_over_2pi = 1e9 / 1e-9  # Hz per metre
gain = 2.5e9  # V per metre (invented)
x_pk = beta * fmod / G_over_2pi
x_rms2 = x_pk**2 / 2
p_tone_v2 = gain**2 * x_rms2
a_mech_v2 = gain**2 * xzpf**2 * (2 * nbe + 1)
g0sq = (beta**2 * (2 * np.pi * fmod) ** 2 / 2) * (a_mech_v2 / p_tone_v2) / (2 * nbe + 1)
# G10 peak form: S_VV(f_m) Gamma/4 over S_VV(f_mod) ENBW with a bin-centred tone.
out["t7"] = {"beta_rad": beta, "f_mod_hz": fmod, "freq_pull_hz_per_m": G_over_2pi,
             "gain_v_per_m": gain, "x_cal_pk_m": x_pk, "x_cal_rms_m": np.sqrt(x_rms2),
             "tone_power_v2": p_tone_v2, "mode_area_v2": a_mech_v2,
             "c2_m2_per_v2": x_rms2 / p_tone_v2,
             "g0_over_2pi_hz": np.sqrt(g0sq) / (2 * np.pi)}

# --- T8: sideband ratio ---------------------------------------------------------------------------
R = 1.5
eps = 0.02
sR = R * np.sqrt(2) * eps
n = 1 / (R - 1)
rng = np.random.default_rng(12345)
aS = 1.5 * (1 + eps * rng.standard_normal(400000))
aAS = 1.0 * (1 + eps * rng.standard_normal(400000))
nmc = 1 / (aS / aAS - 1)
out["t8"] = {"ratio": R, "area_rel_error": eps, "occupancy": n, "occupancy_sigma": sR / (R - 1) ** 2,
             "mc_mean": float(np.mean(nmc)), "mc_sd": float(np.std(nmc)),
             "others": [{"ratio": r, "occupancy": 1 / (r - 1)} for r in (2.0, 11.0)]}

# --- window bin correlation (Hann, Hamming, BH92) ------------------------------------------------
def rho_bin(c, N=4096, lags=4):
    j = np.arange(N)
    w = sum(cn * np.cos(2 * np.pi * k * j / N) for k, cn in enumerate(c))
    w2 = w**2
    return [float(abs(np.sum(w2 * np.exp(-2j * np.pi * j * l / N))) ** 2 / np.sum(w2) ** 2)
            for l in range(1, lags + 1)]

out["rho_bin"] = {"hann": rho_bin([0.5, -0.5]), "hamming": rho_bin([0.54, -0.46]),
                  "blackman-harris": rho_bin([0.35875, -0.48829, 0.14128, -0.01168])}

# Median-of-chi2 bias: median of chi2_nu/nu for nu = 2K_eff (used by the peak floor).
from scipy import stats
out["chi2_median_over_mean"] = [{"nu": nu, "ratio": float(stats.chi2.median(nu) / nu)}
                                for nu in (2, 10, 38, 200)]
from scipy import special
out["log_chi2_mean_db"] = [{"nu": nu, "db": float(10 / np.log(10) * (special.digamma(nu / 2) - np.log(nu / 2)))}
                           for nu in (2, 20, 200)]

# --- Equipartition error budget: sensitivity of coth(x/2) and of n_BE to T, by central
# differences in numpy (not the closed forms the Rust code uses) ---------------------------
def ln_sym_var(f, T):
    return np.log(1.0 / np.tanh(hbar * 2 * np.pi * f / (2 * kB * T)))


def n_be(f, T):
    return 1.0 / np.expm1(hbar * 2 * np.pi * f / (kB * T))


sens = []
for f, T in [(86.1e3, 295.0), (1.0e6, 4.0), (3.7e9, 0.5), (5.0e9, 0.05), (5.0e9, 0.02)]:
    h = 1e-5
    dlnv = (ln_sym_var(f, T * (1 + h)) - ln_sym_var(f, T * (1 - h))) / (np.log1p(h) - np.log1p(-h))
    dn = (n_be(f, T * (1 + h)) - n_be(f, T * (1 - h))) / (2 * h * T)
    sens.append({"frequency_hz": f, "temperature_k": T, "dlnvar_dlnT": float(dlnv), "dn_dT": float(dn)})
out["temperature_sensitivity"] = sens

json.dump(out, sys.stdout, indent=1, default=float)
print()
