package export_test

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/export"
	"trajvault/ingest"
	"trajvault/internal/testenv"
)

// convertDir converts a folder written by testenv.LegacyLogs (in the
// units it prints) to a trajectory file.
func convertDir(t *testing.T, dir string) string {
	t.Helper()
	out := filepath.Join(t.TempDir(), "out.h5")
	if _, _, err := ingest.ConvertFiles(context.Background(), []string{dir}, out, ingest.ConvertOptions{Options: ingest.Options{Units: testenv.LegacyLogUnits}}); err != nil {
		t.Fatal(err)
	}
	return out
}

// numberTokens returns the numeric tokens of the atom lines of an
// (extended) XYZ file, in order.
func numberTokens(t *testing.T, path string, skipCols int) []string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, line := range strings.Split(strings.ReplaceAll(string(b), "\r", ""), "\n") {
		fs := strings.Fields(line)
		if len(fs) < 4 || strings.Contains(line, "=") {
			continue
		}
		out = append(out, fs[skipCols:]...)
	}
	return out
}

// TestRoundTripDigits: text -> h5 -> text reproduces every number of the
// corpus digit for digit, in the precision it was printed with.
func TestRoundTripDigits(t *testing.T) {
	dir := testenv.LegacyLogs(t, 300)
	h5path := convertDir(t, dir)
	out := filepath.Join(t.TempDir(), "x")
	if _, err := export.Export(h5path, out, export.FormatExtXYZ); err != nil {
		t.Fatal(err)
	}
	src := numberTokens(t, filepath.Join(dir, "geom.extxyz"), 1)
	got := numberTokens(t, filepath.Join(out, "traj.extxyz"), 1)
	if len(src) != len(got) || len(src) == 0 {
		t.Fatalf("%d source numbers, %d exported", len(src), len(got))
	}
	bad := 0
	for i := range src {
		if src[i] != got[i] {
			if bad < 5 {
				t.Errorf("number %d: source %q, exported %q", i, src[i], got[i])
			}
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%d of %d numbers differ", bad, len(src))
	}
	// Tables: every mapped column comes back with its printed digits.
	csvOut := filepath.Join(t.TempDir(), "c")
	if _, err := export.Export(h5path, csvOut, export.FormatCSV); err != nil {
		t.Fatal(err)
	}
	exported := readCSV(t, filepath.Join(csvOut, "observables.csv"))
	srcTab := readWS(t, filepath.Join(dir, "energies.dat"))
	srcPop := readCSV(t, filepath.Join(dir, "states.csv"))
	for r := range srcTab {
		e := exported[r]
		want := map[string]string{
			"step": srcTab[r][0], "time[fs]": srcTab[r][1], "kinetic_energy[eV]": srcTab[r][2],
			"potential_energy[eV]": srcTab[r][3], "total_energy[eV]": srcTab[r][4],
			"state_energy_0[eV]": srcPop[r]["1"], "state_energy_2[eV]": srcPop[r]["3"], "population_1": srcPop[r]["5"],
		}
		for col, w := range want {
			if e[col] != w {
				t.Fatalf("row %d %s: source %q, exported %q", r, col, w, e[col])
			}
		}
	}
}

func readWS(t *testing.T, path string) [][]string {
	b, _ := os.ReadFile(path)
	var rows [][]string
	for _, l := range strings.Split(strings.ReplaceAll(string(b), "\r", ""), "\n") {
		l = strings.TrimPrefix(l, "\ufeff")
		if l == "" || l[0] == '!' || l[0] == '#' {
			continue
		}
		rows = append(rows, strings.Fields(l))
	}
	return rows
}

// readCSV returns data rows; for observables.csv, keyed by header.
func readCSV(t *testing.T, path string) []map[string]string {
	b, _ := os.ReadFile(path)
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	header := strings.Split(strings.TrimPrefix(lines[0], "# "), ",")
	var rows []map[string]string
	for _, l := range lines[1:] {
		m := map[string]string{}
		for i, v := range strings.Split(l, ",") {
			m[header[i]] = v
			m[fmt.Sprint(i)] = v
		}
		rows = append(rows, m)
	}
	return rows
}

// TestComputedTimesExport (issue 10): times computed from --dt 0.1 (no
// printed times in the logs) export as 0.3 and 400.0, the decimal
// products step x dt, not 0.30000000000000004.
func TestComputedTimesExport(t *testing.T) {
	dir := t.TempDir()
	var b strings.Builder
	for i := 0; i <= 4001; i++ {
		fmt.Fprintf(&b, "1\nstep=%d\nH 0.0 0.0 %.3f\n", i, float64(i)*0.001)
	}
	os.WriteFile(filepath.Join(dir, "geom.xyz"), []byte(b.String()), 0o644)
	h5 := filepath.Join(t.TempDir(), "dt.h5")
	opt := ingest.ConvertOptions{Options: ingest.Options{Units: map[string]string{"position": "angstrom", "time": "fs"}, Dt: 0.1}}
	if _, _, err := ingest.ConvertFiles(context.Background(), []string{dir}, h5, opt); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(t.TempDir(), "x")
	if _, err := export.Export(h5, out, export.FormatExtXYZ); err != nil {
		t.Fatal(err)
	}
	text, _ := os.ReadFile(filepath.Join(out, "traj.extxyz"))
	var times []string
	for _, w := range strings.Fields(string(text)) {
		if v, ok := strings.CutPrefix(w, "time="); ok {
			times = append(times, v)
		}
	}
	for _, i := range []int{0, 3, 7, 4000, 4001} {
		want := fmt.Sprintf("%d.%d", i/10, i%10) // i x 0.1 by hand
		if times[i] != want {
			t.Errorf("frame %d: time=%s, want %s", i, times[i], want)
		}
	}
}

// TestExportUnitsReadBack (issue 10): the extended-XYZ export names the
// unit of every column and key on the comment line (pos_unit=,
// forces_unit=, energy_unit=, time_unit=, ...); converted again with no
// unit given, it exports to the same text byte for byte, and ase.io.read
// (Debian python3-ase) sees the units as plain info keys.
func TestExportUnitsReadBack(t *testing.T) {
	h5 := convertDir(t, testenv.LegacyLogs(t, 20))
	first := filepath.Join(t.TempDir(), "a")
	if _, err := export.Export(h5, first, export.FormatExtXYZ); err != nil {
		t.Fatal(err)
	}
	text, err := os.ReadFile(filepath.Join(first, "traj.extxyz"))
	if err != nil {
		t.Fatal(err)
	}
	line := strings.SplitN(string(text), "\n", 3)[1]
	for _, want := range []string{` pos_unit=angstrom `, ` velo_unit="angstrom fs-1" `, ` forces_unit="eV angstrom-1" `, ` energy_unit=eV `, ` time_unit=fs `} {
		if !strings.Contains(line+" ", want) {
			t.Errorf("comment line %q lacks %q", line, want)
		}
	}
	again := filepath.Join(t.TempDir(), "again.h5")
	if _, _, err := ingest.ConvertFiles(context.Background(), []string{first}, again, ingest.ConvertOptions{}); err != nil {
		t.Fatalf("the export does not convert without units: %v", err)
	}
	second := filepath.Join(t.TempDir(), "b")
	if _, err := export.Export(again, second, export.FormatExtXYZ); err != nil {
		t.Fatal(err)
	}
	if text2, _ := os.ReadFile(filepath.Join(second, "traj.extxyz")); string(text2) != string(text) {
		t.Errorf("export of the converted export differs from the first export")
	}
	// ASE reads no Fortran D exponents (the forces here): a selection of
	// positions and energies shows what it makes of the unit keys.
	sel := filepath.Join(t.TempDir(), "s")
	if _, err := export.ExportSelection(h5, sel, export.Options{Format: export.FormatExtXYZ, Sel: export.Selection{Quantities: []string{"position", "potential_energy"}}}); err != nil {
		t.Fatal(err)
	}
	var info []map[string]any
	out, err := exec.Command(testenv.Python(), "-c", `import json, sys
from ase.io import read
json.dump([a.info for a in read(sys.argv[1], index=":2")], sys.stdout, default=str)`, filepath.Join(sel, "traj.extxyz")).Output()
	if err != nil {
		t.Fatalf("ase.io.read: %v", err)
	}
	if err := json.Unmarshal(out, &info); err != nil || len(info) != 2 || info[0]["energy_unit"] != "eV" || info[0]["pos_unit"] != "angstrom" || info[0]["time_unit"] != "fs" {
		t.Errorf("ASE reads the units as %v (%v)", info, err)
	}
}
