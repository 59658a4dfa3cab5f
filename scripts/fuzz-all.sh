#!/usr/bin/env bash
# Runs every Go fuzz target in the repository for the given time each.
set -euo pipefail
t=${1:-30s}
grep -rl --include='*_test.go' '^func Fuzz' . | while read -r f; do
	pkg=./$(dirname "${f#./}")
	for name in $(grep -o '^func Fuzz[A-Za-z0-9_]*' "$f" | sed 's/^func //'); do
		echo "== $pkg $name"
		go test -run XXX -fuzz "^${name}\$" -fuzztime "$t" "$pkg"
	done
done
# The discharge oracle (convert/oracle_test.go) on a larger corpus and a
# seed of its own each run: muarc must store the truth or refuse.
echo "== ./convert TestDischargeOracle (20000 cases)"
MUARC_ORACLE_CASES=20000 MUARC_ORACLE_SEED=$(date +%s) CI=true go test -count=1 -run '^TestDischargeOracle$' ./convert
# The integer-counts round trip (convert/counts_test.go) over more files.
echo "== ./convert TestCountsRoundTrip (2000 files)"
COUNTS_CASES=2000 CI=true go test -count=1 -timeout 60m -run '^TestCountsRoundTrip$' ./convert
