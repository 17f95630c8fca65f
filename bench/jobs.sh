#!/usr/bin/env bash
# bench/jobs.sh: how convert scales with --jobs on an ensemble, and how
# its memory stays flat in the number of trajectories.
#
# --jobs above 1 runs worker processes (one HDF5 library each); the
# speed-up is wall(--jobs 1) / wall(--jobs N) on the same ensemble, with
# CPU seconds (user + sys, GNU time, children included) beside it to
# show the work is equal. Peak RSS is the largest single process.
#
# Parameters (environment): TRAJ trajectories, STEPS steps each, MOLECULES
# copies of the 3-atom demo molecule, BIG trajectories of the memory row.
# Replaces its own section of bench/results.md.
set -euo pipefail
cd "$(dirname "$0")/.."
. bench/lib.sh
TRAJ=${TRAJ:-16}
STEPS=${STEPS:-20000}
MOLECULES=${MOLECULES:-10}
BIG=${BIG:-400}
BIN=bin/trajvault
RECIPE=testdata/recipes/tarnol.yaml
.ci/deps.sh bench
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
echo "bench: jobs: generating $TRAJ trajectories x $STEPS steps, and $BIG x 1000" >&2
"$BIN" demo --text --trajectories "$TRAJ" --steps "$STEPS" --molecules "$MOLECULES" "$work/logs" >/dev/null
"$BIN" demo --text --trajectories "$BIG" --steps 1000 "$work/many" >/dev/null
text=$(du -sb "$work/logs" | cut -f1)
cat "$work"/logs/*/* >/dev/null # warm cache

rows=()
run() { # NAME OUT ARGS...
	local name=$1 out=$2
	shift 2
	rm -rf "$out"
	/usr/bin/time -f "%e %U %S %M" -o "$work/time" "$@" >/dev/null
	read -r wall u s rss <"$work/time"
	rows+=("$name;$wall;$(awk -v u="$u" -v s="$s" 'BEGIN { printf "%.2f", u + s }');$((rss / 1024));$(du -sb "${in:-$work/logs}" | cut -f1)")
	echo "bench: jobs: $name: ${wall}s wall" >&2
}
run "convert --jobs 1, $TRAJ trajectories" "$work/o1" "$BIN" convert --jobs 1 --recipe "$RECIPE" "$work/logs" -o "$work/o1"
run "convert --jobs $(nproc), $TRAJ trajectories" "$work/o2" "$BIN" convert --jobs "$(nproc)" --recipe "$RECIPE" "$work/logs" -o "$work/o2"
for f in "$work"/o1/*.h5; do
	# Same data either way (the provenance names the command line).
	out=$(h5diff "$f" "$work/o2/$(basename "$f")" | grep -v -e 'trajvault_provenance' -e 'differences\? found' || true)
	[ -z "$out" ] || { echo "bench: jobs: $(basename "$f") differs: $out" >&2; exit 1; }
done
in=$work/many
run "convert --jobs 1, $BIG trajectories x 1001 frames" "$work/m1" "$BIN" convert --jobs 1 --recipe "$RECIPE" "$work/many" -o "$work/m1"
run "convert --jobs $(nproc), $BIG trajectories x 1001 frames" "$work/m2" "$BIN" convert --jobs "$(nproc)" --recipe "$RECIPE" "$work/many" -o "$work/m2"

section=$(
	echo "## Jobs: worker processes and memory"
	echo
	echo "Made by bench/jobs.sh (part of \`make bench\`) on $(date -u +%Y-%m-%d), $(nproc) cores; load average at the end: $(cut -d' ' -f1-3 /proc/loadavg)."
	echo "Inputs: $TRAJ invented demo trajectories x $STEPS steps x $((3 * MOLECULES)) atoms ($text bytes of text); $BIG trajectories x 1000 steps x 3 atoms."
	echo "Warm page cache. CPU is user + sys of the run and its workers; MB per CPU-s is MB of text per CPU second (speed on"
	echo "equal CPU work: at --jobs 1 the single-core throughput); peak RSS is the largest single process (MiB)."
	echo
	echo "| run | wall s | CPU s | MB per CPU-s | peak RSS MiB | speed-up |"
	echo "|---|---:|---:|---:|---:|---:|"
	base=""
	for r in "${rows[@]}"; do
		IFS=';' read -r name wall cpu rss bytes <<<"$r"
		up="-"
		case $name in
		"convert --jobs 1,"*) base=$wall ;;
		*) up=$(awk -v a="$base" -v w="$wall" 'BEGIN { if (w > 0) printf "%.2fx", a / w; else print "-" }') ;;
		esac
		echo "| $name | $wall | $cpu | $(awk -v b="$bytes" -v c="$cpu" 'BEGIN { printf "%.1f", b / 1e6 / (c > 0 ? c : 0.01) }') | $rss | $up |"
	done
)
replace_section "## Jobs: " "$section"
echo "$section"
