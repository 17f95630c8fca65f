package h5

import (
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"sync"
	"testing"
)

// build writes a small file exercising every writer feature.
func build(t *testing.T, path string) { buildFmt(t, path, CreateOptions{}) }

// buildFmt is build in a chosen file format.
func buildFmt(t *testing.T, path string, o CreateOptions) {
	t.Helper()
	f, err := CreateWith(path, o)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	must(f.CreateGroup("/a/b"))
	must(f.SetString("/a", "name", "fixed"))
	must(f.SetVarString("/a", "vname", "variable"))
	must(f.SetStrings("/a/b", "boundary", []string{"periodic", "none", "periodic"}))
	must(f.SetInts("/a", "version", []int32{1, 1}, false))
	must(f.SetInts("/a", "dimension", []int32{3}, true))
	must(f.SetFloats("/a", "scale", []float64{0.5}, true))
	w, err := f.CreateDataset("/a/b/x", DatasetSpec{
		Type: Float64, Dims: []int{0, 2}, MaxDims: []int{Unlimited, 2}, Chunk: []int{4, 2},
		Filters: Filters{Shuffle: true, Deflate: 6, Fletcher32: true},
	})
	must(err)
	must(w.Append([]float64{1, 2, 3, 4}))
	must(w.Append([]float64{5, 6}))
	if err := w.Append([]float64{7}); err == nil {
		t.Fatal("append of a partial row succeeded")
	}
	if err := w.Append([]float64{7, 8}); err == nil {
		t.Fatal("writer error is not sticky")
	}
	w.Close()
	w, err = f.CreateDataset("/a/b/y", DatasetSpec{
		Type: Float64, Dims: []int{0, 2}, MaxDims: []int{Unlimited, 2}, Chunk: []int{4, 2},
		Filters: Filters{Shuffle: true, Deflate: 6, Fletcher32: true},
	})
	must(err)
	must(w.Append([]float64{1.25, 2.5, 3.75, 4}))
	must(w.Close())
	if err := w.Append([]float64{1, 2}); err == nil {
		t.Fatal("append after Close succeeded")
	}
	w, err = f.CreateDataset("/a/step", DatasetSpec{Type: Int64, Dims: []int{0}, MaxDims: []int{Unlimited}, Chunk: []int{8},
		Filters: Filters{ScaleOffsetInt: true, Deflate: 1}})
	must(err)
	must(w.Append([]int64{0, 10, 20}))
	must(w.Close())
	w, err = f.CreateDataset("/a/so", DatasetSpec{Type: Float64, Dims: []int{3}, Chunk: []int{3},
		Filters: Filters{ScaleOffsetFloat: true, ScaleOffsetDigits: 3}})
	must(err)
	must(w.Write([]float64{1.0005, 2.25, -3.125}))
	must(w.Close())
	w, err = f.CreateDataset("/a/nb", DatasetSpec{Type: Int32, Dims: []int{3}, Chunk: []int{3}, Filters: Filters{NBit: true}})
	must(err)
	must(w.Write([]int32{1, 2, 3}))
	must(w.Close())
	must(f.CreateStrings("/a/names", []string{"H", "He", "Li"}))
	must(f.HardLink("/a/step", "/a/b/step"))
	must(f.SoftLink("/nowhere", "/a/dangling"))
}

func TestRoundTrip(t *testing.T) {
	path := filepath.Join(t.TempDir(), "rt.h5")
	build(t, path)
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()

	links, err := f.Links("/a")
	if err != nil {
		t.Fatal(err)
	}
	if want := []string{"b", "dangling", "names", "nb", "so", "step"}; !reflect.DeepEqual(links, want) {
		t.Errorf("links = %v, want %v", links, want)
	}
	attrs, _ := f.AttrNames("/a")
	if want := []string{"dimension", "name", "scale", "version", "vname"}; !reflect.DeepEqual(attrs, want) {
		t.Errorf("attrs = %v, want %v", attrs, want)
	}
	a, err := f.Attr("/a", "name")
	if err != nil || a.Strings[0] != "fixed" || a.Type.VarLen || a.Shape.Rank != 0 {
		t.Errorf("fixed string attr = %+v, %v", a, err)
	}
	a, err = f.Attr("/a", "vname")
	if err != nil || a.Strings[0] != "variable" || !a.Type.VarLen {
		t.Errorf("vlen string attr = %+v, %v", a, err)
	}
	a, _ = f.Attr("/a/b", "boundary")
	if !reflect.DeepEqual(a.Strings, []string{"periodic", "none", "periodic"}) || a.Shape.Rank != 1 {
		t.Errorf("string array attr = %+v", a)
	}
	a, _ = f.Attr("/a", "version")
	if !reflect.DeepEqual(a.Ints, []int64{1, 1}) || a.Type.Class != ClassInt || a.Type.Size != 4 {
		t.Errorf("version attr = %+v", a)
	}
	a, _ = f.Attr("/a", "dimension")
	if a.Shape.Rank != 0 || a.Ints[0] != 3 {
		t.Errorf("scalar int attr = %+v", a)
	}
	x, shape, err := f.ReadFloat64("/a/b/x")
	if err != nil || !reflect.DeepEqual(x, []float64{1, 2, 3, 4, 5, 6}) || shape.String() != "[3,2]" {
		t.Errorf("x = %v %v %v", x, shape, err)
	}
	if shape.MaxDims[0] != Unlimited {
		t.Errorf("maxdims = %v", shape.MaxDims)
	}
	rows, err := f.ReadRows("/a/b/x", shape, 1, 2)
	if err != nil || !reflect.DeepEqual(rows, []float64{3, 4, 5, 6}) {
		t.Errorf("rows = %v %v", rows, err)
	}
	info, err := f.Info("/a/b/x")
	if err != nil {
		t.Fatal(err)
	}
	var ids []int
	for _, fl := range info.Filters {
		ids = append(ids, fl.ID)
	}
	if !reflect.DeepEqual(ids, []int{FilterShuffle, FilterDeflate, FilterFletcher32}) || info.Layout != "chunked" || !reflect.DeepEqual(info.Chunk, []int{4, 2}) {
		t.Errorf("info = %+v", info)
	}
	st, _, _ := f.ReadInt64("/a/step")
	if !reflect.DeepEqual(st, []int64{0, 10, 20}) {
		t.Errorf("step = %v", st)
	}
	so, _, _ := f.ReadFloat64("/a/so")
	// Scale-offset keeps 3 decimals: values are rounded to 1e-3 (HDF5
	// User's Guide, scale-offset filter, D-scaling; lossy by design).
	for i, want := range []float64{1.0005, 2.25, -3.125} {
		if d := so[i] - want; d > 5e-4+1e-12 || d < -5e-4-1e-12 {
			t.Errorf("scale-offset[%d] = %v, want %v within 5e-4", i, so[i], want)
		}
	}
	info, _ = f.Info("/a/so")
	if len(info.Filters) != 1 || info.Filters[0].ID != FilterScaleOffset {
		t.Errorf("scale-offset filters = %+v", info.Filters)
	}
	info, _ = f.Info("/a/nb")
	if len(info.Filters) != 1 || info.Filters[0].ID != FilterNBit {
		t.Errorf("n-bit filters = %+v", info.Filters)
	}
	names, err := f.ReadStrings("/a/names")
	if err != nil || !reflect.DeepEqual(names, []string{"H", "He", "Li"}) {
		t.Errorf("names = %v %v", names, err)
	}
	id1, _ := f.ObjectID("/a/step")
	id2, _ := f.ObjectID("/a/b/step")
	id3, _ := f.ObjectID("/a/so")
	if id1 != id2 || id1 == id3 {
		t.Errorf("object identity: %v %v %v", id1, id2, id3)
	}
	for path, want := range map[string]Kind{"/a": Group, "/a/b/x": Dataset, "/a/dangling": DanglingSoftLink, "/a/zz": Missing, "/zz/yy": Missing, "/a/b/x/q": Missing} {
		if got := f.Kind(path); got != want {
			t.Errorf("Kind(%s) = %v, want %v", path, got, want)
		}
	}
}

func TestNoLeaks(t *testing.T) {
	base := OpenObjects()
	path := filepath.Join(t.TempDir(), "leak.h5")
	build(t, path)
	if n := OpenObjects(); n != base {
		t.Fatalf("after writing: %d open identifiers, want %d", n, base)
	}
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	f.Links("/a")
	f.AttrNames("/a")
	for _, n := range []string{"name", "vname", "version", "nope"} {
		f.Attr("/a", n)
	}
	f.ReadFloat64("/a/b/x")
	f.ReadFloat64("/a/missing")
	f.ReadStrings("/a/names")
	f.Info("/a/b/x")
	f.ObjectID("/a/step")
	f.Kind("/a/dangling")
	// Calls added with the checked read path, on good and failing inputs.
	f.ReadRows("/a/b/x", Shape{Rank: 2, Dims: []int{3, 2}}, 1, 2)
	f.ReadRows("/a/b/x", Shape{Rank: 2, Dims: []int{9, 2}}, 1, 2)
	f.ReadInt64("/a/step")
	f.ReadFloat64("/a/names") // strings: refused type
	f.ReadStrings("/a/b/x")   // numbers: refused type
	f.Info("/a/missing")
	f.Describe("/a/b/x")
	f.Describe("/a/missing")
	f.AttrNames("/a/b/x")
	f.AttrNames("/a/missing")
	f.Links("/a/missing")
	f.ObjectID("/a/missing")
	f.RawChunk("/a/b/x", []int{0, 0})
	f.RawChunk("/a/b/x", []int{1, 0}) // not a chunk's origin
	f.RawChunk("/a/missing", []int{0})
	if n := OpenObjects(); n != base+1 { // the file itself
		t.Errorf("while open: %d identifiers, want %d", n, base+1)
	}
	f.Close()
	f.Close()
	if n := OpenObjects(); n != base {
		t.Errorf("after close: %d open identifiers, want %d", n, base)
	}
	// The direct chunk path, a chunk the encoders decline (NaN) included.
	dpath := filepath.Join(t.TempDir(), "direct.h5")
	df, err := Create(dpath)
	if err != nil {
		t.Fatal(err)
	}
	dw, err := df.CreateDataset("/d", DatasetSpec{Type: Float64, Dims: []int{0}, MaxDims: []int{Unlimited}, Chunk: []int{4},
		Filters: Filters{ScaleOffsetFloat: true, ScaleOffsetDigits: 2, Deflate: 1, Fletcher32: true}})
	if err != nil {
		t.Fatal(err)
	}
	if err := dw.Append([]float64{1, 2, 3, 4, 5, math.NaN(), 7, 8, 9, 10}); err != nil || dw.direct == nil {
		t.Fatalf("direct append: %v (direct path %v)", err, dw.direct != nil)
	}
	if dw.direct.stored != 1 {
		t.Fatalf("%d chunks stored directly, want 1 (the second has a NaN)", dw.direct.stored)
	}
	dw.Close()
	df.Close()
	if n := OpenObjects(); n != base {
		t.Fatalf("after direct chunks: %d open identifiers, want %d", n, base)
	}
	raw, _ := os.ReadFile(path)
	img, err := OpenImageWith("leak.h5", raw, OpenOptions{AllowExternalDir: filepath.Dir(path), MaxReadBytes: 1 << 10})
	if err != nil {
		t.Fatal(err)
	}
	img.ReadFloat64("/a/b/x")
	img.Attr("/a/b", "boundary")
	img.Close()
	if _, err := img.Links("/"); !errors.Is(err, ErrClosed) {
		t.Errorf("Links after Close: %v", err)
	}
	if n := OpenObjects(); n != base {
		t.Errorf("after image: %d open identifiers, want %d", n, base)
	}
}

// TestDescribeIsInfoWithoutStorage: Describe gives Info's type, shape,
// layout and chunking, and leaves out what walks the chunk index.
func TestDescribeIsInfoWithoutStorage(t *testing.T) {
	path := filepath.Join(t.TempDir(), "d.h5")
	build(t, path)
	f, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	info, err := f.Info("/a/b/x")
	if err != nil {
		t.Fatal(err)
	}
	d, err := f.Describe("/a/b/x")
	if err != nil {
		t.Fatal(err)
	}
	if d.StorageBytes != -1 || d.Filters != nil {
		t.Errorf("Describe: storage %d, filters %v; want -1 and none", d.StorageBytes, d.Filters)
	}
	if info.StorageBytes <= 0 {
		t.Errorf("Info: storage %d, want the bytes stored", info.StorageBytes)
	}
	d.StorageBytes, d.Filters = info.StorageBytes, info.Filters
	if !reflect.DeepEqual(d, info) {
		t.Errorf("Describe %+v, Info %+v", d, info)
	}
	if _, err := f.Describe("/a/missing"); err == nil {
		t.Error("Describe of a missing dataset: no error")
	}
}

func TestConcurrentReaders(t *testing.T) {
	path := filepath.Join(t.TempDir(), "c.h5")
	build(t, path)
	var wg sync.WaitGroup
	for i := 0; i < 8; i++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			f, err := Open(path)
			if err != nil {
				t.Error(err)
				return
			}
			defer f.Close()
			for j := 0; j < 50; j++ {
				if x, _, err := f.ReadFloat64("/a/b/x"); err != nil || x[5] != 6 {
					t.Error("concurrent read failed", err)
				}
			}
		}()
	}
	wg.Wait()
}

func TestOpenErrors(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.h5")
	build(t, good)
	raw, _ := os.ReadFile(good)
	write := func(name string, b []byte) string {
		p := filepath.Join(dir, name)
		os.WriteFile(p, b, 0o644)
		return p
	}
	cases := []struct {
		name string
		path string
		want error
	}{
		{"empty", write("empty.h5", nil), ErrEmpty},
		{"text", write("text.h5", []byte("10\ncomment\nH 0 0 0\n")), ErrNotHDF5},
		{"truncated", write("trunc.h5", raw[:len(raw)/2]), ErrDamaged},
		{"missing", filepath.Join(dir, "nope.h5"), os.ErrNotExist},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			f, err := Open(c.path)
			if err == nil {
				f.Close()
				t.Fatal("opened")
			}
			var oe *OpenError
			if !errors.As(err, &oe) || !errors.Is(err, c.want) {
				t.Errorf("err = %v, want %v", err, c.want)
			}
		})
	}
	if _, err := Create(good); !errors.Is(err, os.ErrExist) {
		t.Errorf("Create over an existing file: %v", err)
	}
}

func TestOpenImage(t *testing.T) {
	path := filepath.Join(t.TempDir(), "img.h5")
	build(t, path)
	raw, _ := os.ReadFile(path)
	base := OpenObjects()
	f, err := OpenImage("img.h5", raw)
	if err != nil {
		t.Fatal(err)
	}
	x, _, err := f.ReadFloat64("/a/b/x")
	if err != nil || len(x) != 6 || x[5] != 6 {
		t.Errorf("x = %v %v", x, err)
	}
	f.Close()
	if n := OpenObjects(); n != base {
		t.Errorf("leak: %d open, want %d", n, base)
	}
	if _, err := OpenImage("t.h5", raw[:len(raw)/2]); !errors.Is(err, ErrDamaged) {
		t.Errorf("truncated image: %v", err)
	}
}
