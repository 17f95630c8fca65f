#!/usr/bin/env bash
# bench/slices.sh: how fast trajvault takes a window out of a long run,
# against reaching the same place in compressed text of the same run.
#
# One invented demo trajectory of STEPS steps (3 atoms, every step kept)
# is written as text logs (trajvault demo --text) and converted; then the
# wall time of the whole command, process start included, is measured for
#   - one frame from the middle (export --frame, a complete restart frame;
#     inspect --values of the positions), and
#   - a 1,000-frame window of 3 atoms (export --format npy; inspect
#     --values as CSV),
# and for reaching the same frame, and the same window, in the geometry
# text compressed with zstd -3 and xz -6 (decompress and stop at the frame).
# The compressed text holds the frames up to the end of the window only:
# a stream decompressor reaching the middle never reads further, and this
# halves the time the compressors take to make it. xz compresses with -T0
# (blocks decompress the same way; decompression is single-threaded).
#
# Times are with a warm page cache (the files were just written): the
# median of RUNS runs (zstd, xz: XZRUNS runs). Appends its section to
# bench/results.md, replacing an earlier one.
set -euo pipefail
cd "$(dirname "$0")/.."
. bench/lib.sh
STEPS=${STEPS:-1000000}
RUNS=${RUNS:-21}
XZRUNS=${XZRUNS:-3}
BIN=bin/trajvault
.ci/deps.sh bench
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
mid=$((STEPS / 2))
win=1000
echo "bench: slices: generating 1 trajectory x $((STEPS + 1)) frames" >&2
"$BIN" demo --text --trajectories 1 --steps "$STEPS" "$work/logs" >/dev/null
run="$work/logs/traj-001"
echo "bench: slices: converting" >&2
"$BIN" convert --recipe testdata/recipes/tarnol.yaml "$run" -o "$work/run.h5" >/dev/null
h5="$work/run.h5"
frames=$(( $(wc -l <"$run/geom.xyz") / 5 ))

# The geometry text up to the end of the window, compressed.
head -n $(((mid + win + 1) * 5)) "$run/geom.xyz" >"$work/geom-head.xyz"
echo "bench: slices: compressing $(stat -c %s "$work/geom-head.xyz") bytes of text" >&2
zstd -q -3 -T1 "$work/geom-head.xyz" -o "$work/geom.xyz.zst"
xz -6 -T0 -c "$work/geom-head.xyz" >"$work/geom.xyz.xz"

# ms N: run "$@" N times (removing $work/o first, untimed) and print the
# median, fastest and slowest wall time in milliseconds.
ms() {
	local n=$1 i s e
	shift
	local ts=()
	for ((i = 0; i < n; i++)); do
		rm -rf "$work/o"
		s=$EPOCHREALTIME
		"$@" >/dev/null
		e=$EPOCHREALTIME
		ts+=("$(awk -v s="$s" -v e="$e" 'BEGIN { printf "%.1f", (e - s) * 1000 }')")
	done
	printf '%s\n' "${ts[@]}" | sort -n | awk '{ a[NR] = $1 } END { printf "%s;%s;%s", a[int((NR + 1) / 2)], a[1], a[NR] }'
}

one_export() { "$BIN" export "$h5" -o "$work/o" --frame "$mid" --format extxyz; }
one_values() { "$BIN" inspect --values "$h5" --frames "$mid" --quantities position; }
win_npy() { "$BIN" export "$h5" -o "$work/o" --frames "$mid:$((mid + win))" --atoms 0-2 --quantities position --format npy; }
win_csv() { "$BIN" inspect --values "$h5" --frames "$mid:$((mid + win))" --atoms 0-2 --quantities position; }
# A frame is 5 lines (count, comment, 3 atoms); grep stops after the
# frame or window, and the decompressor then ends on a closed pipe.
one_zstd() { { zstd -dc "$work/geom.xyz.zst" 2>/dev/null || true; } | grep -m1 -A3 -F " step=$mid "; }
win_zstd() { { zstd -dc "$work/geom.xyz.zst" 2>/dev/null || true; } | grep -m1 -A$((win * 5 - 2)) -F " step=$mid "; }
one_xz() { { xz -dc "$work/geom.xyz.xz" 2>/dev/null || true; } | grep -m1 -A3 -F " step=$mid "; }
win_xz() { { xz -dc "$work/geom.xyz.xz" 2>/dev/null || true; } | grep -m1 -A$((win * 5 - 2)) -F " step=$mid "; }

# Check that the methods agree before timing them: the frame's atom lines
# from the text and from trajvault are the same digits.
one_zstd | tail -n 3 >"$work/want"
one_export >/dev/null
tail -n 3 "$work/o/traj.extxyz" | awk '{ print $1, $2, $3, $4, $5, $6, $7, $8, $9, $10 }' >"$work/got"
awk '{ print $1, $2, $3, $4, $5, $6, $7, $8, $9, $10 }' "$work/want" >"$work/want2"
cmp -s "$work/want2" "$work/got" || { echo "bench: slices: exported frame differs from the text" >&2; diff "$work/want2" "$work/got" >&2; exit 1; }

rows=()
row() { rows+=("$1;$(ms "$2" "$3")"); echo "bench: slices: $1: ${rows[-1]#*;}" >&2; }
# The floor: starting a process at all, and starting trajvault (a
# dynamically linked Go program that loads the HDF5 library).
row "floor: /bin/true" "$RUNS" /bin/true
row "floor: trajvault --version" "$RUNS" "$BIN" --version
row "trajvault export --frame $mid --format extxyz" "$RUNS" one_export
row "trajvault inspect --values --frames $mid" "$RUNS" one_values
row "zstd -3 text: decompress to frame $mid" "$RUNS" one_zstd
row "xz -6 text: decompress to frame $mid" "$XZRUNS" one_xz
row "trajvault export --frames $mid:$((mid + win)) --atoms 0-2 --format npy" "$RUNS" win_npy
row "trajvault inspect --values --frames $mid:$((mid + win)) --atoms 0-2" "$RUNS" win_csv
row "zstd -3 text: decompress frames $mid..$((mid + win - 1))" "$RUNS" win_zstd
row "xz -6 text: decompress frames $mid..$((mid + win - 1))" "$XZRUNS" win_xz

section=$(
	echo "## Slices: one frame and a window out of a long run"
	echo
	echo "Made by bench/slices.sh (the last part of \`make bench\`) on $(date -u +%Y-%m-%d), same machine; load average at the end: $(cut -d' ' -f1-3 /proc/loadavg)."
	echo "Input: one invented demo trajectory, $frames frames x 3 atoms; trajectory file $(stat -c %s "$h5") bytes;"
	echo "geometry text up to the end of the window $(stat -c %s "$work/geom-head.xyz") bytes, zstd -3 $(stat -c %s "$work/geom.xyz.zst") bytes, xz -6 $(stat -c %s "$work/geom.xyz.xz") bytes."
	echo "Wall time of the whole command (process start included), warm page cache; median of $RUNS runs ($XZRUNS for xz)."
	echo "The exported frame was checked digit for digit against the text before timing. The floor rows show what"
	echo "starting any process costs on this machine at the time of the run; compare the rows with them."
	echo
	echo "| command | median ms | fastest ms | slowest ms | median over trajvault --version ms |"
	echo "|---|---:|---:|---:|---:|"
	floor=""
	for r in "${rows[@]}"; do
		IFS=';' read -r name med lo hi <<<"$r"
		over="-"
		case $name in
		"floor: trajvault --version") floor=$med ;;
		trajvault*) over=$(awk -v a="$med" -v b="$floor" 'BEGIN { printf "%.1f", a - b }') ;;
		esac
		echo "| ${name//|/\\|} | $med | $lo | $hi | $over |"
	done
)
replace_section "## Slices: " "$section"
echo "$section"
