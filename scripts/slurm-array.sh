#!/usr/bin/env bash
# Scan one shard of a table per Slurm array task; merge the shard directories afterwards.
#
#   sbatch --array=1-4 scripts/slurm-array.sh DATA.csv SHARD_PREFIX [scan flags...]
#   # when all tasks are done (or submit with --wait, or chain with --dependency=afterok:JOBID):
#   ccm-triage merge SHARD_PREFIX-* --out RESULTS
#
# Task k of an N-task array runs `ccm-triage scan DATA.csv --shard k/N --out SHARD_PREFIX-k`
# (k counted from 1 whatever the array's first id). Response manifolds are dealt round-robin,
# so every shard has the same number of units give or take one. Results do not depend on the
# number of shards or threads, so the merged files equal a single-process scan byte for byte.
# A task that is killed or preempted resumes from its saved units when resubmitted
# (`sbatch --array=K ...` with the same arguments; see --requeue).
#
# Environment: CCM_TRIAGE names the binary (default: ccm-triage on PATH); the task uses
# SLURM_CPUS_PER_TASK threads (default 1). Give the same scan flags to every task. Progress
# bars are off in batch logs (stderr is not a terminal).
#SBATCH --job-name=ccm-triage-shard
#SBATCH --output=ccm-triage-shard-%A_%a.log
#SBATCH --cpus-per-task=1
set -euo pipefail

if [ $# -lt 2 ]; then
    echo "usage: sbatch --array=1-N $0 DATA.csv SHARD_PREFIX [scan flags...]" >&2
    exit 2
fi
data=$1
prefix=$2
shift 2
: "${SLURM_ARRAY_TASK_ID:?not an array task: submit with sbatch --array=1-N}"
first=${SLURM_ARRAY_TASK_MIN:-1}
last=${SLURM_ARRAY_TASK_MAX:-$SLURM_ARRAY_TASK_COUNT}
count=${SLURM_ARRAY_TASK_COUNT:?}
if [ $((last - first + 1)) -ne "$count" ]; then
    echo "array ids must be consecutive (e.g. --array=1-$count): found $first-$last for $count tasks" >&2
    exit 2
fi
index=$((SLURM_ARRAY_TASK_ID - first + 1))
exec "${CCM_TRIAGE:-ccm-triage}" scan "$data" \
    --out "$prefix-$index" --shard "$index/$count" \
    --threads "${SLURM_CPUS_PER_TASK:-1}" "$@"
