"""Reference for tests/rational_fit_test.cpp: H(jw) by scipy.signal.freqs and the poles and
zeros by numpy.roots, for a transfer function given in DESCENDING powers of s (scipy's order).

usage: fit_freqs.py "b_M ... b_0" "a_N ... a_0" "w_1 w_2 ..."     (w in rad/s)
prints: "h <w> <re> <im>" per frequency, then "pole <re> <im>" and "zero <re> <im>" lines,
all with repr() (round-trip) precision.
"""
import sys

import numpy as np
from scipy import signal

b = [float(v) for v in sys.argv[1].split()]
a = [float(v) for v in sys.argv[2].split()]
w = np.array([float(v) for v in sys.argv[3].split()])
_, h = signal.freqs(b, a, worN=w)
for wk, hk in zip(w, h):
    print("h", repr(float(wk)), repr(float(hk.real)), repr(float(hk.imag)))
for p in np.roots(a):
    print("pole", repr(float(np.real(p))), repr(float(np.imag(p))))
if len(b) > 1:
    for z in np.roots(b):
        print("zero", repr(float(np.real(z))), repr(float(np.imag(z))))
