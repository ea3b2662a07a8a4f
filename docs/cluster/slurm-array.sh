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
# cores each shard may use. A task that is stopped (time limit, scancel, node failure) can simply be run
# again: items already finished are skipped. To run again only some tasks of an array of N, say how many
# shards there are, as SHARDS (Slurm counts only the tasks of the new array):
#
#   sbatch --array=2,7 --export=ALL,SHARDS=16,MANIFEST=/shared/archive/manifest.csv,OUT=/shared/results docs/cluster/slurm-array.sh
#
#SBATCH --job-name=orderunfold-batch
#SBATCH --array=0-15
#SBATCH --cpus-per-task=4
#SBATCH --mem-per-cpu=600M
#SBATCH --time=02:00:00
#SBATCH --signal=B:USR1@120
#SBATCH --output=orderunfold-%A_%a.log

set -uo pipefail
: "${MANIFEST:?set MANIFEST to the manifest CSV (sbatch --export=ALL,MANIFEST=...)}"
: "${OUT:?set OUT to the shared output folder (sbatch --export=ALL,OUT=...)}"

# The shard index is the array task id (0 to N-1); the count is SHARDS, else the number of tasks of this array.
: "${SLURM_ARRAY_TASK_ID:?submit this script as a job array (sbatch --array=0-N-1)}"
SHARD_INDEX=${SLURM_ARRAY_TASK_ID}
SHARD_COUNT=${SHARDS:-${SLURM_ARRAY_TASK_COUNT}}
if [ -z "${SHARDS:-}" ] && { [ "${SLURM_ARRAY_TASK_MIN}" -ne 0 ] || [ "${SLURM_ARRAY_TASK_MAX}" -ne $((SLURM_ARRAY_TASK_COUNT - 1)) ]; }; then
    echo "this array (tasks ${SLURM_ARRAY_TASK_MIN} to ${SLURM_ARRAY_TASK_MAX}, ${SLURM_ARRAY_TASK_COUNT} of them) is not 0 to N-1: to run" \
         "some shards of N, pass the number of shards (sbatch --array=... --export=ALL,SHARDS=N,MANIFEST=...,OUT=...)" >&2
    exit 2
fi

# Stopping. scancel and the time limit send SIGTERM to every process of the task, the batch included: it stops the
# items in flight (they run again on resume), writes its shard summary and exits with 143; this shell only waits
# for it (passing that TERM on would be a second signal, which stops the batch at once, without its summary).
# --signal=B:USR1@120 sends SIGUSR1 to this shell alone two minutes before the time limit: it passes it on to the
# batch as SIGTERM.
pid=""
trap '[ -z "$pid" ] || kill -TERM "$pid" 2>/dev/null' USR1
trap ':' TERM
orderunfold batch "$MANIFEST" --out "$OUT" --jobs "${SLURM_CPUS_PER_TASK:-1}" --shard "${SHARD_INDEX}/${SHARD_COUNT}" &
pid=$!
wait "$pid"; rc=$?
# wait returns early when a trap fires: wait again for the batch to finish writing
while kill -0 "$pid" 2>/dev/null; do wait "$pid"; rc=$?; done

# 0: all items ok; 1: some items failed (recorded in the summary: not a failure of the task);
# 143 (130 for SIGINT): stopped (run the task again to resume); 2: bad usage or manifest.
if [ "$rc" -eq 1 ]; then
    echo "shard ${SHARD_INDEX}/${SHARD_COUNT}: finished; some items failed (see the error column of the summary)"
    exit 0
fi
exit "$rc"
