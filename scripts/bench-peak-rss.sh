#!/usr/bin/env bash
# Peak resident memory of writing a generated 64-channel 2048 Hz recording
# of 60 s and of 600 s: the writer streams, so both should be about equal.
set -euo pipefail
go build -o bin/muarc-benchwrite ./scripts/benchwrite
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
for s in 60 600; do
	/usr/bin/time -f "write ${s}s: %e s wall, %M KiB peak RSS" bin/muarc-benchwrite -seconds "$s" -o "$tmp/w$s.h5"
done
