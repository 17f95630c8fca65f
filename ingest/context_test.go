package ingest

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"testing"

	"trajvault/internal/finding"
	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
)

var legacyOpt = ConvertOptions{Options: Options{Units: testenv.LegacyLogUnits}}

func scanned(t *testing.T, dir string) *TrajReport {
	t.Helper()
	tr, err := TrajectoryFrom([]string{dir}, nil)
	if err != nil {
		t.Fatal(err)
	}
	rep, err := Scan(context.Background(), tr, legacyOpt.Options)
	if err != nil || rep.Refusal(false) != nil {
		t.Fatalf("scan: %v %+v", err, rep.Problems)
	}
	return rep
}

// TestScanCancelled: a cancelled scan returns ctx.Err(), not a report.
func TestScanCancelled(t *testing.T) {
	tr, _ := TrajectoryFrom([]string{testenv.LegacyLogs(t, 20)}, nil)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if rep, err := Scan(ctx, tr, legacyOpt.Options); !errors.Is(err, context.Canceled) || rep != nil {
		t.Errorf("Scan after cancel: %v, %v", rep, err)
	}
}

// TestConvertCancelledLeavesNothing: a cancelled conversion returns
// ctx.Err() and leaves nothing in the output folder (no file under the
// final name, no partial file).
func TestConvertCancelledLeavesNothing(t *testing.T) {
	rep := scanned(t, testenv.LegacyLogs(t, 300))
	dir := t.TempDir()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Convert(ctx, rep, filepath.Join(dir, "o.h5"), legacyOpt); !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v, want context.Canceled", err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("left behind: %v", ents)
	}
}

// countingSource counts the records read from a source.
type countingSource struct {
	source
	n int
}

func (c *countingSource) next() (*record, error) {
	c.n++
	return c.source.next()
}

// TestProduceStopsAtFirstEmitError: the parser stops at the writer's
// first error instead of parsing on (issue 9).
func TestProduceStopsAtFirstEmitError(t *testing.T) {
	rep := scanned(t, testenv.LegacyLogs(t, 100))
	srcs, err := openSources(rep.traj, legacyOpt.Options)
	if err != nil {
		t.Fatal(err)
	}
	counted := make([]source, len(srcs))
	var geo *countingSource
	for i, s := range srcs {
		c := &countingSource{source: s}
		counted[i] = c
		if rep.Files[i].reader.Role == RoleGeometry {
			geo = c
		}
		defer s.close()
	}
	boom := errors.New("disk full")
	emitted := 0
	err = produce(context.Background(), rep, counted, legacyOpt, func(*trajfile.Frame, int) error {
		emitted++
		if emitted == 3 {
			return boom
		}
		return nil
	})
	if !errors.Is(err, boom) || emitted != 3 || geo.n != 3 {
		t.Errorf("err %v, %d frames emitted, %d geometry records read; want the error after 3 and 3", err, emitted, geo.n)
	}
}

// TestConvertAllFirstErrorCancels: the first failing conversion stops
// the ones not yet started; its error (not a cancellation) is returned.
func TestConvertAllFirstErrorCancels(t *testing.T) {
	var reps []*TrajReport
	for i := range 3 {
		r := scanned(t, testenv.LegacyLogs(t, 10))
		r.Name = fmt.Sprintf("run-%d", i)
		reps = append(reps, r)
	}
	dir := t.TempDir()
	// An existing file makes the first conversion fail (outputs are never
	// overwritten).
	os.WriteFile(filepath.Join(dir, "run-0.h5"), nil, 0o644)
	res, err := ConvertAll(context.Background(), reps, dir, legacyOpt, 1, nil)
	if err == nil || errors.Is(err, context.Canceled) || res != nil {
		t.Fatalf("ConvertAll = %v, %v; want the first conversion's error", res, err)
	}
	for _, n := range []string{"run-1.h5", "run-2.h5"} {
		if _, err := os.Stat(filepath.Join(dir, n)); err == nil {
			t.Errorf("%s was converted after the first error", n)
		}
	}
	res, err = ConvertAll(context.Background(), reps[1:], t.TempDir(), legacyOpt, 2, nil)
	if err != nil || len(res) != 2 || res[0].Frames != 10 || res[1].Frames != 10 {
		t.Errorf("ConvertAll = %+v, %v", res, err)
	}
	scans, err := ScanAll(context.Background(), []*Trajectory{reps[0].traj, reps[1].traj}, legacyOpt.Options, 2, nil)
	if err != nil || len(scans) != 2 || scans[0].Frames != 10 {
		t.Errorf("ScanAll = %v, %v", scans, err)
	}
}

// TestP10P14: a file no reader takes is P10 (a note); states numbered
// from 1 are P14 (a note), no longer P10 (issue 9: one code per rule).
func TestP10P14(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	os.MkdirAll(dir, 0o755)
	os.WriteFile(filepath.Join(dir, "geom.xyz"), []byte("1\nstep=0 time=0.0\nH 0 0 0\n1\nstep=1 time=0.5\nH 0 0 0.1\n"), 0o644)
	os.WriteFile(filepath.Join(dir, "states.dat"), []byte("# step E_1[hartree] E_2[hartree] state\n0 -1.0 -0.5 1\n1 -1.0 -0.5 2\n"), 0o644)
	os.WriteFile(filepath.Join(dir, "notes.md"), []byte("run by hand\n"), 0o644)
	tr, err := TrajectoryFrom([]string{dir}, nil)
	if err != nil {
		t.Fatal(err)
	}
	rep, err := Scan(context.Background(), tr, Options{Units: map[string]string{"position": "angstrom", "time": "fs"}})
	if err != nil {
		t.Fatal(err)
	}
	codes := map[string][]finding.Finding{}
	for _, p := range rep.Problems {
		codes[p.Code] = append(codes[p.Code], p)
	}
	if p := codes[PUnknownFile]; len(p) != 1 || p[0].File != filepath.Join(dir, "notes.md") || p[0].Severity != finding.Note {
		t.Errorf("P10: %+v", p)
	}
	if p := codes[PStateBase]; len(p) != 1 || p[0].Severity != finding.Note {
		t.Errorf("P14: %+v", p)
	}
	if rep.States != 2 || rep.Errors() != 0 {
		t.Errorf("%d states, %d errors: %+v", rep.States, rep.Errors(), rep.Problems)
	}
}

// TestP8NamesQuantity: a unit finding carries the unit kind it concerns.
func TestP8NamesQuantity(t *testing.T) {
	tr, _ := TrajectoryFrom([]string{testenv.LegacyLogs(t, 5)}, nil)
	rep, err := Scan(context.Background(), tr, Options{Units: map[string]string{"position": "angstrom"}})
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, p := range rep.Problems {
		if p.Code == PUnit {
			got = append(got, p.Quantity)
		}
	}
	// The run has velocities and forces without units (time and energies
	// carry theirs in the table header); kinds come in table order.
	if fmt.Sprint(got) != "[velocity force]" {
		t.Errorf("P8 quantities %v, want [velocity force]: %+v", got, rep.Problems)
	}
}
