#!/usr/bin/env bash
# Batch throughput: 20 synthetic scans analysed with --jobs 1 and --jobs 2; prints scans per
# second of each and their ratio (docs/performance.md, "Batch").
#
#   tests/bench/batch_throughput.sh [PATH/TO/streakwright] [WORK_DIR]
#
# Defaults: build/cli/streakwright of this checkout, a fresh temporary folder (removed at the
# end unless WORK_DIR was given). The scans are made by `streakwright simulate` from the
# neon-150as preset with seeds 1..20 (121 delays x 300 energies each). Analysis options:
# $BATCH_BENCH_ARGS, default "--engine ptychographic" with the default 8 bootstrap replicas (about
# 1.6 s per scan on one core). Three runs: --jobs 1 --threads 1 (one core), --jobs 2 (one
# thread per job: scaling over scans) and --jobs 1 with the default threads (the machine's
# cores for each scan's bootstrap replicas: scaling inside a scan). Engines are single-threaded in
# all three, and the results identical. Run it on an otherwise idle machine: other processes on
# the cores lower the ratios.
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")/../.." && pwd)"
sw="${1:-$here/build/cli/streakwright}"
work="${2:-}"
args="${BATCH_BENCH_ARGS:---engine ptychographic}"
scans=20

if [[ ! -x "$sw" ]]; then
  echo "batch_throughput: '$sw' is not an executable; build first (cmake --build build --target streakwright)" >&2
  exit 2
fi
cleanup=0
if [[ -z "$work" ]]; then
  work="$(mktemp -d "${TMPDIR:-/tmp}/sw_batch_bench.XXXXXX")"
  cleanup=1
fi
trap '[[ $cleanup == 1 ]] && rm -rf "$work"' EXIT
mkdir -p "$work/archive"

echo "batch_throughput: simulating $scans scans into $work/archive ..."
for i in $(seq 1 "$scans"); do
  "$sw" simulate --preset neon-150as --seed "$i" --name "scan_$(printf %02d "$i")" \
    --out "$work/archive" --quiet > /dev/null
done

now() { date +%s.%N; }
run() {  # run JOBS TAG [EXTRA OPTIONS] -> prints the wall time in seconds
  local jobs="$1" out="$work/out_$2"
  shift 2
  rm -rf "$out"
  local t0 t1
  t0="$(now)"
  # shellcheck disable=SC2086  # $args is a list of options
  "$sw" batch "$work/archive" --out "$out" --jobs "$jobs" --quiet $args "$@" > /dev/null
  t1="$(now)"
  echo "$t0 $t1" | awk '{printf "%.3f", $2 - $1}'
}

echo "batch_throughput: options: $args"
echo "batch_throughput: machine: $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg)"
t1="$(run 1 jobs1 --threads 1)"
t2="$(run 2 jobs2)"
t3="$(run 1 jobs1_threads)"
awk -v n="$scans" -v a="$t1" -v b="$t2" -v c="$t3" 'BEGIN {
  printf "jobs 1, threads 1: %d scans in %.2f s = %.3f scans/s\n", n, a, n / a
  printf "jobs 2:            %d scans in %.2f s = %.3f scans/s\n", n, b, n / b
  printf "jobs 1, threads = cores: %d scans in %.2f s = %.3f scans/s\n", n, c, n / c
  printf "throughput ratio (jobs 2 / jobs 1 threads 1): %.2f\n", a / b
  printf "throughput ratio (jobs 1 threads = cores / jobs 1 threads 1): %.2f\n", a / c
}'
# Same numbers for every schedule (the seeds come from the scan names and replica indices).
# (the options string records the thread count each run gave its scans; the results must not
# depend on it)
strip() {
  grep -v -e '"seconds"' -e '"created_utc"' -e '"out"' "$work/out_$1/summary.json" |
    sed 's/;threads=[0-9]*;/;/'
}
for tag in jobs2 jobs1_threads; do
  if ! cmp -s <(strip jobs1) <(strip "$tag"); then
    echo "batch_throughput: ERROR: the summaries of jobs1 and $tag differ" >&2
    exit 1
  fi
done
echo "batch_throughput: summaries of all runs identical"
