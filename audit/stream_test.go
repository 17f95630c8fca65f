package audit

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/trajfile"
)

// wholeResult builds, from the file read whole, the Result an audit kept
// before it held its series in less memory (issue 14): |c_k|^2 per frame
// as one slice per frame (from the stored amplitudes, |c|^2 = re^2 +
// im^2), the active state, every time (fs) and the full deviation
// E(t) - E(0) of the stored total energy (eV).
func wholeResult(t *testing.T, path string) *Result {
	t.Helper()
	r, err := trajfile.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	amps, _, err := r.Values(trajfile.Amplitudes, "")
	if err != nil {
		t.Fatal(err)
	}
	act, _, err := r.Values(trajfile.ActiveState, "")
	if err != nil {
		t.Fatal(err)
	}
	e, _, err := r.Values(trajfile.TotalEnergy, "hartree")
	if err != nil {
		t.Fatal(err)
	}
	S := r.States
	w := &Result{}
	for f := 0; f < r.T; f++ {
		row := make([]float64, S)
		for k := range row {
			re, im := amps[2*(f*S+k)], amps[2*(f*S+k)+1]
			row[k] = re*re + im*im
		}
		w.Pops = append(w.Pops, row)
		w.Active = append(w.Active, int64(act[f]))
		w.Times = append(w.Times, r.Times[f]*auFs)
		w.EnergyDev = append(w.EnergyDev, (e[f]-e[0])*hartreeEV)
	}
	return w
}

// TestStreamedSameAsWhole (issue 14: audit memory flat in frames): what
// an audit keeps of a run for the ensemble - |c_k|^2 as one flat series,
// the energy deviation thinned while it is formed, the amplitudes and
// couplings read only by hop-probability - folds into exactly the same
// ensemble sums, plot points and times, bit for bit, as the whole series
// built independently from the file. Long enough (3001 frames) that the
// plot series is thinned.
func TestStreamedSameAsWhole(t *testing.T) {
	const steps = 3000
	path := demoRun(t, 11, steps, hopRich)
	got, err := File(context.Background(), path, DefaultSettings)
	if err != nil {
		t.Fatal(err)
	}
	if got.pops == nil || got.Pops != nil || got.devTimes == nil {
		t.Fatalf("File kept per-frame series (Pops %d rows) or no flat ones (pops %d values, devTimes %d)",
			len(got.Pops), len(got.pops), len(got.devTimes))
	}
	if len(got.EnergyDev) != energyPoints {
		t.Errorf("File kept %d energy points, want %d", len(got.EnergyDev), energyPoints)
	}
	for _, c := range got.Checks {
		if c.Name == "hop-probability" && c.Verdict == NA {
			t.Errorf("hop-probability did not run on a file with amplitudes and couplings: %s", c.Summary)
		}
	}
	want := wholeResult(t, path)
	pg, pw := &popSums{shortT: -1}, &popSums{shortT: -1}
	pg.fold(got)
	pw.fold(want)
	if pg.used != 1 || pg.shortT != pw.shortT || !slices.Equal(pg.n, pw.n) || !slices.Equal(pg.times, pw.times) {
		t.Errorf("frame counts or times differ: got %d runs, %d frames; want %d frames", pg.used, pg.shortT, pw.shortT)
	}
	for k := range pw.inK {
		if k >= len(pg.inK) || !slices.Equal(pg.inK[k], pw.inK[k]) || !slices.Equal(pg.amp[k], pw.amp[k]) {
			t.Errorf("state %d: sums of the active state or of |c_k|^2 differ", k)
		}
	}
	if !slices.Equal(got.Times, want.Times) || !slices.Equal(got.EnergyDev, want.EnergyDev) {
		t.Errorf("energy plot series differ: %d points at %v... want %d at %v...", len(got.Times), got.Times[:3], len(want.Times), want.Times[:3])
	}
}

// spreadWhole is max - min of a whole series, as the momentum check
// formed it from every frame's value before it kept only running bounds
// (math.Min and math.Max: a NaN anywhere makes the spread NaN).
func spreadWhole(v []float64) float64 {
	if len(v) == 0 {
		return 0
	}
	lo, hi := v[0], v[0]
	for _, x := range v {
		lo, hi = math.Min(lo, x), math.Max(hi, x)
	}
	return hi - lo
}

// TestSpreadTracker: the running spread equals the whole series' on
// random series (seeded), with a NaN planted, and on none.
func TestSpreadTracker(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 14))
	for _, tc := range []struct {
		name string
		n    int
		nan  int // index of a planted NaN, -1 none
	}{
		{"empty", 0, -1}, {"one", 1, -1}, {"many", 1000, -1}, {"NaN first", 50, 0}, {"NaN inside", 50, 17},
	} {
		t.Run(tc.name, func(t *testing.T) {
			v := make([]float64, tc.n)
			for i := range v {
				v[i] = rng.NormFloat64() * 1e-3
			}
			if tc.nan >= 0 {
				v[tc.nan] = math.NaN()
			}
			var s spreadTracker
			for _, x := range v {
				s.add(x)
			}
			got, want := s.spread(), spreadWhole(v)
			if got != want && !(math.IsNaN(got) && math.IsNaN(want)) {
				t.Errorf("spread %v, want %v", got, want)
			}
		})
	}
}

// TestFramesIntoReuses: FramesInto gives Frames' values and, when the
// buffer is large enough, in the buffer's memory (no block left behind
// per read); a short buffer is not overrun.
func TestFramesIntoReuses(t *testing.T) {
	path := demoRun(t, 5, 300, demo.Faults{})
	r, err := trajfile.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	el := r.Particle(trajfile.Position)
	buf := make([]float64, 0, 64*3*r.N)
	for _, start := range []int{0, 64, 200} {
		want, err := r.Frames(el, "bohr", start, 64)
		if err != nil {
			t.Fatal(err)
		}
		got, err := r.FramesInto(el, "bohr", start, 64, buf)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(got, want) || &got[0] != &buf[:1][0] {
			t.Errorf("frames %d+64: values equal %v, in the buffer %v", start, slices.Equal(got, want), &got[0] == &buf[:1][0])
		}
	}
	short := make([]float64, 3)
	got, err := r.FramesInto(el, "bohr", 0, 10, short)
	if err != nil || len(got) != 10*3*r.N || len(short) != 3 {
		t.Errorf("short buffer: %d values, err %v", len(got), err)
	}
}
