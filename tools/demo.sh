#!/usr/bin/env bash
# Installs what periodfit needs, builds it into build/, and runs the main job on the bundled
# demo data.
set -euo pipefail
PERIODFIT_ROOT=$(cd "$(dirname "$0")/.." && pwd)
cd "$PERIODFIT_ROOT"
source tools/deps.sh

periodfit_install "${PERIODFIT_BUILD_PACKAGES[@]}"
periodfit_build build -DBUILD_TESTING=OFF >/dev/null
echo "== periodfit info testdata/demo/bench_capture.csv"
build/periodfit info testdata/demo/bench_capture.csv
