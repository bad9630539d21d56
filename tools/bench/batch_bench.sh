#!/usr/bin/env bash
# Batch throughput: 400 two-channel captures of 200 000 samples (24-bit WAV, generated once by
# batch_bench_gen.py), `periodfit batch` in frf mode with a 0/2 model and limits, at
# --jobs 1 and --jobs 2; per-file overhead beyond the analysis (from --timing); peak RSS
# (/usr/bin/time -v) for 100 and for 400 files, which should not grow with the file count.
# Usage: tools/bench/batch_bench.sh [BINARY=build/periodfit] [WORK=/tmp/periodfit-bench-batch]
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BIN=${1:-$ROOT/build/periodfit}
WORK=${2:-/tmp/periodfit-bench-batch}
FILES=${FILES:-400}
SAMPLES=${SAMPLES:-200000}
source "$ROOT/tools/bench/bench_captures.sh"
printf '[report]\nplots = "all"\n' | bench_captures "$WORK" "$FILES" "$SAMPLES"

run() {  # run NAME JOBS PATTERN
  local name=$1 jobs=$2 pattern=$3
  rm -rf "$WORK/out-$name"
  /usr/bin/time -v "$BIN" batch "$WORK/captures" --pattern "$pattern" --config "$WORK/bench.toml" \
    --report "$WORK/out-$name" --jobs "$jobs" -q --timing 2> "$WORK/$name.err" > "$WORK/$name.out" || true
  local rss timing
  rss=$(grep 'Maximum resident' "$WORK/$name.err" | awk '{print $NF}')
  timing=$(grep '^timing:' "$WORK/$name.err")
  printf '%-10s %s; peak RSS %.1f MiB; %s\n' "$name" "$(cat "$WORK/$name.out")" "$(echo "$rss / 1024" | bc -l)" "$timing"
}
echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg)"
run jobs1 1 'unit_*.wav'
run jobs2 2 'unit_*.wav'
run files100 2 'unit_00[0-9][0-9].wav'
echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
fps1=$(sed -n 's/.*(\([0-9.]*\) files\/s).*/\1/p' "$WORK/jobs1.err")
fps2=$(sed -n 's/.*(\([0-9.]*\) files\/s).*/\1/p' "$WORK/jobs2.err")
echo "speedup jobs 2 / jobs 1: $(echo "$fps2 / $fps1" | bc -l | cut -c1-5) (target >= 1.8)"
ls -la "$WORK/out-jobs2/report.html" | awk '{printf "report.html of 400 files: %.1f MB\n", $5 / 1e6}'
