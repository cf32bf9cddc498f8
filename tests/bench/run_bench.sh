#!/bin/sh
# Runs the benchmark programs and the numpy reference in one go and prints the ratios of
# docs/performance.md (each ratio from figures taken in this one run).
#   tests/bench/run_bench.sh [BUILD_DIR=build] [OUT_DIR=BUILD_DIR/bench-results]
# Ratios of one-thread kernels use CPU time (robust on a shared machine); thread speed-ups and
# the end-to-end runs use wall time, which depends on the machine's load (printed by each program).
# BENCH_FILTER (a Google Benchmark regex) limits bench_full_model, e.g. 'Floor|Cost|Epie' to skip
# the slow end-to-end runs; STREAKWRIGHT_BENCH_THREADS sets the threads of the end-to-end runs.
set -eu
BUILD=${1:-build}
OUT=${2:-$BUILD/bench-results}
PY=/usr/bin/python3  # Debian's python3 with python3-numpy
mkdir -p "$OUT"

"$BUILD/tests/bench/bench_engines" --benchmark_out="$OUT/engines.json" --benchmark_out_format=json
"$BUILD/tests/bench/bench_full_model" --benchmark_filter="${BENCH_FILTER:-.}" \
  --benchmark_out="$OUT/full_model.json" --benchmark_out_format=json

# The same scan (helium-70as, seed 7) as a CSV image for the numpy ePIE of 150 iterations.
rm -rf "$OUT/scan"
"$BUILD/cli/streakwright" simulate --preset helium-70as --out "$OUT/scan" --seed 7 --format csv --quiet
"$PY" "$(dirname "$0")/numpy_epie.py" "$OUT/scan/helium-70as.json" 150 | tee "$OUT/numpy.txt"

"$PY" - "$OUT" <<'EOF'
import json, sys
out = sys.argv[1]
def load(name):
    try:
        return {b["name"]: b for b in json.load(open(f"{out}/{name}.json"))["benchmarks"]}
    except FileNotFoundError:
        return {}
def seconds(b, key="cpu_time"):
    scale = {"ns": 1e-9, "us": 1e-6, "ms": 1e-3, "s": 1.0}[b["time_unit"]]
    return b[key] * scale
e, f = load("engines"), load("full_model")
numpy_txt = open(f"{out}/numpy.txt").read()
numpy_cpu = float(numpy_txt.split("cpu_seconds")[-1].split()[0])
numpy_s = float(numpy_txt.split("\nseconds")[-1].split()[0])
print("\nratios (this run)")
def ratio(label, a, b, target):
    print(f"  {label:58s} {a / b:7.2f}   target {target}")
k1, k2 = "BM_FullModelCostGradient/1/real_time", "BM_FullModelCostGradient/2/real_time"
if k1 in f:
    ratio("full model cost+gradient / its FFTs (2 per node and delay)",
          seconds(f[k1]), seconds(f["BM_FullModelFftFloor"]), "<= 1.5")
    print(f"  {'full model cost+gradient, speed-up 2 threads / 1 thread':58s} "
          f"{seconds(f[k1], 'real_time') / seconds(f[k2], 'real_time'):7.2f}")
if "BM_EpieIteration" in f:
    ratio("ePIE iteration / 2 FFTs per delay (helium 121 x 330)",
          seconds(f["BM_EpieIteration"]), seconds(f["BM_EpieFftFloor"]), "<= 1.3")
if "BM_PtychographicIteration" in e:
    ratio("ePIE iteration / 2 FFTs per delay (121 x 400)",
          seconds(e["BM_PtychographicIteration"]), seconds(e["BM_FftFloor"]), "<= 1.3")
for b in (0, 8):
    k = f"BM_HeliumRetrieve/{b}/iterations:1/real_time"
    if k in f:
        t = seconds(f[k], "real_time")
        c = f[k]["process_cpu_s"]
        print(f"  helium-70as retrieve, bootstrap {b}: {c:.1f} s CPU ({t:.1f} s wall, "
              f"{f[k]['threads']:.0f} thread(s)); / numpy ePIE 150 iterations ({numpy_cpu:.2f} s "
              f"CPU, {numpy_s:.2f} s wall) = {c / numpy_cpu:.1f} (CPU), {t / numpy_s:.1f} (wall)"
              + ("   target <= 3" if b == 8 else ""))
EOF
