#!/usr/bin/env bash
# Storage and import on realistic amplifier EMG, against baselines in the
# same run. scripts/benchemg writes 64 channels x 2048 Hz x BENCH_EMG_S s of
# synth.RealisticEMG (band-limited sources mixed across an 8 x 8 grid, a
# trapezoidal contraction, amplifier noise, 50 Hz, quantised to a 16-bit
# converter's 0.1907 uV) as a CSV of decimals (4 decimals, no key block so
# that pandas reads it as it is) and the same counts as raw int16. Then:
#   import  muarc import of the CSV against pandas.read_csv + h5py
#           (convert/testdata/bench_pandas.py): wall time, peak memory
#   storage bytes per sample of the samples muarc stores (dataset storage
#           size / values), by default and with --dtype float32, against
#           int16 counts + shuffle + deflate written by h5py
#           (scripts/bench/storage.py h5int), xz -9 of the raw counts and
#           flac -8 of the counts (8 streams of 8 channels, one per grid
#           row: FLAC holds at most 8 channels); each muarc file is checked
#           against the counts (largest |physical - count x LSB|)
#   sweep   chunk shapes and deflate levels through muarc's own writer
#           (scripts/benchchunks), and built-in HDF5 filters, chunk shapes
#           and deflate levels on the int16 counts in h5py
#           (scripts/bench/storage.py sweep)
# Rows print in the format of scripts/bench-study.sh's table (it calls this
# script); BENCH_PARTS picks parts (default import,storage,sweep);
# BENCH_HEADER=1 prints the table header first.
set -euo pipefail
cd "$(dirname "$0")/.."
S=${BENCH_EMG_S:-60}
want() { [[ ",${BENCH_PARTS:-import,storage,sweep}," == *",$1,"* ]]; }
go build -o bin/muarc ./cmd/muarc
go build -o bin/muarc-benchemg ./scripts/benchemg
muarc=$PWD/bin/muarc
py=/usr/bin/python3
store=scripts/bench/storage.py
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
for tool in xz flac; do
	command -v $tool >/dev/null || { echo "bench-storage: $tool is missing (make bench installs xz-utils and flac)" >&2; exit 2; }
done
run() { # run NAME CMD... -> W (wall s), M (peak MiB); fails on a non-zero exit
	scripts/bench/peak.sh "$tmp/t-$1" "${@:2}"
	read -r W K RC <"$tmp/t-$1"
	M=$((K / 1024))
	if [ "$RC" -ne 0 ]; then echo "bench-storage: $1 exited $RC: $(tail -3 "$tmp/t-$1.err")" >&2; exit 1; fi
}
bps() { awk -v b="$1" -v n="$2" 'BEGIN { printf "%.3f", b / n }'; }
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.2fx", a / b }'; }

csv=$tmp/emg_grid.csv counts=$tmp/counts.s16
bin/muarc-benchemg -o "$csv" -counts "$counts" -keys=false -seconds "$S"
N=$(( $(stat -c %s "$counts") / 2 ))
if [ "${BENCH_HEADER:-}" = 1 ]; then
	echo "| work | muarc | baseline | ratio | peak memory |"
	echo "|---|---|---|---|---|"
fi
what="realistic 64 ch x 2048 Hz x ${S} s EMG, 16-bit counts x 0.1907 uV written with 4 decimals ($(du -m "$csv" | cut -f1) MB CSV)"

if want import || want storage; then
	run imp "$muarc" import --emg "$csv" -o "$tmp/muarc.h5"
	IW=$W IM=$M
	read -r MB MT MD < <("$py" $store samples "$tmp/muarc.h5" "$counts" 64 0.1907)
fi
if want import; then
	run pd "$py" convert/testdata/bench_pandas.py "$csv" "$tmp/pandas.h5"
	echo "| \`muarc import\` of the $what | $IW s | pandas.read_csv + h5py (float32, gzip 4): $W s, $M MiB | $(ratio "$IW" "$W") | $IM MiB |"
	rm -f "$tmp/pandas.h5"
fi
if want storage; then
	run f32 "$muarc" import --emg "$csv" --dtype float32 -o "$tmp/f32.h5"
	read -r FB FT FD < <("$py" $store samples "$tmp/f32.h5" "$counts" 64 0.1907)
	F32M=$M
	run h5 "$py" $store h5int "$counts" 64 "$tmp/int.h5"
	HB=$("$py" $store size "$tmp/int.h5")
	HM=$M HW=$W
	run xz xz -9 -T1 -k -f "$counts"
	XB=$(bps "$(stat -c %s "$counts.xz")" "$N") XM=$M XW=$W
	rm -f "$counts.xz"
	"$py" $store split "$counts" 64 8 "$tmp/row"
	run flac bash -c "for f in $tmp/row*.s16; do flac -8 -s -f --force-raw-format --endian=little --sign=signed --channels=8 --bps=16 --sample-rate=2048 -o \"\${f%.s16}.flac\" \"\$f\" || exit 1; done"
	LB=$(bps "$(cat "$tmp"/row*.flac | wc -c)" "$N") LM=$M LW=$W
	rm -f "$tmp"/row*
	base="int16 counts + shuffle + deflate (h5py defaults: chunks ${HB#* }, gzip 4): ${HB%% *} B/sample"
	for form in "default:$MB:$MT:$MD:$IM" "--dtype float32:$FB:$FT:$FD:$F32M"; do
		IFS=: read -r how b t d m <<<"$form"
		lbl="bytes/sample of the $what, \`muarc import\` ($how: ${t//_/ }, largest difference between stored value and count x LSB: $d uV)"
		echo "| $lbl | $b B/sample | $base | $(ratio "$b" "${HB%% *}") | $m MiB |"
		echo "| same ($how) | $b B/sample | flac -8 of the counts (8 streams of 8 channels): $LB B/sample, ${LW} s, $LM MiB | $(ratio "$b" "$LB") | $m MiB |"
		echo "| same ($how) | $b B/sample | xz -9 of the raw int16 counts: $XB B/sample, ${XW} s, $XM MiB | $(ratio "$b" "$XB") | $m MiB |"
	done
fi
if want sweep; then
	go build -o bin/muarc-benchchunks ./scripts/benchchunks
	echo
	echo "muarc's writer (recfile.Write, libdeflate, bands compressed on every core) on the same recording, file bytes per sample:"
	echo
	bin/muarc-benchchunks -form int16 -seconds "$S" -shapes 16384x4,4096x64 -levels 1,4,6,9
	echo
	bin/muarc-benchchunks -form float32 -seconds "$S" -shapes 16384x4,4096x64 -levels 1,6
	echo
	echo "Built-in HDF5 filters on the same int16 counts, written and read by h5py ($N samples; every row checked to read back unchanged):"
	echo
	"$py" $store sweep "$counts" 64 "$tmp/sweep.h5"
fi
