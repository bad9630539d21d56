# Shared by tools/demo.sh and tools/test.sh (sourced, not run): the Debian packages periodfit
# needs, installing the missing ones, and the build into build/.

PERIODFIT_BUILD_PACKAGES=(
  build-essential cmake ninja-build pkg-config
  libfftw3-dev libeigen3-dev libsndfile1-dev libcli11-dev doctest-dev
  nlohmann-json3-dev libtomlplusplus-dev libboost-dev libtbb-dev
  libsqlite3-dev libpq-dev python3-dev pybind11-dev
)
# Only the test suite needs these: reference libraries for the outside-source checks, an XML
# checker for the SVG plots, a headless browser for the HTML report, clang for fuzzing and the
# sanitizer build, ccache so a later run on the same machine recompiles only what changed, a
# PostgreSQL server for the results-database tests (tools/pg-cluster.sh), GNU parallel, Slurm
# and munge for the scale-out recipes' tests (tools/scale-out-test.sh), and pytest for the
# Python module's tests.
PERIODFIT_TEST_PACKAGES=(
  python3 python3-numpy python3-scipy python3-pandas libxml2-utils chromium
  clang libclang-rt-14-dev ccache postgresql python3-pytest
  parallel slurm-wlm munge
)

# periodfit_install PACKAGE…: installs whichever of the packages are missing. As root it runs
# apt-get (update first, since a fresh machine has no package lists); otherwise it prints the
# exact command to run and fails.
periodfit_install() {
  local missing=()
  local p
  for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
  done
  [ ${#missing[@]} -eq 0 ] && return 0
  if [ "$(id -u)" -ne 0 ]; then
    echo "periodfit: missing Debian packages; run as root:" >&2
    echo "  apt-get update && apt-get install -y ${missing[*]}" >&2
    return 1
  fi
  echo "periodfit: installing ${missing[*]}" >&2
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -q >/dev/null || return 1
  apt-get install -y -q --no-install-recommends "${missing[@]}" >/dev/null || return 1
}

# periodfit_ccache_setup: uses Debian's ccache when it is installed and its cache folder is
# writable, so a rebuild — and a fresh clone in another folder on the same machine — compiles only
# what changed. base_dir makes the absolute paths under the checkout relative before hashing, and
# nohashdir keeps the build folder out of the hash (the test.sh builds carry no debug info, and
# the sanitizer build only line tables, so no path from the first clone can mislead a debugger).
# Returns 1, never fails a build, when ccache is missing or unusable: a clean machine builds
# without it. PERIODFIT_CCACHE=0 turns it off.
periodfit_ccache_setup() {
  [ "${PERIODFIT_CCACHE:-1}" = 1 ] || return 1
  command -v ccache >/dev/null || return 1
  export CCACHE_BASEDIR=$PERIODFIT_ROOT
  export CCACHE_NOHASHDIR=1
  export CCACHE_MAXSIZE=${CCACHE_MAXSIZE:-4G}
  local cache_dir
  cache_dir=$(ccache -k cache_dir 2>/dev/null) || return 1
  mkdir -p "$cache_dir" 2>/dev/null && [ -w "$cache_dir" ] || return 1
}

# The flags of the builds test.sh makes. -O2 as a release build has; no debug info in the main
# build (nobody debugs a CI build, and DWARF was most of the link time and of the 95 MB binary);
# line tables only under the sanitizers, enough for symbolised reports. A developer who debugs
# configures a folder of their own with -DCMAKE_BUILD_TYPE=RelWithDebInfo.
PERIODFIT_RELEASE_FLAGS=(-DCMAKE_BUILD_TYPE=Release "-DCMAKE_CXX_FLAGS_RELEASE=-O2 -DNDEBUG")
PERIODFIT_SANITIZER_FLAGS=(-DCMAKE_BUILD_TYPE=Release "-DCMAKE_CXX_FLAGS_RELEASE=-O1 -gline-tables-only -DNDEBUG")

# periodfit_have_libfuzzer: true when clang++ links a libFuzzer target (Debian clang and
# libclang-rt-14-dev).
periodfit_have_libfuzzer() {
  command -v clang++ >/dev/null &&
    echo 'extern "C" int LLVMFuzzerTestOneInput(const char*, unsigned long) { return 0; }' |
    clang++ -x c++ -fsanitize=fuzzer - -o /dev/null 2>/dev/null
}

# periodfit_build_sanitized BUILD_DIR [CMAKE_ARGS…]: the one sanitizer build, shared by the test
# suite under ASan + UBSan and by the fuzz targets: clang, the library instrumented with
# -fsanitize=fuzzer-no-link,address,undefined (the coverage callbacks are weak no-ops outside a
# fuzzer, so the test binary runs normally). One library build serves both stages. Without clang's
# libFuzzer it falls back to gcc with ASan + UBSan and no fuzz targets.
periodfit_build_sanitized() {
  local dir=$1
  shift
  if periodfit_have_libfuzzer; then
    if [ -f "$dir/CMakeCache.txt" ] && ! grep -q '^PERIODFIT_FUZZ:BOOL=ON' "$dir/CMakeCache.txt"; then
      rm -rf "$dir"  # an older layout of this folder (gcc ASan); the compiler cannot change in place
    fi
    periodfit_build "$dir" -DCMAKE_CXX_COMPILER=clang++ -DPERIODFIT_FUZZ=ON -DPERIODFIT_SANITIZE=ON \
      "${PERIODFIT_SANITIZER_FLAGS[@]}" "$@"
  else
    periodfit_build "$dir" -DPERIODFIT_SANITIZE=ON "${PERIODFIT_SANITIZER_FLAGS[@]}" "$@"
  fi
}

# periodfit_build BUILD_DIR [CMAKE_ARGS…]: configures (with the arguments given) and builds
# everything, or only $PERIODFIT_TARGET when that is set.
periodfit_build() {
  local dir=$1
  shift
  local generator=() launcher=()
  command -v ninja >/dev/null && generator=(-G Ninja)
  periodfit_ccache_setup && launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache)
  if [ ! -f "$dir/CMakeCache.txt" ]; then
    cmake -S "$PERIODFIT_ROOT" -B "$dir" "${generator[@]}" "${launcher[@]}" "$@" || return 1
  else
    cmake -S "$PERIODFIT_ROOT" -B "$dir" "${launcher[@]}" "$@" >/dev/null || return 1
  fi
  cmake --build "$dir" -j "$(nproc)" ${PERIODFIT_TARGET:+--target "$PERIODFIT_TARGET"} || return 1
}
