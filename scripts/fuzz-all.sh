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
