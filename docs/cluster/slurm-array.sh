#!/bin/bash
# OrderUnfold batch as a Slurm job array: each array task runs one shard of the manifest.
#
#   sbatch --export=ALL,MANIFEST=/shared/archive/manifest.csv,OUT=/shared/results docs/cluster/slurm-array.sh
#
# then, when all tasks have finished (or chained with --dependency=afterany:<jobid>):
#
#   orderunfold merge /shared/results
#
# OUT must be on a file system every node sees (all shards write into it; their items never overlap).
# Change --array to the number of shards you want (0-based, contiguous: 0-N-1) and --cpus-per-task to the
# cores each shard may use. A task that is stopped (time limit, scancel) can simply be run again: items
# already finished are skipped.
#
#SBATCH --job-name=orderunfold-batch
#SBATCH --array=0-15
#SBATCH --cpus-per-task=4
#SBATCH --mem-per-cpu=600M
#SBATCH --time=02:00:00
#SBATCH --signal=B:TERM@120
#SBATCH --output=orderunfold-%A_%a.log

set -uo pipefail
: "${MANIFEST:?set MANIFEST to the manifest CSV (sbatch --export=ALL,MANIFEST=...)}"
: "${OUT:?set OUT to the shared output folder (sbatch --export=ALL,OUT=...)}"

# Slurm numbers array tasks as --array says; the shard index must run from 0 to N-1.
SHARD_INDEX=$(( SLURM_ARRAY_TASK_ID - ${SLURM_ARRAY_TASK_MIN:-0} ))
SHARD_COUNT=${SLURM_ARRAY_TASK_COUNT}

# --signal=B:TERM@120 sends SIGTERM to this script two minutes before the time limit; pass it on, so the
# batch lets the items in flight finish, writes its shard summary and exits with 130.
orderunfold batch "$MANIFEST" --out "$OUT" --jobs "${SLURM_CPUS_PER_TASK:-1}" --shard "${SHARD_INDEX}/${SHARD_COUNT}" &
pid=$!
trap 'kill -TERM "$pid" 2>/dev/null' TERM
wait "$pid"; rc=$?
# wait returns early when the trap fires: wait again for the batch to finish writing
if kill -0 "$pid" 2>/dev/null; then wait "$pid"; rc=$?; fi

# 0: all items ok; 1: some items failed (recorded in the summary: not a failure of the task);
# 130: interrupted (run the task again to resume); 2: bad usage or manifest.
if [ "$rc" -eq 1 ]; then
    echo "shard ${SHARD_INDEX}/${SHARD_COUNT}: finished; some items failed (see the error column of the summary)"
    exit 0
fi
exit "$rc"
