#!/bin/sh
# pack_finish.sh - after every pack_shards.sh task has ended: merge the shard
# reports, pack the deposit reusing their hashes and checks, verify it.
#
# Needs STUDY, WORK, DEPOSIT and SHARD_COUNT (see pack_shards.sh). Optional:
# LICENCE (an SPDX identifier; default: the recordings' study licence).
#
#SBATCH --job-name=muarc-pack-finish
#SBATCH --cpus-per-task=4
#SBATCH --time=04:00:00
#SBATCH --output=muarc-pack-finish.log
set -eu

STUDY=${STUDY:?set STUDY to the study folder}
WORK=${WORK:?set WORK to the folder holding the shard reports}
DEPOSIT=${DEPOSIT:?set DEPOSIT to the deposit folder to create}
n=${SHARD_COUNT:?set SHARD_COUNT to the number of array tasks}

# Every shard's report, in order; merge-reports refuses a set with a shard
# missing or given twice (exit 1, nothing written).
reports=""
i=1
while [ "$i" -le "$n" ]; do
    reports="$reports $WORK/shard-$i-of-$n.json"
    i=$((i + 1))
done
# shellcheck disable=SC2086  # the list is split on purpose
muarc merge-reports $reports -o "$WORK/merged.json" \
    --manifest "$WORK/manifest-sha256.txt" --overwrite

# The final pack copies the recordings without hashing or checking them again
# (their path, size and modification time match the merged report).
if [ -n "${LICENCE:-}" ]; then
    muarc pack "$STUDY" --known "$WORK/merged.json" -o "$DEPOSIT" --licence "$LICENCE"
else
    muarc pack "$STUDY" --known "$WORK/merged.json" -o "$DEPOSIT"
fi
muarc verify "$DEPOSIT"
