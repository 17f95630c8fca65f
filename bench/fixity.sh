#!/usr/bin/env bash
# bench/fixity.sh: how fast validate --fixity-only checks a bundle's
# checksums, against the coreutils hashers over the same payload files.
#
# A repository re-checks the fixity of what it holds on a schedule; that
# sweep should cost what hashing costs. Rows compare equal work: one
# algorithm against sha256sum, both of the bag's algorithms against
# sha256sum + sha512sum; the full check (every trajectory file decoded,
# metadata, profiles) is shown beside them for what it costs.
#
# Parameters (environment): TRAJ trajectories, STEPS steps each, MOLECULES
# copies of the 3-atom demo molecule, RUNS repetitions (median).
# Replaces its own section of bench/results.md.
set -euo pipefail
cd "$(dirname "$0")/.."
. bench/lib.sh
TRAJ=${TRAJ:-8}
STEPS=${STEPS:-40000}
MOLECULES=${MOLECULES:-10}
RUNS=${RUNS:-5}
BIN=bin/trajvault
.ci/deps.sh bench
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
echo "bench: fixity: generating and packing $TRAJ trajectories x $STEPS steps" >&2
"$BIN" demo --text --trajectories "$TRAJ" --steps "$STEPS" --molecules "$MOLECULES" "$work/logs" >/dev/null
"$BIN" init -o "$work/deposit.yaml" --title "Fixity benchmark (invented demo data)" \
	--description "Invented demo ensemble for a benchmark." \
	--creator "Doe, Jane|0000-0002-1825-0097|Tarn Valley University (fictional)" \
	--contact "Jane Doe|jane.doe@example.org" --program "tarnol-md|1.0" >/dev/null
"$BIN" pack --quiet "$work/logs" -o "$work/bag" --deposit "$work/deposit.yaml" --recipe testdata/recipes/tarnol.yaml >/dev/null
bag=$work/bag
bytes=$(find "$bag/data" -type f -printf '%s\n' | awk '{ s += $1 } END { print s }')
files=$(find "$bag/data" -type f | wc -l)
# Warm the page cache: every row reads the same bytes from memory.
find "$bag" -type f -exec cat {} + >/dev/null

# cpu_wall CMD...: median over RUNS of wall seconds, and of user+sys CPU
# seconds (GNU time).
cpu_wall() {
	local walls=() cpus=()
	for _ in $(seq "$RUNS"); do
		/usr/bin/time -f "%e %U %S" -o "$work/time" "$@" >/dev/null
		read -r w u s <"$work/time"
		walls+=("$w")
		cpus+=("$(awk -v u="$u" -v s="$s" 'BEGIN { printf "%.2f", u + s }')")
	done
	echo "$(printf '%s\n' "${walls[@]}" | sort -g | sed -n "$(((RUNS + 1) / 2))p") $(printf '%s\n' "${cpus[@]}" | sort -g | sed -n "$(((RUNS + 1) / 2))p")"
}
payload() { find "$bag/data" -type f -print0 | xargs -0 "$@"; }
sha256_all() { payload sha256sum; }
sha_both() { payload sha256sum && payload sha512sum; }
rows=()
row() {
	local r
	r=$(cpu_wall "${@:2}")
	rows+=("$1;$r")
	echo "bench: fixity: $1: wall, cpu s: $r" >&2
}
export -f payload sha256_all sha_both
export bag
row "sha256sum over the payload" bash -c sha256_all
row "trajvault validate --fixity-only --digest sha256" "$BIN" validate --fixity-only --digest sha256 "$bag"
row "sha256sum + sha512sum over the payload" bash -c sha_both
row "trajvault validate --fixity-only (sha256 and sha512)" "$BIN" validate --fixity-only "$bag"
row "trajvault validate (full check)" "$BIN" validate "$bag"

section=$(
	echo "## Fixity: checking a bundle's checksums"
	echo
	echo "Made by bench/fixity.sh (part of \`make bench\`) on $(date -u +%Y-%m-%d), $(nproc) cores; load average at the end: $(cut -d' ' -f1-3 /proc/loadavg)."
	echo "Input: a bundle packed from $TRAJ invented demo trajectories x $STEPS steps x $((3 * MOLECULES)) atoms; payload $files files, $bytes bytes; warm page cache."
	echo "Median of $RUNS runs. Throughput is payload bytes per wall second; the ratio compares with the coreutils row doing the same"
	echo "hashing (trajvault also hashes the tag files and checks completeness and Payload-Oxum)."
	echo
	echo "| command | wall s | CPU s | MB/s | throughput vs coreutils |"
	echo "|---|---:|---:|---:|---:|"
	base=""
	for r in "${rows[@]}"; do
		IFS=';' read -r name res <<<"$r"
		read -r wall cpu <<<"$res"
		mbs=$(awk -v b="$bytes" -v w="$wall" 'BEGIN { if (w > 0) printf "%.0f", b / w / 1e6; else print "-" }')
		ratio="-"
		case $name in
		sha*) base=$wall ;;
		"trajvault validate --fixity-only"*) ratio=$(awk -v a="$base" -v w="$wall" 'BEGIN { if (w > 0) printf "%.2fx", a / w; else print "-" }') ;;
		esac
		echo "| ${name//|/\\|} | $wall | $cpu | $mbs | $ratio |"
	done
)
replace_section "## Fixity: " "$section"
echo "$section"
