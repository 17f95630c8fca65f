#!/usr/bin/env bash
# bench/slices.sh: how fast trajvault takes a window out of a long run,
# against reaching the same place in compressed text of the same run.
#
# One invented demo trajectory of STEPS steps (3 atoms, every step kept)
# is written as text logs (trajvault demo --text) and converted; then the
# time of the whole command, process start included, is measured for
#   - one frame from the middle (export --frame, a complete restart frame;
#     inspect --values of the positions), and
#   - a 1,000-frame window of 3 atoms (export --format npy; inspect
#     --values as CSV, of the positions and of every quantity),
# and for reaching the same frame, and the same window, in the geometry
# text compressed with zstd -3 and xz -6 (decompress and stop at the frame).
# The compressed text holds the frames up to the end of the window only:
# a stream decompressor reaching the middle never reads further, and this
# halves the time the compressors take to make it. xz compresses with -T0
# (blocks decompress the same way; decompression is single-threaded).
#
# Times are with a warm page cache (the files were just written): the
# median of RUNS runs (zstd, xz: XZRUNS runs), wall time and CPU time
# (user + system of every process of the command, from bash's times).
# Floors: /bin/true, a Go hello world built with the same toolchain, and
# trajvault --version. Replaces its section of bench/results.md.
#
# SLICES_DIR=DIR keeps the generated run (logs, trajectory file,
# compressed text) in DIR and reuses it on later runs with the same STEPS
# instead of generating it again (minutes for 1e6 steps). XZRUNS=0 leaves
# xz out.
set -euo pipefail
cd "$(dirname "$0")/.."
. bench/lib.sh
STEPS=${STEPS:-1000000}
RUNS=${RUNS:-21}
XZRUNS=${XZRUNS:-3}
BIN=bin/trajvault
.ci/deps.sh bench
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }
GO=$(.ci/deps.sh go)

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
data=${SLICES_DIR:-$work/data}
mkdir -p "$data"
mid=$((STEPS / 2))
win=1000
run="$data/logs/traj-001"
h5="$data/run.h5"
if [ "$(cat "$data/steps" 2>/dev/null)" = "$STEPS" ] && [ -s "$h5" ] && [ -s "$data/geom.xyz.zst" ]; then
	echo "bench: slices: reusing the run in $data" >&2
else
	rm -rf "${data:?}/logs" "$h5" "$data/steps" "$data"/geom*
	echo "bench: slices: generating 1 trajectory x $((STEPS + 1)) frames" >&2
	"$BIN" demo --text --trajectories 1 --steps "$STEPS" "$data/logs" >/dev/null
	echo "bench: slices: converting" >&2
	"$BIN" convert --recipe testdata/recipes/tarnol.yaml "$run" -o "$h5" >/dev/null
	# The geometry text up to the end of the window, compressed.
	head -n $(((mid + win + 1) * 5)) "$run/geom.xyz" >"$data/geom-head.xyz"
	echo "bench: slices: compressing $(stat -c %s "$data/geom-head.xyz") bytes of text (zstd)" >&2
	zstd -q -3 -T1 "$data/geom-head.xyz" -o "$data/geom.xyz.zst"
	echo "$STEPS" >"$data/steps"
fi
# XZRUNS=0 leaves xz out: compressing the text of 1e6 steps with xz -6
# takes many minutes on a busy machine.
if [ "$XZRUNS" -gt 0 ] && [ ! -s "$data/geom.xyz.xz" ]; then
	echo "bench: slices: compressing the text (xz)" >&2
	xz -6 -T0 -c "$data/geom-head.xyz" >"$data/geom.xyz.xz.partial"
	mv "$data/geom.xyz.xz.partial" "$data/geom.xyz.xz"
fi
frames=$(($(wc -l <"$run/geom.xyz") / 5))

# The floor of a Go program: hello world, built with the same toolchain.
mkdir "$work/hello"
printf 'module hello\n\ngo 1.21\n' >"$work/hello/go.mod"
printf 'package main\n\nimport "fmt"\n\nfunc main() { fmt.Println("hello") }\n' >"$work/hello/main.go"
(cd "$work/hello" && GOFLAGS='' "$GO" build -o hello .)
hello="$work/hello/hello"

# ms N: run "$@" N times (removing $work/o first, untimed) and print the
# median, fastest and slowest wall time and the median CPU time, in
# milliseconds. CPU time is what bash's times reports for the shell's
# children (user + system; every process of a pipeline included), read
# just before and after the command.
ms() {
	local n=$1 i s e
	shift
	local ts=() cs=()
	for ((i = 0; i < n; i++)); do
		rm -rf "$work/o"
		times >"$work/t0"
		s=$EPOCHREALTIME
		"$@" >/dev/null
		e=$EPOCHREALTIME
		times >"$work/t1"
		ts+=("$(awk -v s="$s" -v e="$e" 'BEGIN { printf "%.1f", (e - s) * 1000 }')")
		cs+=("$(cat "$work/t0" "$work/t1" | awk '
			function sec(t) { split(t, a, "m"); return a[1] * 60 + a[2] }
			NR == 2 { c0 = sec($1) + sec($2) }
			NR == 4 { c1 = sec($1) + sec($2) }
			END { printf "%.0f", (c1 - c0) * 1000 }')")
	done
	local cpu
	cpu=$(printf '%s\n' "${cs[@]}" | sort -n | awk '{ a[NR] = $1 } END { print a[int((NR + 1) / 2)] }')
	printf '%s\n' "${ts[@]}" | sort -n | awk -v c="$cpu" '{ a[NR] = $1 } END { printf "%s;%s;%s;%s", a[int((NR + 1) / 2)], a[1], a[NR], c }'
}

one_export() { "$BIN" export "$h5" -o "$work/o" --frame "$mid" --format extxyz; }
one_values() { "$BIN" inspect --values "$h5" --frames "$mid" --quantities position; }
win_npy() { "$BIN" export "$h5" -o "$work/o" --frames "$mid:$((mid + win))" --atoms 0-2 --quantities position --format npy; }
win_csv() { "$BIN" inspect --values "$h5" --frames "$mid:$((mid + win))" --atoms 0-2 --quantities position; }
win_all() { "$BIN" inspect --values "$h5" --frames "$mid:$((mid + win))" --atoms 0-2; }
# A frame is 5 lines (count, comment, 3 atoms); grep stops after the
# frame or window, and the decompressor then ends on a closed pipe.
one_zstd() { { zstd -dc "$data/geom.xyz.zst" 2>/dev/null || true; } | grep -m1 -A3 -F " step=$mid "; }
win_zstd() { { zstd -dc "$data/geom.xyz.zst" 2>/dev/null || true; } | grep -m1 -A$((win * 5 - 2)) -F " step=$mid "; }
one_xz() { { xz -dc "$data/geom.xyz.xz" 2>/dev/null || true; } | grep -m1 -A3 -F " step=$mid "; }
win_xz() { { xz -dc "$data/geom.xyz.xz" 2>/dev/null || true; } | grep -m1 -A$((win * 5 - 2)) -F " step=$mid "; }

# Check that the methods agree before timing them: the frame's atom lines
# from the text and from trajvault are the same digits.
one_zstd | tail -n 3 >"$work/want"
one_export >/dev/null
tail -n 3 "$work/o/traj.extxyz" | awk '{ print $1, $2, $3, $4, $5, $6, $7, $8, $9, $10 }' >"$work/got"
awk '{ print $1, $2, $3, $4, $5, $6, $7, $8, $9, $10 }' "$work/want" >"$work/want2"
cmp -s "$work/want2" "$work/got" || { echo "bench: slices: exported frame differs from the text" >&2; diff "$work/want2" "$work/got" >&2; exit 1; }

rows=()
row() { rows+=("$1;$(ms "$2" "$3")"); echo "bench: slices: $1: ${rows[-1]#*;}" >&2; }
# The floor: starting a process at all, a Go program, and trajvault (a Go
# program with the HDF5 library linked in). Every trajvault command below
# starts two trajvault processes: the command and the worker that reads
# the file under memory and time limits (internal/isolate).
row "floor: /bin/true" "$RUNS" /bin/true
row "floor: Go hello world (same toolchain)" "$RUNS" "$hello"
row "floor: trajvault --version" "$RUNS" "$BIN" --version
row "trajvault export --frame $mid --format extxyz" "$RUNS" one_export
row "trajvault inspect --values --frames $mid --quantities position" "$RUNS" one_values
row "zstd -3 text: decompress to frame $mid" "$RUNS" one_zstd
if [ "$XZRUNS" -gt 0 ]; then row "xz -6 text: decompress to frame $mid" "$XZRUNS" one_xz; fi
row "trajvault export --frames $mid:$((mid + win)) --atoms 0-2 --quantities position --format npy" "$RUNS" win_npy
row "trajvault inspect --values --frames $mid:$((mid + win)) --atoms 0-2 --quantities position" "$RUNS" win_csv
row "trajvault inspect --values --frames $mid:$((mid + win)) --atoms 0-2 (every quantity)" "$RUNS" win_all
row "zstd -3 text: decompress frames $mid..$((mid + win - 1))" "$RUNS" win_zstd
if [ "$XZRUNS" -gt 0 ]; then row "xz -6 text: decompress frames $mid..$((mid + win - 1))" "$XZRUNS" win_xz; fi

section=$(
	echo "## Slices: one frame and a window out of a long run"
	echo
	echo "Made by bench/slices.sh (the last part of \`make bench\`) on $(date -u +%Y-%m-%d), same machine; load average at the end: $(cut -d' ' -f1-3 /proc/loadavg)."
	echo "Input: one invented demo trajectory, $frames frames x 3 atoms; trajectory file $(stat -c %s "$h5") bytes;"
	if [ "$XZRUNS" -gt 0 ]; then
		echo "geometry text up to the end of the window $(stat -c %s "$data/geom-head.xyz") bytes, zstd -3 $(stat -c %s "$data/geom.xyz.zst") bytes, xz -6 $(stat -c %s "$data/geom.xyz.xz") bytes."
		echo "Time of the whole command (process start included), warm page cache; median of $RUNS runs ($XZRUNS for xz)."
	else
		echo "geometry text up to the end of the window $(stat -c %s "$data/geom-head.xyz") bytes, zstd -3 $(stat -c %s "$data/geom.xyz.zst") bytes; xz left out (XZRUNS=0)."
		echo "Time of the whole command (process start included), warm page cache; median of $RUNS runs."
	fi
	echo "CPU is user + system time of every process of the command. The exported frame was checked digit for digit"
	echo "against the text before timing. The floor rows show what starting a process costs on this machine at the"
	echo "time of the run. Each trajvault command starts two trajvault processes (the command, and the worker that"
	echo "reads the file under memory and time limits), so it takes at least twice the Go floor."
	echo "Targets (issue 17): one frame <= 20 ms, a 1,000-frame window of 3 atoms <= 50 ms."
	echo
	echo "| command | median ms | fastest ms | slowest ms | median CPU ms | median over Go hello world ms |"
	echo "|---|---:|---:|---:|---:|---:|"
	floor=""
	for r in "${rows[@]}"; do
		IFS=';' read -r name med lo hi cpu <<<"$r"
		over="-"
		case $name in
		"floor: Go hello world"*) floor=$med ;;
		trajvault* | "floor: trajvault"*) over=$(awk -v a="$med" -v b="$floor" 'BEGIN { printf "%.1f", a - b }') ;;
		esac
		echo "| ${name//|/\\|} | $med | $lo | $hi | $cpu | $over |"
	done
)
replace_section "## Slices: " "$section"
echo "$section"
