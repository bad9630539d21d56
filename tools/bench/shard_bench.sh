#!/usr/bin/env bash
# Sharded batch runs (docs/performance.md "Scale-out"):
#  1. throughput: the batch_bench.sh captures (FILES two-channel 200 000-sample WAVs, frf with a
#     0/2 model, plots for all) as 1 shard and as 2 shards at once (tools/shards-parallel.sh, one
#     thread per shard), wall time including the gather, files/s;
#  2. the gather alone for GATHER_FILES tiny captures (analyze mode, 960 samples, THD limit,
#     plots for failed files, one in ten fails) made by 2 shards: wall time and peak RSS.
# Usage: tools/bench/shard_bench.sh [BINARY=build/periodfit] [WORK=/tmp/periodfit-bench-shard]
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BIN=$(realpath "${1:-$ROOT/build/periodfit}")
WORK=${2:-/tmp/periodfit-bench-shard}
FILES=${FILES:-120}
GATHER_FILES=${GATHER_FILES:-10000}
export PERIODFIT=$BIN
mkdir -p "$WORK"
cd "$WORK"
if [ ! -f "captures/unit_$(printf %04d $((FILES - 1))).wav" ]; then
  /usr/bin/python3 "$ROOT/tools/bench/batch_bench_gen.py" captures "$FILES" 200000
fi
cat >bench.toml <<'TOML'
[analysis]
mode = "frf"
input = "0"
output = "1"
order = "0/2"
f0_hint_hz = 100

[[limit]]
result = "natural_frequency_hz"
pole = 1
nominal = 1200
tolerance_pct = 5
TOML
rm -rf one two
start=$(date +%s.%N)
"$ROOT/tools/shards-parallel.sh" 1 one captures -- --config bench.toml >/dev/null 2>&1 || true
mid=$(date +%s.%N)
"$ROOT/tools/shards-parallel.sh" 2 two captures -- --config bench.toml >/dev/null 2>&1 || true
end=$(date +%s.%N)
cmp -s one/report/summary.json two/report/summary.json || echo "warning: 1 and 2 shards differ" >&2
awk -v n="$FILES" -v a="$start" -v b="$mid" -v c="$end" 'BEGIN {
  printf "throughput: %d files, 1 shard %.1f s (%.2f files/s), 2 shards %.1f s (%.2f files/s), speed-up %.2f\n",
         n, b - a, n / (b - a), c - b, n / (c - b), (b - a) / (c - b) }'

if [ ! -f "tiny/c$((GATHER_FILES - 1)).csv" ]; then
  mkdir -p tiny
  awk -v n="$GATHER_FILES" 'BEGIN { pi = atan2(0, -1)
    for (i = 0; i < n; i++) { f = sprintf("tiny/c%d.csv", i); a3 = (i % 10 == 0) ? 0.12 : 0.02
      print "time (s),v (V)" > f
      for (k = 0; k < 960; k++) { t = k / 48000; w = 2 * pi * 1200 * t
        printf "%.9g,%.9g\n", t, cos(w) + a3 * cos(3 * w) > f }
      close(f) } }'
fi
printf '[report]\nplots = "failed"\n[[limit]]\nresult = "thd"\nmax = "8 %%"\n' >tiny.toml
rm -rf tinyrun
PERIODFIT_JOBS=1 "$ROOT/tools/shards-parallel.sh" 2 tinyrun tiny -- --config tiny.toml >/dev/null 2>&1 || true
rm -rf tinyrun/report
/usr/bin/time -f "gather: $GATHER_FILES files from 2 shards in %e s, peak RSS %M kB" \
  "$BIN" gather tinyrun/shard-1-of-2 tinyrun/shard-2-of-2 --report tinyrun/report -q || true
du -sh tinyrun/report tinyrun/shard-1-of-2/shard.json | sed 's/^/size: /'
