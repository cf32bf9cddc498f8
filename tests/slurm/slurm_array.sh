#!/bin/bash
# The documented Slurm array script (docs/examples/slurm_reprocess.sh, shown in docs/batch.md)
# on a real single-node Slurm: writes a localhost slurm.conf (one node, select/cons_tres,
# proctrack/linuxproc, no cgroups), creates a munge key, starts munged, slurmctld and slurmd
# (all private to this test: own key, socket, ports, spool and state folders), submits the
# script with `sbatch --array` for a small simulated archive, waits, merges the shards with
# `streakwright summarize` and compares with a single-process `batch` of the same archive:
# the summaries must be identical (every column except the run time and the report link),
# and `summarize --against` must find nothing moved or changed.
#
# Usage: slurm_array.sh STREAKWRIGHT SOURCE_DIR
# Exit 0 pass, 1 fail, 77 skipped (printed reason): not root, or Debian's slurm-wlm / munge
# not installed (apt-get install slurm-wlm munge), or the daemons cannot start here.
set -uo pipefail
SW=$(realpath "$1")
SRC=$(realpath "$2")
SCRIPT="$SRC/docs/examples/slurm_reprocess.sh"
SKIP=77
TIMEOUT_S=${SW_SLURM_TIMEOUT_S:-300}

skip() { echo "SKIPPED: $*"; exit "$SKIP"; }
fail() { echo "FAILED: $*"; dump_logs; exit 1; }

# ---- the documented script is the one in docs/batch.md (byte for byte) ----
doc_block=$(awk '/^```bash$/ {inb=1; buf=""; next} inb && /^```$/ {if (buf ~ /#SBATCH --job-name=sw-reprocess/) printf "%s", buf; inb=0; next} inb {buf = buf $0 "\n"}' "$SRC/docs/batch.md")
if [ "$doc_block" != "$(cat "$SCRIPT")" ]; then
  echo "FAILED: the array script in docs/batch.md differs from $SCRIPT"
  diff <(printf '%s\n' "$doc_block") "$SCRIPT"
  exit 1
fi
echo "docs/batch.md shows $SCRIPT verbatim"

[ "$(id -u)" = 0 ] || skip "the single-node Slurm needs root to start munged, slurmctld and slurmd"
for p in sbatch squeue scontrol slurmctld slurmd munged; do
  command -v "$p" >/dev/null 2>&1 || skip "'$p' not found: install Debian's slurm-wlm and munge (apt-get install slurm-wlm munge)"
done

D=$(mktemp -d /tmp/sw_slurm.XXXXXX)
chmod 700 "$D"
PIDS=()
dump_logs() {
  for f in "$D"/slurmctld.log "$D"/slurmd.log "$D"/munged.log "$D"/work/*.log; do
    [ -f "$f" ] || continue
    echo "---- $f (last 30 lines)"
    tail -n 30 "$f"
  done
}
cleanup() {
  # Stop only the daemons this test started (their pids), then remove the folder.
  for ((i = ${#PIDS[@]} - 1; i >= 0; i--)); do kill "${PIDS[$i]}" 2>/dev/null; done
  for pid in "${PIDS[@]}"; do
    for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
    kill -9 "$pid" 2>/dev/null
  done
  rm -rf "$D"
}
trap cleanup EXIT
trap 'exit 1' INT TERM

# ---- munge: own key, socket and files ----
mkdir -p "$D/munge" && chmod 700 "$D/munge"
KEY="$D/munge/munge.key"
if command -v mungekey >/dev/null 2>&1; then
  mungekey --create --keyfile="$KEY" >/dev/null 2>&1 || skip "mungekey could not create a key"
else
  dd if=/dev/urandom of="$KEY" bs=1024 count=1 status=none
fi
chmod 400 "$KEY"
SOCK="$D/munge/munge.socket"
munged --foreground --force --key-file="$KEY" --socket="$SOCK" --pid-file="$D/munge/munged.pid" \
  --log-file="$D/munged.log" --seed-file="$D/munge/munged.seed" >/dev/null 2>&1 &
PIDS+=($!)
for _ in $(seq 50); do [ -S "$SOCK" ] && break; sleep 0.1; done
[ -S "$SOCK" ] || { dump_logs; skip "munged did not start (see its log above)"; }

# ---- slurm.conf: this host, one node, private ports and folders ----
HOST=$(hostname -s)
NCPU=$(nproc)
PORT=$((20000 + ($$ % 4000) * 2))
mkdir -p "$D/state" "$D/spool" "$D/work"
export SLURM_CONF="$D/slurm.conf"
cat > "$SLURM_CONF" <<EOF
ClusterName=swtest
SlurmctldHost=$HOST(127.0.0.1)
SlurmctldPort=$PORT
SlurmdPort=$((PORT + 1))
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket=$SOCK
SlurmUser=root
SlurmdUser=root
StateSaveLocation=$D/state
SlurmdSpoolDir=$D/spool
SlurmctldPidFile=$D/slurmctld.pid
SlurmdPidFile=$D/slurmd.pid
SlurmctldLogFile=$D/slurmctld.log
SlurmdLogFile=$D/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
MpiDefault=none
ReturnToService=2
MinJobAge=600
NodeName=swnode NodeHostname=$HOST NodeAddr=127.0.0.1 CPUs=$NCPU State=UNKNOWN
PartitionName=swtest Nodes=swnode Default=YES MaxTime=INFINITE State=UP
EOF
slurmctld -D -i -f "$SLURM_CONF" >/dev/null 2>&1 &
PIDS+=($!)
slurmd -D -N swnode -f "$SLURM_CONF" >/dev/null 2>&1 &
PIDS+=($!)
ready=0
for _ in $(seq 60); do
  if sinfo -h -N -o '%t' 2>/dev/null | grep -qE '^(idle|mix|alloc)'; then ready=1; break; fi
  sleep 0.5
done
[ "$ready" = 1 ] || { dump_logs; skip "the single-node Slurm did not come up (slurmctld/slurmd logs above)"; }
echo "Slurm $(sinfo -V | awk '{print $2}') up: node swnode, $NCPU CPU(s), port $PORT"

# ---- a small archive: 4 simulated scans (streaking and RABBITT, nested folders) ----
A="$D/archive"
"$SW" simulate --preset neon-150as --out "$A/day1" --name scan_001 --seed 1 --quiet >/dev/null || fail "simulate"
"$SW" simulate --preset neon-chirped-pos --out "$A/day1" --name scan_002 --seed 2 --quiet >/dev/null || fail "simulate"
"$SW" simulate --preset neon-chirped-neg --out "$A/day2" --name scan_001 --seed 3 --quiet >/dev/null || fail "simulate"
"$SW" simulate --preset argon-rabbitt --out "$A/day2" --name scan_002 --seed 4 --quiet >/dev/null || fail "simulate"
OPTS=(--bootstrap 2 --seed 11 --iterations 40 --threads 1 --engine ptychographic)

# ---- the array job: 3 shards, one CPU each ----
OUT="$D/reprocessed"
cd "$D/work" || fail "cd"
JOB=$(STREAKWRIGHT="$SW" sbatch --parsable --array=1-3 --cpus-per-task=1 --time=00:10:00 \
        --chdir="$D/work" "$SCRIPT" "$A" "$OUT" "${OPTS[@]}") || fail "sbatch refused the script"
JOB=${JOB%%;*}
echo "submitted array job $JOB (3 tasks)"
t0=$SECONDS
while squeue -h -j "$JOB" 2>/dev/null | grep -q .; do
  [ $((SECONDS - t0)) -lt "$TIMEOUT_S" ] || fail "the array job did not finish within $TIMEOUT_S s"
  sleep 1
done
states=$(scontrol -o show job "$JOB" 2>/dev/null | grep -o 'JobState=[A-Z_]*' | sort | uniq -c)
echo "array tasks finished in $((SECONDS - t0)) s: $(echo $states)"
n_done=$(scontrol -o show job "$JOB" | grep -c 'JobState=COMPLETED')
[ "$n_done" = 3 ] || fail "expected 3 COMPLETED array tasks, got: $states"
for k in 1 2 3; do
  [ -f "$OUT/shard-$k/summary.json" ] || fail "shard $k wrote no summary.json"
done

# ---- merge, single-process batch, compare ----
"$SW" summarize "$OUT" --out "$OUT/merged" --quiet >/dev/null || fail "summarize of the shards"
"$SW" batch "$A" --out "$D/single" --quiet "${OPTS[@]}" >/dev/null
st=$?
[ "$st" = 0 ] || [ "$st" = 5 ] || fail "single-process batch exit $st"
# Identical summaries: every column except seconds (run time) and report (the link goes
# through shard-K/ in the merged summary); text exactly, numbers to 1e-9 relative (docs/batch.md
# "Seeds": between processes FFTW's measured plans may change the last digits, ~1e-14).
# RFC 4180 CSV (quoted messages hold commas): parsed with Python's csv module when a python3
# is there, else only summarize --against below.
rows=$(grep -c '' "$D/single/summary.csv")
rows=$((rows - 1))
[ "$rows" = 4 ] || fail "the single batch summary has $rows rows, expected 4"
PY=$(command -v /usr/bin/python3 || command -v python3 || true)
if [ -n "$PY" ]; then
  "$PY" - "$OUT/merged/summary.csv" "$D/single/summary.csv" <<'PYEOF' || fail "the merged Slurm summary differs from the single-process batch (above)"
import csv, math, sys
def rows(p):
    with open(p, newline="") as f:
        return [{k: v for k, v in r.items() if k not in ("seconds", "report")} for r in csv.DictReader(f)]
def num(v):
    try:
        x = float(v)
        return x if math.isfinite(x) else None
    except ValueError:
        return None
a, b = rows(sys.argv[1]), rows(sys.argv[2])
bad, worst = [], 0.0
for x, y in zip(a, b):
    if x.keys() != y.keys():
        bad.append((x, y)); continue
    for k in x:
        u, v = num(x[k]), num(y[k])
        if u is not None and v is not None:
            rel = abs(u - v) / max(abs(u), abs(v), 1e-300)
            worst = max(worst, rel)
            if rel > 1e-9: bad.append((x["scan"] + "." + k, (x[k], y[k])))
        elif x[k] != y[k]:
            bad.append((x["scan"] + "." + k, (x[k], y[k])))
for what, vals in bad:
    print("differs:", what, vals)
print(f"{len(a)} vs {len(b)} rows; largest relative difference of a number {worst:.1e}")
sys.exit(1 if bad or len(a) != len(b) else 0)
PYEOF
  echo "merged summary of 3 shards = single-process batch summary ($rows scans, all columns but seconds/report)"
else
  echo "note: no python3 to compare the CSV columns; relying on summarize --against"
fi
cmp_out=$("$SW" summarize "$OUT/merged" --against "$D/single" 2>&1) || fail "summarize --against: $cmp_out"
echo "$cmp_out" | grep -q ' 0 moved' || fail "summarize --against found moved values: $cmp_out"
if echo "$cmp_out" | grep -qE '^(changed|only in)'; then fail "summarize --against: $cmp_out"; fi
echo "summarize --against: 0 moved, no class/status changes, no scan in only one run"
echo "PASSED"
