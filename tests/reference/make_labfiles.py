#!/usr/bin/env python3
"""Lab files for tests/labfiles.rs: NumPy .npy and HDF5 records written by numpy and h5py
themselves (an outside writer, not our code), and scipy.signal.welch reference spectra of
some of them.

Made with numpy 2.4.6, scipy 1.17.1 and h5py 3.16.0 (HDF5 library 2.0.0); the script prints
the versions it ran with and writes them into tests/data/labfiles/reference.json.
Install: pip install numpy==2.4.6 scipy==1.17.1 h5py==3.16.0
Run from the repository root:  python3 tests/reference/make_labfiles.py

Writes into tests/data/labfiles/ (every file a few KB):
  npy/*.npy          good arrays: every supported dtype, both byte orders, 1-D and 2-D
                     [samples, channels], format versions 1.0, 2.0 and 3.0;
                     bad ones: Fortran order, object, structured, unsupported dtypes, 3-D,
                     empty, corrupt header, truncated body, not a .npy at all
  lab.h5             h5py defaults (libver 'earliest': superblock v0, v1 object headers,
                     symbol-table groups, v1 B-tree chunk index): contiguous and chunked,
                     gzip with and without shuffle, big-endian, rate attributes
                     sample_rate_hz / fs / rate (also two at once, and a string one), a
                     dataset without rate, a string dataset, unsupported dtype and rank
  latest.h5          libver='v112' (superblock v3, v2 object headers, link messages,
                     fixed-array and extensible-array chunk indexes)
  v200.h5            libver='latest' of HDF5 2.0 (data-layout message v5): refused clearly
  corrupt.h5         lab.h5 with its superblock overwritten
  reference.json     scipy.signal.welch of some datasets (Hann, periodic, 50 %, mean detrend,
                     scaling='density'), with the options and the stillpoint arguments

Signals: white Gaussian noise + a tone + an offset from numpy's default_rng (fixed seeds).
"""
import json
import os

import h5py
import numpy as np
import scipy
import scipy.signal as signal

OUT = os.path.join("tests", "data", "labfiles")
NPY = os.path.join(OUT, "npy")
N = 2048


def signal_f64(n, rate, seed, channels=1):
    rng = np.random.default_rng(seed)
    t = np.arange(n) / rate
    cols = []
    for c in range(channels):
        cols.append(0.3 * rng.standard_normal(n)
                    + (0.05 + 0.02 * c) * np.sin(2 * np.pi * (0.1 + 0.07 * c) * rate * t)
                    + 0.01 * (c + 1))
    x = np.stack(cols, axis=1)
    return x[:, 0] if channels == 1 else x


def counts(x, scale, dtype):
    info = np.iinfo(dtype)
    return np.clip(np.round(x * scale), info.min + 1, info.max - 1).astype(dtype)


def welch(x, rate, nperseg):
    f, p = signal.welch(np.asarray(x, dtype=np.float64), fs=rate, window="hann",
                        nperseg=nperseg, noverlap=nperseg // 2, detrend="constant",
                        scaling="density", average="mean")
    return [float(v) for v in f], [float(v) for v in p]


def main():
    versions = {"numpy": np.__version__, "scipy": scipy.__version__,
                "h5py": h5py.__version__, "hdf5": h5py.version.hdf5_version}
    print(versions)
    os.makedirs(NPY, exist_ok=True)
    refs = []

    # ---------- .npy: good files ----------
    x1 = signal_f64(N, 1000.0, 11)
    np.save(os.path.join(NPY, "f32_le_1d.npy"), x1.astype("<f4"))
    np.save(os.path.join(NPY, "f64_be_1d.npy"), x1.astype(">f8"))
    f, p = welch(x1.astype("<f4"), 1000.0, 256)
    refs.append({"name": "npy_f32_le_1d", "file": "npy/f32_le_1d.npy",
                 "args": ["--rate", "1000", "--segment", "256"], "frequency_hz": f, "psd": p})
    f, p = welch(x1.astype(">f8"), 1000.0, 256)
    refs.append({"name": "npy_f64_be_1d", "file": "npy/f64_be_1d.npy",
                 "args": ["--rate", "1000", "--segment", "256"], "frequency_hz": f, "psd": p})

    x2 = signal_f64(N, 2000.0, 12, channels=2)
    i16 = counts(x2, 8000.0, np.int16)
    np.save(os.path.join(NPY, "i16_le_2d.npy"), i16.astype("<i2"))
    np.save(os.path.join(NPY, "i16_be_2d.npy"), i16.astype(">i2"))
    # the same counts as a raw interleaved file, to compare the two readers byte for byte
    i16.astype("<i2").tofile(os.path.join(NPY, "i16_le_2d.raw"))
    vpu = 3.05e-5
    f, p = welch(i16[:, 1].astype(np.float64) * vpu, 2000.0, 256)
    refs.append({"name": "npy_i16_be_2d_ch1", "file": "npy/i16_be_2d.npy",
                 "args": ["--rate", "2000", "--segment", "256", "--channel", "1",
                          "--volts-per-unit", "3.05e-05"], "frequency_hz": f, "psd": p})

    x3 = signal_f64(1024, 500.0, 13, channels=3)
    i32 = counts(x3, 1e6, np.int32)
    np.save(os.path.join(NPY, "i32_le_3ch.npy"), i32.astype("<i4"))
    np.save(os.path.join(NPY, "i32_be_3ch.npy"), i32.astype(">i4"))
    f, p = welch(i32[:, 2].astype(np.float64) * 1e-6, 500.0, 128)
    refs.append({"name": "npy_i32_le_3ch_ch2", "file": "npy/i32_le_3ch.npy",
                 "args": ["--rate", "500", "--segment", "128", "--channel", "2",
                          "--volts-per-unit", "1e-06"], "frequency_hz": f, "psd": p})

    small = x1[:512].astype("<f4")
    for version in [(1, 0), (2, 0), (3, 0)]:
        with open(os.path.join(NPY, f"f32_v{version[0]}.npy"), "wb") as out:
            np.lib.format.write_array(out, small, version=version)

    # ---------- .npy: bad files ----------
    np.save(os.path.join(NPY, "fortran.npy"), np.asfortranarray(x2[:64].astype("<f4")))
    np.save(os.path.join(NPY, "object.npy"), np.array([1.0, "a", None], dtype=object),
            allow_pickle=True)
    np.save(os.path.join(NPY, "structured.npy"),
            np.zeros(16, dtype=[("t", "<f8"), ("v", "<f4")]))
    np.save(os.path.join(NPY, "u16.npy"), np.arange(64, dtype="<u2"))
    np.save(os.path.join(NPY, "i64.npy"), np.arange(64, dtype="<i8"))
    np.save(os.path.join(NPY, "c64.npy"), np.zeros(64, dtype="<c8"))
    np.save(os.path.join(NPY, "three_d.npy"), np.zeros((4, 4, 4), dtype="<f4"))
    np.save(os.path.join(NPY, "empty.npy"), np.zeros(0, dtype="<f4"))
    good = open(os.path.join(NPY, "f32_le_1d.npy"), "rb").read()
    corrupt = bytearray(good)
    at = corrupt.index(b"'shape'")
    corrupt[at:at + 7] = b"'sh@pe'"
    corrupt[at - 30:at - 25] = b"#####"
    open(os.path.join(NPY, "corrupt_header.npy"), "wb").write(bytes(corrupt))
    # cut in the middle of the body: 1000 of 2048 samples and half a sample
    open(os.path.join(NPY, "truncated.npy"), "wb").write(good[:128 + 4 * 1000 + 2])
    open(os.path.join(NPY, "not_numpy.npy"), "wb").write(b"time,volts\n0,1\n1,2\n")

    # ---------- HDF5 (h5py defaults: libver 'earliest') ----------
    h5 = os.path.join(OUT, "lab.h5")
    xa = signal_f64(N, 1000.0, 21)
    xb = signal_f64(N, 2000.0, 22, channels=2)
    xc = signal_f64(N, 500.0, 23)
    xd = signal_f64(N, 4000.0, 24, channels=3)
    ib = counts(xb, 8000.0, np.int16)
    id_ = counts(xd, 1e6, np.int32)
    with h5py.File(h5, "w") as f5:
        g = f5.create_group("raw")
        d = g.create_dataset("contiguous_f32", data=xa.astype("<f4"))
        d.attrs["sample_rate_hz"] = 1000.0
        d = g.create_dataset("chunked_i16", data=ib, chunks=(256, 2), compression="gzip",
                             shuffle=True)
        d.attrs["fs"] = 2000.0
        d = g.create_dataset("auto_chunked_f64_be", data=xc.astype(">f8"), chunks=True)
        d.attrs["rate"] = np.float32(500.0)
        d = g.create_dataset("gzip_i32", data=id_, compression="gzip")
        d.attrs["sample_rate_hz"] = np.int64(4000)
        d.attrs["fs"] = 1.0  # ignored: sample_rate_hz comes first
        g.create_dataset("no_rate", data=xa[:512].astype("<f4"))
        d = g.create_dataset("text_rate", data=xa[:512].astype("<f4"))
        d.attrs["sample_rate_hz"] = "fast"
        d = g.create_dataset("negative_rate", data=xa[:512].astype("<f4"))
        d.attrs["fs"] = -5.0
        g.create_dataset("u16", data=np.arange(64, dtype="<u2"))
        g.create_dataset("three_d", data=np.zeros((4, 4, 4), dtype="<f4"))
        f5.create_dataset("labels", data=np.array([b"cooldown", b"laser on"]))
        f5.create_dataset("notes", data="a variable-length string", dtype=h5py.string_dtype())
        f5.attrs["created_by"] = "tests/reference/make_labfiles.py"
    f, p = welch(xa.astype("<f4"), 1000.0, 256)
    refs.append({"name": "h5_contiguous_f32", "file": "lab.h5",
                 "args": ["--dataset", "/raw/contiguous_f32", "--segment", "256"],
                 "frequency_hz": f, "psd": p})
    f, p = welch(ib[:, 1].astype(np.float64) * 1e-4, 2000.0, 256)
    refs.append({"name": "h5_chunked_i16_ch1", "file": "lab.h5",
                 "args": ["--dataset", "/raw/chunked_i16", "--segment", "256", "--channel", "1",
                          "--volts-per-unit", "0.0001"], "frequency_hz": f, "psd": p})
    f, p = welch(xc.astype(">f8"), 500.0, 256)
    refs.append({"name": "h5_auto_chunked_f64_be", "file": "lab.h5",
                 "args": ["--dataset", "/raw/auto_chunked_f64_be", "--segment", "256"],
                 "frequency_hz": f, "psd": p})
    f, p = welch(id_[:, 2].astype(np.float64) * 1e-6, 4000.0, 512)
    refs.append({"name": "h5_gzip_i32_ch2", "file": "lab.h5",
                 "args": ["--dataset", "raw/gzip_i32", "--segment", "512", "--channel", "2",
                          "--volts-per-unit", "1e-06"], "frequency_hz": f, "psd": p})

    # ---------- HDF5, newest format ----------
    latest = os.path.join(OUT, "latest.h5")
    xe = signal_f64(N, 8000.0, 25)
    # HDF5 2.0's libver='latest' writes data-layout messages of version 5, which the reader
    # refuses (see v200.h5 below); 'v112' gives the newest structures it reads: superblock
    # v3, v2 object headers, link messages, fixed- and extensible-array chunk indexes.
    with h5py.File(latest, "w", libver=("v112", "v112")) as f5:
        d = f5.create_dataset("fixed", data=xe.astype("<f4"), chunks=(256,),
                              compression="gzip", shuffle=True)
        d.attrs["sample_rate_hz"] = 8000.0
        d = f5.create_dataset("run/extensible", data=xe.astype("<f4"), chunks=(300,),
                              maxshape=(None,), compression="gzip", shuffle=True)
        d.attrs["fs"] = 8000.0
    f, p = welch(xe.astype("<f4"), 8000.0, 256)
    for name in ["/fixed", "/run/extensible"]:
        refs.append({"name": "h5_latest" + name.replace("/", "_"), "file": "latest.h5",
                     "args": ["--dataset", name, "--segment", "256"],
                     "frequency_hz": f, "psd": p})

    with h5py.File(os.path.join(OUT, "v200.h5"), "w", libver="latest") as f5:
        f5.create_dataset("fixed", data=xe[:256].astype("<f4"), chunks=(64,),
                          compression="gzip").attrs["fs"] = 8000.0

    data = bytearray(open(h5, "rb").read())
    data[0:64] = b"\x00" * 64
    open(os.path.join(OUT, "corrupt.h5"), "wb").write(bytes(data[:4096]))

    with open(os.path.join(OUT, "reference.json"), "w") as out:
        json.dump({"versions": versions,
                   "welch": "scipy.signal.welch(x, fs, window='hann', nperseg, "
                            "noverlap=nperseg//2, detrend='constant', scaling='density')",
                   "cases": refs}, out, indent=1)
        out.write("\n")


if __name__ == "__main__":
    main()
