package trajfile

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"

	"trajvault/internal/h5"
)

// TestWriterDirectChunksMatchLibrary writes the same run twice, once with
// whole chunks encoded in Go (the default) and once through HDF5's own
// filter pipeline (h5.CreateOptions.LibraryChunks), and checks that
// h5diff (Debian hdf5-tools) finds the files identical - values and
// attributes, the negative-zero list included - and that every
// time-dependent dataset reads back to the same bits through HDF5.
// Chunk layouts: frames x atoms x 3 and per-atom time series
// (SeriesFrames); explicit clock, so the int64 step dataset and the
// int32 active state use integer scale-offset.
func TestWriterDirectChunksMatchLibrary(t *testing.T) {
	const frames = 2500 // two whole chunks of 1024 frames and a partial one
	for _, series := range []int{0, 256} {
		t.Run(fmt.Sprintf("series=%d", series), func(t *testing.T) {
			dir := t.TempDir()
			var paths [2]string
			for i, lib := range []bool{true, false} {
				paths[i] = filepath.Join(dir, fmt.Sprintf("%v.h5", lib))
				writeRun(t, paths[i], frames, series, lib)
			}
			if out, err := exec.Command("h5diff", "-r", paths[0], paths[1]).CombinedOutput(); err != nil {
				t.Errorf("h5diff (hdf5-tools): %v\n%.2000s", err, out)
			}
			// The direct path stored the chunks: deflate streams from
			// klauspost/compress differ in bytes from zlib's.
			var raws [2][]byte
			for i, p := range paths {
				f, err := h5.Open(p)
				if err != nil {
					t.Fatal(err)
				}
				_, raws[i], err = f.RawChunk(Particle(pgroup, Position)+Value, []int{1024, 0, 0})
				f.Close()
				if err != nil {
					t.Fatal(err)
				}
			}
			if string(raws[0]) == string(raws[1]) {
				t.Errorf("position chunk at frame 1024 has the same bytes from both paths: not written directly")
			}
			for _, p := range []string{Particle(pgroup, Position) + Value, Particle(pgroup, Velocity) + Value,
				Particle(pgroup, Position) + Step, Particle(pgroup, Position) + Time, KineticEnergy + Value,
				Populations + Value, ActiveState + Value} {
				a, b := readBits(t, paths[0], p), readBits(t, paths[1], p)
				if len(a) != len(b) {
					t.Fatalf("%s: %d values from the library, %d direct", p, len(a), len(b))
				}
				for i := range a {
					if a[i] != b[i] {
						t.Fatalf("%s[%d]: library %#x, direct %#x", p, i, a[i], b[i])
					}
				}
			}
		})
	}
}

func readBits(t *testing.T, path, ds string) []uint64 {
	t.Helper()
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	v, _, err := f.ReadFloat64(ds)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]uint64, len(v))
	for i, x := range v {
		out[i] = math.Float64bits(x)
	}
	return out
}

// writeRun writes a seeded random run of 4 atoms printed with 5 to 10
// decimals, negative zeros included.
func writeRun(t *testing.T, path string, frames, series int, library bool) {
	t.Helper()
	rng := rand.New(rand.NewPCG(14, 3))
	pr := func(x float64, d int) float64 {
		y, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'f', d, 64), 64)
		return y
	}
	spec := Spec{
		Species: []int{8, 1, 1, 6}, Masses: []float64{15.999, 1.008, 1.008, 12.011},
		Velocity: true, Kinetic: true, NStates: 3, Populations: true, ActiveState: true,
		ChunkFrames: 1024, SeriesFrames: series,
		Storage: map[string]Storage{
			"position": {Format: "fixed:8", Decimals: 8}, "velocity": {Format: "fixed:10", Decimals: 10},
			"kinetic_energy": {Format: "fixed:10", Decimals: 10}, "populations": {Format: "fixed:5", Decimals: 5},
			"time": {Format: "fixed:2", Decimals: 2},
		},
		File: h5.CreateOptions{Format: h5.Format110, LibraryChunks: library},
	}
	w, err := Create(path, spec)
	if err != nil {
		t.Fatal(err)
	}
	pos := make([]float64, 12)
	for i := range pos {
		pos[i] = rng.NormFloat64() * 3
	}
	for f := 0; f < frames; f++ {
		fr := Frame{Step: int64(f) * 5, Time: pr(float64(f)*0.25, 2), Position: make([]float64, 12), Velocity: make([]float64, 12),
			Kinetic: pr(rng.Float64()*0.01, 10), Populations: make([]float64, 3), ActiveState: rng.IntN(3)}
		for i := range pos {
			pos[i] += rng.NormFloat64() * 0.01
			fr.Position[i] = pr(pos[i], 8)
			fr.Velocity[i] = pr(rng.NormFloat64()*1e-3, 10)
		}
		if f%97 == 0 {
			fr.Velocity[f%12] = math.Copysign(0, -1)
		}
		p := rng.Float64()
		fr.Populations = []float64{pr(p, 5), pr(1-p, 5), 0}
		if err := w.WriteFrame(&fr); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
}
