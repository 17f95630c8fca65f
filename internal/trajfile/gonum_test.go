package trajfile_test

import (
	"testing"

	"gonum.org/v1/hdf5"

	"trajvault/internal/trajfile"
)

// TestGonumReadsOurFiles: the Go recipe the data description gives
// depositors' readers (gonum.org/v1/hdf5, the Go binding most Go users
// reach for) opens a trajvault file and reads the positions; they equal
// what trajvault's own reader stores, value for value. gonum/hdf5 is a
// separate binding over the C library, so this also guards our layer.
func TestGonumReadsOurFiles(t *testing.T) {
	path := demoFile(t)
	f, err := hdf5.OpenFile(path, hdf5.F_ACC_RDONLY)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	d, err := f.OpenDataset("particles/all/position/value")
	if err != nil {
		t.Fatal(err)
	}
	defer d.Close()
	sp := d.Space()
	dims, _, err := sp.SimpleExtentDims()
	sp.Close()
	if err != nil || len(dims) != 3 {
		t.Fatalf("dims %v %v", dims, err)
	}
	buf := make([]float64, dims[0]*dims[1]*dims[2])
	if err := d.Read(&buf); err != nil {
		t.Fatal(err)
	}
	r, err := trajfile.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	e, err := r.Element(r.Particle(trajfile.Position))
	if err != nil || e == nil {
		t.Fatalf("element: %v", err)
	}
	ours, err := r.Raw(e, 0, r.T)
	if err != nil {
		t.Fatal(err)
	}
	if len(ours) != len(buf) {
		t.Fatalf("gonum/hdf5 reads %d values, trajvault %d", len(buf), len(ours))
	}
	for i := range buf {
		if buf[i] != ours[i] {
			t.Fatalf("value %d: gonum/hdf5 %v, trajvault %v", i, buf[i], ours[i])
		}
	}
}
