"""Crest factor of a flat multisine with Schroeder (1970) phases, computed by numpy.

Usage: predict_schroeder.py K M
Harmonics 1..K of equal amplitude, phases phi_k = -pi*k*(k-1)/K (Schroeder, IEEE Trans. Inf.
Theory 16(1), 1970, eq. for a flat power spectrum), sampled at M points per period with
numpy.fft.irfft. Prints "crest_factor peak rms" of the sampled period.
"""
import sys

import numpy as np

k_max, m = int(sys.argv[1]), int(sys.argv[2])
k = np.arange(1, k_max + 1)
phi = -np.pi * k * (k - 1) / k_max
spectrum = np.zeros(m // 2 + 1, dtype=complex)
spectrum[1:k_max + 1] = np.exp(1j * phi) * m / 2  # irfft scales by 1/M
x = np.fft.irfft(spectrum, m)
peak = np.max(np.abs(x))
rms = np.sqrt(np.mean(x ** 2))
print(repr(float(peak / rms)), repr(float(peak)), repr(float(rms)))
