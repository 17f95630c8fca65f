package validate

import (
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"sync/atomic"
	"syscall"
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
	// TRAJVAULT_FUZZ_CURRENT names a file that holds the input being
	// validated, so that an input on which a long run stalls can be
	// found and replayed.
	current := os.Getenv("TRAJVAULT_FUZZ_CURRENT")
	f.Fuzz(func(t *testing.T, img []byte) {
		if current != "" {
			os.WriteFile(fmt.Sprintf("%s.%d", current, os.Getpid()), img, 0o644)
		}
		defer boundMemory(t)()
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

// fuzzAddressSpace bounds the address space while one input is validated
// (RLIMIT_AS). Why: long fuzz runs stalled on inputs such as
// testdata/fuzz/FuzzValidateImage/stall-vlen-length, a file with one byte
// inserted before its global heap, whose variable-length string
// attribute then declares a sequence of gigabytes: HDF5 1.10.8 allocates
// and clears it in H5T__conv_vlen (memset, seen with gdb; h5py hangs the
// same way) for minutes. Under the limit the allocation fails at once and
// the read is an error (V33), as in validate's workers (--max-memory).
// The Go runtime and HDF5 reserve about 1 GiB of address space before
// reading anything (cmd/trajvault, minWorkerMemoryMiB), hence 3 GiB.
const fuzzAddressSpace = 3 << 30

// boundMemory lowers RLIMIT_AS to fuzzAddressSpace and returns the
// function that restores the previous limit (the seed-corpus run shares
// its process with the package's other tests).
func boundMemory(t *testing.T) func() {
	var old syscall.Rlimit
	if err := syscall.Getrlimit(syscall.RLIMIT_AS, &old); err != nil {
		t.Fatal(err)
	}
	if old.Cur <= fuzzAddressSpace {
		return func() {}
	}
	lim := syscall.Rlimit{Cur: fuzzAddressSpace, Max: old.Max}
	if err := syscall.Setrlimit(syscall.RLIMIT_AS, &lim); err != nil {
		t.Fatal(err)
	}
	return func() { syscall.Setrlimit(syscall.RLIMIT_AS, &old) }
}
