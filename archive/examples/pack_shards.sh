#!/bin/sh
# pack_shards.sh - check and hash one shard of a study on a cluster job array.
#
# Written for Slurm job arrays (the array index is SLURM_ARRAY_TASK_ID, the
# array size SLURM_ARRAY_TASK_COUNT). For another scheduler set SHARD_INDEX
# and SHARD_COUNT from its own array variables instead (e.g. PBS_ARRAY_INDEX,
# SGE_TASK_ID); the rest is plain POSIX shell.
#
# Submit from a login node, with STUDY, WORK and DEPOSIT on a shared file
# system:
#
#   jobid=$(sbatch --parsable --array=1-8 \
#       --export=ALL,STUDY=/shared/study,WORK=/shared/pack-work pack_shards.sh)
#   sbatch --dependency=afterany:$jobid \
#       --export=ALL,STUDY=/shared/study,WORK=/shared/pack-work,DEPOSIT=/shared/deposit,SHARD_COUNT=8 \
#       pack_finish.sh
#
# Each task writes WORK/shard-<i>-of-<n>.json (format "muarc-shard-report",
# see archive/examples/README.md). A task whose shard holds a refused
# recording exits 1 but still writes its report, so the merge can list it.
#
#SBATCH --job-name=muarc-pack-shard
#SBATCH --cpus-per-task=4
#SBATCH --time=02:00:00
#SBATCH --output=muarc-pack-shard-%a.log
set -eu

STUDY=${STUDY:?set STUDY to the study folder}
WORK=${WORK:?set WORK to a shared folder for the shard reports}
i=${SHARD_INDEX:-${SLURM_ARRAY_TASK_ID:?run as a job array, or set SHARD_INDEX}}
n=${SHARD_COUNT:-${SLURM_ARRAY_TASK_COUNT:?set SHARD_COUNT to the number of array tasks}}
workers=${SLURM_CPUS_PER_TASK:-0}

mkdir -p "$WORK"
exec muarc pack "$STUDY" --shard "$i/$n" --workers "$workers" \
    -o "$WORK/shard-$i-of-$n.json" --overwrite
