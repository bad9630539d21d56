#!/usr/bin/env bash
# Installs what the build and the tests need, builds into build/, and runs the whole suite.
# Usage: tools/test.sh            (CI=true turns warnings into errors)
set -euo pipefail
PERIODFIT_ROOT=$(cd "$(dirname "$0")/.." && pwd)
cd "$PERIODFIT_ROOT"
source tools/deps.sh

periodfit_install "${PERIODFIT_BUILD_PACKAGES[@]}" "${PERIODFIT_TEST_PACKAGES[@]}"
werror=OFF
[ "${CI:-}" = true ] && werror=ON
periodfit_build build -DPERIODFIT_WERROR=$werror -DBUILD_TESTING=ON
ctest --test-dir build --output-on-failure -j "$(nproc)"
