#!/usr/bin/env bash
# Times periodfit steady-state and excite on their heaviest ordinary jobs (wall time and peak RSS
# from /usr/bin/time). Usage: tools/bench/predict_excite.sh [BINARY]
# Figures: docs/performance.md, section "Predict and excite".
set -euo pipefail
BIN=${1:-build/periodfit}
TMP=$(mktemp -d)
trap 'rm -rf "$TMP"' EXIT
run() {
  local label=$1
  shift
  /usr/bin/time -f "%e s wall  %U s user  %M kB peak RSS  $label" "$BIN" "$@" >/dev/null
}
RC=(--system "1000/(1000 + s)")
run "steady-state square, automatic count (405 285 harmonics)" steady-state "${RC[@]}" --wave square --f0 50
run "steady-state sawtooth, automatic count (~608 000 harmonics)" steady-state "${RC[@]}" --wave sawtooth --f0 50
run "steady-state square, automatic, 10 periods at 1 MHz to CSV" steady-state "${RC[@]}" --wave square --f0 50 --csv "$TMP/a.csv" --rate 1e6 --periods 10
run "steady-state square, 20 000 harmonics, direct sums at 44.123 kHz (882.46 samples/period)" steady-state "${RC[@]}" --wave square --f0 50 --harmonics 20000 --csv "$TMP/b.csv" --rate 44123
# A model file with a parameter covariance: every output figure carries an uncertainty (the
# per-harmonic table was O(N²) here before session 4; --system has no covariance and hid it).
"$BIN" frf testdata/demo/board_01.csv --order auto --save-model "$TMP/m.json" >/dev/null
run "steady-state square, automatic count, model with covariance" steady-state --model "$TMP/m.json" --wave square --f0 500
run "excite 2000-line Schroeder multisine, 60 s at 192 kHz, pcm24" excite "$TMP/c.wav" --harmonics 1-2000 --f0 1 --rate 192000 --duration 60
