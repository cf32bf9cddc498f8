#!/bin/bash
#SBATCH --job-name=sw-reprocess
#SBATCH --array=1-16
#SBATCH --cpus-per-task=2
#SBATCH --time=04:00:00
#SBATCH --output=sw-reprocess-%A_%a.log
# Reprocess an archive with a Slurm array job: one shard per array task, each task analysing
# its shard with as many parallel scans as it has CPUs. The number of shards is the size of
# the array, so `sbatch --array=1-64 ...` needs no edit (any contiguous range, e.g. 0-15).
# Submit from the folder that should receive the logs:
#   sbatch slurm_reprocess.sh ARCHIVE OUT [batch options]   (default: --bootstrap 16 --seed 2024)
# then merge: streakwright summarize OUT --out OUT/merged
# STREAKWRIGHT names the program when it is not on the compute nodes' PATH.
set -uo pipefail
if [ $# -lt 2 ]; then
  echo "usage: sbatch slurm_reprocess.sh ARCHIVE OUT [batch options]" >&2
  exit 2
fi
ARCHIVE=$1
OUT=$2
shift 2
if [ $# -eq 0 ]; then set -- --bootstrap 16 --seed 2024; fi
K=$((SLURM_ARRAY_TASK_ID - SLURM_ARRAY_TASK_MIN + 1))
N=$((SLURM_ARRAY_TASK_MAX - SLURM_ARRAY_TASK_MIN + 1))
"${STREAKWRIGHT:-streakwright}" batch "$ARCHIVE" --out "$OUT/shard-$K" --shard "$K/$N" \
    --jobs "${SLURM_CPUS_PER_TASK:-1}" --resume "$@"
status=$?
# 5 = the shard finished but some scans failed (listed in its summary): not a task failure.
if [ "$status" -eq 5 ]; then exit 0; fi
exit "$status"
