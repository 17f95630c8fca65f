package validate

import (
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"sync/atomic"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/h5"
)

// FuzzValidateImage: any bytes opened as an in-memory HDF5 image
// (h5.OpenImage, as validate reads files inside archives) and validated
// give an error or a report, never a panic, and the same bytes give the
// same report twice (no state kept between files, no reads of
// uninitialised memory that change the verdict). Seeds: a small file of the package's writer and a copy
// with one byte flipped. Crashes inside the HDF5 C library itself stop
// the fuzzer too: they are what validate's worker processes contain.
// fuzzCalls names each input's image apart: HDF5 keeps open files by
// name, and a damaged image left half-open must not meet the next input.
var fuzzCalls atomic.Int64

func FuzzValidateImage(f *testing.F) {
	p := filepath.Join(f.TempDir(), "seed.h5")
	o := demo.DefaultOptions
	o.Steps = 3
	if err := demo.WriteH5(p, o); err != nil {
		f.Fatal(err)
	}
	raw, err := os.ReadFile(p)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(raw)
	flipped := append([]byte(nil), raw...)
	flipped[len(flipped)/2] ^= 0x10
	f.Add(flipped)
	f.Add([]byte("\x89HDF\r\n\x1a\n"))
	f.Fuzz(func(t *testing.T, img []byte) {
		var reps [2]*Report
		name := fmt.Sprintf("fuzz-%d.h5", fuzzCalls.Add(1))
		for i := range reps {
			file, err := h5.OpenImageWith(name, img, h5.OpenOptions{MaxReadBytes: 16 << 20})
			if err != nil {
				return
			}
			reps[i] = Opened(file, "fuzz.h5", Options{})
			file.Close()
		}
		if !reflect.DeepEqual(reps[0], reps[1]) {
			t.Fatalf("two reports of the same bytes differ:\n%v\n%v", reps[0].Findings, reps[1].Findings)
		}
	})
}
