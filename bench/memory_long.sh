#!/usr/bin/env bash
# bench/memory_long.sh: peak memory of convert, validate and audit on one
# long run (issue 14: below 300 MiB for 1e6 frames), and of validating a
# bundle whose trajectory file grows: a folder bag, a .tar.zst and a .zip
# holding one run of SMALL and one of STEPS steps. Memory should not grow
# with the size of the trajectory file (archive members are checked from
# a temporary file, folder files in place).
#
# Parameters (environment): STEPS steps of the long run (default
# 1000000, every step stored), SMALL steps of the short one (default
# STEPS/10), BIN the trajvault binary (default bin/trajvault). The runs
# are the invented demo scenario (trajvault demo --text, one 3-atom
# molecule), converted with testdata/recipes/tarnol.yaml. The bags are
# made here by hand (bagit.txt and a sha256 manifest; no metadata, so
# validate reports the missing RO-Crate and DataCite files and exits 1).
# Peak RSS is GNU time's maximum resident set size: that of the largest
# single process (validate and audit read each file in a worker).
#
# Writes its section to bench/results.md, replacing an earlier one.
set -euo pipefail
cd "$(dirname "$0")/.."
. bench/lib.sh
STEPS=${STEPS:-1000000}
SMALL=${SMALL:-$((STEPS / 10))}
BIN=${BIN:-bin/trajvault}
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }
[ -x /usr/bin/time ] || { echo "bench: needs GNU time (/usr/bin/time, Debian package time)" >&2; exit 2; }
command -v zstd >/dev/null || { echo "bench: needs zstd" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
load0=$(cut -d' ' -f1-3 /proc/loadavg)

# measure NAME BYTES CMD...: wall seconds and peak RSS of CMD; exit 1
# (findings) is fine, anything above is a failure of the benchmark.
rows=()
measure() {
	local name=$1 bytes=$2 rc
	shift 2
	set +e
	/usr/bin/time -f "%e %M" -o "$work/time" "$@" >"$work/out" 2>"$work/err"
	rc=$?
	set -e
	if ((rc > 1)); then
		echo "bench: $name failed (exit $rc):" >&2
		cat "$work/err" >&2
		exit 2
	fi
	# GNU time writes "Command exited with non-zero status 1" first.
	read -r wall kb < <(tail -n 1 "$work/time")
	rows+=("$name;$bytes;$wall;$kb")
	echo "bench: $name: ${wall}s wall, peak RSS ${kb} KiB" >&2
}

# bag N: a bag folder, a .tar.zst and a .zip (stored, no compression)
# holding run N.
bag() {
	local n=$1 b="$work/bag$1"
	mkdir -p "$b/data/trajectories"
	cp "$work/run$n.h5" "$b/data/trajectories/run.h5"
	printf 'BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n' >"$b/bagit.txt"
	(cd "$b" && sha256sum data/trajectories/run.h5 >manifest-sha256.txt)
	tar -C "$work" -cf - "bag$n" | zstd -q -3 -T0 >"$work/bag$n.tar.zst"
	python3 - "$work" "bag$n" <<'EOF'
import os, sys, zipfile
work, name = sys.argv[1], sys.argv[2]
with zipfile.ZipFile(os.path.join(work, name + ".zip"), "w", zipfile.ZIP_STORED) as z:
    for root, _, files in sorted(os.walk(os.path.join(work, name))):
        for f in sorted(files):
            p = os.path.join(root, f)
            z.write(p, os.path.relpath(p, work))
EOF
}

for n in "$SMALL" "$STEPS"; do
	frames=$((n + 1))
	echo "bench: memory: generating 1 trajectory x $frames frames" >&2
	"$BIN" demo --text --trajectories 1 --steps "$n" --molecules 1 "$work/logs$n" >/dev/null
	text=$(du -sb "$work/logs$n" | cut -f1)
	measure "convert ($frames frames)" "$text" \
		"$BIN" convert --recipe testdata/recipes/tarnol.yaml "$work/logs$n/traj-001" -o "$work/run$n.h5"
	rm -rf "$work/logs$n"
	size=$(stat -c %s "$work/run$n.h5")
	if [ "$n" = "$STEPS" ]; then
		measure "validate file ($frames frames)" "$size" "$BIN" validate "$work/run$n.h5"
		measure "audit ($frames frames)" "$size" "$BIN" audit --json "$work/run$n.h5"
	fi
	bag "$n"
	measure "validate bag folder ($frames frames)" "$size" "$BIN" validate "$work/bag$n"
	measure "validate .tar.zst bag ($frames frames)" "$size" "$BIN" validate "$work/bag$n.tar.zst"
	measure "validate .zip bag ($frames frames)" "$size" "$BIN" validate "$work/bag$n.zip"
	rm -rf "$work/bag$n" "$work/bag$n.tar.zst" "$work/bag$n.zip"
done
load1=$(cut -d' ' -f1-3 /proc/loadavg)

section=$(
	echo "## Memory on one long run: peak RSS of convert, validate and audit"
	echo
	echo "Made by bench/memory_long.sh on $(date -u +%Y-%m-%d); machine: $(nproc) cores, $(free -g | awk '/^Mem:/ { print $2 }') GiB;"
	echo "load average (1, 5, 15 min) $load0 at the start, $load1 at the end."
	echo "Input: the invented demo scenario (trajvault demo --text, one 3-atom molecule, every step stored), runs of"
	echo "$((SMALL + 1)) and $((STEPS + 1)) frames. Bags made by hand around the converted file (bagit.txt, sha256 manifest);"
	echo "the .zip stores its members uncompressed, the .tar.zst is zstd -3. Bytes: text for convert, the trajectory file otherwise."
	echo "Peak RSS is GNU time's maximum resident set size, that of the largest single process (validate and audit read each"
	echo "file in a worker process). Target (issue 14): below 300 MiB for 1e6 frames, and bag validation flat in the file's size."
	echo
	echo "| command | bytes | wall s | peak RSS MiB |"
	echo "|---|---:|---:|---:|"
	for r in "${rows[@]}"; do
		IFS=';' read -r name bytes wall kb <<<"$r"
		echo "| $name | $bytes | $wall | $(awk -v k="$kb" 'BEGIN { printf "%.1f", k / 1024 }') |"
	done
)
replace_section "## Memory on one long run: " "$section"
echo "$section"
