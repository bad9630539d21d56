# Shared by tools/demo.sh and tools/test.sh (sourced, not run): the Debian packages periodfit
# needs, installing the missing ones, and the build into build/.

PERIODFIT_BUILD_PACKAGES=(
  build-essential cmake ninja-build pkg-config
  libfftw3-dev libeigen3-dev libsndfile1-dev libcli11-dev doctest-dev
  nlohmann-json3-dev libtomlplusplus-dev libboost-dev libtbb-dev
)
# Only the test suite needs these: reference libraries for the outside-source checks, an XML
# checker for the SVG plots, a headless browser for the HTML report, clang for fuzzing.
PERIODFIT_TEST_PACKAGES=(
  python3 python3-numpy python3-scipy python3-pandas libxml2-utils chromium
  clang libclang-rt-14-dev
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

# periodfit_build BUILD_DIR [CMAKE_ARGS…]: configures (Release with debug info) and builds
# everything, or only $PERIODFIT_TARGET when that is set.
periodfit_build() {
  local dir=$1
  shift
  local generator=()
  command -v ninja >/dev/null && generator=(-G Ninja)
  if [ ! -f "$dir/CMakeCache.txt" ]; then
    cmake -S "$PERIODFIT_ROOT" -B "$dir" "${generator[@]}" -DCMAKE_BUILD_TYPE=RelWithDebInfo "$@" || return 1
  else
    cmake -S "$PERIODFIT_ROOT" -B "$dir" "$@" >/dev/null || return 1
  fi
  cmake --build "$dir" -j "$(nproc)" ${PERIODFIT_TARGET:+--target "$PERIODFIT_TARGET"} || return 1
}
