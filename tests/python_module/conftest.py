"""Shared fixtures of the Python module's tests: the CLI to cross-check against, and small
captures written by numpy into a temporary folder (nothing large is kept in the repository)."""
import json
import os
import subprocess

import numpy as np
import pytest


@pytest.fixture(scope="session")
def exe():
    path = os.environ.get("PERIODFIT_EXE")
    if not path or not os.access(path, os.X_OK):
        pytest.fail("PERIODFIT_EXE must name the built periodfit program (ctest sets it)")
    return path


@pytest.fixture
def run_cli(exe):
    """Runs the CLI and returns its parsed JSON standard output (the command must succeed)."""

    def run(*args):
        p = subprocess.run([exe, *args], capture_output=True, text=True, check=False)
        assert p.returncode == 0, p.stderr
        return json.loads(p.stdout)

    return run


def write_csv(path, rate, columns):
    """A capture as a scope exports one: a time column and named data columns, printed with 17
    significant digits so the file holds the doubles exactly (shortest round-trip would too)."""
    names = list(columns)
    n = len(columns[names[0]])
    t = np.arange(n) / rate
    with open(path, "w") as f:
        f.write("time," + ",".join(names) + "\n")
        for k in range(n):
            f.write("%.17g," % t[k] + ",".join("%.17g" % columns[c][k] for c in names) + "\n")
    return str(path)


@pytest.fixture
def rc_capture(tmp_path):
    """A 50 Hz square wave through a first-order RC low-pass (corner 300 Hz), 10 periods at
    20 kHz, with 1 mV of noise on each channel (seeded): the DUT of the cross-checks. The output
    is the exact steady-state Fourier series of the RC (textbook: Y_n = X_n / (1 + j n w0 RC))."""
    rate, f0, periods, harmonics = 20000.0, 50.0, 10, 99
    tau = 1 / (2 * np.pi * 300.0)
    t = np.arange(int(rate / f0) * periods) / rate
    x = np.zeros_like(t)
    y = np.zeros_like(t)
    for n in range(1, harmonics + 1, 2):
        a = 4 / (np.pi * n)  # square wave of amplitude 1 (handbook Fourier series)
        w = 2 * np.pi * n * f0
        h = 1 / (1 + 1j * w * tau)
        x += a * np.cos(w * t)
        y += a * abs(h) * np.cos(w * t + np.angle(h))
    rng = np.random.default_rng(20261202)
    x += rng.normal(0, 1e-3, t.size)
    y += rng.normal(0, 1e-3, t.size)
    return write_csv(tmp_path / "rc.csv", rate, {"v_in": x, "v_out": y}), tau
