#!/usr/bin/env bash
# Tests of the scale-out recipes (docs/scale-out.md), run by ctest (tests/CMakeLists.txt,
# label scaleout): each runs a recipe over a small capture folder and requires the gathered
# report folder to equal the single run's (summary.csv, summary.json, report.html, files/;
# gather.json is the gather's own record) and the same exit code.
#
# Usage: PERIODFIT=build/periodfit tools/scale-out-test.sh MODE
#   parallel   tools/shards-parallel.sh with 3 shards (GNU parallel)
#   slurm      a real one-node cluster (tools/slurm-cluster.sh), tools/shards-slurm.sh with 3
#              shards; then one shard removed, the gather names it, the shard alone re-run with
#              sbatch --array=2, and the second gather equals the single run
#   slurm-env  tools/shards-slurm.sbatch without daemons: the tasks run with SLURM_ARRAY_TASK_ID
#              set as Slurm sets it; bad task ids are refused
# Exit 77 (ctest: skipped, shown as such) when a tool the mode needs is missing or not root.
set -euo pipefail
MODE=${1:?usage: scale-out-test.sh parallel|slurm|slurm-env}
HERE=$(cd "$(dirname "$0")" && pwd)
export PERIODFIT=${PERIODFIT:?set PERIODFIT to the periodfit binary}
WORK=$(mktemp -d /tmp/periodfit-scale-out.XXXXXX)
cleanup() {
  if [ "$MODE" = slurm ]; then PERIODFIT_SLURM_DIR=$WORK/cluster "$HERE/slurm-cluster.sh" stop || true; fi
  rm -rf "$WORK"
}
trap cleanup EXIT
fail() { echo "scale-out-test ($MODE): FAILED: $*" >&2; exit 1; }
skip() { echo "scale-out-test ($MODE): SKIPPED: $*" >&2; exit 77; }

# 10 captures: a1·cos(ωt) + a3·cos(3ωt), 24 periods of 1200 Hz at 48 kHz; THD = a3/a1 (IEEE Std
# 1241), a3 = 0.01 … 0.10, so the 8 % limit fails the last two; and one unreadable file (ERROR).
mkdir -p "$WORK/caps/line2"
for i in $(seq 0 9); do
  dest=$WORK/caps/cap_$i.csv
  [ "$i" -ge 7 ] && dest=$WORK/caps/line2/cap_$i.csv
  awk -v a3="0.0$((i + 1))" -v i="$i" 'BEGIN { if (i == 9) a3 = 0.1; print "time (s),v (V)";
    pi = atan2(0, -1); for (k = 0; k < 960; k++) { t = k / 48000; w = 2 * pi * 1200 * t;
    printf "%.9g,%.9g\n", t, cos(w) + a3 * cos(3 * w) } }' >"$dest"
done
printf 'time (s),v (V)\n0,1\n0.1,x\n' >"$WORK/caps/broken.csv"
printf '[[limit]]\nresult = "thd"\nmax = "8 %%"\n' >"$WORK/limits.toml"
cd "$WORK"
options=(--config limits.toml --recursive --plots failed)

single_rc=0
"$PERIODFIT" batch caps "${options[@]}" --report single --quiet >single.out || single_rc=$?
[ "$single_rc" -eq 2 ] || fail "the single run exited $single_rc, expected 2 (one unreadable capture)"

same_as_single() {  # folder: the gathered report folder
  diff -r -x gather.json single "$1" >/dev/null || fail "$1 differs from the single run: $(diff -rq -x gather.json single "$1" | head -3)"
  [ -s "$1/gather.json" ] || fail "$1/gather.json is missing"
}

case "$MODE" in
parallel)
  command -v parallel >/dev/null || skip "GNU parallel is not installed (tools/deps.sh)"
  rc=0
  "$HERE/shards-parallel.sh" 3 work caps -- "${options[@]}" >gather.out 2>gather.err || rc=$?
  [ "$rc" -eq "$single_rc" ] || fail "gather exited $rc, the single run $single_rc: $(cat gather.err)"
  same_as_single work/report
  ;;
slurm-env)
  for k in 1 2 3; do
    rc=0
    SLURM_ARRAY_TASK_ID=$k SLURM_CPUS_PER_TASK=1 "$HERE/shards-slurm.sbatch" 3 work caps -- "${options[@]}" || rc=$?
    [ "$rc" -le 2 ] && [ -s "work/shard-$k-of-3/shard.json" ] || fail "task $k did not write its shard (exit $rc)"
  done
  rc=0
  "$PERIODFIT" gather work/shard-{1,2,3}-of-3 --report work/report >gather.out 2>gather.err || rc=$?
  [ "$rc" -eq "$single_rc" ] || fail "gather exited $rc, the single run $single_rc: $(cat gather.err)"
  same_as_single work/report
  # Task ids outside 1 … N and a missing task id are refused before anything runs.
  for bad in 0 4; do
    if SLURM_ARRAY_TASK_ID=$bad "$HERE/shards-slurm.sbatch" 3 work2 caps 2>err.txt; then fail "task id $bad accepted"; fi
    grep -q "array task $bad is not a shard of 1 … 3" err.txt || fail "task id $bad: $(cat err.txt)"
  done
  if env -u SLURM_ARRAY_TASK_ID "$HERE/shards-slurm.sbatch" 3 work2 caps 2>err.txt; then fail "no task id accepted"; fi
  grep -q "SLURM_ARRAY_TASK_ID is not set" err.txt || fail "no task id: $(cat err.txt)"
  [ ! -e work2 ] || fail "a refused task wrote work2"
  ;;
slurm)
  for b in munged slurmctld slurmd sbatch; do command -v "$b" >/dev/null || skip "$b is not installed (tools/deps.sh)"; done
  [ "$(id -u)" -eq 0 ] || skip "a Slurm node needs root"
  export PERIODFIT_SLURM_DIR=$WORK/cluster
  # A port of our own per test run: two runs on one machine must not meet.
  export PERIODFIT_SLURM_PORT=$((20000 + ($$ % 20000) * 2))
  eval "$("$HERE/slurm-cluster.sh" start)"
  rc=0
  SECONDS=0; "$HERE/shards-slurm.sh" 3 "$WORK/work" caps -- "${options[@]}" >gather.out 2>gather.err || rc=$?
  echo "array + gather: $SECONDS s" >&2
  [ "$rc" -eq "$single_rc" ] || fail "gather job exited $rc, the single run $single_rc: $(cat gather.err)"
  same_as_single work/report
  # Shard 2 lost: the gather names it; re-running only that array task completes the run.
  rm -rf work/shard-2-of-3 work/report
  rc=0
  "$PERIODFIT" gather work/shard-{1,2,3}-of-3 --report work/report 2>gather.err || rc=$?
  [ "$rc" -eq 2 ] || fail "gather without shard 2 exited $rc"
  grep -q "shard 2/3 is missing; it holds" gather.err || fail "the gather did not name shard 2: $(cat gather.err)"
  sbatch --wait --quiet --array=2 --output="$WORK/work/logs/rerun-%a.out" "$HERE/shards-slurm.sbatch" 3 "$WORK/work" caps -- "${options[@]}" || true
  rc=0
  "$PERIODFIT" gather work/shard-{1,2,3}-of-3 --report work/report 2>gather.err || rc=$?
  [ "$rc" -eq "$single_rc" ] || fail "gather after the re-run exited $rc: $(cat gather.err)"
  same_as_single work/report
  ;;
*) echo "usage: scale-out-test.sh parallel|slurm|slurm-env" >&2; exit 2 ;;
esac
echo "scale-out-test ($MODE): passed" >&2
