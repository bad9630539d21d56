#!/usr/bin/python3
"""Speed of `periodfit frf` on a 2 × 4-million-sample CSV against a numpy/scipy/pandas
reference pipeline doing the same job, timed in the same run on the same file.

The file: t, v_in, v_out; fs = 1 MHz, 4 s, f0 = 997 Hz (not coherent with fs), an odd
multisine on 1…25 (amplitude 0.2/n, Schroeder phases) through a second-order low-pass (wn = 2π·5 kHz, ζ = 0.4), 60 dB SNR.

Both pipelines do, end to end from the file:
  1. read the CSV;
  2. estimate f0 on the input (FFT peak, then least-squares refinement with harmonics);
  3. put both channels on whole periods of f0 (periodfit: band-limited; reference: linear
     interpolation with numpy.interp, cheaper and less exact);
  4. per-period FFT, H = mean(Y)/mean(U) at the excited harmonics with the per-period
     errors-in-variables covariance;
  5. fit the rational model 0/2 by weighted nonlinear least squares (scipy.optimize.least_squares
     from a linearised start);
  6. write JSON.
Target (issue 4): periodfit ≥ 10× faster.

usage: tools/bench/identify_speed.py [--exe build/periodfit] [--samples 4000000] [--keep DIR]
"""
import argparse
import json
import math
import os
import resource
import subprocess
import sys
import tempfile
import time

import numpy as np

FS = 1.0e6
F0 = 997.0
WN = 2 * math.pi * 5000
ZETA = 0.4
HARMONICS = 25


def true_h(w):
    s = 1j * w
    return WN * WN / (s * s + 2 * ZETA * WN * s + WN * WN)


def write_capture(path, samples, seed=1):
    rng = np.random.default_rng(seed)
    t = np.arange(samples) / FS
    u = np.zeros(samples)
    y = np.zeros(samples)
    for n in range(1, HARMONICS + 1, 2):
        ph = -n * (n - 1) * math.pi / HARMONICS
        h = true_h(2 * math.pi * F0 * n)
        arg = 2 * math.pi * F0 * n * t + ph
        u += 0.2 / n * np.cos(arg)
        y += 0.2 / n * abs(h) * np.cos(arg + np.angle(h))
    u += math.sqrt(np.mean(u * u)) * 1e-3 * rng.standard_normal(samples)
    y += math.sqrt(np.mean(y * y)) * 1e-3 * rng.standard_normal(samples)
    with open(path, "w") as f:
        f.write("t,v_in,v_out\n")
        np.savetxt(f, np.column_stack([t, u, y]), delimiter=",", fmt=["%.7f", "%.9g", "%.9g"])


def reference_pipeline(path, out_json):
    import pandas as pd
    from scipy import optimize

    df = pd.read_csv(path)
    t = df["t"].to_numpy()
    u = df["v_in"].to_numpy()
    y = df["v_out"].to_numpy()
    fs = 1.0 / np.median(np.diff(t[:1000]))
    n = len(u)
    # 2. f0: Hann-windowed FFT peak with parabolic interpolation, then Gauss-Newton on the
    #    3-harmonic least-squares model (variable projection by lstsq at each step).
    spec = np.abs(np.fft.rfft(u * np.hanning(n)))
    k = int(np.argmax(spec[1:]) + 1)
    a, b, c = np.log(spec[k - 1 : k + 2])
    f0 = (k + 0.5 * (a - c) / (a - 2 * b + c)) * fs / n
    tc = t - t[n // 2]
    for _ in range(4):
        w = 2 * math.pi * f0
        cols = [np.ones(n)]
        for h in (1, 2, 3):
            cols += [np.cos(h * w * tc), np.sin(h * w * tc)]
        A = np.column_stack(cols)
        coef, *_ = np.linalg.lstsq(A, u, rcond=None)
        r = u - A @ coef
        d = np.zeros(n)
        for i, h in enumerate((1, 2, 3)):
            ca, cb = coef[1 + 2 * i], coef[2 + 2 * i]
            d += h * tc * (-ca * np.sin(h * w * tc) + cb * np.cos(h * w * tc))
        dw = np.dot(d, r) / np.dot(d, d)
        f0 += dw / (2 * math.pi)
    # 3. whole periods, M samples per period
    m = int(math.ceil(fs / f0))
    periods = int((t[-1] - t[0]) * f0)
    grid = t[0] + np.arange(periods * m) / (m * f0)
    ug = np.interp(grid, t, u).reshape(periods, m)
    yg = np.interp(grid, t, y).reshape(periods, m)
    # 4. per-period spectra and the errors-in-variables FRF covariance
    U = np.fft.rfft(ug, axis=1)[:, : 51] * 2 / m
    Y = np.fft.rfft(yg, axis=1)[:, : 51] * 2 / m
    Um, Ym = U.mean(axis=0), Y.mean(axis=0)
    su = (np.abs(U - Um) ** 2).sum(axis=0) / (periods - 1) / periods
    excited = [h for h in range(1, 51) if abs(Um[h]) ** 2 > 100 * su[h]]
    H = Ym[excited] / Um[excited]
    dH = ((Y[:, excited] - Ym[excited]) - H * (U[:, excited] - Um[excited])) / Um[excited]
    var_re = (dH.real ** 2).sum(axis=0) / (periods - 1) / periods
    var_im = (dH.imag ** 2).sum(axis=0) / (periods - 1) / periods
    cov = (dH.real * dH.imag).sum(axis=0) / (periods - 1) / periods
    w = 2 * math.pi * f0 * np.array(excited)
    # 5. 0/2 model b0/(a0 + a1 s + s²): Levy start, then weighted nonlinear least squares
    wr = math.sqrt(w.min() * w.max())
    x = w / wr
    s = 1j * x
    Alin = np.column_stack([np.ones_like(s), -H, -H * s])
    rhs = H * s * s
    Ar = np.vstack([Alin.real, Alin.imag])
    br = np.concatenate([rhs.real, rhs.imag])
    theta0, *_ = np.linalg.lstsq(Ar, br, rcond=None)
    L = []
    for vr, vi, c in zip(var_re, var_im, cov):
        L.append(np.linalg.inv(np.linalg.cholesky(np.array([[vr, c], [c, vi]]))))

    def resid(th):
        model = th[0] / (th[1] + th[2] * s + s * s)
        e = H - model
        out = np.empty(2 * len(e))
        for i, li in enumerate(L):
            out[2 * i : 2 * i + 2] = li @ np.array([e[i].real, e[i].imag])
        return out

    fit = optimize.least_squares(resid, theta0, method="lm", xtol=1e-15, ftol=1e-15)
    J = fit.jac
    cov_theta = np.linalg.inv(J.T @ J)
    b0 = fit.x[0] * wr * wr
    a0 = fit.x[1] * wr * wr
    a1 = fit.x[2] * wr
    poles = np.roots([1, a1, a0])
    doc = {"f0_hz": f0, "frf": [{"n": int(h), "re": float(v.real), "im": float(v.imag)} for h, v in zip(excited, H)],
           "model": {"num": [b0], "den": [a0, a1, 1.0], "poles": [[float(p.real), float(p.imag)] for p in poles],
                     "cost": float(2 * fit.cost), "cov_scaled": cov_theta.tolist()}}
    with open(out_json, "w") as f:
        json.dump(doc, f)
    return doc


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--exe", default=os.path.join(os.path.dirname(__file__), "..", "..", "build", "periodfit"))
    ap.add_argument("--samples", type=int, default=4_000_000)
    ap.add_argument("--keep", help="folder to keep the CSV in (else a temporary folder)")
    a = ap.parse_args()
    tmp = a.keep or tempfile.mkdtemp(prefix="pf_bench_")
    path = os.path.join(tmp, "identify_4M.csv")
    if not os.path.exists(path):
        t0 = time.time()
        write_capture(path, a.samples)
        print(f"wrote {path} ({os.path.getsize(path) / 1e6:.0f} MB) in {time.time() - t0:.1f} s")
    cmd = [a.exe, "frf", path, "--input", "v_in", "--output", "v_out", "--order", "0/2",
           "--json", os.path.join(tmp, "periodfit.json")]
    c0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True)
    t_pf = time.perf_counter() - t0
    c1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu_pf = (c1.ru_utime - c0.ru_utime) + (c1.ru_stime - c0.ru_stime)
    if p.returncode != 0:
        print("periodfit failed:", p.stderr, file=sys.stderr)
        return 1
    s0 = resource.getrusage(resource.RUSAGE_SELF)
    t0 = time.perf_counter()
    ref = reference_pipeline(path, os.path.join(tmp, "reference.json"))
    t_ref = time.perf_counter() - t0
    s1 = resource.getrusage(resource.RUSAGE_SELF)
    cpu_ref = (s1.ru_utime - s0.ru_utime) + (s1.ru_stime - s0.ru_stime)
    pf = json.load(open(os.path.join(tmp, "periodfit.json")))
    print(f"periodfit frf   {t_pf:7.2f} s wall {cpu_pf:7.2f} s cpu   f0 {pf['f0_hz']:.9f} Hz, poles "
          + ", ".join(f"{q['re']:.6g}{q['im']:+.6g}j" for q in pf["model"]["poles"]))
    print(f"numpy/scipy/pandas   {t_ref:7.2f} s wall {cpu_ref:7.2f} s cpu   f0 {ref['f0_hz']:.9f} Hz, poles "
          + ", ".join(f"{q[0]:.6g}{q[1]:+.6g}j" for q in ref["model"]["poles"]))
    ratio = t_ref / t_pf
    print(f"speed-up {ratio:.1f}x wall, {cpu_ref / cpu_pf:.1f}x cpu "
          f"(target >= 10x: {'met' if ratio >= 10 else 'MISSED'}; load average {os.getloadavg()[0]:.1f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
