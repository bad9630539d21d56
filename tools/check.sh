#!/usr/bin/env bash
# The developer loop: rebuilds build/ incrementally (compiler cache on, no debug info, the flags
# tools/test.sh uses) and runs the ctest entries of the stages named, or the whole suite.
# Usage: tools/check.sh [STAGE…]      stages (ctest labels): core io dsp ident steady-state report batch cli
#        tools/check.sh -R NAME       ctest's own selection (e.g. -R period_lock_test)
# Installs nothing (tools/test.sh does that once); warnings are errors, as in CI.
set -euo pipefail
PERIODFIT_ROOT=$(cd "$(dirname "$0")/.." && pwd)
cd "$PERIODFIT_ROOT"
source tools/deps.sh
periodfit_build build -DPERIODFIT_WERROR=ON -DBUILD_TESTING=ON "${PERIODFIT_RELEASE_FLAGS[@]}"
if [ $# -eq 0 ]; then
  exec ctest --test-dir build --output-on-failure -j "$(nproc)"
elif [ "${1#-}" != "$1" ]; then
  exec ctest --test-dir build --output-on-failure -j "$(nproc)" "$@"
else
  exec ctest --test-dir build --output-on-failure -j "$(nproc)" -L "^($(IFS='|'; echo "$*"))\$"
fi
