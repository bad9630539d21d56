# Reference for tests/cost_band_test.cpp: the law of Hotelling's T² for dimension 2 on m dof,
# T² ~ 2m/(m-1)·F(2, m-1) (Anderson, An Introduction to Multivariate Statistical Analysis, §5.2).
# Usage: hotelling_f.py M  →  prints the mean and the 2.5 % and 97.5 % points (scipy.stats.f).
import sys

from scipy.stats import f

m = int(sys.argv[1])
a = 2.0 * m / (m - 1)
print(repr(a * f.mean(2, m - 1)))
print(repr(a * f.ppf(0.025, 2, m - 1)))
print(repr(a * f.ppf(0.975, 2, m - 1)))
