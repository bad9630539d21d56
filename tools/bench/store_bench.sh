#!/usr/bin/env bash
# Cost of recording in the results database: the same batch (frf mode, 0/2 model, two limits,
# plots) over FILES two-channel captures (batch_bench_gen.py, numpy) without --db, with --db on
# a fresh SQLite file, with --db again (a re-run: every capture already recorded), and with
# --db on PostgreSQL when PERIODFIT_TEST_PG_URL is set (tools/pg-cluster.sh). The variants are
# interleaved ROUNDS times, in a rotating order, so that load from other processes hits them alike; the median files/s
# of each is printed with its ratio to the run without --db (target: >= 0.90).
# Usage: tools/bench/store_bench.sh [BINARY=build/periodfit] [WORK=/tmp/periodfit-bench-store]
#        FILES=200 SAMPLES=48000 ROUNDS=3 JOBS=2
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BIN=${1:-$ROOT/build/periodfit}
WORK=${2:-/tmp/periodfit-bench-store}
FILES=${FILES:-200}
SAMPLES=${SAMPLES:-48000}
ROUNDS=${ROUNDS:-3}
JOBS=${JOBS:-2}
source "$ROOT/tools/bench/bench_captures.sh"
printf '[identity]\nname_pattern = '"'"'unit_([0-9]+)'"'"'\nname_fields = ["serial"]\nstation = "bench"\n' |
  bench_captures "$WORK" "$FILES" "$SAMPLES"

fps() {  # fps NAME [DB]: one run, prints "files/s cpu-ms-per-file"
  local name=$1 db=${2:-}
  rm -rf "$WORK/out-$name"
  /usr/bin/time -f 'cpu %U %S' "$BIN" batch "$WORK/captures" --config "$WORK/bench.toml" --report "$WORK/out-$name" \
    --jobs "$JOBS" -q --timing ${db:+--db "$db"} 2> "$WORK/$name.err" > "$WORK/$name.out" || true
  local rate cpu
  rate=$(sed -n 's/.*(\([0-9.]*\) files\/s).*/\1/p' "$WORK/$name.err")
  cpu=$(awk -v n="$FILES" '/^cpu /{printf "%.2f", ($2 + $3) * 1000 / n}' "$WORK/$name.err")
  echo "$rate $cpu"
}
median() { sort -g | awk '{a[NR]=$1} END {print a[int((NR + 1) / 2)]}'; }

variants=(none sqlite sqlite_rerun)
[ -n "${PERIODFIT_TEST_PG_URL:-}" ] && variants+=(postgresql)
declare -A results cpus
echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg)"
for round in $(seq "$ROUNDS"); do
  rm -f "$WORK/bench.sqlite" "$WORK/bench.sqlite-wal" "$WORK/bench.sqlite-shm"
  if [ -n "${PERIODFIT_TEST_PG_URL:-}" ]; then
    psql -q "$PERIODFIT_TEST_PG_URL" -c 'DROP TABLE IF EXISTS run_capture, flag, verdict, result, capture_metadata, capture, run, schema_version CASCADE' >/dev/null 2>&1 || true
  fi
  # The order rotates every round, so a load that rises or falls during the run favours none.
  order=("${variants[@]:$(( (round - 1) % ${#variants[@]} ))}" "${variants[@]:0:$(( (round - 1) % ${#variants[@]} ))}")
  for v in "${order[@]}"; do
    case $v in
      none) r=$(fps none) ;;
      sqlite) r=$(fps sqlite "$WORK/bench.sqlite") ;;
      sqlite_rerun) r=$(fps sqlite_rerun "$WORK/bench.sqlite") ;;
      postgresql) r=$(fps postgresql "$PERIODFIT_TEST_PG_URL") ;;
    esac
    results[$v]+="${r% *} "
    cpus[$v]+="${r#* } "
    echo "round $round $v: ${r% *} files/s, ${r#* } ms CPU per file" >&2
  done
done
echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
# Wall-clock files/s moves with whatever else the machine runs; CPU time per file (user + sys of
# the whole process) is the steadier measure of what recording adds.
base=$(echo ${results[none]} | tr ' ' '\n' | median)
base_cpu=$(echo ${cpus[none]} | tr ' ' '\n' | median)
for v in "${variants[@]}"; do
  m=$(echo ${results[$v]} | tr ' ' '\n' | median)
  c=$(echo ${cpus[$v]} | tr ' ' '\n' | median)
  printf '%-13s median %7s files/s (runs: %s) ratio %s | CPU %s ms/file (runs: %s) ratio %s\n' "$v" "$m" \
    "${results[$v]}" "$(echo "$m / $base" | bc -l | cut -c1-5)" "$c" "${cpus[$v]}" "$(echo "$c / $base_cpu" | bc -l | cut -c1-5)"
done
grep '^recorded' "$WORK/sqlite.out" "$WORK/sqlite_rerun.out" || true
