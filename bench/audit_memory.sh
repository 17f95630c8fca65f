#!/usr/bin/env bash
# bench/audit_memory.sh: peak memory of `trajvault audit` over an ensemble,
# at growing ensemble sizes, to show that it does not grow with the number
# of trajectories (ensemble statistics are running sums per frame).
#
# Parameters (environment): TRAJ the largest ensemble (default 200), SIZES
# the ensemble sizes measured (default "10 50 TRAJ"), STEPS steps per
# trajectory (default 100000, every step stored), JOBS trajectories audited
# at once (default nproc), BIN the trajvault binary (default bin/trajvault).
# The trajectories are the invented demo scenario (trajvault demo),
# generated before any measurement, NPROC generator processes at once.
# Peak RSS is GNU time's "Maximum resident set size" of the audit process.
#
# Writes its section to bench/results.md, replacing an earlier one; the
# section goes before the slices section when there is one.
set -euo pipefail
cd "$(dirname "$0")/.."
. bench/lib.sh
TRAJ=${TRAJ:-200}
STEPS=${STEPS:-100000}
SIZES=${SIZES:-"10 50 $TRAJ"}
JOBS=${JOBS:-$(nproc)}
NPROC=${NPROC:-$(nproc)}
BIN=${BIN:-bin/trajvault}
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }
[ -x /usr/bin/time ] || { echo "bench: needs GNU time (/usr/bin/time, Debian package time)" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
echo "bench: generating $TRAJ trajectories x $STEPS steps ($NPROC processes)" >&2
start=$(date +%s)
per=$(((TRAJ + NPROC - 1) / NPROC))
pids=()
for ((p = 0; p < NPROC; p++)); do
	n=$((TRAJ - p * per))
	((n > per)) && n=$per
	((n <= 0)) && break
	"$BIN" demo --trajectories "$n" --seed $((1 + p * per)) --steps "$STEPS" "$work/gen$p" >/dev/null &
	pids+=($!)
done
for pid in "${pids[@]}"; do wait "$pid"; done
mkdir "$work/all"
i=0
for f in "$work"/gen*/traj-*.h5; do
	i=$((i + 1))
	mv "$f" "$(printf '%s/all/run%04d.h5' "$work" "$i")"
done
gen=$(($(date +%s) - start))
bytes=$(du -sb "$work/all" | cut -f1)
echo "bench: generated $i files, $bytes bytes, in ${gen}s" >&2

rows=()
for n in $SIZES; do
	mkdir -p "$work/n$n"
	for ((k = 1; k <= n; k++)); do
		ln -s "$(printf '%s/all/run%04d.h5' "$work" "$k")" "$work/n$n/"
	done
	set +e
	/usr/bin/time -v -o "$work/time$n" "$BIN" audit --json --jobs "$JOBS" "$work/n$n" >"$work/audit$n.json"
	rc=$?
	set -e
	# exit 1 means findings (e.g. the demo's photoexcited hops), not an error
	((rc > 1)) && { echo "bench: audit of $n trajectories failed (exit $rc)" >&2; exit 2; }
	rss=$(awk -F': ' '/Maximum resident set size/ { print $2 }' "$work/time$n")
	wall=$(awk -F': ' '/Elapsed \(wall clock\)/ { print $2 }' "$work/time$n")
	audited=$(python3 -c 'import json,sys; r=json.load(open(sys.argv[1])); print(sum(1 for t in r["trajectories"] if not t.get("error")))' "$work/audit$n.json")
	rows+=("$n;$audited;$wall;$rss")
	echo "bench: $n trajectories: peak RSS ${rss} KiB, wall $wall" >&2
done

section=$(
	echo "## Audit memory: peak RSS against the number of trajectories"
	echo
	echo "Made by bench/audit_memory.sh on $(date -u +%Y-%m-%d); machine: $(nproc) cores, $(free -g | awk '/^Mem:/ { print $2 }') GiB."
	echo "Input: the invented demo ensemble (trajvault demo), $STEPS steps per trajectory, every step stored"
	echo "(positions, velocities, forces, energies, two states with amplitudes, couplings and hops); $i files, $bytes bytes,"
	echo "generated in ${gen}s by $NPROC processes. The smaller ensembles are the first files of the largest."
	echo "Audit with --jobs $JOBS --json; peak RSS is GNU time's maximum resident set size of the audit process."
	echo
	echo "| trajectories | audited | wall | peak RSS MiB |"
	echo "|---:|---:|---:|---:|"
	for r in "${rows[@]}"; do
		IFS=';' read -r n a w kb <<<"$r"
		echo "| $n | $a | $w | $(awk -v k="$kb" 'BEGIN { printf "%.1f", k / 1024 }') |"
	done
)
replace_section "## Audit memory: " "$section"
echo "$section"
