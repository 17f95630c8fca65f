package h5

import (
	"bytes"
	"errors"
	"math/rand"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"trajvault/internal/testenv"
)

// hostileCorpus writes the corpus of testdata/hostile.py (h5py, an
// independent writer) into a fresh folder that also holds a FIFO named
// "fifo": anything that follows a reference to it hangs.
func hostileCorpus(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	if err := syscall.Mkfifo(filepath.Join(dir, "fifo"), 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(testenv.Python(), filepath.Join("testdata", "hostile.py"), dir)
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("h5py corpus writer failed (install python3-h5py; make test does): %v\n%s", err, out)
	}
	return dir
}

// within runs fn, failing the test if it takes longer than d (a FIFO
// being opened); the FIFO is then opened for writing to release it.
func within(t *testing.T, d time.Duration, fifo string, fn func()) {
	t.Helper()
	done := make(chan struct{})
	go func() {
		defer close(done)
		fn()
	}()
	select {
	case <-done:
	case <-time.After(d):
		if w, err := os.OpenFile(fifo, os.O_RDWR, 0); err == nil {
			w.Close()
		}
		<-done
		t.Fatalf("hung for more than %v: a reference outside the file was followed", d)
	}
}

// flipTypeSize writes a one-dataset file in the earliest format with the
// package's writer, then sets the stored size of its float64 datatype to
// 0x3d0008 (the damaged file of issue 12). The datatype message layout is
// from the HDF5 File Format Specification, section IV.A.2.d: class and
// version byte 0x11, bit fields 20 3f 00 (little-endian IEEE double),
// then the 4-byte size.
func flipTypeSize(t *testing.T, dir string) string {
	t.Helper()
	p := filepath.Join(dir, "flip.h5")
	f, err := CreateWith(p, CreateOptions{Format: FormatEarliest})
	if err != nil {
		t.Fatal(err)
	}
	w, err := f.CreateDataset("/x", DatasetSpec{Type: Float64, Dims: []int{4}})
	if err != nil {
		t.Fatal(err)
	}
	if err := w.Write([]float64{1, 2, 3, 4}); err != nil {
		t.Fatal(err)
	}
	w.Close()
	f.Close()
	raw, _ := os.ReadFile(p)
	pat := []byte{0x11, 0x20, 0x3f, 0x00, 0x08, 0x00, 0x00, 0x00}
	i := bytes.Index(raw, pat)
	if i < 0 || bytes.Index(raw[i+1:], pat) >= 0 {
		t.Fatalf("want exactly one float64 datatype message in %s", p)
	}
	copy(raw[i+4:], []byte{0x08, 0x00, 0x3d, 0x00})
	if err := os.WriteFile(p, raw, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func TestHostileCorpus(t *testing.T) {
	dir := hostileCorpus(t)
	fifo := filepath.Join(dir, "fifo")
	flip := flipTypeSize(t, dir)
	base := OpenObjects()
	cases := []struct {
		name, file, path string
		check            func(t *testing.T, err error) // on the read error
	}{
		// issue 12 item 1: (2^33, 2^31, 4) crashed export; Shape.Len wrapped.
		{"huge 2^33x2^31x4", "huge_2p33.h5", "/value", wantLimit(true)},
		// issue 12 item 1: (2^32+1, 2^32, 1) crashed validate in ReadRows.
		{"wrap 2^32+1 x 2^32", "wrap_2p32.h5", "/value", wantLimit(true)},
		// issue 12 item 1: (1e12,3,3) ran out of memory.
		{"1e12x3x3", "big_1e12.h5", "/value", wantLimit(false)},
		// issue 12 item 1: (2^62,4,3) panicked in makeslice.
		{"2^62x4x3", "huge_2p62.h5", "/value", wantLimit(true)},
		// issue 12 item 2: external storage on /etc/passwd read as numbers.
		{"external storage passwd", "ext_passwd.h5", "/value", wantOutside("external storage", "/etc/passwd")},
		{"external storage FIFO", "ext_fifo.h5", "/value", wantOutside("external storage", "fifo")},
		{"external link FIFO", "elink.h5", "/particles/all/position", wantOutside("external link", "fifo:/particles/all")},
		{"external link file", "elink.h5", "/data", wantOutside("external link", "other.h5:/data")},
		// issue 12 item 1: a self-sourced virtual dataset crashed three commands.
		{"virtual self", "vds_self.h5", "/vds", wantOutside("virtual dataset source", ".:/vds")},
		{"virtual other file", "vds_other.h5", "/vds", wantOutside("virtual dataset source", "other.h5:/data")},
		// issue 12 item 1: float datatype size 0x3d0008 crashed three commands.
		{"datatype size 0x3d0008", flip, "/x", wantErr(ErrUnsupportedType)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := c.file
			if !filepath.IsAbs(p) {
				p = filepath.Join(dir, p)
			}
			within(t, 10*time.Second, fifo, func() {
				f, err := Open(p)
				if err != nil {
					t.Fatalf("open: %v", err)
				}
				defer f.Close()
				v, _, err := f.ReadFloat64(c.path)
				if err == nil {
					t.Fatalf("read %d values, want an error", len(v))
				}
				c.check(t, err)
				if _, err := f.ReadRows(c.path, Shape{Rank: 1, Dims: []int{1}}, 0, 1); err == nil {
					t.Error("ReadRows succeeded")
				}
				if _, _, err := f.ReadInt64(c.path); err == nil {
					t.Error("ReadInt64 succeeded")
				}
				walk(f, "/", 0, map[ObjectID]bool{})
			})
		})
	}
	if n := OpenObjects(); n != base {
		t.Errorf("after the corpus: %d open identifiers, want %d", n, base)
	}
}

func wantLimit(overflow bool) func(*testing.T, error) {
	return func(t *testing.T, err error) {
		t.Helper()
		var le *LimitError
		if !errors.As(err, &le) || !errors.Is(err, ErrTooLarge) || le.Overflow != overflow {
			t.Fatalf("err = %v, want *LimitError with Overflow=%v", err, overflow)
		}
	}
}

func wantOutside(kind, target string) func(*testing.T, error) {
	return func(t *testing.T, err error) {
		t.Helper()
		var ee *ExternalError
		if !errors.As(err, &ee) || !errors.Is(err, ErrOutside) || ee.Kind != kind || ee.Target != target {
			t.Fatalf("err = %#v (%v), want *ExternalError kind %q target %q", err, err, kind, target)
		}
	}
}

func wantErr(cause error) func(*testing.T, error) {
	return func(t *testing.T, err error) {
		t.Helper()
		var he *Error
		if !errors.As(err, &he) || !errors.Is(err, cause) {
			t.Fatalf("err = %v, want *Error with %v", err, cause)
		}
	}
}

// walk visits every object once: links, kinds, attributes and, for
// datasets, description and data. Errors are expected on hostile files;
// only crashes and hangs fail.
func walk(f *File, path string, depth int, seen map[ObjectID]bool) int {
	if depth > 16 || len(seen) > 500 {
		return 0
	}
	n := 1
	if id, err := f.ObjectID(path); err == nil {
		if seen[id] {
			return 0
		}
		seen[id] = true
	}
	names, _ := f.AttrNames(path)
	for _, a := range names {
		f.Attr(path, a)
	}
	switch f.Kind(path) {
	case Group:
		links, _ := f.Links(path)
		for _, l := range links {
			child := strings.TrimSuffix(path, "/") + "/" + l
			n += walk(f, child, depth+1, seen)
		}
	case Dataset:
		info, err := f.Info(path)
		if err == nil {
			switch info.Type.Class {
			case ClassString:
				f.ReadStrings(path)
			case ClassInt:
				f.ReadInt64(path)
			default:
				f.ReadFloat64(path)
			}
			if info.Shape.Rank > 0 && info.Shape.Dims[0] > 0 {
				f.ReadRows(path, info.Shape, 0, 1)
			}
		}
	}
	return n
}

// TestAllowExternalDir: the opt-in follows references to regular files
// inside the folder and still refuses FIFOs and names leaving it.
func TestAllowExternalDir(t *testing.T) {
	dir := hostileCorpus(t)
	fifo := filepath.Join(dir, "fifo")
	open := func(name string) *File {
		f, err := OpenWith(filepath.Join(dir, name), OpenOptions{AllowExternalDir: dir})
		if err != nil {
			t.Fatal(err)
		}
		return f
	}
	within(t, 10*time.Second, fifo, func() {
		f := open("elink.h5")
		defer f.Close()
		// other.h5 holds /data = 0, 1, 2, 3 (testdata/hostile.py).
		v, _, err := f.ReadFloat64("/data")
		if err != nil || len(v) != 4 || v[3] != 3 {
			t.Errorf("allowed external link: %v %v", v, err)
		}
		_, _, err = f.ReadFloat64("/particles/all/position")
		wantOutside("external link", "fifo:/particles/all")(t, err)
		g := open("ext_fifo.h5")
		defer g.Close()
		_, _, err = g.ReadFloat64("/value")
		wantOutside("external storage", "fifo")(t, err)
		h := open("ext_passwd.h5")
		defer h.Close()
		_, _, err = h.ReadFloat64("/value")
		wantOutside("external storage", "/etc/passwd")(t, err)
		v2 := open("vds_other.h5")
		defer v2.Close()
		v, _, err = v2.ReadFloat64("/vds")
		if err != nil || len(v) != 4 || v[2] != 2 {
			t.Errorf("allowed virtual source: %v %v", v, err)
		}
		v3 := open("vds_self.h5")
		defer v3.Close()
		_, _, err = v3.ReadFloat64("/vds")
		wantOutside("virtual dataset source", ".:/vds")(t, err)
	})
}

// TestOpenImageNoProbe: issue 12 item 2, the in-memory driver probed
// ./file_image_N; a FIFO of that name hung and a regular file failed a
// pristine bag. Both kinds are planted in the working folder.
func TestOpenImageNoProbe(t *testing.T) {
	path := filepath.Join(t.TempDir(), "img.h5")
	build(t, path)
	raw, _ := os.ReadFile(path)
	cwd, _ := os.Getwd()
	tmp := t.TempDir()
	if err := os.Chdir(tmp); err != nil {
		t.Fatal(err)
	}
	defer os.Chdir(cwd)
	for i := 0; i < 8; i++ {
		if err := syscall.Mkfifo(filepath.Join(tmp, "file_image_"+string(rune('0'+i))), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	for _, n := range []string{"file_image_8", "file_image_9", "img.h5", strings.Repeat("m", 255)} {
		os.WriteFile(filepath.Join(tmp, n), raw, 0o644)
	}
	within(t, 10*time.Second, filepath.Join(tmp, "file_image_0"), func() {
		for i := 0; i < 12; i++ {
			f, err := OpenImage("img.h5", raw)
			if err != nil {
				t.Fatalf("image %d: %v", i, err)
			}
			if x, _, err := f.ReadFloat64("/a/b/x"); err != nil || len(x) != 6 {
				t.Errorf("image %d: x = %v %v", i, x, err)
			}
			f.Close()
		}
	})
}

// TestMutants opens byte-flipped copies of small valid files, written in
// each of the three formats, as images and walks and reads everything:
// errors are fine, crashes and hangs not. Seeded, so a failure names a
// reproducible mutant; TRAJVAULT_MUTANTS sets the count per format and
// TRAJVAULT_MUTANT_DUMP a file that holds the mutant being walked.
func TestMutants(t *testing.T) {
	n := 150
	if testing.Short() {
		n = 50
	}
	if v, err := strconv.Atoi(os.Getenv("TRAJVAULT_MUTANTS")); err == nil && v > 0 {
		n = v
	}
	base := OpenObjects()
	for _, form := range []Format{FormatEarliest, Format18, Format110} {
		src := filepath.Join(t.TempDir(), "m.h5")
		buildFmt(t, src, CreateOptions{Format: form})
		raw, _ := os.ReadFile(src)
		rng := rand.New(rand.NewSource(int64(12 + form)))
		opened, visited := 0, 0
		for i := 0; i < n; i++ {
			img := bytes.Clone(raw)
			for k := 0; k < 1+rng.Intn(4); k++ {
				img[8+rng.Intn(len(img)-8)] ^= byte(1 + rng.Intn(255))
			}
			if d := os.Getenv("TRAJVAULT_MUTANT_DUMP"); d != "" {
				os.WriteFile(d, img, 0o644)
			}
			f, err := OpenImageWith("mutant.h5", img, OpenOptions{MaxReadBytes: 1 << 20})
			if err != nil {
				continue
			}
			opened++
			visited += walk(f, "/", 0, map[ObjectID]bool{})
			f.Close()
		}
		t.Logf("format %d: %d mutants, %d opened, %d objects visited", form, n, opened, visited)
		if opened == 0 {
			t.Errorf("format %d: no mutant opened: the loop tests nothing", form)
		}
	}
	if got := OpenObjects(); got != base {
		t.Errorf("after mutants: %d open identifiers, want %d", got, base)
	}
}
