#!/bin/sh
# Rational fit: Monte Carlo coverage of the 95 % intervals of every model parameter (band-pass,
# order 1/2, 60 dB SNR) and the NIST StRD LREs of the least-squares engine.
# usage: tools/bench/rational_fit_coverage.sh [build-dir] [draws]   (figures: docs/performance.md)
set -eu
build=${1:-build}
draws=${2:-10000}
PERIODFIT_FIT_DRAWS=$draws "$build/rational_fit_test" -tc='*cover the truth*' | grep MESSAGE | sed 's/.*MESSAGE: //'
"$build/least_squares_test" -tc='*NIST*' | grep MESSAGE | sed 's/.*MESSAGE: //'
