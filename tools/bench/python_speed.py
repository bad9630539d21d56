#!/usr/bin/python3
"""The Python module's analyze against the CLI's analysis on the same 1M-sample capture, in one
run (issue: the module may cost at most 1.1x the CLI's analysis time minus its file reading).

  PYTHONPATH=build/python tools/bench/python_speed.py [--exe build/periodfit] [--samples 1000000] [--repeat 5]

The capture is a 64-bit float WAV (exact doubles, cheap to read), a 997 Hz tone with harmonics
and noise at 48 kHz. Measured, best of --repeat each:
  cli_total   wall time of `periodfit analyze FILE --json /dev/null` (process start, read, analysis, JSON)
  read        periodfit.read_capture(FILE) in Python (the same C++ reader)
  cli_analysis = cli_total - read
  module      periodfit.analyze(samples, rate) on the float64 array (no copy), to_dict() included
Prints the ratio module / cli_analysis. docs/performance.md, "Python module"."""
import argparse
import os
import subprocess
import tempfile
import time

import numpy as np

import periodfit


def best(f, repeat):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        f()
        times.append(time.perf_counter() - t)
    return min(times)


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--exe", default="build/periodfit")
    p.add_argument("--samples", type=int, default=1_000_000)
    p.add_argument("--repeat", type=int, default=5)
    a = p.parse_args()
    rate = 48000.0
    t = np.arange(a.samples) / rate
    x = 0.5 * np.cos(2 * np.pi * 997 * t) + 0.01 * np.cos(2 * np.pi * 2991 * t + 0.3)
    x += np.random.default_rng(1).normal(0, 1e-3, t.size)
    with tempfile.TemporaryDirectory() as work:
        path = os.path.join(work, "tone.wav")
        # A WAVE_FORMAT_IEEE_FLOAT file of 64-bit samples, header written by hand (the stdlib's
        # wave module writes PCM only): the reader then returns exactly these doubles.
        data = x.astype("<f8").tobytes()
        header = b"RIFF" + (36 + len(data) + 12).to_bytes(4, "little") + b"WAVE"
        fmt = (b"fmt " + (16).to_bytes(4, "little") + (3).to_bytes(2, "little") + (1).to_bytes(2, "little")
               + int(rate).to_bytes(4, "little") + (int(rate) * 8).to_bytes(4, "little")
               + (8).to_bytes(2, "little") + (64).to_bytes(2, "little"))
        fact = b"fact" + (4).to_bytes(4, "little") + a.samples.to_bytes(4, "little")
        with open(path, "wb") as f:
            f.write(header + fmt + fact + b"data" + len(data).to_bytes(4, "little") + data)
        cap = periodfit.read_capture(path)
        samples = cap["#0"]
        assert np.array_equal(samples, x), "the WAV round trip must give the same doubles"
        cli_total = best(lambda: subprocess.run([a.exe, "analyze", path, "--json", "/dev/null"], check=True,
                                                stdout=subprocess.DEVNULL), a.repeat)
        read = best(lambda: periodfit.read_capture(path), a.repeat)
        module = best(lambda: periodfit.analyze(samples, cap.rate, unit=cap.unit("#0")).to_dict(), a.repeat)
    cli_analysis = cli_total - read
    print(f"samples {a.samples}  cli_total {cli_total*1e3:.1f} ms  read {read*1e3:.1f} ms  "
          f"cli_analysis {cli_analysis*1e3:.1f} ms  module {module*1e3:.1f} ms  ratio {module/cli_analysis:.3f}")


if __name__ == "__main__":
    main()
