#!/usr/bin/env bash
# CSV import benchmark (not a test): a generated CSV with a time column and 2 data columns,
# 4 million rows, read by `periodfit info` (import + statistics) under /usr/bin/time -v, and
# by pandas.read_csv (Debian python3-pandas) on the same file in the same run.
#
#   tools/bench/csv_import.sh [PERIODFIT_BINARY] [ROWS]
#
# Prints MB/s (file bytes / wall time, and / CPU time), peak RSS against the target
# 1.5 × bytes of parsed doubles + 30 MB, and the pandas/periodfit time ratio. Best of 3 runs
# each, since the machine is shared.
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BIN=${1:-$ROOT/build/periodfit}
ROWS=${2:-4000000}
WORK=${TMPDIR:-/tmp}/periodfit_bench_csv
mkdir -p "$WORK"
FILE=$WORK/import_${ROWS}.csv
[ -f "$FILE" ] || /usr/bin/python3 "$ROOT/tools/bench/csv_import_gen.py" "$FILE" "$ROWS"
BYTES=$(stat -c %s "$FILE")
cat "$FILE" >/dev/null  # both readers start from the page cache

best_wall=999999; best_cpu=999999; rss=0
for run in 1 2 3; do
  /usr/bin/time -v "$BIN" info "$FILE" >/dev/null 2>"$WORK/time.txt"
  wall=$(awk -F': ' '/Elapsed/ {n=split($2,a,":"); s=0; for(i=1;i<=n;i++) s=s*60+a[i]; print s}' "$WORK/time.txt")
  cpu=$(awk -F': ' '/User time/ {u=$2} /System time/ {s=$2} END {print u+s}' "$WORK/time.txt")
  r=$(awk -F': ' '/Maximum resident/ {print $2}' "$WORK/time.txt")
  best_wall=$(awk -v a="$best_wall" -v b="$wall" 'BEGIN {print (b<a)?b:a}')
  best_cpu=$(awk -v a="$best_cpu" -v b="$cpu" 'BEGIN {print (b<a)?b:a}')
  [ "$r" -gt "$rss" ] && rss=$r
done

pandas=$(/usr/bin/python3 - "$FILE" <<'PY'
import sys, time
import pandas as pd
best, best_cpu = 1e9, 1e9
for _ in range(3):
    t, c = time.perf_counter(), time.process_time()
    frame = pd.read_csv(sys.argv[1], comment="#")
    best = min(best, time.perf_counter() - t)
    best_cpu = min(best_cpu, time.process_time() - c)
assert len(frame) > 0
print(f"{best:.3f} {best_cpu:.3f}")
PY
)

read -r pandas pandas_cpu <<<"$pandas"
awk -v bytes="$BYTES" -v rows="$ROWS" -v wall="$best_wall" -v cpu="$best_cpu" -v rss="$rss" -v pandas="$pandas" -v pandas_cpu="$pandas_cpu" 'BEGIN {
  mb = bytes / 1e6
  doubles = rows * 2 * 8 / 1048576
  target = 1.5 * doubles + 30
  printf "file            %.1f MB, %d rows (time + 2 data columns)\n", mb, rows
  printf "periodfit info  %.3f s wall, %.3f s CPU (best of 3)\n", wall, cpu
  printf "throughput      %.0f MB/s wall, %.0f MB/s CPU (target >= 250 MB/s on one core)\n", mb / wall, mb / cpu
  printf "peak RSS        %.1f MiB (target <= 1.5 x %.1f MiB of doubles + 30 = %.1f MiB)\n", rss / 1024, doubles, target
  printf "pandas.read_csv %.3f s wall, %.3f s CPU (best of 3): %.1f x the periodfit wall time, %.1f x its CPU time\n", pandas, pandas_cpu, pandas / wall, pandas_cpu / cpu
}'
