#!/usr/bin/env bash
# peak.sh OUT CMD...: runs CMD, writes "WALL_S PEAK_KIB" to OUT: the wall
# time and the peak of the summed resident memory of CMD and its direct
# children (muarc's worker processes), sampled from /proc every 50 ms, and
# the exit status. OUT.cpu gets the CPU seconds (user, system) of CMD's own
# process and the children it waited for (GNU time; muarc's worker
# processes are not waited for, so this is exact only without workers).
out=$1; shift
start=$(date +%s.%N)
/usr/bin/time -f "%U %S" -o "$out.cpu" "$@" >/dev/null 2>"$out.err" &
pid=$!
peak=0
while kill -0 "$pid" 2>/dev/null; do
	# GNU time, its child CMD, and CMD's children (the workers)
	kids=$(ps -o pid= --ppid "$pid" 2>/dev/null | tr -s ' \n' ',' | sed 's/^,//; s/,$//')
	kib=$(ps -o rss= --pid "$pid${kids:+,$kids}" 2>/dev/null | awk '{ s += $1 } END { print s + 0 }')
	[ -n "$kids" ] && kib=$((kib + $(ps -o rss= --ppid "$kids" 2>/dev/null | awk '{ s += $1 } END { print s + 0 }')))
	[ "$kib" -gt "$peak" ] && peak=$kib
	sleep 0.05
done
wait "$pid"
rc=$?
end=$(date +%s.%N)
echo "$(awk -v a="$start" -v b="$end" 'BEGIN { printf "%.2f", b - a }') $peak $rc" >"$out"
