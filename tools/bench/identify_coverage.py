#!/usr/bin/python3
"""Monte Carlo coverage of `periodfit frf`: do the reported 95 % intervals hold the truth
95 % of the time?

Each run synthesises a two-channel CSV (t, v_in, v_out) of a flat multisine through a known
DUT by exact Fourier-series superposition, adds independent white Gaussian noise to both
channels, runs `periodfit frf --json -` and scores:
  * |H| and phase at every excited harmonic against the DUT's true response: inside
    [mag_lo, mag_hi] / [phase_lo_deg, phase_hi_deg] (Student-t intervals);
  * every model parameter (b0, a0, a1, and T with --delay) against its true value: inside
    its reported [lo, hi] (value ± model.coverage_factor·u: the normal quantile on a covariance
    inflated for weights estimated from P periods, model.covariance_inflation);
    --student-t scores with the old rule instead, value ± coverage_factor·u/√inflation
    (Student-t with P − 1 dof on the uninflated covariance), for comparison;
  * the share of runs whose model is called adequate (the true order is fitted, so ≈ 95 %).
Target (issue 4): each coverage 95 ± 2.5 %.

DUT: H(s) = wn²/(s² + 2ζ·wn·s + wn²)·e^(−sT), wn = 2π·300 rad/s, ζ = 0.3 (textbook
second-order low-pass), T = 0.2 ms with --delay, else 0.

usage: tools/bench/identify_coverage.py [--runs 300] [--snr-db 40] [--periods 16] [--delay]
                                        [--exe build/periodfit]
"""
import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

FS = 10000.0      # Hz
F0 = 100.0        # Hz, 100 samples per period
HARMONICS = 12    # flat multisine on 1…12
WN = 2 * math.pi * 300
ZETA = 0.3


def true_h(w, delay):
    s = 1j * w
    return WN * WN / (s * s + 2 * ZETA * WN * s + WN * WN) * np.exp(-s * delay)


def synthesise(rng, periods, snr_db, delay):
    n = int(FS / F0 * periods)
    t = np.arange(n) / FS
    k = np.arange(1, HARMONICS + 1)
    phases = -k * (k - 1) * math.pi / HARMONICS  # Schroeder phases (common practice)
    amp = 0.2
    h = true_h(2 * math.pi * F0 * k, delay)
    arg = 2 * math.pi * F0 * np.outer(t, k)
    u = (amp * np.cos(arg + phases)).sum(axis=1)
    y = (amp * np.abs(h) * np.cos(arg + phases + np.angle(h))).sum(axis=1)
    su = math.sqrt(np.mean(u * u)) * 10 ** (-snr_db / 20)
    sy = math.sqrt(np.mean(y * y)) * 10 ** (-snr_db / 20)
    return t, u + su * rng.standard_normal(n), y + sy * rng.standard_normal(n)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=300)
    ap.add_argument("--snr-db", type=float, default=40.0)
    ap.add_argument("--periods", type=int, default=16)
    ap.add_argument("--delay", action="store_true")
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--student-t", dest="student_t", action="store_true",
                    help="score parameters the old way: Student-t on the uninflated covariance")
    ap.add_argument("--exe", default=os.path.join(os.path.dirname(__file__), "..", "..", "build", "periodfit"))
    a = ap.parse_args()
    delay = 2e-4 if a.delay else 0.0
    truth = {"b0": WN * WN, "a0": WN * WN, "a1": 2 * ZETA * WN}
    if a.delay:
        truth["T"] = delay
    rng = np.random.default_rng(a.seed)
    mag_in = phase_in = points = 0
    par_in = {k: 0 for k in truth}
    runs = adequate = 0
    failures = 0
    start = time.time()
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "mc.csv")
        for run in range(a.runs):
            t, u, y = synthesise(rng, a.periods, a.snr_db, delay)
            np.savetxt(path, np.column_stack([t, u, y]), delimiter=",", header="t,v_in,v_out",
                       comments="", fmt="%.17g")
            cmd = [a.exe, "frf", path, "--input", "v_in", "--output", "v_out", "--f0-hint", str(F0),
                   "--harmonics", str(HARMONICS), "--order", "0/2", "--json", "-"]
            if a.delay:
                cmd.append("--delay")
            p = subprocess.run(cmd, capture_output=True, text=True)
            if p.returncode != 0:
                failures += 1
                print("run", run, "failed:", p.stderr.strip(), file=sys.stderr)
                continue
            r = json.loads(p.stdout)
            runs += 1
            for pt in r["frf"]:
                h0 = true_h(2 * math.pi * pt["freq_hz"], delay)
                points += 1
                mag_in += pt["mag_lo"] <= abs(h0) <= pt["mag_hi"]
                # wrapped difference: intervals may cross ±180° (the delay turns the phase)
                d = math.remainder(math.degrees(np.angle(h0)) - pt["phase_deg"], 360.0)
                phase_in += abs(d) <= 0.5 * (pt["phase_hi_deg"] - pt["phase_lo_deg"])
            model = r["model"]
            adequate += bool(model["adequate"])
            for par in model["parameters"]:
                if par["name"] not in truth:
                    continue
                if a.student_t:
                    u = par["u"] / math.sqrt(model["covariance_inflation"])
                    par_in[par["name"]] += abs(par["value"] - truth[par["name"]]) <= r["coverage_factor"] * u
                else:
                    par_in[par["name"]] += par["lo"] <= truth[par["name"]] <= par["hi"]
    elapsed = time.time() - start
    print(f"runs {runs} (failed {failures}), {a.periods} periods, SNR {a.snr_db:g} dB, "
          f"delay {'estimated' if a.delay else 'none'}, parameters scored {'the old way (student-t)' if a.student_t else 'by lo/hi'}, "
          f"{elapsed:.1f} s")
    print(f"coverage |H|     {100 * mag_in / points:.1f} %  ({points} points)")
    print(f"coverage phase   {100 * phase_in / points:.1f} %")
    for k, v in par_in.items():
        print(f"coverage {k:<7} {100 * v / max(runs, 1):.1f} %")
    print(f"adequate         {100 * adequate / max(runs, 1):.1f} %")
    lo, hi = 92.5, 97.5
    ok = all(lo <= 100 * c <= hi for c in [mag_in / points, phase_in / points] + [v / runs for v in par_in.values()])
    print("target 95 ± 2.5 %:", "met" if ok else "MISSED")
    return 0 if ok and failures == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
