#!/usr/bin/env bash
# Builds the libFuzzer targets into build-fuzz/ (clang, -fsanitize=fuzzer,address,undefined) and
# runs each for SECONDS (default 60) from its seeds in tests/fuzz/corpus/<target>/.
# Usage: tools/fuzz.sh [SECONDS] [TARGET…]     (targets: csv audio config model_file; default all)
# Crash, leak and timeout inputs are kept in tests/fuzz/artifacts/<target>/ (git-ignored); once a
# bug is fixed, copy its input to tests/regressions/<target>/ so robustness_test replays it.
# New corpus entries found during a run go to build-fuzz/corpus/<target>/, not into the source tree.
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

# libFuzzer ships in Debian's libclang-rt-14-dev; without it clang links but finds no fuzzer.
if ! command -v clang++ >/dev/null || ! echo 'extern "C" int LLVMFuzzerTestOneInput(const char*, unsigned long) { return 0; }' |
    clang++ -x c++ -fsanitize=fuzzer - -o /dev/null 2>/dev/null; then
  echo "periodfit: fuzzing skipped: clang++ with libFuzzer (Debian clang, libclang-rt-14-dev) is missing" >&2
  exit 3
fi

build=build-fuzz
generator=()
command -v ninja >/dev/null && generator=(-G Ninja)
if [ ! -f "$build/CMakeCache.txt" ]; then
  cmake -S . -B "$build" "${generator[@]}" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DCMAKE_CXX_COMPILER=clang++ \
    -DBUILD_TESTING=OFF -DPERIODFIT_FUZZ=ON -DPERIODFIT_SANITIZE=ON >/dev/null
fi
fuzz_targets=()
for t in "${targets[@]}"; do fuzz_targets+=("fuzz_$t"); done
cmake --build "$build" -j "$(nproc)" --target "${fuzz_targets[@]}"

failed=()
for t in "${targets[@]}"; do
  artifacts="tests/fuzz/artifacts/$t"
  corpus="$build/corpus/$t"
  mkdir -p "$artifacts" "$corpus"
  echo "periodfit: fuzzing $t for ${seconds}s" >&2
  # -rss_limit_mb: an input that makes the parser allocate beyond this is a finding, not an
  # out-of-memory of the machine; -timeout: a single input slower than this is a hang.
  if ! ASAN_OPTIONS=detect_leaks=1:halt_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
      "$build/fuzz/fuzz_$t" -seed="${PERIODFIT_FUZZ_SEED:-0}" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -max_len=65536 \
      -print_final_stats=1 -artifact_prefix="$artifacts/" "$corpus" "tests/fuzz/corpus/$t" \
      >"$build/fuzz_$t.log" 2>&1; then
    failed+=("$t")
    tail -n 60 "$build/fuzz_$t.log" >&2
  else
    grep -E '^stat::(number_of_executed_units|new_units_added|peak_rss_mb)' "$build/fuzz_$t.log" | tr '\n' ' ' >&2
    echo >&2
  fi
done
if [ ${#failed[@]} -ne 0 ]; then
  echo "periodfit: fuzzing found problems in: ${failed[*]} (inputs in tests/fuzz/artifacts/)" >&2
  exit 1
fi
echo "periodfit: fuzzing passed (${targets[*]}, ${seconds}s each)" >&2
