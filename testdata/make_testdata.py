"""Regenerates testdata/csv/*.csv and testdata/demo/bench_capture.csv (invented content).

Run with /usr/bin/python3 (needs numpy). The files are committed; this script documents how
they were made and keeps them reproducible (fixed seeds).
"""
import math
import pathlib

import numpy as np

root = pathlib.Path(__file__).resolve().parent
rng = np.random.default_rng(20240611)

# A scope export with a key,value preamble (40 samples at 1 MHz, 20 us pre-trigger).
with open(root / "csv" / "scope_preamble.csv", "w", newline="\n") as f:
    f.write("Model,DSO-1204 (invented)\nFirmware,1.0.3\nRecord Length,40\n")
    f.write("Sample Interval,1.000000e-06,s\nTrigger Point,20\nSource,CH1+CH2\n")
    f.write("TIME,CH1 (V),CH2 (V)\n")
    for k in range(40):
        t = (k - 20) * 1e-6
        f.write(f"{t:.6e},{math.sin(2 * math.pi * 25e3 * t):.5f},{0.5 * math.cos(2 * math.pi * 25e3 * t):.5f}\n")

# A European data logger: BOM, CRLF, semicolons, decimal comma, 1 kHz.
with open(root / "csv" / "logger_decimal_comma.csv", "w", newline="") as f:
    f.write("\ufeffMessung;Prüfstand 2 (erfunden)\r\nDatum;2024-06-11\r\n")
    f.write("Zeit [s];U_ein [V];U_aus [V]\r\n")
    for k in range(25):
        u_in = 1.0 if (k // 5) % 2 == 0 else -1.0
        u_out = -0.125 if k == 0 else 0.8 * u_in
        f.write(f"{k * 1e-3:.3f};{u_in:.3f};{u_out:.3f}\r\n".replace(".", ","))

# Whitespace columns with no header; the rate is stated in a comment.
with open(root / "csv" / "columns_no_header.txt", "w", newline="\n") as f:
    f.write("# bench recorder dump (invented)\n# fs = 8000 Hz\n")
    for k in range(32):
        x = math.sin(2 * math.pi * 1000 * k / 8000)
        f.write(f"  {x: .6f}  {0.5 * x + 0.01: .6f}\n")

# A header followed by a row of units, as some scopes write.
with open(root / "csv" / "units_row.csv", "w", newline="\n") as f:
    f.write("x-axis,1,2\nsecond,Volt,Volt\n")
    for k in range(30):
        t = k * 2e-6
        f.write(f"{t:.6e},{math.sin(2 * math.pi * 20e3 * t):.4e},{math.cos(2 * math.pi * 20e3 * t):.4e}\n")

# Demo: a 997 Hz ±1 V square wave from a bench generator driving an RC low-pass
# (R = 1.0 kOhm, C = 47 nF, fc = 3.39 kHz), recorded at 100 kHz with an anti-alias filter
# (the square is band-limited to its harmonics below fs/2), 0.5 mV rms noise per channel.
fs, f0, tau, n = 100e3, 997.0, 1.0e3 * 47e-9, 4000
t = np.arange(n) / fs
v_in = np.zeros(n)
v_out = np.zeros(n)
for h in range(1, 200, 2):
    if h * f0 >= fs / 2:
        break
    b = 4 / (math.pi * h)  # Fourier series of a ±1 square: (4/(n pi)) sin(n w t), n odd
    H = 1 / (1 + 1j * 2 * math.pi * h * f0 * tau)
    w = 2 * math.pi * h * f0
    v_in += b * np.sin(w * t)
    v_out += b * abs(H) * np.sin(w * t + np.angle(H))
v_in += rng.normal(0, 5e-4, n)
v_out += rng.normal(0, 5e-4, n)
with open(root / "demo" / "bench_capture.csv", "w", newline="\n") as f:
    f.write("# periodfit demo capture (invented): 997 Hz square wave from a bench generator\n")
    f.write("# into an RC low-pass, R = 1.0 kOhm, C = 47 nF; 100 kHz with anti-alias filter\n")
    f.write("Instrument,Bench recorder BR-2 (invented)\nOperator,Test bench 3\n")
    f.write("Sample Interval,1e-05,s\n")
    f.write("t (s),v_in (V),v_out (V)\n")
    for k in range(n):
        f.write(f"{t[k]:.7g},{v_in[k]:.6g},{v_out[k]:.6g}\n")
