#!/usr/bin/env bash
# bench/run.sh: how fast and how small trajvault converts an ensemble of
# text logs, against general-purpose compressors of the same text.
#
# Parameters (environment): TRAJ trajectories, STEPS steps each, MOLECULES
# copies of the 3-atom demo molecule (atoms = 3 x MOLECULES), DECIMALS of
# the positions, JOBS parallel conversions. The logs are the invented demo
# scenario (trajvault demo --text), generated before timing starts.
#
# Writes the table to stdout and to the head of bench/results.md.
set -euo pipefail
cd "$(dirname "$0")/.."
TRAJ=${TRAJ:-4}
STEPS=${STEPS:-20000}
MOLECULES=${MOLECULES:-10}
DECIMALS=${DECIMALS:-8}
JOBS=${JOBS:-$(nproc)}
# PARTS: which measurements to run (default all); e.g. PARTS="main jobs".
PARTS=${PARTS:-main slices audit fixity jobs ase memory}
BIN=bin/trajvault
. bench/lib.sh
want() { case " $PARTS " in *" $1 "*) return 0 ;; esac; return 1; }
.ci/deps.sh bench
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
if want main; then
echo "bench: generating $TRAJ trajectories x $STEPS steps x $((3 * MOLECULES)) atoms" >&2
"$BIN" demo --text --trajectories "$TRAJ" --steps "$STEPS" --molecules "$MOLECULES" --decimals "$DECIMALS" "$work/logs" >/dev/null
text=$(du -sb "$work/logs" | cut -f1)

# measure NAME OUTFILE CMD...: wall seconds, CPU seconds (user + sys of
# the command and its children: compressor threads, worker processes) and
# peak RSS (GNU time), bytes.
rows=()
measure() {
	local name=$1 out=$2
	shift 2
	sync
	/usr/bin/time -f "%e %M %U %S" -o "$work/time" "$@"
	read -r wall rss u s <"$work/time"
	local bytes cpu
	bytes=$(du -sb "$out" | cut -f1)
	cpu=$(awk -v u="$u" -v s="$s" 'BEGIN { printf "%.2f", u + s }')
	rows+=("$name;$wall;$rss;$bytes;$cpu")
	echo "bench: $name: ${wall}s wall, ${cpu}s CPU, $bytes bytes" >&2
}

measure "trajvault convert (--jobs $JOBS)" "$work/h5" \
	"$BIN" convert --jobs "$JOBS" --recipe testdata/recipes/tarnol.yaml "$work/logs" -o "$work/h5"
"$BIN" validate "$work"/h5/*.h5 >/dev/null
# The baselines people use for archives of text: fast (gzip -6, zstd -3),
# strong and threaded (zstd -19 -T0, xz -6 -T0) and the strongest common
# setting (xz -9, single-threaded).
measure "tar | gzip -6" "$work/logs.tar.gz" sh -c "tar -C '$work' -cf - logs | gzip -6 > '$work/logs.tar.gz'"
measure "tar | zstd -3" "$work/logs.3.tar.zst" sh -c "tar -C '$work' -cf - logs | zstd -q -3 > '$work/logs.3.tar.zst'"
measure "tar | zstd -19 -T0" "$work/logs.tar.zst" sh -c "tar -C '$work' -cf - logs | zstd -q -19 -T0 > '$work/logs.tar.zst'"
measure "tar | xz -6 -T0" "$work/logs.6.tar.xz" sh -c "tar -C '$work' -cf - logs | xz -6 -T0 > '$work/logs.6.tar.xz'"
measure "tar | xz -9" "$work/logs.tar.xz" sh -c "tar -C '$work' -cf - logs | xz -9 > '$work/logs.tar.xz'"

# Chunk-length sweep on one trajectory: the measurement behind the
# default --chunk-frames.
sweep=()
for n in -1 256 512 1024 2048 4096; do
	rm -f "$work/sweep.h5"
	/usr/bin/time -f "%e" -o "$work/time" "$BIN" convert --chunk-frames "$n" --recipe testdata/recipes/tarnol.yaml "$work/logs/traj-001" -o "$work/sweep.h5" >/dev/null
	sweep+=("$n;$(cat "$work/time");$(stat -c %s "$work/sweep.h5")")
done
compat=()
for c in 1.10 1.8 earliest; do
	rm -f "$work/compat.h5"
	"$BIN" convert --hdf5-compat "$c" --recipe testdata/recipes/tarnol.yaml "$work/logs/traj-001" -o "$work/compat.h5" >/dev/null
	compat+=("$c;$(stat -c %s "$work/compat.h5")")
done
one=$(du -sb "$work/logs/traj-001" | cut -f1)
onexz=$(tar -C "$work/logs" -cf - traj-001 | xz -9 | wc -c)

cpu=$(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | sed 's/^ *//')
{
	echo "# Benchmark: text logs to trajectory files"
	echo
	echo "Made by \`make bench\` (bench/run.sh) on $(date -u +%Y-%m-%d)."
	echo "Machine: $(nproc) cores ($cpu), $(awk '/MemTotal/ {printf "%.0f GiB", $2/1048576}' /proc/meminfo), $(uname -sr);"
	echo "$($(.ci/deps.sh go) version | cut -d' ' -f3), HDF5 $(dpkg-query -W -f='${Version}' libhdf5-dev 2>/dev/null),"
	echo "gzip $(gzip --version | head -1 | grep -o '[0-9][0-9.]*' | head -1), zstd $(zstd --version | grep -o 'v[0-9][0-9.]*' | head -1), xz $(xz --version | head -1 | grep -o '[0-9][0-9.]*' | head -1)."
	echo
	echo "Input: the invented demo ensemble, $TRAJ trajectories x $((STEPS + 1)) frames x $((3 * MOLECULES)) atoms,"
	echo "positions printed with $DECIMALS decimals, velocities and forces with 10, plus energy, state and event logs: $text bytes of text."
	echo "trajvault stores every number exactly at its printed precision (export gives the text back digit for digit);"
	echo "the compressors keep the bytes of the text, trajvault keeps the numbers digit for digit (not the spacing of the columns)."
	echo "CPU s is user + sys of the command and its threads or worker processes; MB per CPU-second compares speed on equal CPU"
	echo "work (the fair ratio when one method uses more cores); peak RSS is that of the largest single process."
	echo
	echo "| method | wall s | CPU s | MB/s of text (wall) | MB per CPU-s | output bytes | ratio to text | peak RSS MiB |"
	echo "|---|---:|---:|---:|---:|---:|---:|---:|"
	for r in "${rows[@]}"; do
		IFS=';' read -r name wall rss bytes cpu <<<"$r"
		printf '| %s ' "${name//|/\\|}"
		awk -v w="$wall" -v c="$cpu" -v r="$rss" -v b="$bytes" -v t="$text" \
			'BEGIN { printf "| %.2f | %.2f | %.1f | %.1f | %d | %.3f | %.1f |\n", w, c, t/1e6/(w>0?w:0.01), t/1e6/(c>0?c:0.01), b, b/t, r/1024 }'
	done
	echo
	echo "## Chunk length of per-atom time series (one trajectory, $one bytes of text; tar | xz -9: $onexz bytes)"
	echo
	echo "| --chunk-frames | wall s | output bytes |"
	echo "|---:|---:|---:|"
	for r in "${sweep[@]}"; do
		IFS=';' read -r n wall bytes <<<"$r"
		label=$n
		[ "$n" = -1 ] && label="-1 (whole frames)"
		echo "| $label | $wall | $bytes |"
	done
	echo
	echo "## HDF5 file format (same trajectory)"
	echo
	echo "| --hdf5-compat | output bytes |"
	echo "|---|---:|"
	for r in "${compat[@]}"; do
		IFS=';' read -r c bytes <<<"$r"
		echo "| $c | $bytes |"
	done
} >"$work/main.md"
cat "$work/main.md"
# The main table heads the file; the other scripts' sections stay.
keep_sections "$work/main.md"
fi

# Slices (bench/slices.sh): one frame and a 1,000-frame window out of a
# 1e6-frame run against reaching them in compressed text; appends its
# own section to bench/results.md.
if want slices; then bench/slices.sh; fi

# Audit memory (bench/audit_memory.sh): peak RSS of audit against the
# number of trajectories.
if want audit; then bench/audit_memory.sh; fi

# Fixity (bench/fixity.sh): validate --fixity-only against the coreutils
# hashers on the same payload; replaces its own section.
if want fixity; then bench/fixity.sh; fi

# Jobs (bench/jobs.sh): --jobs 1 against worker processes, and peak RSS
# on a 400-trajectory ensemble; replaces its own section.
if want jobs; then bench/jobs.sh; fi

# Memory on one long run (bench/memory_long.sh): peak RSS of convert,
# validate and audit at 1e6 frames, and of validating bags (folder,
# .tar.zst, .zip) as the trajectory file grows; replaces its own section.
if want memory; then bench/memory_long.sh; fi

# ASE-style run (bench/ase.sh): momenta printed with 8 decimals, against
# tar | xz -9 of the text; appends its own section.
if want ase; then bench/ase.sh; fi
