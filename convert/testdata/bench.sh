#!/bin/sh
# Times `muarc import` against pandas.read_csv + h5py (bench_pandas.py) on the
# same generated 64-channel, 2048 Hz, 60 s EMG CSV with six decimals (~76 MB),
# in one run, with /usr/bin/time -v for wall time and peak RSS; then muarc
# alone on a 10x longer file (peak RSS must stay flat). Run from the repo root:
#   sh convert/testdata/bench.sh
set -e
dir=$(mktemp -d)
trap 'rm -rf "$dir"' EXIT
go build -o "$dir/muarc" ./cmd/muarc
go run ./convert/testdata/gencsv -o "$dir/emg.csv" -channels 64 -rate 2048 -seconds 60
field() { sed -n "s/^.*$1: *//p" "$2"; }
secs() { echo "$1" | awk -F: '{ if (NF == 3) print $1*3600+$2*60+$3; else print $1*60+$2 }'; }
/usr/bin/time -v "$dir/muarc" import --emg "$dir/emg.csv" -o "$dir/muarc.h5" >/dev/null 2>"$dir/go.time"
/usr/bin/time -v /usr/bin/python3 convert/testdata/bench_pandas.py "$dir/emg.csv" "$dir/pandas.h5" 2>"$dir/py.time"
gw=$(secs "$(field 'Elapsed (wall clock) time (h:mm:ss or m:ss)' "$dir/go.time")")
pw=$(secs "$(field 'Elapsed (wall clock) time (h:mm:ss or m:ss)' "$dir/py.time")")
cpu() { awk -F': *' '/User time|System time/ { s += $2 } END { print s }' "$1"; }
gc=$(cpu "$dir/go.time"); pc=$(cpu "$dir/py.time")
gr=$(field 'Maximum resident set size (kbytes)' "$dir/go.time")
pr=$(field 'Maximum resident set size (kbytes)' "$dir/py.time")
echo "CSV $(du -m "$dir/emg.csv" | cut -f1) MB"
echo "muarc import:   ${gw} s wall, ${gc} s CPU, peak RSS $((gr / 1024)) MiB"
echo "pandas + h5py:  ${pw} s wall, ${pc} s CPU, peak RSS $((pr / 1024)) MiB"
awk -v g="$gw" -v p="$pw" -v gc="$gc" -v pc="$pc" 'BEGIN { printf "speed-up: %.2fx wall, %.2fx CPU\n", p / g, pc / gc }'
rm -f "$dir/emg.csv" "$dir/muarc.h5" "$dir/pandas.h5"
go run ./convert/testdata/gencsv -o "$dir/emg10.csv" -channels 64 -rate 2048 -seconds 600
/usr/bin/time -v "$dir/muarc" import --emg "$dir/emg10.csv" -o "$dir/muarc10.h5" >/dev/null 2>"$dir/go10.time"
g10=$(secs "$(field 'Elapsed (wall clock) time (h:mm:ss or m:ss)' "$dir/go10.time")")
r10=$(field 'Maximum resident set size (kbytes)' "$dir/go10.time")
echo "muarc import 10x longer ($(du -m "$dir/emg10.csv" 2>/dev/null | cut -f1) MB): ${g10} s, peak RSS $((r10 / 1024)) MiB"
