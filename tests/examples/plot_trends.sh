#!/bin/bash
# docs/examples/plot_batch_trends.py on a small batch: 3 simulated scans (two streaking, one
# RABBITT) analysed by `streakwright batch`, then the script must write a non-empty PDF and
# report as many plotted points per quantity as summary.csv has values (counted here with awk,
# independently of the script). Skipped (exit 77, printed reason) without matplotlib for
# Debian's /usr/bin/python3 (apt-get install python3-matplotlib).
# Usage: plot_trends.sh STREAKWRIGHT SOURCE_DIR
set -uo pipefail
SW=$(realpath "$1")
SRC=$(realpath "$2")
PY=/usr/bin/python3
[ -x "$PY" ] || PY=$(command -v python3)
[ -n "$PY" ] || { echo "SKIPPED: no python3"; exit 77; }
"$PY" -c "import matplotlib" 2>/dev/null ||
  { echo "SKIPPED: matplotlib missing for $PY (apt-get install python3-matplotlib)"; exit 77; }
D=$(mktemp -d /tmp/sw_trends.XXXXXX)
trap 'rm -rf "$D"' EXIT
fail() { echo "FAILED: $*"; exit 1; }
"$SW" simulate --preset neon-150as --out "$D/in" --name a1 --seed 1 --quiet >/dev/null || fail simulate
"$SW" simulate --preset neon-chirped-neg --out "$D/in" --name a2 --seed 2 --quiet >/dev/null || fail simulate
"$SW" simulate --preset argon-rabbitt --out "$D/in" --name a3 --seed 3 --quiet >/dev/null || fail simulate
"$SW" batch "$D/in" --out "$D/batch" --jobs 2 --bootstrap 2 --iterations 30 --quiet >/dev/null
st=$?
[ "$st" = 0 ] || [ "$st" = 5 ] || fail "batch exit $st"
out=$("$PY" "$SRC/docs/examples/plot_batch_trends.py" "$D/batch" --out "$D/trends.pdf") || fail "script: $out"
echo "$out"
[ -s "$D/trends.pdf" ] || fail "no PDF or an empty one"
[ "$(head -c 5 "$D/trends.pdf")" = "%PDF-" ] || fail "the file is not a PDF (no %PDF- header)"
# Points per quantity: ok rows with a value in the column (RFC 4180 CSV: the message column
# may hold quoted commas, so parse with Python's csv module, not with the script's code).
for col in fwhm_as gdd_as2 attochirp_as_per_eV; do
  n=$("$PY" -c "import csv,sys; print(sum(1 for r in csv.DictReader(open(sys.argv[1])) if r['status']=='ok' and r[sys.argv[2]] not in ('',)))" "$D/batch/summary.csv" "$col")
  echo "$out" | grep -q "$col $n" || fail "the script plotted a different number of $col points than summary.csv has ($n)"
done
[ "$(echo "$out" | grep -o 'attochirp_as_per_eV [0-9]*')" = "attochirp_as_per_eV 1" ] || fail "expected the RABBITT scan's attochirp"
echo "PASSED: $(stat -c %s "$D/trends.pdf") byte PDF"
