#!/usr/bin/env python3
"""Reference spectra for tests/cli.rs (`stillpoint spectrum` against scipy.signal.welch).

Run from the repository root:  python3 tests/data/cli/make_reference.py
Made with numpy 2.4.6 and scipy 1.17.1 (the script prints the versions it used).
Writes small WAV inputs and one CSV per case (frequency_hz,psd_v2_per_hz, Python repr
numbers). Windows are periodic (sym=False) as in METHODS.md §1; HFT95 coefficients from
Heinzel, Rüdiger & Schilling (2002), App. D.
"""
import os

import numpy as np
import scipy
import scipy.io.wavfile as wavfile
import scipy.signal as signal

HERE = os.path.dirname(os.path.abspath(__file__))
HFT95 = [1.0, -1.9383379, 1.3045202, -0.4028270, 0.0350665]


def window(name, n):
    if name == "hann":
        return signal.windows.hann(n, sym=False)
    if name == "hamming":
        return signal.windows.general_hamming(n, 0.54, sym=False)
    if name == "blackman-harris":
        return signal.windows.blackmanharris(n, sym=False)
    if name == "flattop":
        # general_cosine takes the magnitudes with alternating signs applied internally
        return signal.windows.general_cosine(n, [abs(c) for c in HFT95], sym=False)
    raise ValueError(name)


def record(n, rate, seed):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / rate
    x = 0.3 * rng.standard_normal(n) + 0.05 * np.sin(2 * np.pi * 0.1234 * rate * t) + 0.01
    return x


def write_csv(path, f, p):
    with open(path, "w") as out:
        out.write("frequency_hz,psd_v2_per_hz\n")
        for fk, pk in zip(f, p):
            out.write(f"{float(fk)!r},{float(pk)!r}\n")


def main():
    print("numpy", np.__version__, "scipy", scipy.__version__)
    cases = []
    # (a) float WAV, Hann, 50 %, mean detrend
    x = record(8192, 48000.0, 1).astype(np.float32)
    wavfile.write(os.path.join(HERE, "noise_f32.wav"), 48000, x)
    cases.append(("hann_mean_50", x.astype(np.float64), 48000.0,
                  dict(nperseg=1024, noverlap=512, window="hann", detrend="constant", average="mean")))
    # (b) same record, HFT95 flat-top, 75 %, linear detrend
    cases.append(("flattop_linear_75", x.astype(np.float64), 48000.0,
                  dict(nperseg=512, noverlap=384, window="flattop", detrend="linear", average="mean")))
    # (c) 16-bit WAV (full scale ±1 after /32768), volts-per-unit 2.5, Blackman-Harris, no overlap
    xi = np.clip(np.round(record(6000, 100000.0, 2) * 20000), -32768, 32767).astype(np.int16)
    wavfile.write(os.path.join(HERE, "noise_i16.wav"), 100000, xi)
    cases.append(("bh_i16_vpu2.5_0", xi.astype(np.float64) / 32768.0 * 2.5, 100000.0,
                  dict(nperseg=256, noverlap=0, window="blackman-harris", detrend="constant", average="mean")))
    # (d) float WAV, Hamming, 50 %, no detrend, median average
    cases.append(("hamming_none_median", x.astype(np.float64), 48000.0,
                  dict(nperseg=1024, noverlap=512, window="hamming", detrend=False, average="median")))
    for name, data, rate, kw in cases:
        n = kw["nperseg"]
        win = window(kw.pop("window"), n)
        f, p = signal.welch(data, fs=rate, window=win, scaling="density", return_onesided=True, **kw)
        write_csv(os.path.join(HERE, f"{name}.csv"), f, p)
        print(name, len(f), "bins")


if __name__ == "__main__":
    main()
