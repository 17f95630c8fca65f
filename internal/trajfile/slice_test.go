package trajfile_test

// Window against h5py: a file written by h5py (Debian python3-h5py) holds
// the same kind of element stored contiguously, in chunks of one frame,
// of 7 frames x 2 atoms with gzip, and in one chunk larger than the
// dataset; Window must return exactly what h5py's indexing returns for
// dense, strided and irregular frame lists with atom and state picks.

import (
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
)

const windowWriter = `
import sys, h5py, numpy as np
T, N = 200, 4
rng = np.random.default_rng(5)
with h5py.File(sys.argv[1], "w") as f:
    p = f.create_group("particles/all")
    pos = p.create_group("position")
    pos["step"] = np.int64(1)
    pos["step"].attrs["offset"] = np.int64(0)
    pos["time"] = 0.5
    pos["time"].attrs["unit"] = "fs"
    pos["time"].attrs["offset"] = 0.0
    v = pos.create_dataset("value", data=rng.standard_normal((T, N, 3)), chunks=(7, 2, 3), compression="gzip")
    v.attrs["unit"] = "angstrom"
    p["species"] = np.array([6, 1, 1, 8], dtype="i4")
    p["mass"] = np.array([12.011, 1.008, 1.008, 15.999])
    p["mass"].attrs["unit"] = "u"
    for name, chunks in (("contiguous", None), ("one_frame", (1, N, 3)), ("larger", (512, N, 3))):
        g = f.create_group("observables/" + name)
        g["step"] = pos["step"]
        g["time"] = pos["time"]
        kw = {"maxshape": (None, N, 3)} if chunks and chunks[0] > T else {}
        g.create_dataset("value", data=rng.standard_normal((T, N, 3)), chunks=chunks, **kw)
    g = f.create_group("observables/pairs")
    g["step"] = pos["step"]
    g["time"] = pos["time"]
    g.create_dataset("value", data=rng.standard_normal((T, 3, 3)), chunks=(16, 3, 3))
`

const windowReader = `
import sys, json, h5py, numpy as np
cases = json.load(open(sys.argv[2]))
out = []
with h5py.File(sys.argv[1], "r") as f:
    for c in cases:
        a = f[c["path"] + "/value"][c["frames"]]  # h5py: increasing index list
        for d, k in enumerate(c["keep"] or []):
            if k is not None:
                a = np.take(a, k, axis=d + 1)
        out.append([float(x) for x in a.reshape(-1)])
print(json.dumps(out))
`

func TestWindowMatchesH5py(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "w.h5")
	if out, err := exec.Command(testenv.Python(), "-c", windowWriter, path).CombinedOutput(); err != nil {
		t.Fatalf("h5py writer: %v\n%s", err, out)
	}
	r, err := trajfile.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	rng := func(a, b, s int) []int {
		var out []int
		for i := a; i < b; i += s {
			out = append(out, i)
		}
		return out
	}
	type wcase struct {
		Path   string  `json:"path"`
		Frames []int   `json:"frames"`
		Keep   [][]int `json:"keep"`
	}
	var cases []wcase
	for _, el := range []string{r.Particle(trajfile.Position), "/observables/contiguous", "/observables/one_frame", "/observables/larger"} {
		for _, fr := range [][]int{{0}, {199}, rng(0, 200, 1), rng(3, 190, 5), rng(10, 200, 60), {1, 2, 3, 50, 51, 198}} {
			for _, keep := range [][][]int{nil, {{1, 3}}, {{0}, {2}}, {nil, {0, 2}}} {
				cases = append(cases, wcase{el, fr, keep})
			}
		}
	}
	cases = append(cases, wcase{"/observables/pairs", rng(5, 100, 3), [][]int{{0, 2}, {0, 2}}})
	spec := filepath.Join(dir, "cases.json")
	b, _ := json.Marshal(cases)
	os.WriteFile(spec, b, 0o644)
	cmd := exec.Command(testenv.Python(), "-c", windowReader, path, spec)
	var stderr strings.Builder
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("h5py reader: %v\n%s", err, stderr.String())
	}
	var want [][]float64
	if err := json.Unmarshal(out, &want); err != nil {
		t.Fatal(err)
	}
	for i, c := range cases {
		e, err := r.Element(c.Path)
		if err != nil || e == nil {
			t.Fatalf("%s: %v", c.Path, err)
		}
		got, err := r.Window(e, c.Frames, c.Keep)
		if err != nil {
			t.Fatalf("%s %v %v: %v", c.Path, c.Frames, c.Keep, err)
		}
		if len(got) != len(want[i]) {
			t.Fatalf("%s frames %v keep %v: %d values, h5py %d", c.Path, c.Frames, c.Keep, len(got), len(want[i]))
		}
		for k := range got {
			if got[k] != want[i][k] {
				t.Fatalf("%s frames %v keep %v: value %d = %v, h5py %v", c.Path, c.Frames, c.Keep, k, got[k], want[i][k])
			}
		}
	}
}

// TestWindowRejectsBadIndices: misuse is an error, never a wrong read.
func TestWindowRejectsBadIndices(t *testing.T) {
	path := filepath.Join(t.TempDir(), "w.h5")
	if out, err := exec.Command(testenv.Python(), "-c", windowWriter, path).CombinedOutput(); err != nil {
		t.Fatalf("h5py writer: %v\n%s", err, out)
	}
	r, err := trajfile.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	e, _ := r.Element(r.Particle(trajfile.Position))
	for _, c := range []struct {
		frames []int
		keep   [][]int
	}{
		{[]int{200}, nil},
		{[]int{-1}, nil},
		{[]int{5, 5}, nil},
		{[]int{6, 5}, nil},
		{[]int{0}, [][]int{{4}}},
		{[]int{0}, [][]int{{1, 0}}},
		{[]int{0}, [][]int{nil, {3}}},
		{[]int{0}, [][]int{nil, nil, nil}},
	} {
		if _, err := r.Window(e, c.frames, c.keep); err == nil {
			t.Errorf("frames %v keep %v: no error", c.frames, c.keep)
		}
	}
}

// TestWindowReadsOnlyItsChunks: with a checksum on every chunk (HDF5's
// Fletcher-32 filter), a damaged chunk outside the window must not stop
// the read, and one inside it must: proof that Window reads only the
// chunks holding the selected frames.
func TestWindowReadsOnlyItsChunks(t *testing.T) {
	const writer = `
import sys, h5py, numpy as np
T, N = 200, 4
with h5py.File(sys.argv[1], "w") as f:
    p = f.create_group("particles/all")
    pos = p.create_group("position")
    pos["step"] = np.int64(1)
    pos["step"].attrs["offset"] = np.int64(0)
    pos["time"] = 0.5
    pos["time"].attrs["unit"] = "fs"
    pos["time"].attrs["offset"] = 0.0
    v = pos.create_dataset("value", data=np.arange(T * N * 3, dtype="f8").reshape(T, N, 3), chunks=(10, N, 3), fletcher32=True)
    v.attrs["unit"] = "angstrom"
    p["species"] = np.array([6, 1, 1, 8], dtype="i4")
    p["mass"] = np.array([12.011, 1.008, 1.008, 15.999])
    p["mass"].attrs["unit"] = "u"
    print(v.id.get_chunk_info_by_coord((150, 0, 0)).byte_offset)
`
	path := filepath.Join(t.TempDir(), "w.h5")
	out, err := exec.Command(testenv.Python(), "-c", writer, path).Output()
	if err != nil {
		t.Fatalf("h5py writer: %v", err)
	}
	var off int64
	if _, err := fmt.Sscan(string(out), &off); err != nil || off <= 0 {
		t.Fatalf("chunk offset %q: %v", out, err)
	}
	fh, err := os.OpenFile(path, os.O_RDWR, 0)
	if err != nil {
		t.Fatal(err)
	}
	fh.WriteAt([]byte{0xde, 0xad, 0xbe, 0xef}, off+16) // inside frames 150..159
	fh.Close()
	r, err := trajfile.OpenReader(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	e, _ := r.Element(r.Particle(trajfile.Position))
	seq := func(a, b, s int) []int {
		var out []int
		for i := a; i < b; i += s {
			out = append(out, i)
		}
		return out
	}
	for _, fr := range [][]int{seq(0, 150, 1), seq(160, 200, 1), seq(0, 200, 20), {149, 160}} {
		v, err := r.Window(e, fr, nil)
		if err != nil {
			t.Errorf("frames %v..%v avoid the damaged chunk, but: %v", fr[0], fr[len(fr)-1], err)
			continue
		}
		if v[0] != float64(fr[0]*12) {
			t.Errorf("frame %d starts with %v, want %d", fr[0], v[0], fr[0]*12)
		}
	}
	for _, fr := range [][]int{{155}, seq(100, 200, 1), seq(0, 200, 5)} {
		if _, err := r.Window(e, fr, nil); err == nil {
			t.Errorf("frames %v..%v include the damaged chunk, yet the read succeeded", fr[0], fr[len(fr)-1])
		}
	}
}
