# Sourced by the batch benchmarks: bench_captures WORK FILES SAMPLES makes WORK/captures (the
# seeded batch_bench_gen.py captures) unless they are there already, and writes WORK/bench.toml,
# the frf config both benchmarks run (model 0/2; limits on the corner and the damping), with
# any extra TOML given on standard input appended.
bench_captures() {
  local work=$1 files=$2 samples=$3 root
  root=$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)
  mkdir -p "$work"
  if [ ! -f "$work/captures/unit_$(printf %04d $((files - 1))).wav" ]; then
    echo "generating $files captures of $samples samples in $work/captures" >&2
    /usr/bin/python3 "$root/tools/bench/batch_bench_gen.py" "$work/captures" "$files" "$samples"
  fi
  {
    printf '[analysis]\nmode = "frf"\ninput = "0"\noutput = "1"\norder = "0/2"\nf0_hint_hz = 100\n\n'
    printf '[[limit]]\nresult = "natural_frequency_hz"\npole = 1\nnominal = 1200\ntolerance_pct = 5\nguard_band = true\n\n'
    printf '[[limit]]\nresult = "damping"\npole = 1\nnominal = 0.5\ntolerance = 0.05\n\n'
    cat
  } > "$work/bench.toml"
}
