#!/usr/bin/env bash
# Builds the libFuzzer targets into build-asan/ (clang, -fsanitize=fuzzer,address,undefined) and
# runs each for SECONDS (default 60) from its seeds in tests/fuzz/corpus/<target>/, as many at
# once as there are cores.
# Usage: tools/fuzz.sh [SECONDS] [TARGET…]     (targets: csv audio config model_file; default all)
# Crash, leak and timeout inputs are kept in tests/fuzz/artifacts/<target>/ (git-ignored); once a
# bug is fixed, copy its input to tests/regressions/<target>/ so robustness_test replays it.
# New corpus entries found during a run go to build-asan/corpus/<target>/, not into the source tree.
# PERIODFIT_FUZZ_SEED=N fixes libFuzzer's seed (tools/test.sh does in CI, so a CI run explores the
# same inputs in the same order each time and a red run reproduces; unset = a new seed per run,
# for exploring).
# Exits 1 when any target found a problem, 3 when clang or its fuzzer runtime is missing.
set -euo pipefail
PERIODFIT_ROOT=$(cd "$(dirname "$0")/.." && pwd)
cd "$PERIODFIT_ROOT"
seconds=${1:-60}
shift || true
targets=("$@")
[ ${#targets[@]} -eq 0 ] && targets=(csv audio config model_file)

source tools/deps.sh
# libFuzzer ships in Debian's libclang-rt-14-dev; without it clang links but finds no fuzzer.
if ! periodfit_have_libfuzzer; then
  echo "periodfit: fuzzing skipped: clang++ with libFuzzer (Debian clang, libclang-rt-14-dev) is missing" >&2
  exit 3
fi

# The fuzz targets live in the sanitizer build that tools/test.sh also runs the suite in
# (build-asan/: clang, library instrumented for libFuzzer, ASan and UBSan), so CI compiles the
# library once for both stages.
build=build-asan
PERIODFIT_TARGET=periodfit_fuzz_targets periodfit_build_sanitized "$build" -DPERIODFIT_WERROR=OFF

# fuzz_one TARGET: runs one target for $seconds; its log goes to $build/fuzz_TARGET.log.
fuzz_one() {
  local t=$1
  local artifacts="tests/fuzz/artifacts/$t"
  local corpus="$build/corpus/$t"
  mkdir -p "$artifacts" "$corpus"
  # -rss_limit_mb: an input that makes the parser allocate beyond this is a finding, not an
  # out-of-memory of the machine; -timeout: a single input slower than this is a hang.
  ASAN_OPTIONS=detect_leaks=1:halt_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
    "$build/fuzz/fuzz_$t" -seed="${PERIODFIT_FUZZ_SEED:-0}" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -max_len=65536 \
    -print_final_stats=1 -artifact_prefix="$artifacts/" "$corpus" "tests/fuzz/corpus/$t" \
    >"$build/fuzz_$t.log" 2>&1
}

# Each libFuzzer process is single-threaded: run as many targets at once as there are cores, so
# the stage takes ceil(targets / cores) * SECONDS of wall time and each target still gets SECONDS.
failed=()
slots=$(nproc)
for ((first = 0; first < ${#targets[@]}; first += slots)); do
  pids=()
  names=()
  for t in "${targets[@]:first:slots}"; do
    echo "periodfit: fuzzing $t for ${seconds}s" >&2
    fuzz_one "$t" &
    pids+=($!)
    names+=("$t")
  done
  for i in "${!pids[@]}"; do
    t=${names[$i]}
    if wait "${pids[$i]}"; then
      printf '%s: ' "$t" >&2
      grep -E '^stat::(number_of_executed_units|new_units_added|peak_rss_mb)' "$build/fuzz_$t.log" | tr '\n' ' ' >&2
      echo >&2
    else
      failed+=("$t")
      tail -n 60 "$build/fuzz_$t.log" >&2
    fi
  done
done
if [ ${#failed[@]} -ne 0 ]; then
  echo "periodfit: fuzzing found problems in: ${failed[*]} (inputs in tests/fuzz/artifacts/)" >&2
  exit 1
fi
echo "periodfit: fuzzing passed (${targets[*]}, ${seconds}s each)" >&2
