#!/usr/bin/env bash
# bench/ase.sh: the size of an MD run kept the way Python MD toolkits keep
# one (extended XYZ with momenta and forces printed with 8 decimals,
# energy= in Python's repr, plus a %.10f energy table), converted by
# trajvault, against tar | xz -9 and tar | zstd -19 of the text.
#
# The run is made by bench/ase_run.py with Debian python3-ase (EMT copper
# icosahedron, velocity Verlet), before anything is measured. It is
# converted with the units scan asks for (the momentum unit taken from
# scan's own suggestion), exported with --convention ase and every
# position, momentum and force of the export compared with the text,
# digit for digit, before the sizes are written.
#
# Parameters (environment): ASE_FRAMES frames, ASE_SHELLS shells of the
# icosahedron (3: 55 atoms). Appends its section to bench/results.md,
# replacing an earlier one.
set -euo pipefail
cd "$(dirname "$0")/.."
. bench/lib.sh
FRAMES=${ASE_FRAMES:-2000}
SHELLS=${ASE_SHELLS:-3}
BIN=bin/trajvault
PY=${TRAJVAULT_PYTHON:-/usr/bin/python3}
.ci/deps.sh bench
"$PY" -c 'import ase' 2>/dev/null || .ci/deps.sh test
[ -x "$BIN" ] || { echo "bench: build first (make build)" >&2; exit 2; }

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
mkdir "$work/run"
echo "bench: ase: generating $FRAMES frames with python3-ase" >&2
"$PY" bench/ase_run.py "$work/run" "$FRAMES" "$SHELLS"
atoms=$(head -n 1 "$work/run/traj.xyz" | tr -d ' ')
# The momentum unit, as scan suggests it by name (from --json: text output wraps at 80 columns).
pu=$("$BIN" scan --json "$work/run" 2>/dev/null | grep -o "\-\-unit momentum='[^']*'" | sed "s/^--unit momentum='//; s/'\$//" || true)
[ -n "$pu" ] || { echo "bench: ase: scan suggested no momentum unit" >&2; exit 1; }
"$BIN" convert "$work/run" -o "$work/run.h5" --unit position=angstrom --unit 'force=eV angstrom-1' --unit "momentum=$pu" >/dev/null
"$BIN" validate "$work/run.h5" >/dev/null
"$BIN" export "$work/run.h5" -o "$work/export.extxyz" --convention ase >/dev/null
# Digit check: pos, momenta and forces of each atom line (columns 2-4,
# 6-8, 9-11 in both files: the source has tags, the export masses, in
# column 5), compared as strings.
atomcols() { awk 'NF >= 11 && $1 ~ /^[A-Z][a-z]?$/ { print $2, $3, $4, $6, $7, $8, $9, $10, $11 }' "$1"; }
differ=$(paste -d' ' <(atomcols "$work/run/traj.xyz") <(atomcols "$work/export.extxyz") |
	awk '{ for (i = 1; i <= 9; i++) if (($i "") != ($(i + 9) "")) { if ($i + 0 == $(i + 9) + 0) z++; else d++ } }
		END { print d + 0, z + 0, NR * 9 }')
read -r ndiff nzero nnum <<<"$differ"
[ "$ndiff" -eq 0 ] || { echo "bench: ase: $ndiff numbers of the export differ from the text" >&2; exit 1; }
[ "$nnum" -gt 0 ] || { echo "bench: ase: no numbers compared" >&2; exit 1; }

text=$(du -sb "$work/run" | cut -f1)
h5=$(stat -c %s "$work/run.h5")
xz=$(tar -C "$work" -cf - run | xz -9 -T1 | wc -c)
zst=$(tar -C "$work" -cf - run | zstd -q -19 | wc -c)
ratio() { awk -v a="$1" -v b="$2" 'BEGIN { printf "%.3f", a / b }'; }

section=$(
	echo "## ASE-style run: momenta printed with 8 decimals"
	echo
	echo "Made by bench/ase.sh (part of \`make bench\`) on $(date -u +%Y-%m-%d), same machine; python3-ase $("$PY" -c 'import ase; print(ase.__version__)')."
	echo "Input: $FRAMES frames x $atoms atoms (EMT copper icosahedron, velocity Verlet, 2 fs), extended XYZ with"
	echo "pos, tags, momenta, forces and per-atom energies (%16.8f), energy= in Python's repr, and a %.10f energy table."
	echo "Converted with the units scan asks for (momentum: '$pu', as scan suggests);"
	echo "velocities are stored as momenta / masses at the decimals that give the printed momenta back."
	echo "Export --convention ase gave back $((nnum - nzero)) of $nnum positions, momenta and forces digit for digit."
	echo
	echo "| what | bytes | trajectory file over it |"
	echo "|---|---:|---:|"
	echo "| text as written | $text | $(ratio "$h5" "$text") |"
	echo "| tar \\| zstd -19 of the text | $zst | $(ratio "$h5" "$zst") |"
	echo "| tar \\| xz -9 of the text | $xz | $(ratio "$h5" "$xz") |"
	echo "| trajvault file | $h5 | 1.000 |"
	if [ "$nzero" -gt 0 ]; then
		echo
		echo "The other $nzero are zeros printed with a minus sign (-0.00000000) that come back as 0.00000000: equal"
		echo "values, but scale-offset storage does not keep the sign of zero."
	fi
)
replace_section "## ASE-style run" "$section"
echo "$section"
