#!/usr/bin/python3
"""Captures for tools/bench/batch_bench.sh: COUNT two-channel 24-bit WAV files of SAMPLES
frames at 48 kHz, each a different unit of a second-order low-pass (fn about 1.2 kHz, zeta
about 0.5) under an odd multisine (harmonics 1..49 of about 100 Hz). Seeded, so every run
generates the same files. Needs numpy (Debian python3-numpy).

Usage: batch_bench_gen.py FOLDER [COUNT=400] [SAMPLES=200000]
"""
import os
import sys
import wave

import numpy as np


def main():
    folder = sys.argv[1]
    count = int(sys.argv[2]) if len(sys.argv) > 2 else 400
    samples = int(sys.argv[3]) if len(sys.argv) > 3 else 200000
    os.makedirs(folder, exist_ok=True)
    fs = 48000
    rng = np.random.default_rng(20261202)
    harmonics = np.arange(1, 50, 2)
    phases = -np.pi * np.arange(1, 26) * np.arange(0, 25) / 25  # Schroeder (1970)
    t = np.arange(samples) / fs
    full = 2 ** 23 - 1
    for unit in range(count):
        f0 = 100 * (1 + rng.normal(0, 3e-4))
        fn = 1200 * (1 + rng.normal(0, 0.01))
        zeta = 0.5 * (1 + rng.normal(0, 0.02))
        s = 1j * harmonics * f0 / fn
        h = 1 / (s * s + 2 * zeta * s + 1)
        arg = 2 * np.pi * f0 * np.outer(t, harmonics) + phases
        x = 0.03 * np.cos(arg).sum(axis=1) + rng.normal(0, 1e-4, samples)
        y = (0.03 * np.abs(h) * np.cos(arg + np.angle(h))).sum(axis=1) + rng.normal(0, 1e-4, samples)
        q = np.round(np.stack([x, y], 1) * full).astype("<i4")
        frames = q.view(np.uint8).reshape(-1, 4)[:, :3].tobytes()
        with wave.open(os.path.join(folder, "unit_%04d.wav" % unit), "wb") as w:
            w.setnchannels(2)
            w.setsampwidth(3)
            w.setframerate(fs)
            w.writeframes(frames)


if __name__ == "__main__":
    main()
