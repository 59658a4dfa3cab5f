#!/usr/bin/env bash
# peak.sh OUT CMD...: runs CMD, writes "WALL_S PEAK_KIB" to OUT: the wall
# time and the peak of the summed resident memory of CMD and its direct
# children (muarc's worker processes), sampled from /proc every 50 ms, and
# the exit status.
out=$1; shift
start=$(date +%s.%N)
"$@" >/dev/null 2>"$out.err" &
pid=$!
peak=0
while kill -0 "$pid" 2>/dev/null; do
	kib=$(ps -o rss= --pid "$pid" --ppid "$pid" 2>/dev/null | awk '{ s += $1 } END { print s + 0 }')
	[ "$kib" -gt "$peak" ] && peak=$kib
	sleep 0.05
done
wait "$pid"
rc=$?
end=$(date +%s.%N)
echo "$(awk -v a="$start" -v b="$end" 'BEGIN { printf "%.2f", b - a }') $peak $rc" >"$out"
