"""Reference for dsp::magnitude_interval: the Neyman interval for the Rice parameter nu from one
observed magnitude r, by inverting scipy.stats.rice.cdf (b = nu/sigma, scale = sigma) with
scipy.optimize.brentq. Args: sigma k r1 r2 ...; prints "r lo hi" per r (lo = 0 when the Rayleigh
CDF at r is at most 1 - alpha, alpha = 1 - Phi(k))."""
import sys
from scipy import optimize, stats

sigma = float(sys.argv[1])
k = float(sys.argv[2])
alpha = stats.norm.sf(k)
for arg in sys.argv[3:]:
    r = float(arg)
    cdf = lambda nu: stats.rice.cdf(r, nu / sigma, scale=sigma)
    hi = optimize.brentq(lambda nu: cdf(nu) - alpha, 1e-12 * sigma, r + (k + 10) * sigma, xtol=1e-14 * sigma)
    if stats.rayleigh.cdf(r, scale=sigma) <= 1 - alpha:
        lo = 0.0
    else:
        lo = optimize.brentq(lambda nu: cdf(nu) - (1 - alpha), 1e-12 * sigma, r, xtol=1e-14 * sigma)
    print(f"{r!r} {lo!r} {hi!r}")
