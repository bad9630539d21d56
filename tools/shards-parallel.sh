#!/usr/bin/env bash
# A batch run split into N shards run at once with GNU parallel, then gathered into one report
# folder identical to a single run's (docs/scale-out.md).
#
# Usage: tools/shards-parallel.sh N WORKDIR INPUT… [-- BATCH OPTION…]
#   WORKDIR/shard-K-of-N   each shard's report folder (batch --shard K/N)
#   WORKDIR/report         the gathered report folder
# Environment: PERIODFIT       the periodfit binary (default: periodfit on PATH)
#              PERIODFIT_JOBS  threads per shard (default 1: N shards use N cores)
#              PERIODFIT_PARALLEL_ARGS  more options for parallel, e.g. "--sshlogin 4/hostA,4/hostB"
#                              to spread the shards over hosts (WORKDIR and the inputs must then
#                              be on a shared file system, at the same path everywhere)
# Exit code: the gather's — 0 every capture passed, 1 a limit or flag failed, 2 an error or an
# incomplete run (the gather names the missing shards; re-run one with
# `periodfit batch INPUT… --shard K/N --report WORKDIR/shard-K-of-N …`, then gather again).
set -euo pipefail
if [ $# -lt 3 ]; then
  echo "usage: tools/shards-parallel.sh N WORKDIR INPUT… [-- BATCH OPTION…]" >&2
  exit 2
fi
N=$1
WORKDIR=$2
shift 2
inputs=()
while [ $# -gt 0 ] && [ "$1" != "--" ]; do inputs+=("$1"); shift; done
[ $# -gt 0 ] && shift
options=("$@")
case "$N" in '' | *[!0-9]* | 0) echo "periodfit: error: N must be a whole number ≥ 1, not \"$N\"" >&2; exit 2 ;; esac
PERIODFIT=${PERIODFIT:-periodfit}
mkdir -p "$WORKDIR"

# Each shard's own exit code (1 or 2 when one of its captures failed) is not the run's: the
# gather decides, and it also notices a shard that did not finish. -q passes every word to the
# command unchanged (no shell), so paths with spaces survive.
# shellcheck disable=SC2086
parallel -q --will-cite --halt never --line-buffer --tag -j "$N" ${PERIODFIT_PARALLEL_ARGS:-} \
  "$PERIODFIT" batch "${inputs[@]}" "${options[@]}" --jobs "${PERIODFIT_JOBS:-1}" \
  --shard "{}/$N" --report "$WORKDIR/shard-{}-of-$N" --quiet ::: $(seq "$N") >&2 || true

folders=()
for k in $(seq "$N"); do folders+=("$WORKDIR/shard-$k-of-$N"); done
exec "$PERIODFIT" gather "${folders[@]}" --report "$WORKDIR/report"
