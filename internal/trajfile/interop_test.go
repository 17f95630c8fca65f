package trajfile_test

// Independent read-back: files written by trajvault are read by two
// general-purpose HDF5 readers that share no code with it beyond the C
// library: h5py (Debian python3-h5py, 3.7.0 on Debian 12) and the HDF5
// command-line tools h5dump/h5ls (Debian hdf5-tools, 1.10.8 on Debian 12).
// Shapes, dtypes, attribute values and the bytes of every dataset must
// agree exactly. The versions found are logged.

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/h5"
	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
)

func demoFile(t *testing.T) string {
	t.Helper()
	p := filepath.Join(t.TempDir(), "run.h5")
	o := demo.DefaultOptions
	o.Steps = 300
	if err := demo.WriteH5(p, o); err != nil {
		t.Fatal(err)
	}
	return p
}

type object struct {
	Kind     string         `json:"kind"`
	DType    string         `json:"dtype,omitempty"`
	Shape    []int          `json:"shape,omitempty"`
	MaxShape []int          `json:"maxshape,omitempty"`
	SHA256   string         `json:"sha256,omitempty"`
	Attrs    map[string]any `json:"attrs"`
}

// ours describes the file as trajvault's HDF5 layer reads it, in the form
// of testdata/interop/h5py_dump.py.
func ours(t *testing.T, path string) map[string]object {
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	out := map[string]object{}
	var walk func(p string)
	walk = func(p string) {
		o := object{Attrs: map[string]any{}}
		names, _ := f.AttrNames(p)
		for _, n := range names {
			a, err := f.Attr(p, n)
			if err != nil {
				t.Fatal(err)
			}
			var v any
			switch {
			case a.Strings != nil:
				v = a.Strings
			case a.Ints != nil:
				v = a.Ints
			case a.Floats != nil:
				v = a.Floats
			}
			if a.Shape.Rank == 0 {
				v = reflect.ValueOf(v).Index(0).Interface()
			}
			o.Attrs[n] = v
		}
		switch f.Kind(p) {
		case h5.Group:
			o.Kind = "group"
			out[p] = o
			links, _ := f.Links(p)
			for _, l := range links {
				walk(strings.TrimSuffix(p, "/") + "/" + l)
			}
		case h5.Dataset:
			info, _ := f.Info(p)
			o.Kind = "dataset"
			o.DType = info.Type.String()
			o.Shape = info.Shape.Dims
			if o.Shape == nil {
				o.Shape = []int{}
			}
			o.MaxShape = info.Shape.MaxDims
			if o.MaxShape == nil {
				o.MaxShape = []int{}
			}
			o.SHA256 = hex.EncodeToString(rawHash(t, f, p, info))
			out[p] = o
		}
	}
	walk("/")
	return out
}

// rawBytes re-encodes the values read by trajvault in the stored
// little-endian type, so that equality of hashes means bit-for-bit
// equality of data.
func rawBytes(t *testing.T, f *h5.File, p string, info h5.DatasetInfo) []byte {
	var buf bytes.Buffer
	switch info.Type.Class {
	case h5.ClassFloat:
		v, _, err := f.ReadFloat64(p)
		if err != nil {
			t.Fatal(err)
		}
		for _, x := range v {
			if info.Type.Size == 4 {
				binary.Write(&buf, binary.LittleEndian, math.Float32bits(float32(x)))
			} else {
				binary.Write(&buf, binary.LittleEndian, math.Float64bits(x))
			}
		}
	case h5.ClassInt:
		v, _, err := f.ReadInt64(p)
		if err != nil {
			t.Fatal(err)
		}
		for _, x := range v {
			var b [8]byte
			binary.LittleEndian.PutUint64(b[:], uint64(x))
			buf.Write(b[:info.Type.Size])
		}
	default:
		t.Fatalf("%s: unexpected class %v", p, info.Type.Class)
	}
	return buf.Bytes()
}

func rawHash(t *testing.T, f *h5.File, p string, info h5.DatasetInfo) []byte {
	s := sha256.Sum256(rawBytes(t, f, p, info))
	return s[:]
}

// normalise round-trips through JSON so numbers compare as float64.
func normalise(t *testing.T, v any) any {
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	var out any
	json.Unmarshal(b, &out)
	return out
}

func TestH5pyReadsOurFiles(t *testing.T) {
	path := demoFile(t)
	cmd := exec.Command(testenv.Python(), testenv.Repo("testdata", "interop", "h5py_dump.py"), path)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("h5py reader failed (install python3-h5py; make test does): %v\n%s", err, stderr.String())
	}
	var theirs struct {
		H5py    string            `json:"h5py"`
		HDF5    string            `json:"hdf5"`
		Objects map[string]object `json:"objects"`
	}
	if err := json.Unmarshal(out, &theirs); err != nil {
		t.Fatal(err)
	}
	t.Logf("reference reader: h5py %s over HDF5 %s", theirs.H5py, theirs.HDF5)
	mine := ours(t, path)
	if len(mine) != len(theirs.Objects) {
		t.Errorf("trajvault sees %d objects, h5py %d", len(mine), len(theirs.Objects))
	}
	for p, o := range mine {
		th, ok := theirs.Objects[p]
		if !ok {
			t.Errorf("%s: not seen by h5py", p)
			continue
		}
		if o.Kind == "dataset" {
			if o.DType != th.DType || !reflect.DeepEqual(o.Shape, th.Shape) || !reflect.DeepEqual(o.MaxShape, th.MaxShape) {
				t.Errorf("%s: trajvault %s %v/%v, h5py %s %v/%v", p, o.DType, o.Shape, o.MaxShape, th.DType, th.Shape, th.MaxShape)
			}
			if o.SHA256 != th.SHA256 {
				t.Errorf("%s: data differ (sha256 %s vs %s)", p, o.SHA256[:12], th.SHA256[:12])
			}
		}
		if a, b := normalise(t, o.Attrs), normalise(t, th.Attrs); !reflect.DeepEqual(a, b) {
			t.Errorf("%s: attributes differ:\n trajvault %v\n h5py      %v", p, a, b)
		}
	}
}

func tool(t *testing.T, name string) string {
	p, err := exec.LookPath(name)
	if err != nil {
		t.Fatalf("%s not found: install Debian hdf5-tools (make test does)", name)
	}
	v, _ := exec.Command(p, "--version").Output()
	t.Logf("reference reader: %s", strings.TrimSpace(string(v)))
	return p
}

func TestH5dumpReadsOurFiles(t *testing.T) {
	path := demoFile(t)
	h5dump := tool(t, "h5dump")
	f, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	for _, p := range []string{
		"/particles/all/position/value", "/particles/all/position/step", "/particles/all/mass",
		"/particles/all/species", trajfile.Populations + trajfile.Value, trajfile.ActiveState + trajfile.Value, trajfile.HopKind,
	} {
		bin := filepath.Join(t.TempDir(), "out.bin")
		// -b LE: raw little-endian binary of the dataset (HDF5 tools guide).
		if out, err := exec.Command(h5dump, "-b", "LE", "-d", p, "-o", bin, path).CombinedOutput(); err != nil {
			t.Fatalf("h5dump %s: %v\n%s", p, err, out)
		}
		theirs, _ := os.ReadFile(bin)
		info, _ := f.Info(p)
		if mine := rawBytes(t, f, p, info); !bytes.Equal(mine, theirs) {
			t.Errorf("%s: h5dump bytes differ from trajvault's (%d vs %d bytes)", p, len(theirs), len(mine))
		}
	}
	// Header view: types, dataspaces and string attributes as h5dump
	// prints them (DDL of the HDF5 tools).
	out, err := exec.Command(h5dump, "-H", "-A", path).Output()
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{
		`DATASET "value"`, "H5T_IEEE_F64LE", "( 301, 3, 3 ) / ( H5S_UNLIMITED, 3, 3 )",
		`"angstrom"`, `"kJ mol-1 nm-1"`, "STRSIZE H5T_VARIABLE", `(0): 1, 1`, `"trajvault demo"`,
		`(0): "none", "none", "none"`, "H5T_STR_NULLTERM",
	} {
		if !strings.Contains(string(out), want) {
			t.Errorf("h5dump -H -A output lacks %q", want)
		}
	}
}

func TestH5lsListsOurFiles(t *testing.T) {
	path := demoFile(t)
	h5ls := tool(t, "h5ls")
	out, err := exec.Command(h5ls, "-r", path).Output()
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{
		"/particles/all/position/value Dataset {301/Inf, 3, 3}",
		"/particles/all/species   Dataset {3}",
		"/observables/couplings/value Dataset {301/Inf, 2, 2}",
		"/parameters/n_states     Dataset {SCALAR}",
	} {
		if !strings.Contains(string(out), want) {
			t.Errorf("h5ls -r output lacks %q:\n%s", want, out)
		}
	}
}
