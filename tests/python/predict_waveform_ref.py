"""Reference Fourier coefficients of the standard waveforms, built from numpy/scipy definitions.

Usage: predict_waveform_ref.py KIND AMPLITUDE DUTY HARMONICS
Prints one line per harmonic n = 0..HARMONICS: "n re im" of X_n in the convention
x(t) = X_0 + sum Re(X_n e^{j n w0 t}) (X_n = 2/M * rfft bin n, X_0 = bin 0 / M).

Definitions (t = 0 at the upward zero crossing of sin, u = position in the period):
  sine       A*np.sin(theta)
  square     A*scipy.signal.square(theta, duty)          (+A first, rising edge at 0)
  triangle   A*scipy.signal.sawtooth(theta + pi/2, 0.5)  (scipy starts at -1; shifted a quarter)
  sawtooth   A*scipy.signal.sawtooth(theta + pi)         (scipy rises -1..1 from t = 0; shifted half)
  half-wave  A*np.maximum(np.sin(theta), 0)
  full-wave  A*np.abs(np.sin(theta))
  pulse      A*(scipy.signal.square(theta, duty) + 1)/2
The grid has M = 2**16 points per period; scipy's square is +1 at the jump instants (not the
midpoint), which moves each coefficient by at most 2A/M.
"""
import sys

import numpy as np
from scipy import signal

kind, a, duty, harmonics = sys.argv[1], float(sys.argv[2]), float(sys.argv[3]), int(sys.argv[4])
m = 2 ** 16
theta = 2 * np.pi * np.arange(m) / m
if kind == "sine":
    x = a * np.sin(theta)
elif kind == "square":
    x = a * signal.square(theta, duty)
elif kind == "triangle":
    x = a * signal.sawtooth(theta + np.pi / 2, 0.5)
elif kind == "sawtooth":
    x = a * signal.sawtooth(theta + np.pi)
elif kind == "half-wave":
    x = a * np.maximum(np.sin(theta), 0)
elif kind == "full-wave":
    x = a * np.abs(np.sin(theta))
elif kind == "pulse":
    x = a * (signal.square(theta, duty) + 1) / 2
else:
    sys.exit("unknown kind " + kind)
c = np.fft.rfft(x) / m
for n in range(harmonics + 1):
    z = c[n] if n == 0 else 2 * c[n]
    print(n, repr(float(z.real)), repr(float(z.imag)))
