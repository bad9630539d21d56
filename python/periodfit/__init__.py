"""periodfit: harmonic analysis, frequency response and steady-state prediction of sampled
periodic waveforms, for test scripts (docs/api.md, "From Python").

Conventions (the same as the command-line tool's):
  * SI units: Hz, s, and the channel's own unit for amplitudes;
  * amplitudes are peak values of the cosine term;
  * phases are degrees of cos(n*w0*t + phi), t = 0 at the capture's time origin;
  * every attribute named *_u is a standard uncertainty u (1 sigma, GUM JCGM 100:2008);
    intervals (mag_lo, mag_hi) are at the stated confidence level.

Functions: read_capture, analyze, frf, steady_state, excite. Errors are periodfit.Error
subclasses (InputError, IoError, OptionError, AnalysisError, UnknownNameError) whose message is
the line the CLI prints after "periodfit: error: ".

    import numpy as np, periodfit
    t = np.arange(48000) / 48000.0
    a = periodfit.analyze(np.cos(2 * np.pi * 50 * t), 48000.0)
    print(a.f0, a.f0_u, a.amplitude[0])
"""
from ._periodfit import (  # noqa: F401
    AnalysisError,
    Analysis,
    Capture,
    Error,
    Excitation,
    InputError,
    IoError,
    OptionError,
    Response,
    SteadyState,
    UnknownNameError,
    __version__,
    analyze,
    excite,
    frf,
    read_capture,
    steady_state,
)

__all__ = [
    "Error", "InputError", "IoError", "OptionError", "AnalysisError", "UnknownNameError",
    "Capture", "Analysis", "Response", "SteadyState", "Excitation",
    "read_capture", "analyze", "frf", "steady_state", "excite", "__version__",
]
