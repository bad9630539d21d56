"""Applies a continuous-time filter to a periodic excitation file, as the bench would.

Usage: predict_roundtrip_filter.py IN.csv OUT.csv NUM DEN NOISE_SIGMA SEED
  IN.csv   periodfit excite CSV (time_s,value), a whole number of periods
  NUM,DEN  coefficients in ascending powers of s (s in rad/s)
Writes OUT.csv with columns t,u,y: u the excitation, y its periodic steady-state response
through H(s) = NUM/DEN plus white Gaussian noise of NOISE_SIGMA (numpy default_rng(SEED)).

Steady state: the record holds whole periods of a band-limited periodic signal, so
y = irfft(H(j*w_k) * rfft(u)) (circular convolution) is the exact steady-state response at the
sample instants; H from scipy.signal.freqs at the bin frequencies w_k = 2*pi*k*fs/N.
"""
import sys

import numpy as np
from scipy import signal

data = np.loadtxt(sys.argv[1], delimiter=",", skiprows=1)
t, u = data[:, 0], data[:, 1]
num = [float(v) for v in sys.argv[3].split(",")]
den = [float(v) for v in sys.argv[4].split(",")]
sigma, seed = float(sys.argv[5]), int(sys.argv[6])
n = len(u)
fs = 1.0 / (t[1] - t[0])
w = 2 * np.pi * np.arange(n // 2 + 1) * fs / n
_, h = signal.freqs(num[::-1], den[::-1], worN=w)
y = np.fft.irfft(h * np.fft.rfft(u), n)
y += np.random.default_rng(seed).normal(0.0, sigma, n)
with open(sys.argv[2], "w") as f:
    f.write("t,u,y\n")
    for k in range(n):
        f.write("%r,%r,%r\n" % (float(t[k]), float(u[k]), float(y[k])))
