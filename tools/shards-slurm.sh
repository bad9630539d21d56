#!/usr/bin/env bash
# Submits a batch run as a Slurm job array of N shards (tools/shards-slurm.sbatch) and a gather
# job that starts when every shard has ended, waits for the gather and exits with its code
# (docs/scale-out.md).
#
# Usage: tools/shards-slurm.sh N WORKDIR INPUT… [-- BATCH OPTION…]
#   WORKDIR/shard-K-of-N  the shards; WORKDIR/report  the gathered report folder;
#   WORKDIR/logs/         the jobs' output (gather.out and gather.err are printed at the end)
# Environment: PERIODFIT (the binary; give an absolute path, jobs run on other nodes),
# PERIODFIT_SBATCH_ARGS (more sbatch options for the array, e.g. "--partition=batch --time=1:00:00").
# Exit code: the gather's — 0 all passed, 1 a limit or flag failed, 2 an error or an incomplete
# run (it names the shards to re-run: sbatch --array=K tools/shards-slurm.sbatch N WORKDIR …).
set -euo pipefail
if [ $# -lt 3 ]; then
  echo "usage: tools/shards-slurm.sh N WORKDIR INPUT… [-- BATCH OPTION…]" >&2
  exit 2
fi
HERE=$(cd "$(dirname "$0")" && pwd)
N=$1
WORKDIR=$2
case "$N" in '' | *[!0-9]* | 0) echo "periodfit: error: N must be a whole number ≥ 1, not \"$N\"" >&2; exit 2 ;; esac
mkdir -p "$WORKDIR/logs"
# shellcheck disable=SC2086
array=$(sbatch --parsable --array="1-$N" --output="$WORKDIR/logs/shard-%a.out" ${PERIODFIT_SBATCH_ARGS:-} \
  "$HERE/shards-slurm.sbatch" "$@")
array=${array%%;*}
folders=()
for k in $(seq "$N"); do folders+=("$WORKDIR/shard-$k-of-$N"); done
# afterany: the gather runs even when shards failed or were cancelled, and names what is missing.
gather=$(printf '%q ' "${PERIODFIT:-periodfit}" gather "${folders[@]}" --report "$WORKDIR/report")
status=0
sbatch --wait --quiet --dependency="afterany:$array" --job-name=periodfit-gather \
  --output="$WORKDIR/logs/gather.out" --error="$WORKDIR/logs/gather.err" --wrap="$gather" || status=$?
cat "$WORKDIR/logs/gather.out"
cat "$WORKDIR/logs/gather.err" >&2
exit "$status"
