package trajfile

import (
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"trajvault/internal/h5"
)

// TestWriterRejectsStepsOutOfOrder, also across a chunk boundary (a
// regression: the check once read the emptied chunk buffer).
func TestWriterRejectsStepsOutOfOrder(t *testing.T) {
	w, err := Create(filepath.Join(t.TempDir(), "x.h5"), Spec{Species: []int{1}, Masses: []float64{1.008}, ChunkFrames: 2})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Abort()
	for _, s := range []int64{0, 1, 2} {
		if err := w.WriteFrame(&Frame{Step: s, Position: []float64{0, 0, 0}}); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.WriteFrame(&Frame{Step: 1, Position: []float64{0, 0, 0}}); err == nil || !strings.Contains(err.Error(), "must increase") {
		t.Errorf("err = %v", err)
	}
}

// writeSmall writes three frames of one atom with a velocity, a force,
// electronic data and one hop.
func writeSmall(t *testing.T, spec Spec) string {
	t.Helper()
	spec.Species, spec.Masses = []int{1}, []float64{1.008}
	spec.Velocity, spec.Force = true, true
	spec.NStates, spec.Populations, spec.ActiveState, spec.Hops = 2, true, true, true
	spec.Kinetic = true
	path := filepath.Join(t.TempDir(), "x.h5")
	w, err := Create(path, spec)
	if err != nil {
		t.Fatal(err)
	}
	for i := int64(0); i < 3; i++ {
		fr := Frame{Step: 10 * i, Time: 0.5 * float64(i), Position: []float64{1, 2, 3}, Velocity: []float64{1, 0, -1},
			Force: []float64{1, 0, 0}, Kinetic: 0.25, Populations: []float64{1, 0}, ActiveState: int(i % 2)}
		if err := w.WriteFrame(&fr); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.WriteHop(Hop{Step: 10, Time: 0.5, From: 0, To: 1}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

// TestWriterClockModes: a uniform Clock is stored in H5MD fixed mode,
// but in explicit mode with ForReaders (H5MD 1.1, "time-dependent data":
// scalar step and time in fixed mode, one entry per frame in explicit
// mode); both read back as the same clock.
func TestWriterClockModes(t *testing.T) {
	clock := &FixedClock{StepOffset: 0, StepIncrement: 10, TimeOffset: 0, TimeIncrement: 0.5}
	for _, fixed := range []bool{false, true} {
		path := writeSmall(t, Spec{Clock: clock, ForReaders: !fixed})
		f, err := h5.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		info, err := f.Info(OurGroup + "/" + Position + Step)
		f.Close()
		if err != nil {
			t.Fatal(err)
		}
		if want := map[bool]int{false: 1, true: 0}[fixed]; info.Shape.Rank != want {
			t.Errorf("fixed %v: step has rank %d, want %d", fixed, info.Shape.Rank, want)
		}
		r, err := OpenReader(path)
		if err != nil {
			t.Fatal(err)
		}
		c, err := r.Clock(r.Particle(Position))
		r.Close()
		if err != nil || !slices.Equal(c.Steps, []int64{0, 10, 20}) || !slices.Equal(c.Times, []float64{0, 0.5, 1}) {
			t.Errorf("fixed %v: clock %+v, %v", fixed, c, err)
		}
	}
}

// TestWriterForReaders: with ForReaders the numbers are stored in
// ReaderUnits. Reference values: 1 angstrom fs-1 = 1e5 m s-1 = 100 nm ps-1
// (exact, SI prefixes); 1 hartree bohr-1 = 49614.7525892 kJ mol-1 nm-1
// (derived from CODATA 2018 Eh N_A = 2625.4996394798 kJ mol-1 and
// a0 = 0.0529177210903 nm).
func TestWriterForReaders(t *testing.T) {
	path := writeSmall(t, Spec{ForReaders: true, Storage: map[string]Storage{"velocity": {Format: "fixed:3", Decimals: 3}}})
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	for _, c := range []struct {
		path, unit string
		want       float64 // first stored value
		tol        float64
	}{
		{OurGroup + "/velocity/value", "nm ps-1", 100, 1e-13},
		{OurGroup + "/force/value", "kJ mol-1 nm-1", 49614.7525892, 5e-8},
		{OurGroup + "/position/value", "angstrom", 1, 0},
		{OurGroup + "/position/time", "fs", 0, 0},
	} {
		v, _, err := f.ReadFloat64(c.path)
		if err != nil {
			t.Fatal(err)
		}
		a, err := f.Attr(c.path, UnitAttr)
		if err != nil || len(a.Strings) != 1 || a.Strings[0] != c.unit || !a.Type.VarLen {
			t.Errorf("%s: unit %v (variable-length %v), want %q as a variable-length string", c.path, a.Strings, a.Type.VarLen, c.unit)
		}
		if math.Abs(v[0]-c.want) > c.tol*math.Abs(c.want) {
			t.Errorf("%s: stored %.15g, want %.15g", c.path, v[0], c.want)
		}
	}
	// Converted numbers are not the printed ones: no format recorded.
	if f.HasAttr(OurGroup+"/velocity/value", FormatAttr) {
		t.Error("velocity keeps trajvault_format after conversion")
	}
}

// TestReaderReadsModule10: files of electronic module version 1.0 keep
// the module's elements under /observables/electronic; the reader finds
// them there (Legacy).
func TestReaderReadsModule10(t *testing.T) {
	path := writeSmall(t, Spec{})
	f, err := h5.OpenRW(path)
	if err != nil {
		t.Fatal(err)
	}
	move := func(from, to string) {
		if err := f.HardLink(from, to); err != nil {
			t.Fatal(err)
		}
		if err := f.Delete(from); err != nil {
			t.Fatal(err)
		}
	}
	if err := f.CreateGroup(LegacyElectronicGroup); err != nil {
		t.Fatal(err)
	}
	move(Populations, LegacyElectronicGroup+"/populations")
	move(ActiveState, LegacyElectronicGroup+"/active_state")
	move(HopsGroup, LegacyElectronicGroup+"/hops")
	f.Close()

	r, err := OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if !r.Has(Populations) || !r.Has(ActiveState) {
		t.Fatal("reader does not find the module 1.0 elements")
	}
	act, _, err := r.Values(ActiveState, "")
	if err != nil || !slices.Equal(act, []float64{0, 1, 0}) {
		t.Errorf("active state %v, %v", act, err)
	}
	hops, err := r.Hops()
	if err != nil || len(hops) != 1 || hops[0].Step != 10 || hops[0].To != 1 {
		t.Errorf("hops %+v, %v", hops, err)
	}
}
