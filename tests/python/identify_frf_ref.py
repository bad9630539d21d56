"""Reference for tests/cli_frf_test.cpp: the FRF of a coherently sampled CSV capture by
numpy alone. The capture holds P whole periods of exactly M samples (fs/f0 an integer), so the
periods need no resampling: numpy.fft.rfft of each period (scaled 2/M, peak phasors), averaged
over the periods, H_n = mean(Y_n)/mean(U_n), and the errors-in-variables variance
σ²_H = Σ_p |δY_p − H·δU_p|²/|Ū|²/(P(P−1)) (Pintelon & Schoukens 2012, §2.4).

usage: identify_frf_ref.py FILE.csv M "n1 n2 ..."     (columns: t, input, output; one header row)
prints: "h <n> <re> <im> <var>" per harmonic, with repr() precision.
"""
import sys

import numpy as np

data = np.loadtxt(sys.argv[1], delimiter=",", skiprows=1)
m = int(sys.argv[2])
harmonics = [int(v) for v in sys.argv[3].split()]
p = data.shape[0] // m
u = data[: p * m, 1].reshape(p, m)
y = data[: p * m, 2].reshape(p, m)
U = np.fft.rfft(u, axis=1) * 2 / m
Y = np.fft.rfft(y, axis=1) * 2 / m
for n in harmonics:
    um, ym = U[:, n].mean(), Y[:, n].mean()
    h = ym / um
    d = ((Y[:, n] - ym) - h * (U[:, n] - um)) / um
    var = float(np.sum(np.abs(d) ** 2) / (p * (p - 1)))
    print("h", n, repr(float(h.real)), repr(float(h.imag)), repr(var))
