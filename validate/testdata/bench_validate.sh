#!/bin/sh
# Times `muarc validate` on a generated recording against reading every
# dataset once with h5py (Debian python3-h5py) in the same run, with peak
# RSS from GNU time. Usage: validate/testdata/bench_validate.sh [SECONDS]
# (default 2900 s of 64 channels at 2048 Hz, about 1 GB). The file is made
# in a temporary folder and removed afterwards.
set -eu
seconds=${1:-2900}
here=$(cd "$(dirname "$0")/../.." && pwd)
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
cd "$here"
go build -o "$tmp/muarc" ./cmd/muarc
MUARC_BENCH_SECONDS=$seconds MUARC_BENCH_OUT="$tmp/big.h5" \
	go test -run '^$' -bench '^BenchmarkValidateLarge$' -benchtime 1x ./validate >/dev/null
ls -l "$tmp/big.h5"
py=validate/testdata/read_all_h5py.py
for round in 1 2; do
	/usr/bin/time -f "round $round muarc validate:        %e s, peak RSS %M KiB" "$tmp/muarc" validate --in-process "$tmp/big.h5" >/dev/null
	/usr/bin/time -f "round $round h5py decoded read-all: %e s, peak RSS %M KiB" /usr/bin/python3 $py "$tmp/big.h5"
	/usr/bin/time -f "round $round h5py raw-chunk read:   %e s, peak RSS %M KiB" /usr/bin/python3 $py --raw "$tmp/big.h5"
done
