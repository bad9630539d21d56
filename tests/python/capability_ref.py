# Reference for tests/store_test.cpp: Cp, Cpk and their confidence intervals by the formulas of
# the NIST/SEMATECH e-Handbook of Statistical Methods §6.1.6 (Cp interval from the chi-square
# distribution; Cpk interval per Bissell 1990), computed with numpy and scipy.stats.
# Usage: capability_ref.py LSL USL CONFIDENCE X1 X2 …  →  prints cp, cp_lo, cp_hi, cpk, cpk_lo, cpk_hi
import sys

import numpy as np
from scipy.stats import chi2, norm

lsl, usl, conf = float(sys.argv[1]), float(sys.argv[2]), float(sys.argv[3])
x = np.array([float(v) for v in sys.argv[4:]])
n = len(x)
m, s = x.mean(), x.std(ddof=1)
a = 1 - conf
nu = n - 1
cp = (usl - lsl) / (6 * s)
cpk = min(usl - m, m - lsl) / (3 * s)
half = norm.ppf(1 - a / 2) * np.sqrt(1 / (9 * n) + cpk ** 2 / (2 * (n - 1)))
for v in (cp, cp * np.sqrt(chi2.ppf(a / 2, nu) / nu), cp * np.sqrt(chi2.ppf(1 - a / 2, nu) / nu),
          cpk, cpk - half, cpk + half):
    print(repr(float(v)))
