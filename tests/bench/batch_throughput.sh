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
# 1.6 s per scan on one core); the engine runs single-threaded in both cases (batch gives each job one thread), so
# the ratio measures scaling over scans, not inside an engine. Run it on an otherwise idle
# machine: other processes on the cores lower the ratio.
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
run() {  # run JOBS -> prints the wall time in seconds
  local jobs="$1" out="$work/out_jobs$1"
  rm -rf "$out"
  local t0 t1
  t0="$(now)"
  # shellcheck disable=SC2086  # $args is a list of options
  "$sw" batch "$work/archive" --out "$out" --jobs "$jobs" --quiet $args > /dev/null
  t1="$(now)"
  echo "$t0 $t1" | awk '{printf "%.3f", $2 - $1}'
}

echo "batch_throughput: options: $args"
echo "batch_throughput: machine: $(nproc) cores, load average $(cut -d' ' -f1-3 /proc/loadavg)"
t1="$(run 1)"
t2="$(run 2)"
awk -v n="$scans" -v a="$t1" -v b="$t2" 'BEGIN {
  printf "jobs 1: %d scans in %.2f s = %.3f scans/s\n", n, a, n / a
  printf "jobs 2: %d scans in %.2f s = %.3f scans/s\n", n, b, n / b
  printf "throughput ratio (jobs 2 / jobs 1): %.2f\n", a / b
}'
# Same numbers for both job counts (the seeds come from the scan names, not the schedule).
if ! cmp -s <(grep -v -e '"seconds"' -e '"created_utc"' -e '"out"' "$work/out_jobs1/summary.json") \
            <(grep -v -e '"seconds"' -e '"created_utc"' -e '"out"' "$work/out_jobs2/summary.json"); then
  echo "batch_throughput: ERROR: the summaries of --jobs 1 and --jobs 2 differ" >&2
  exit 1
fi
echo "batch_throughput: summaries of both runs identical"
