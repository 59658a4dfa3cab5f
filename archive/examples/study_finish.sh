#!/bin/sh
# study_finish.sh - after every task of study_shards.sh's four job arrays has
# ended: merge each step's shard reports into WORK/merged/STEP.json (and the
# de-identified recordings' sha256sum-style manifest), pack the deposit
# reusing the pack shards' hashes and checks, and verify it.
#
# Needs WORK and SHARD_COUNT; DEPOSIT is optional (default WORK/deposit).
#
#SBATCH --job-name=muarc-study-finish
#SBATCH --cpus-per-task=2
#SBATCH --time=04:00:00
#SBATCH --output=muarc-study-finish-%j.log
set -eu

WORK=${WORK:?set WORK to the shared folder of study_shards.sh}
n=${SHARD_COUNT:?set SHARD_COUNT to the number of array tasks}
DEPOSIT=${DEPOSIT:-$WORK/deposit}
mkdir -p "$WORK/merged"

# merge-reports refuses (exit 1, nothing written) a set with a shard missing
# or given twice, and files whose entries differ between shards.
for step in import validate deidentify pack; do
    reports=""
    i=1
    while [ "$i" -le "$n" ]; do
        reports="$reports $WORK/reports/$step-$i-of-$n.json"
        i=$((i + 1))
    done
    if [ "$step" = pack ]; then
        # shellcheck disable=SC2086  # the list is split on purpose
        muarc merge-reports $reports -o "$WORK/merged/$step.json" \
            --manifest "$WORK/merged/manifest-sha256.txt" --overwrite
    else
        # shellcheck disable=SC2086
        muarc merge-reports $reports -o "$WORK/merged/$step.json" --overwrite
    fi
done
muarc pack "$WORK/shared" --known "$WORK/merged/pack.json" -o "$DEPOSIT"
muarc verify "$DEPOSIT"
