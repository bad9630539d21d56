"""The Python module against the CLI and against outside references (docs/api.md)."""
import json
import re
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

import periodfit as pf

SOURCE_DIR = Path(__file__).resolve().parents[2]

# --- identical numbers to the CLI -----------------------------------------------------------


def test_analyze_matches_cli_json_exactly(rc_capture, run_cli):
    path, _ = rc_capture
    cli = run_cli("analyze", path, "--json", "-")
    cap = pf.read_capture(path)
    for k, name in enumerate(cap.names):
        a = pf.analyze(cap[name], cap.rate, t0=cap.t0, name=name, unit=cap.unit(name))
        # Same library call, same doubles: the dicts are equal key for key, bit for bit.
        assert a.to_dict() == cli["channels"][k]


def test_read_capture_gives_the_files_samples(rc_capture):
    path, _ = rc_capture
    cap = pf.read_capture(path)
    assert cap.names == ["v_in", "v_out"]
    assert cap.rate == pytest.approx(20000.0, rel=1e-12)
    raw = np.loadtxt(path, delimiter=",", skiprows=1)  # numpy's own CSV reader (reference)
    np.testing.assert_array_equal(cap["v_out"], raw[:, 2])
    np.testing.assert_array_equal(cap["#0"], raw[:, 1])
    assert not cap["v_in"].flags.writeable  # a view of the capture, not a copy to edit


def test_frf_matches_cli_json(rc_capture, run_cli):
    path, _ = rc_capture
    cli = run_cli("frf", path, "--order", "0/1", "--json", "-")
    cap = pf.read_capture(path)
    r = pf.frf(cap["v_in"], cap["v_out"], cap.rate, t0=cap.t0, order="0/1", x_name="v_in", y_name="v_out",
               x_unit=cap.unit("v_in"), y_unit=cap.unit("v_out"))
    d = r.to_dict()
    # Only the description of where the samples came from differs (a file against arrays).
    for key in ("input", "output", "source", "input_source", "output_source"):
        d.pop(key, None)
        cli.pop(key, None)
    assert d == cli


def test_frf_finds_the_rc_pole(rc_capture):
    path, tau = rc_capture
    cap = pf.read_capture(path)
    r = pf.frf(cap["v_in"], cap["v_out"], cap.rate, order="0/1")
    # Textbook first-order low-pass H = 1/(1 + j w tau) at every excited (odd) harmonic.
    truth = 1 / (1 + 1j * 2 * np.pi * r.freq * tau)
    assert np.all(r.n % 2 == 1)
    assert np.all(np.abs(r.h - truth) <= 5 * np.hypot(r.mag_u, 1e-12) + 1e-9)
    assert r.adequate is True
    assert np.all(r.mag_lo >= 0) and np.all(r.mag_lo <= r.mag) and np.all(r.mag <= r.mag_hi)


def test_steady_state_matches_cli_json_exactly(run_cli):
    args = dict(system="1/(1 + s/(2*pi*300))", wave="square", f0=50.0, amplitude=1.0, harmonics=199)
    cli = run_cli("steady-state", "--system", args["system"], "--wave", "square", "--f0", "50", "--amplitude", "1",
                  "--harmonics", "199", "--json", "-")
    s = pf.steady_state(**args)
    assert s.to_dict() == cli


def test_steady_state_from_a_measured_input_matches_cli_and_carries_its_u(rc_capture, run_cli):
    path, _ = rc_capture
    system = "1/(1 + s/(2*pi*1000))"
    cli = run_cli("steady-state", "--system", system, "--input-file", path, "--channel", "v_in", "--json", "-")
    cap = pf.read_capture(path)
    s = pf.steady_state(system=system, input=cap["v_in"], input_rate=cap.rate, input_t0=cap.t0)
    assert s.to_dict() == cli
    # The input's own uncertainties reach the output (JCGM 100 first-order propagation).
    assert "input harmonics" in s.to_dict()["uncertainty_sources"]
    assert s.dc_u > 0 and np.all(s.amplitude_u > 0)


def test_steady_state_of_a_first_order_low_pass_against_the_closed_form():
    tau = 1 / (2 * np.pi * 300.0)
    s = pf.steady_state(system="1/(1 + %r*s)" % tau, wave="sine", f0=1000.0, amplitude=2.0)
    h = 1 / (1 + 1j * 2 * np.pi * 1000.0 * tau)  # textbook first-order low-pass
    assert s.amplitude[0] == pytest.approx(2 * abs(h), rel=1e-12)
    # The sine wave is A*sin(w t) = A*cos(w t - 90 deg) (docs/waveforms.md), so the output's
    # phase is -90 deg plus the angle of H.
    assert s.phase[0] == pytest.approx(np.degrees(np.angle(h)) - 90.0, abs=1e-9)


def test_excite_matches_cli_json_and_file(tmp_path, run_cli):
    out = tmp_path / "ms.csv"
    cli = run_cli("excite", str(out), "--harmonics", "1-30", "--f0", "100", "--rate", "48000", "--periods", "2",
                  "--format", "csv", "--json", "-")
    e = pf.excite(harmonics="1-30", f0=100.0, rate=48000.0, periods=2, format="csv")
    assert e.to_dict() == cli
    written = np.loadtxt(out, delimiter=",", skiprows=1)[:, 1]
    np.testing.assert_array_equal(e.samples, written)


def test_excite_multisine_spectrum_against_numpy_fft():
    e = pf.excite(harmonics="1-10", f0=100.0, rate=10000.0, format="float")
    m = len(e.period)
    spectrum = np.fft.rfft(e.period) * 2 / m  # numpy.fft.rfft: peak phasors of one period
    np.testing.assert_allclose(np.abs(spectrum[1:11]), e.amplitude, rtol=1e-6)
    assert e.crest_factor == pytest.approx(np.max(np.abs(e.period)) / np.sqrt(np.mean(e.period**2)), rel=1e-12)


# --- outside references ---------------------------------------------------------------------


def test_analyze_coherent_sine_against_numpy_fft():
    rate, f0, periods = 48000.0, 1000.0, 20
    t = np.arange(int(rate / f0) * periods) / rate
    x = 0.7 * np.cos(2 * np.pi * f0 * t + 0.4) + 0.05 * np.cos(2 * np.pi * 3 * f0 * t - 1.1)
    x += np.random.default_rng(7).normal(0, 1e-4, t.size)
    a = pf.analyze(x, rate)
    spectrum = np.fft.rfft(x) * 2 / t.size  # numpy.fft.rfft of a whole number of periods
    for n in (1, 3):
        line = spectrum[n * periods]
        assert a.amplitude[n - 1] == pytest.approx(abs(line), abs=4 * a.amplitude_u[n - 1])
        assert a.phase[n - 1] == pytest.approx(np.degrees(np.angle(line)), abs=4 * a.phase_u[n - 1])
    assert abs(a.f0 - f0) <= 4 * a.f0_u


# --- bad input: a clear exception, never a crash ------------------------------------------


@pytest.mark.parametrize(
    "samples, message",
    [
        (np.array([1.0, np.nan, 2.0]), "element 1 is NaN"),
        (np.array([1.0, np.inf]), "element 1 is infinite"),
        (np.zeros(0), "empty"),
        (np.zeros((100, 2)), "1-D array"),
        (np.array([1 + 1j, 2]), "dtype complex128"),
        (np.array(["a", "b"]), "dtype"),
        (np.array([True, False]), "dtype bool"),
        ([0.0, 1.0, "x"], "dtype"),
    ],
)
def test_bad_arrays_raise_input_error(samples, message):
    with pytest.raises(pf.InputError, match=re.escape(message)):
        pf.analyze(samples, 1000.0)


def test_errors_carry_the_cli_message(tmp_path, exe):
    bad = tmp_path / "bad.csv"
    bad.write_text("time,v\n0,1\n0.001,abc\n")
    p = subprocess.run([exe, "analyze", str(bad)], capture_output=True, text=True)
    assert p.returncode == 2
    with pytest.raises(pf.InputError) as caught:
        pf.read_capture(str(bad))
    assert p.stderr.strip() == "periodfit: error: " + str(caught.value)
    with pytest.raises(pf.IoError):
        pf.read_capture(str(tmp_path / "missing.csv"))
    with pytest.raises(pf.UnknownNameError, match="did you mean"):
        pf.excite(phases="schroder")
    with pytest.raises(pf.OptionError):
        pf.analyze(np.ones(100), -5.0)
    with pytest.raises(pf.AnalysisError):
        pf.analyze(np.ones(1000), 1000.0)  # a constant: no periodic component
    assert issubclass(pf.AnalysisError, pf.Error) and issubclass(pf.Error, Exception)


def test_integer_adc_codes_are_accepted():
    codes = np.round(1000 * np.cos(2 * np.pi * np.arange(4800) / 48)).astype(np.int16)
    a = pf.analyze(codes, 48000.0)
    assert a.f0 == pytest.approx(1000.0, rel=1e-9)


# --- the GIL is released while the library computes ----------------------------------------


def test_other_threads_run_during_an_analysis():
    x = np.cos(2 * np.pi * np.arange(500_000) * 0.01234567) + np.random.default_rng(3).normal(0, 0.01, 500_000)
    ticks = 0
    busy = threading.Event()

    def count():
        nonlocal ticks
        while not busy.is_set():
            ticks += 1
            time.sleep(0)

    worker = threading.Thread(target=count)
    started = time.perf_counter()
    worker.start()
    pf.analyze(x, 1.0)
    elapsed = time.perf_counter() - started
    busy.set()
    worker.join()
    # With the GIL held for the whole call the counter would stall for `elapsed`; released, it
    # keeps counting (thousands of ticks over the ~0.1 s or more the analysis takes).
    assert elapsed > 0.02
    assert ticks > 100


# --- the README's example runs --------------------------------------------------------------


def test_readme_python_example_runs(tmp_path):
    text = (SOURCE_DIR / "README.md").read_text()
    section = text.split("### From Python", 1)[1]
    code = re.search(r"```python\n(.*?)```", section, re.S).group(1)
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path)
    assert p.returncode == 0, p.stderr
    assert "f0" in p.stdout
