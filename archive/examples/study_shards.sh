#!/bin/sh
# study_shards.sh - one step of the whole study job on one shard, as a task
# of a cluster job array: STEP is import, validate, deidentify or pack.
#
# Written for Slurm job arrays (SLURM_ARRAY_TASK_ID, SLURM_ARRAY_TASK_COUNT);
# with another scheduler set SHARD_INDEX and SHARD_COUNT. The steps run one
# after the other, each a job array of its own that starts when the one
# before has ended (every task of a step must see the whole output of the
# step before: each step deals out the sorted file list round-robin):
#
#   n=3; env="ALL,EXPORTS=/shared/exports,WORK=/shared/work,KEY=/private/study.key"
#   a=$(sbatch --parsable --array=1-$n --export=$env,STEP=import study_shards.sh)
#   b=$(sbatch --parsable --array=1-$n --dependency=afterany:$a --export=$env,STEP=validate study_shards.sh)
#   c=$(sbatch --parsable --array=1-$n --dependency=afterany:$b --export=$env,STEP=deidentify study_shards.sh)
#   d=$(sbatch --parsable --array=1-$n --dependency=afterany:$c --export=$env,STEP=pack study_shards.sh)
#   sbatch --dependency=afterany:$d --export=ALL,WORK=/shared/work,SHARD_COUNT=$n study_finish.sh
#
# Folders under WORK: recordings/ (import), shared/ (de-identified copies),
# reports/ (one shard report per step and task). KEY is the study key
# (muarc key new KEYFILE); keep it outside WORK and any deposit.
#
#SBATCH --job-name=muarc-study-step
#SBATCH --cpus-per-task=2
#SBATCH --time=02:00:00
#SBATCH --output=muarc-study-step-%A-%a.log
set -eu

STEP=${STEP:?set STEP to import, validate, deidentify or pack}
WORK=${WORK:?set WORK to a shared folder}
i=${SHARD_INDEX:-${SLURM_ARRAY_TASK_ID:?run as a job array, or set SHARD_INDEX}}
n=${SHARD_COUNT:-${SLURM_ARRAY_TASK_COUNT:?set SHARD_COUNT to the number of array tasks}}
workers=${SLURM_CPUS_PER_TASK:-0}
report="$WORK/reports/$STEP-$i-of-$n.json"
mkdir -p "$WORK/reports"

case "$STEP" in
import)
    exec muarc import "${EXPORTS:?set EXPORTS to the folder of plain-text exports}" \
        -o "$WORK/recordings" --shard "$i/$n" --workers "$workers" --shard-report "$report" ;;
validate)
    exec muarc validate "$WORK/recordings" --shard "$i/$n" --workers "$workers" \
        --shard-report "$report" >/dev/null ;;
deidentify)
    exec muarc deidentify "$WORK/recordings" -o "$WORK/shared" --key "${KEY:?set KEY to the study key file}" \
        --shard "$i/$n" --workers "$workers" --shard-report "$report" ;;
pack)
    exec muarc pack "$WORK/shared" --shard "$i/$n" --workers "$workers" -o "$report" --overwrite ;;
*)
    echo "study_shards.sh: STEP $STEP is not import, validate, deidentify or pack" >&2
    exit 2 ;;
esac
