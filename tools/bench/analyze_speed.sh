#!/usr/bin/env bash
# Speed of `periodfit analyze` on a 10-million-sample channel, end to end (import included),
# the analysis core alone (analyze_core_bench, one thread), and the numpy/scipy reference
# doing the same fit, all in one run. Usage: tools/bench/analyze_speed.sh [BUILD_DIR] [SAMPLES]
set -euo pipefail
root=$(cd "$(dirname "$0")/../.." && pwd)
build=${1:-$root/build}
samples=${2:-10000000}
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
/usr/bin/python3 - "$work/bench.wav" "$samples" <<'PY'
import sys
import numpy as np
import scipy.io.wavfile
n = int(sys.argv[2]); fs = 1000000; f0 = 997.123
t = np.arange(n) / fs
w = 2 * np.pi * f0 * t
x = 0.5 * np.cos(w + 0.3) + 0.005 * np.cos(2 * w) + 0.0015 * np.cos(3 * w + 1)
x += 5e-4 * np.random.default_rng(1).standard_normal(n)
scipy.io.wavfile.write(sys.argv[1], fs, x.astype(np.float32))
PY
g++ -std=c++20 -O2 -I"$root/src" "$root/tools/bench/analyze_core_bench.cpp" \
  "$build/libperiodfit_dsp.a" "$build/libperiodfit_io.a" "$build/libperiodfit_core.a" -lsndfile \
  -lfftw3 -lfftw3_threads -lpthread -o "$work/core_bench"
echo "== periodfit analyze, end to end (wall and CPU time)"
/usr/bin/time -f "periodfit: wall %e s  user %U s  sys %S s  max RSS %M KB" \
  "$build/periodfit" analyze "$work/bench.wav" --json "$work/out.json" >/dev/null
/usr/bin/python3 -c "import json,sys; c=json.load(open(sys.argv[1]))['channels'][0]; print('periodfit: f0 %.9f Hz  A1 %.9g  A2 %.6g  A3 %.6g' % (c['f0_hz'], *[h['amplitude'] for h in c['harmonics'][:3]]))" "$work/out.json"
echo "== analysis core (no import)"
"$work/core_bench" "$samples" 3
echo "== numpy/scipy reference (same fit)"
/usr/bin/time -f "reference: wall %e s  user %U s" /usr/bin/python3 "$root/tools/bench/analyze_reference.py" "$work/bench.wav" 50
