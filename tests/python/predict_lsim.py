"""Steady state of an LTI system driven by a periodic wave, by scipy.signal.lsim.

Usage: predict_lsim.py NUM DEN KIND AMPLITUDE F0 PERIODS M
  NUM, DEN   comma-separated coefficients in ascending powers of s (periodfit's order)
  KIND       square | half-wave (t = 0 at the upward zero crossing of the underlying sine)
  PERIODS    whole periods simulated from rest; the last one is printed
  M          samples per period (the lsim time step is 1/(M*F0))
Prints M lines "k value": y at t = (PERIODS-1)/F0 + k/(M*F0), i.e. at phase k/M of the period.

Input representation, chosen so that lsim is exact or nearly so:
  square     piecewise constant with both jumps on grid points (M even): lsim(interp=False)
             holds u[k] over [t_k, t_k+1), which is the square wave exactly (u[k] is the value just
             after t_k).
  half-wave  continuous with kinks on grid points: lsim(interp=True) interpolates linearly,
             error <= h^2/8 * max|x''| = (2*pi/M)^2/8 * A, 1.2e-8*A for M = 20000.
lsim propagates the state with the matrix exponential of the (augmented) system, so the only
other error is rounding.
"""
import sys

import numpy as np
from scipy import signal

num = [float(v) for v in sys.argv[1].split(",")]
den = [float(v) for v in sys.argv[2].split(",")]
kind, a, f0 = sys.argv[3], float(sys.argv[4]), float(sys.argv[5])
periods, m = int(sys.argv[6]), int(sys.argv[7])

k = np.arange(periods * m + 1)
t = k / (m * f0)
phase = k % m
if kind == "square":
    u = np.where(phase < m // 2, a, -a)
    interp = False
elif kind == "half-wave":
    u = a * np.maximum(np.sin(2 * np.pi * phase / m), 0.0)
    interp = True
else:
    sys.exit("unknown kind " + kind)
system = signal.lti(num[::-1], den[::-1])
_, y, _ = signal.lsim(system, u, t, interp=interp)
last = y[(periods - 1) * m:(periods - 1) * m + m]
for i, v in enumerate(last):
    print(i, repr(float(v)))
