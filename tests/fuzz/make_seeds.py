#!/usr/bin/env python3
"""Seed inputs for the wav_reader fuzz target: tiny valid WAV files of every layout the reader
supports, written byte by byte from the RIFF/WAVE definition (Microsoft "Multimedia
Programming Interface and Data Specifications 1.0", 1991; WAVE_FORMAT_EXTENSIBLE from the
Windows SDK's mmreg.h; RF64 from EBU Tech 3306), with the standard library only. Without
them libFuzzer rarely gets past the header (measured 2026-12-02: cov 110 of 1503 counters
after 10^6 runs from an empty corpus).

Run:  python3 tests/fuzz/make_seeds.py      (rewrites tests/fuzz/seeds/wav_reader/)
"""
import math
import os
import struct

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "seeds", "wav_reader")
PCM, FLOAT, EXTENSIBLE = 1, 3, 0xFFFE
# KSDATAFORMAT_SUBTYPE_PCM / _IEEE_FLOAT: the format tag, then the fixed GUID tail.
GUID_TAIL = bytes.fromhex("000000001000800000aa00389b71")


def samples(frames, channels):
    return [math.sin(0.3 * i + c) * 0.5 for i in range(frames) for c in range(channels)]


def encode(values, bits, is_float):
    if is_float:
        return b"".join(struct.pack("<f" if bits == 32 else "<d", v) for v in values)
    full = 2 ** (bits - 1) - 1
    out = b""
    for v in values:
        code = int(round(v * full))
        if bits == 8:  # 8-bit WAV PCM is unsigned
            out += struct.pack("<B", code + 128)
        else:
            out += code.to_bytes(bits // 8, "little", signed=True)
    return out


def fmt_chunk(tag, channels, rate, bits, extensible_tag=None):
    block = channels * bits // 8
    body = struct.pack("<HHIIHH", tag, channels, rate, rate * block, block, bits)
    if tag == EXTENSIBLE:
        mask = (1 << channels) - 1
        body += struct.pack("<HHI", 22, bits, mask) + struct.pack("<H", extensible_tag) + GUID_TAIL
    return b"fmt " + struct.pack("<I", len(body)) + body


def riff(chunks, data_size_field=None, form=b"RIFF"):
    body = b"WAVE" + b"".join(chunks)
    size = len(body) if data_size_field is None else data_size_field
    return form + struct.pack("<I", size) + body


def data_chunk(payload, declared=None):
    n = len(payload) if declared is None else declared
    pad = b"\0" if len(payload) % 2 else b""
    return b"data" + struct.pack("<I", n) + payload + pad


def write(name, content):
    with open(os.path.join(OUT, name), "wb") as f:
        f.write(content)


def main():
    os.makedirs(OUT, exist_ok=True)
    for old in os.listdir(OUT):
        os.remove(os.path.join(OUT, old))
    rate = 8000
    for bits, is_float, channels in [(8, False, 1), (16, False, 1), (16, False, 2), (24, False, 1),
                                     (24, False, 3), (32, False, 2), (32, True, 1), (64, True, 2)]:
        tag = FLOAT if is_float else PCM
        payload = encode(samples(6, channels), bits, is_float)
        name = f"{'f' if is_float else 'i'}{bits}_{channels}ch.wav"
        write(name, riff([fmt_chunk(tag, channels, rate, bits), data_chunk(payload)]))
    # WAVE_FORMAT_EXTENSIBLE, integer and float.
    for bits, sub in [(24, PCM), (32, FLOAT)]:
        payload = encode(samples(5, 2), bits, sub == FLOAT)
        write(f"extensible_{bits}.wav",
              riff([fmt_chunk(EXTENSIBLE, 2, rate, bits, sub), data_chunk(payload)]))
    payload = encode(samples(8, 1), 16, False)
    fmt = fmt_chunk(PCM, 1, rate, 16)
    # An extra chunk before the data, an odd-sized one (padded), and a LIST after it.
    extra = b"fact" + struct.pack("<I", 4) + struct.pack("<I", 8)
    odd = b"junk" + struct.pack("<I", 3) + b"abc\0"
    listc = b"LIST" + struct.pack("<I", 4) + b"INFO"
    write("chunks.wav", riff([fmt, extra, odd, data_chunk(payload), listc]))
    # A recorder that died: data size "unknown" (0xFFFFFFFF), and one cut short.
    write("unknown_size.wav", riff([fmt, data_chunk(payload, 0xFFFFFFFF)], 0xFFFFFFFF))
    # Header sizes disagree (damaged: refused), and a recorder that died mid-file (the RIFF
    # size agrees with the declared data size, the bytes stop early: read with a warning).
    write("truncated.wav", riff([fmt, data_chunk(payload, 4 * len(payload))]))
    cut = fmt + b"data" + struct.pack("<I", 4 * len(payload)) + payload
    write("cut_short.wav", b"RIFF" + struct.pack("<I", 4 + len(fmt) + 8 + 4 * len(payload))
          + b"WAVE" + cut)
    # RF64 with a ds64 chunk giving the real sizes (64-bit) and 0xFFFFFFFF in the 32-bit ones.
    data = data_chunk(payload, 0xFFFFFFFF)
    ds64_body = struct.pack("<QQQI", 4 + 36 + 8 + 24 + len(data), len(payload), len(payload) // 2, 0)
    ds64 = b"ds64" + struct.pack("<I", len(ds64_body)) + ds64_body
    write("rf64.wav", riff([ds64, fmt, data], 0xFFFFFFFF, form=b"RF64"))


if __name__ == "__main__":
    main()
