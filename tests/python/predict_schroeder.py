"""Crest factor of a flat multisine with Schroeder (1970) phases, computed by numpy.

Usage: predict_schroeder.py K M [odd]
Harmonics 1..K (or, with "odd", the first K odd harmonics 1, 3, ..., 2K-1) of equal amplitude,
phases phi_k = -pi*k*(k-1)/K over the component index k (Schroeder, IEEE Trans. Inf. Theory
16(1), 1970, eq. for a flat power spectrum), sampled at M points per period with
numpy.fft.irfft. Prints "crest_factor peak rms" of the sampled period.
"""
import sys

import numpy as np

k_max, m = int(sys.argv[1]), int(sys.argv[2])
k = np.arange(1, k_max + 1)
harmonics = 2 * k - 1 if len(sys.argv) > 3 and sys.argv[3] == "odd" else k
phi = -np.pi * k * (k - 1) / k_max
spectrum = np.zeros(m // 2 + 1, dtype=complex)
spectrum[harmonics] = np.exp(1j * phi) * m / 2  # irfft scales by 1/M
x = np.fft.irfft(spectrum, m)
peak = np.max(np.abs(x))
rms = np.sqrt(np.mean(x ** 2))
print(repr(float(peak / rms)), repr(float(peak)), repr(float(rms)))
