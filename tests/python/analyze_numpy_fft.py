"""Reference for harmonics_test: harmonic amplitudes and phases of a coherent capture by
numpy.fft.rfft. Usage: analyze_numpy_fft.py SAMPLES_FILE PERIODS MAX_HARMONIC
Prints "n amplitude phase_deg" for n = 0..MAX_HARMONIC (peak amplitudes, cos phase)."""
import sys

import numpy as np

x = np.loadtxt(sys.argv[1])
periods = int(sys.argv[2])
top = int(sys.argv[3])
X = np.fft.rfft(x)
N = len(x)
for n in range(top + 1):
    v = X[n * periods]
    if n == 0:
        print(0, repr(float(v.real / N)), 0.0)
    else:
        c = 2 * v / N
        print(n, repr(float(abs(c))), repr(float(np.degrees(np.angle(c)))))
