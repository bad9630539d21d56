"""numpy/scipy reference for the analyze speed benchmark: the same fit as periodfit's
(Hann-windowed FFT peak with log-parabolic interpolation, then Gauss-Newton on f0 with the
dc + H-harmonic linear least squares re-solved at every step, time centred on the record),
written the ordinary numpy way: design-matrix blocks of cos/sin, Gram matrix and A^T x
accumulated per block, scipy.linalg.solve. Prints f0, the first amplitudes and the time.
Usage: analyze_reference.py FILE.wav [HARMONICS]"""
import sys
import time

import numpy as np
import scipy.io.wavfile
import scipy.linalg

path = sys.argv[1]
H = int(sys.argv[2]) if len(sys.argv) > 2 else 50
fs, x = scipy.io.wavfile.read(path)
x = np.asarray(x, dtype=np.float64)
if x.ndim > 1:
    x = x[:, 0]
t_start = time.perf_counter()
N = len(x)
w = np.hanning(N)
X = np.abs(np.fft.rfft((x - np.average(x, weights=w)) * w)) ** 2
k = int(np.argmax(X[2:-1])) + 2
la, lb, lc = np.log(X[k - 1]), np.log(X[k]), np.log(X[k + 1])
f = (k + 0.5 * (la - lc) / (la - 2 * lb + lc)) * fs / N
H = min(H, int(0.45 * fs / f))
s = np.arange(N) - (N - 1) / 2.0
BLOCK = 1 << 16


def evaluate(nu, want_grad):
    p = 2 * H + 1
    G = np.zeros((p, p))
    Ay = np.zeros(p)
    blocks = []
    for b0 in range(0, N, BLOCK):
        sb = s[b0:b0 + BLOCK]
        th = np.outer(sb * nu, np.arange(1, H + 1))
        A = np.hstack([np.ones((len(sb), 1)), np.cos(th), np.sin(th)])
        G += A.T @ A
        Ay += A.T @ x[b0:b0 + BLOCK]
    c = scipy.linalg.solve(G, Ay, assume_a="pos")
    if not want_grad:
        return c, 0.0, 0.0
    n = np.arange(1, H + 1)
    a, bb = c[1:H + 1], c[H + 1:]
    dtd = 0.0
    dtr = 0.0
    Ad = np.zeros(p)
    for b0 in range(0, N, BLOCK):
        sb = s[b0:b0 + BLOCK]
        th = np.outer(sb * nu, n)
        cs, sn = np.cos(th), np.sin(th)
        A = np.hstack([np.ones((len(sb), 1)), cs, sn])
        d = sb * ((-sn * a + cs * bb) @ n)
        r = x[b0:b0 + BLOCK] - A @ c
        dtd += d @ d
        dtr += d @ r
        Ad += A.T @ d
    schur = dtd - Ad @ scipy.linalg.solve(G, Ad, assume_a="pos")
    return c, dtr, schur


nu = 2 * np.pi * f / fs
for it in range(20):
    c, g, schur = evaluate(nu, True)
    step = g / schur
    nu += step
    if abs(step) <= 1e-12 * nu:
        break
c, _, _ = evaluate(nu, False)
elapsed = time.perf_counter() - t_start
amps = np.hypot(c[1:H + 1], c[H + 1:])
print("reference: samples %d  harmonics %d  iterations %d  fit %.3f s  f0 %.9f Hz  A1 %.9g  A2 %.6g  A3 %.6g"
      % (N, H, it + 1, elapsed, nu * fs / (2 * np.pi), amps[0], amps[1], amps[2]))
