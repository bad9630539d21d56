#!/usr/bin/env bash
# Reliability bound (issue 7, item 5): a 1 GB CSV capture (time column + 2 data columns, made by
# csv_import_gen.py) is imported by `periodfit info` within the import issue's memory bound,
# peak RSS ≤ 1.5 × (bytes of the parsed doubles) + 30 MB, measured with /usr/bin/time -v.
# The parsed doubles are the data channels' samples: rows × 2 × 8 bytes (the time column
# becomes t0 and the rate, not a channel).
# Usage: tools/bench/csv_1gb.sh [WORK_DIR]      (default /tmp/periodfit-bench-1gb; the 1 GB file
#        is kept there for reruns). PERIODFIT_EXE overrides the binary (default build-rel/periodfit,
#        else build/periodfit). Exit 1 when the bound is missed. Not a ctest.
set -euo pipefail
root=$(cd "$(dirname "$0")/../.." && pwd)
exe=${PERIODFIT_EXE:-}
if [ -z "$exe" ]; then
  exe=$root/build-rel/periodfit
  [ -x "$exe" ] || exe=$root/build/periodfit
fi
dir=${1:-/tmp/periodfit-bench-1gb}
mkdir -p "$dir"
file=$dir/capture_1gb.csv
rows=38000000   # ≈ 28 bytes a row (time 7 digits, volts 6): just over 1 GiB
if [ ! -f "$file" ] || [ "$(stat -c %s "$file")" -lt 1000000000 ]; then
  echo "writing $file ($rows rows)…" >&2
  /usr/bin/python3 "$root/tools/bench/csv_import_gen.py" "$file" "$rows"
fi
bytes=$(stat -c %s "$file")
/usr/bin/time -v "$exe" info "$file" >"$dir/info.txt" 2>"$dir/time.txt" || {
  cat "$dir/time.txt" >&2
  exit 2
}
peak_kb=$(awk -F: '/Maximum resident set size/ {gsub(/ /, "", $2); print $2}' "$dir/time.txt")
wall=$(awk '/Elapsed \(wall clock\)/ {print $NF}' "$dir/time.txt")
user=$(awk -F: '/User time/ {gsub(/ /, "", $2); print $2}' "$dir/time.txt")
samples=$(awk '/^ *samples/ {print $2; exit}' "$dir/info.txt")
[ -n "$samples" ] || samples=$rows
/usr/bin/python3 - "$bytes" "$samples" "$peak_kb" "$wall" "$user" <<'PY'
import sys
size, samples, peak_kb, wall, user = int(sys.argv[1]), int(sys.argv[2]), int(sys.argv[3]), sys.argv[4], float(sys.argv[5])
parts = [float(p) for p in wall.split(":")]
secs = sum(p * 60 ** i for i, p in enumerate(reversed(parts)))
doubles = samples * 2 * 8
bound = 1.5 * doubles + 30 * 2**20
peak = peak_kb * 1024
print(f"file            {size / 2**20:10.1f} MiB, {samples} rows")
print(f"parsed doubles  {doubles / 2**20:10.1f} MiB (2 channels)")
print(f"peak RSS        {peak / 2**20:10.1f} MiB")
print(f"bound           {bound / 2**20:10.1f} MiB (1.5 x doubles + 30 MiB): {'MET' if peak <= bound else 'MISSED'}"
      f" (peak / doubles = {peak / doubles:.3f})")
print(f"wall            {secs:10.2f} s  ({size / 2**20 / secs:.0f} MiB/s), user {user:.2f} s")
sys.exit(0 if peak <= bound else 1)
PY
