package ingest

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/trajfile"
)

// TestNegativeZeroRoundTrip: numbers printed as negative zeros
// ("-0.00000000", as C's printf and Python's "%.8f" print a negative
// value that rounds to zero, common practice) come back digit for digit
// through the default scale-offset storage, whose decoding (k/10^D +
// min) loses the sign of zero: convert lists where they are and the
// reader puts the sign back. Checked the way export prints (the
// recorded format applied to Reader.Raw), against the text itself.
func TestNegativeZeroRoundTrip(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "negzero")
	os.MkdirAll(dir, 0o755)
	var xyz, tab strings.Builder
	var wantPos, wantE, wantP []string
	tab.WriteString("# step time[fs] Epot[eV]\n")
	negZero := math.Copysign(0, -1) // a Go constant -0.0 is +0
	for i := 0; i < 300; i++ {
		xs := []float64{0.5 + 0.001*float64(i), -1e-10, 0.25, negZero, 1.5, -0.75 + 0.002*float64(i%7)}
		if i%3 == 0 {
			xs[4] = negZero
		}
		fmt.Fprintf(&xyz, "2\nProperties=species:S:1:pos:R:3:momenta:R:3 step=%d time=%.1f\n", i, 0.5*float64(i))
		for a := 0; a < 2; a++ {
			line := []string{"H"}
			for k := 0; k < 3; k++ {
				s := fmt.Sprintf("%.8f", xs[3*a+k])
				line = append(line, s)
				wantPos = append(wantPos, s)
			}
			for k := 0; k < 3; k++ {
				s := fmt.Sprintf("%.8f", xs[5-(3*a+k)]*0.01)
				line = append(line, s)
				wantP = append(wantP, s)
			}
			xyz.WriteString(strings.Join(line, " ") + "\n")
		}
		e := fmt.Sprintf("%.6f", -3.2+0.1*float64(i%5))
		if i%10 == 0 {
			e = fmt.Sprintf("%.6f", -1e-9) // prints -0.000000
		}
		wantE = append(wantE, e)
		fmt.Fprintf(&tab, "%d %.1f %s\n", i, 0.5*float64(i), e)
	}
	os.WriteFile(filepath.Join(dir, "geom.xyz"), []byte(xyz.String()), 0o644)
	os.WriteFile(filepath.Join(dir, "energies.dat"), []byte(tab.String()), 0o644)
	if n := strings.Count(xyz.String(), "-0.00000000") + strings.Count(tab.String(), "-0.000000"); n < 1400 {
		t.Fatalf("only %d negative zeros planted", n)
	}
	out := filepath.Join(t.TempDir(), "out.h5")
	_, res, err := ConvertFiles(context.Background(), []string{dir}, out, ConvertOptions{Options: Options{Units: map[string]string{"position": "angstrom", "momentum": "u angstrom fs-1"}}})
	if err != nil {
		t.Fatal(err)
	}
	for _, el := range []string{"position", "potential_energy", "velocity"} {
		if !strings.Contains(res.Storage[el], "scale-offset") || !strings.Contains(res.Storage[el], "negative zeros listed") {
			t.Errorf("%s stored %q; want scale-offset with the negative zeros listed", el, res.Storage[el])
		}
	}
	r, err := trajfile.OpenReader(out)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	for _, c := range []struct {
		el   string
		want []string
	}{{r.Particle(trajfile.Position), wantPos}, {trajfile.PotentialEnergy, wantE}} {
		e, err := r.Element(c.el)
		if err != nil || e == nil || !e.Exact {
			t.Fatalf("%s: element %v, %v; want one with a recorded format", c.el, e, err)
		}
		v, err := r.Raw(e, 0, r.T)
		if err != nil {
			t.Fatal(err)
		}
		bad := 0
		for i, x := range v {
			if got := string(e.Format.Append(nil, x)); got != c.want[i] {
				if bad++; bad < 4 {
					t.Errorf("%s value %d: printed %q, text %q", c.el, i, got, c.want[i])
				}
			}
		}
		if bad > 0 {
			t.Errorf("%s: %d of %d values differ from the text", c.el, bad, len(v))
		}
		// A selection (frames 10 and 12, some columns) finds its zeros
		// too, as export's --frames/--atoms read them.
		keep := [][]int{}
		if e.Shape.Rank == 3 {
			keep = [][]int{{0, 1}, {1}}
		}
		sel, err := r.Window(e, []int{10, 12}, keep)
		if err != nil {
			t.Fatal(err)
		}
		var wantSel []string
		for _, f := range []int{10, 12} {
			if e.Shape.Rank == 3 {
				wantSel = append(wantSel, c.want[f*6+1], c.want[f*6+4])
			} else {
				wantSel = append(wantSel, c.want[f])
			}
		}
		for i, x := range sel {
			if got := string(e.Format.Append(nil, x)); got != wantSel[i] {
				t.Errorf("%s selection value %d: printed %q, text %q", c.el, i, got, wantSel[i])
			}
		}
		// Block reads (as a long run is streamed) give every value's
		// sign exactly as the whole read does.
		for start := 0; start < r.T; start += 7 {
			n := min(7, r.T-start)
			b, err := r.Raw(e, start, n)
			if err != nil {
				t.Fatal(err)
			}
			for k, x := range b {
				if y := v[start*e.Width()+k]; x != y || math.Signbit(x) != math.Signbit(y) {
					t.Fatalf("%s block at frame %d, value %d: %v, whole read %v", c.el, start, k, x, y)
				}
			}
		}
		// A window in the middle starts its indices at the window.
		w, _ := r.Raw(e, 10, 1)
		if i := 10 * e.Width(); !math.Signbit(w[0]) && strings.HasPrefix(c.want[i], "-0.") && c.want[i] != "-0.000000" {
			t.Errorf("%s frame 10: sign lost in a partial read", c.el)
		}
	}
	// Momenta are stored as velocities p/m (scale-offset at more
	// decimals); m v printed at the momenta's 8 decimals, as export does,
	// gives every printed momentum, negative zeros included.
	e, _ := r.Element(r.Particle(trajfile.Velocity))
	v, err := r.Raw(e, 0, r.T)
	if err != nil {
		t.Fatal(err)
	}
	m, err := r.MassesIn("u")
	if err != nil {
		t.Fatal(err)
	}
	bad := 0
	for i, x := range v {
		if got := fmt.Sprintf("%.8f", m[(i/3)%r.N]*x); got != wantP[i] {
			if bad++; bad < 4 {
				t.Errorf("momentum %d: m v printed %q, text %q", i, got, wantP[i])
			}
		}
	}
}
