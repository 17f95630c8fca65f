package validate

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"trajvault/ingest"
	"trajvault/internal/demo"
	"trajvault/internal/finding"
	"trajvault/internal/h5"
	"trajvault/internal/testenv"
	"trajvault/internal/trajfile"
	"trajvault/schema"
)

// base writes a valid file with the trajectory writer: the demo model,
// 200 steps, which include accepted hops.
func base(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "traj.h5")
	o := demo.DefaultOptions
	o.Seed, o.Steps = 3, 200
	if err := demo.WriteH5(path, o); err != nil {
		t.Fatal(err)
	}
	return path
}

// converted makes a valid file the way a deposit's files are made: demo
// text logs converted by ingest with the demo recipe, so that it carries
// a provenance record.
func converted(t *testing.T) string {
	t.Helper()
	rc, err := ingest.LoadRecipe(testenv.Repo("testdata", "recipes", "tarnol.yaml"))
	mustDo(t, err)
	dir := filepath.Join(t.TempDir(), "traj-001")
	o := demo.LogOptions{Options: demo.DefaultOptions, Decimals: 8}
	o.Steps = 100
	mustDo(t, demo.WriteLogs(dir, o))
	out := filepath.Join(t.TempDir(), "traj.h5")
	_, _, err = ingest.ConvertFiles(context.Background(), []string{dir}, out, ingest.ConvertOptions{Options: ingest.Options{Recipe: rc}, ToolVersion: "test"})
	mustDo(t, err)
	return out
}

// observablesOnly converts a table of energies and states without a
// geometry file (a file with /observables and no /particles).
func observablesOnly(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	var b strings.Builder
	b.WriteString("# step time[fs] Epot[hartree] Ekin[hartree] E_0[hartree] E_1[hartree] state\n")
	for i := 0; i < 50; i++ {
		fmt.Fprintf(&b, "%d %.2f %.8f %.8f %.6f %.6f 0\n", 10*i, 0.5*float64(i), -76.4+1e-5*float64(i), 0.001, -76.4, -76.2)
	}
	mustDo(t, os.WriteFile(filepath.Join(dir, "energies.dat"), []byte(b.String()), 0o644))
	out := filepath.Join(t.TempDir(), "obs.h5")
	_, _, err := ingest.ConvertFiles(context.Background(), []string{dir}, out, ingest.ConvertOptions{ToolVersion: "test"})
	mustDo(t, err)
	return out
}

// extraColumn converts an extended XYZ file with a per-atom column no
// quantity names (tags:I:1), kept as /particles/all/tags.
func extraColumn(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	var b strings.Builder
	for i := 0; i < 20; i++ {
		fmt.Fprintf(&b, "2\nProperties=species:S:1:pos:R:3:tags:I:1 step=%d time=%.1f\nH 0.0 0.0 %.4f 1\nH 0.0 0.0 %.4f 2\n", i, 0.5*float64(i), 0.01*float64(i), 0.74)
	}
	mustDo(t, os.WriteFile(filepath.Join(dir, "geom.xyz"), []byte(b.String()), 0o644))
	out := filepath.Join(t.TempDir(), "tags.h5")
	_, res, err := ingest.ConvertFiles(context.Background(), []string{dir}, out, ingest.ConvertOptions{ToolVersion: "test", Options: ingest.Options{Units: map[string]string{"position": "angstrom", "time": "fs"}}})
	mustDo(t, err)
	if res.Storage["tags"] == "" {
		t.Fatalf("tags not stored: %v", res.Storage)
	}
	return out
}

// editRecord rewrites the stored provenance JSON text with edit.
func editRecord(edit func(string) string) func(t *testing.T, f *h5.File) {
	return func(t *testing.T, f *h5.File) {
		t.Helper()
		a, err := f.Attr("/parameters", "trajvault_provenance")
		mustDo(t, err)
		mustDo(t, f.SetVarString("/parameters", "trajvault_provenance", edit(a.Strings[0])))
	}
}

// pyRun runs a Python script with Debian's h5py and returns its output.
func pyRun(t *testing.T, script string, args ...string) string {
	t.Helper()
	out, err := exec.Command(testenv.Python(), append([]string{"-c", script}, args...)...).CombinedOutput()
	if err != nil {
		t.Fatalf("python (install python3-h5py; make test does): %v\n%s", err, out)
	}
	return string(out)
}

func mustDo(t *testing.T, err error) {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
}

// rewrite replaces a numeric dataset by edit(values), same shape unless
// edit says otherwise, keeping its unit attribute.
func rewrite(t *testing.T, f *h5.File, path string, typ h5.DType, edit func(v []float64, dims []int) ([]float64, []int)) {
	t.Helper()
	v, shape, err := f.ReadFloat64(path)
	mustDo(t, err)
	unit := ""
	if a, err := f.Attr(path, "unit"); err == nil && len(a.Strings) == 1 {
		unit = a.Strings[0]
	}
	v, dims := edit(v, shape.Dims)
	mustDo(t, f.Delete(path))
	create(t, f, path, typ, dims, v)
	if unit != "" {
		mustDo(t, f.SetVarString(path, "unit", unit))
	}
}

func create(t *testing.T, f *h5.File, path string, typ h5.DType, dims []int, v []float64) {
	t.Helper()
	w, err := f.CreateDataset(path, h5.DatasetSpec{Type: typ, Dims: dims})
	mustDo(t, err)
	switch typ {
	case h5.Float64:
		mustDo(t, w.Write(v))
	default:
		iv := make([]int64, len(v))
		for i, x := range v {
			iv[i] = int64(x)
		}
		mustDo(t, w.Write(iv))
	}
	mustDo(t, w.Close())
}

func same(v []float64, d []int) ([]float64, []int) { return v, d }

// ownClock gives element e its own copies of step and time (replacing the
// hard links), edited by editStep/editTime.
func ownClock(t *testing.T, f *h5.File, e string, editStep, editTime func([]float64)) {
	t.Helper()
	st, _, _ := f.ReadFloat64(e + "/step")
	tm, _, _ := f.ReadFloat64(e + "/time")
	mustDo(t, f.Delete(e+"/step"))
	mustDo(t, f.Delete(e+"/time"))
	if editStep != nil {
		editStep(st)
	}
	if editTime != nil {
		editTime(tm)
	}
	create(t, f, e+"/step", h5.Int64, []int{len(st)}, st)
	create(t, f, e+"/time", h5.Float64, []int{len(tm)}, tm)
	mustDo(t, f.SetString(e+"/time", "unit", "fs"))
}

// TestWriterOutputIsClean: what trajvault writes passes every rule. The
// trajectory writer alone (the demo model) records no provenance, which is
// noted (R1) and nothing else; a file converted from logs carries its
// record and gives no finding at all.
func TestWriterOutputIsClean(t *testing.T) {
	sch, err := schema.FindingsSchema()
	mustDo(t, err)
	for _, c := range []struct {
		name  string
		make  func(*testing.T) string
		notes []string
	}{
		{"trajectory writer", base, []string{"R1"}},
		{"converted from logs", converted, nil},
		// No /particles: H5MD 1.1.0, "General organization", makes only
		// the h5md group mandatory at the root (V41 stays quiet).
		{"observables only", observablesOnly, nil},
		// Unknown per-atom columns kept as extra particle elements.
		{"extra per-atom column", extraColumn, nil},
	} {
		t.Run(c.name, func(t *testing.T) {
			rep, err := File(c.make(t), Options{ToolVersion: "test"})
			if err != nil {
				t.Fatal(err)
			}
			var notes []string
			for _, f := range rep.Findings {
				if f.Severity != finding.Note {
					t.Error(f)
					continue
				}
				notes = append(notes, f.Code)
			}
			if fmt.Sprint(notes) != fmt.Sprint(c.notes) {
				t.Errorf("notes %v, want %v", notes, c.notes)
			}
			// The JSON form must match the published findings schema.
			raw, _ := json.Marshal(rep)
			var doc any
			json.Unmarshal(raw, &doc)
			if err := sch.Validate(doc); err != nil {
				t.Errorf("report does not match findings.schema.json: %v", err)
			}
		})
	}
}

const (
	pg   = "/particles/all"
	obs  = "/observables"
	hops = trajfile.HopsGroup
)

// TestRules: one fixture per rule, each breaking exactly that rule of a
// valid file; the test asserts the code and its severity.
func TestRules(t *testing.T) {
	cases := []struct {
		code   string
		sev    finding.Severity
		name   string
		mutate func(t *testing.T, f *h5.File)
		// from makes the valid file to break; nil means base.
		from func(t *testing.T) string
	}{
		{"V1", finding.Error, "no h5md group", func(t *testing.T, f *h5.File) { mustDo(t, f.Delete("/h5md")) }, nil},
		{"V2", finding.Error, "version 2.0", func(t *testing.T, f *h5.File) { mustDo(t, f.SetInts("/h5md", "version", []int32{2, 0}, false)) }, nil},
		{"V2", finding.Error, "version not int[2]", func(t *testing.T, f *h5.File) { mustDo(t, f.SetInts("/h5md", "version", []int32{1}, true)) }, nil},
		{"V3", finding.Error, "creator version missing", func(t *testing.T, f *h5.File) { mustDo(t, f.DeleteAttr("/h5md/creator", "version")) }, nil},
		{"V3", finding.Error, "author name not a string", func(t *testing.T, f *h5.File) { mustDo(t, f.SetInts("/h5md/author", "name", []int32{7}, true)) }, nil},
		{"V39", finding.Warning, "fixed-length author", func(t *testing.T, f *h5.File) { mustDo(t, f.SetString("/h5md/author", "name", "A. Nonymous")) }, nil},
		{"V39", finding.Warning, "fixed-length boundary", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SetStrings(pg+"/box", "boundary", []string{"none", "none", "none"}))
		}, nil},
		{"V38", finding.Warning, "position in Angstrom", func(t *testing.T, f *h5.File) { mustDo(t, f.SetVarString(pg+"/position/value", "unit", "Angstrom")) }, nil},
		{"V38", finding.Warning, "energy in kcal/mol", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SetVarString(obs+"/total_energy/value", "unit", "kcal/mol"))
		}, nil},
		{"V5", finding.Error, "module without version", func(t *testing.T, f *h5.File) { mustDo(t, f.DeleteAttr("/h5md/modules/units", "version")) }, nil},
		{"V6", finding.Error, "element without step", func(t *testing.T, f *h5.File) { mustDo(t, f.Delete(pg+"/velocity/step")) }, nil},
		{"V6", finding.Error, "element without value", func(t *testing.T, f *h5.File) { mustDo(t, f.Delete(obs+"/kinetic_energy/value")) }, nil},
		{"V7", finding.Error, "float step", func(t *testing.T, f *h5.File) {
			rewrite(t, f, obs+"/kinetic_energy/step", h5.Float64, same)
		}, nil},
		{"V7", finding.Error, "step 2-D", func(t *testing.T, f *h5.File) {
			rewrite(t, f, obs+"/kinetic_energy/step", h5.Int64, func(v []float64, d []int) ([]float64, []int) { return v[:d[0]/2*2], []int{d[0] / 2, 2} })
		}, nil},
		{"V8", finding.Error, "short step", func(t *testing.T, f *h5.File) {
			ownClock(t, f, obs+"/kinetic_energy", nil, nil)
			rewrite(t, f, obs+"/kinetic_energy/step", h5.Int64, func(v []float64, d []int) ([]float64, []int) { return v[:10], []int{10} })
		}, nil},
		{"V9", finding.Error, "decreasing step", func(t *testing.T, f *h5.File) {
			ownClock(t, f, obs+"/total_energy", func(s []float64) { s[5], s[6] = s[6], s[5] }, nil)
		}, nil},
		{"V9", finding.Warning, "repeated step", func(t *testing.T, f *h5.File) {
			ownClock(t, f, obs+"/total_energy", func(s []float64) { s[6] = s[5] }, func(tm []float64) { tm[6] = tm[5] })
		}, nil},
		{"V10", finding.Error, "species as a group", func(t *testing.T, f *h5.File) {
			mustDo(t, f.Delete(pg+"/species"))
			mustDo(t, f.CreateGroup(pg+"/species"))
		}, nil},
		{"V11", finding.Error, "box without boundary", func(t *testing.T, f *h5.File) { mustDo(t, f.DeleteAttr(pg+"/box", "boundary")) }, nil},
		{"V11", finding.Error, "bad dimension", func(t *testing.T, f *h5.File) { mustDo(t, f.SetInts(pg+"/box", "dimension", []int32{4}, true)) }, nil},
		{"V12", finding.Error, "periodic without edges", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SetStrings(pg+"/box", "boundary", []string{"periodic", "periodic", "periodic"}))
		}, nil},
		{"V13", finding.Error, "image with copied clock", func(t *testing.T, f *h5.File) {
			st, _, _ := f.ReadFloat64(pg + "/position/step")
			mustDo(t, f.CreateGroup(pg+"/image"))
			create(t, f, pg+"/image/step", h5.Int64, []int{len(st)}, st)
			create(t, f, pg+"/image/value", h5.Int32, []int{len(st), 3, 3}, make([]float64, len(st)*9))
		}, nil},
		{"V14", finding.Error, "velocity with D=2", func(t *testing.T, f *h5.File) {
			rewrite(t, f, pg+"/velocity/value", h5.Float64, func(v []float64, d []int) ([]float64, []int) {
				return v[:d[0]*d[1]*2], []int{d[0], d[1], 2}
			})
		}, nil},
		{"V14", finding.Error, "force with other N", func(t *testing.T, f *h5.File) {
			rewrite(t, f, pg+"/force/value", h5.Float64, func(v []float64, d []int) ([]float64, []int) {
				return v[:d[0]*2*3], []int{d[0], 2, 3}
			})
		}, nil},
		{"V14", finding.Error, "extra per-atom element with other N", func(t *testing.T, f *h5.File) {
			// An element the layout does not name (as convert keeps an
			// unknown per-atom column) still needs N rows per frame.
			info, err := f.Info(pg + "/position/value")
			mustDo(t, err)
			T := info.Shape.Dims[0]
			mustDo(t, f.CreateGroup(pg+"/tags"))
			create(t, f, pg+"/tags/value", h5.Float64, []int{T, 2, 1}, make([]float64, 2*T))
			mustDo(t, f.HardLink(pg+"/position/step", pg+"/tags/step"))
			mustDo(t, f.HardLink(pg+"/position/time", pg+"/tags/time"))
		}, nil},
		{"V15", finding.Error, "integer mass", func(t *testing.T, f *h5.File) { rewrite(t, f, pg+"/mass", h5.Int32, same) }, nil},
		{"V15", finding.Error, "float species", func(t *testing.T, f *h5.File) { rewrite(t, f, pg+"/species", h5.Float64, same) }, nil},
		{"V17", finding.Error, "connectivity index out of range", func(t *testing.T, f *h5.File) {
			create(t, f, "/connectivity/bonds", h5.Int32, []int{2, 2}, []float64{0, 1, 0, 7})
		}, nil},
		{"V18", finding.Error, "unit grammar", func(t *testing.T, f *h5.File) { mustDo(t, f.SetVarString(pg+"/position/value", "unit", "nm nm")) }, nil},
		{"V18", finding.Warning, "unknown symbol", func(t *testing.T, f *h5.File) { mustDo(t, f.SetVarString(pg+"/position/value", "unit", "furlong")) }, nil},
		{"V19", finding.Warning, "units module missing", func(t *testing.T, f *h5.File) { mustDo(t, f.Delete("/h5md/modules/units")) }, nil},
		{"V20", finding.Error, "position without unit", func(t *testing.T, f *h5.File) { mustDo(t, f.DeleteAttr(pg+"/position/value", "unit")) }, nil},
		{"V40", finding.Error, "position in fs", func(t *testing.T, f *h5.File) { mustDo(t, f.SetVarString(pg+"/position/value", "unit", "fs")) }, nil},
		{"V40", finding.Error, "A is the ampere", func(t *testing.T, f *h5.File) { mustDo(t, f.SetVarString(pg+"/position/value", "unit", "A")) }, nil},
		{"V22", finding.Error, "trailing fill frames", func(t *testing.T, f *h5.File) {
			ownClock(t, f, obs+"/kinetic_energy", func(s []float64) {
				for i := len(s) - 3; i < len(s); i++ {
					s[i] = 0
				}
			}, nil)
		}, nil},
		{"V25", finding.Warning, "clock jump", func(t *testing.T, f *h5.File) {
			ownClock(t, f, obs+"/total_energy", nil, func(tm []float64) {
				for i := 100; i < len(tm); i++ {
					tm[i] += 5
				}
			})
		}, nil},
		{"V26", finding.Error, "NaN energy", func(t *testing.T, f *h5.File) {
			rewrite(t, f, obs+"/potential_energy/value", h5.Float64, func(v []float64, d []int) ([]float64, []int) {
				v[len(v)-1] = math.NaN()
				return v, d
			})
		}, nil},
		{"V27", finding.Error, "integer kinetic energy", func(t *testing.T, f *h5.File) { rewrite(t, f, obs+"/kinetic_energy/value", h5.Int64, same) }, nil},
		{"V27", finding.Error, "time step not scalar", func(t *testing.T, f *h5.File) {
			rewrite(t, f, "/parameters/time_step", h5.Float64, func(v []float64, d []int) ([]float64, []int) { return []float64{v[0], v[0]}, []int{2} })
		}, nil},
		{"V29", finding.Warning, "lossy storage stated", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SetFloats(pg+"/velocity/value", "trajvault_tolerance", []float64{5e-7}, true))
		}, nil},
		{"V45", finding.Error, "negative-zero list points outside the data", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SetInt64s(pg+"/position/value", "trajvault_negative_zeros", []int64{3, 1 << 40}, false))
		}, nil},
		{"V45", finding.Error, "negative-zero list names a value that is not zero", func(t *testing.T, f *h5.File) {
			v, _, err := f.ReadFloat64(pg + "/position/value")
			mustDo(t, err)
			k := slices.IndexFunc(v, func(x float64) bool { return x != 0 })
			mustDo(t, f.SetInt64s(pg+"/position/value", "trajvault_negative_zeros", []int64{int64(k)}, false))
		}, nil},
		{"V30", finding.Warning, "dangling soft link", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SoftLink("/observables/nowhere", obs+"/dangling"))
		}, nil},
		{"V31", finding.Warning, "external link (written by h5py)", nil, func(t *testing.T) string {
			// h5py (Debian python3-h5py) adds the link: our layer
			// writes none.
			path := base(t)
			py := "import h5py,sys\nwith h5py.File(sys.argv[1], 'a') as f:\n    f['/observables/elsewhere'] = h5py.ExternalLink('other.h5', '/x')\n"
			pyRun(t, py, path)
			return path
		}},
		{"V41", finding.Error, "no particles group and no observables", func(t *testing.T, f *h5.File) {
			mustDo(t, f.Delete("/particles"))
			mustDo(t, f.Delete("/observables"))
		}, nil},
		{"V32", finding.Error, "particle group is a dataset", func(t *testing.T, f *h5.File) { create(t, f, "/particles/extra", h5.Float64, []int{1}, []float64{0}) }, nil},
		{"V33", finding.Error, "damaged object header", nil, func(t *testing.T) string {
			// h5py (Debian python3-h5py, HDF5 1.10 API) gives the object
			// header's address; its first bytes (version or "OHDR"
			// signature, HDF5 File Format Specification sec. IV.A) are
			// overwritten so the header cannot be decoded.
			path := base(t)
			py := "import h5py,sys\nwith h5py.File(sys.argv[1], 'r') as f:\n    print(getattr(h5py.h5o.get_info(f['/observables/kinetic_energy/value'].id), 'addr', 'none'))\n"
			out := pyRun(t, py, path)
			if strings.TrimSpace(out) == "none" {
				t.Skip("this h5py's HDF5 (1.12 or later) gives object tokens, not addresses")
			}
			var addr int64
			if _, err := fmt.Sscan(out, &addr); err != nil {
				t.Fatalf("address %q: %v", out, err)
			}
			raw, err := os.ReadFile(path)
			mustDo(t, err)
			copy(raw[addr:], []byte{0xff, 0xff, 0xff, 0xff})
			mustDo(t, os.WriteFile(path, raw, 0o644))
			return path
		}},
		{"V34", finding.Error, "species missing", func(t *testing.T, f *h5.File) { mustDo(t, f.Delete(pg+"/species")) }, nil},
		{"V35", finding.Error, "ids repeat in a frame", func(t *testing.T, f *h5.File) {
			st, _, _ := f.ReadFloat64(pg + "/position/step")
			mustDo(t, f.CreateGroup(pg+"/id"))
			mustDo(t, f.HardLink(pg+"/position/step", pg+"/id/step"))
			create(t, f, pg+"/id/value", h5.Int32, []int{len(st), 3}, make([]float64, len(st)*3))
		}, nil},
		{"V37", finding.Error, "bonds without their particle group", func(t *testing.T, f *h5.File) {
			create(t, f, "/connectivity/bonds", h5.Int32, []int{1, 2}, []float64{0, 1})
		}, nil},
		{"V36", finding.Warning, "step with a unit", func(t *testing.T, f *h5.File) { mustDo(t, f.SetString(obs+"/kinetic_energy/step", "unit", "fs")) }, nil},
		{"E1", finding.Error, "module undeclared", func(t *testing.T, f *h5.File) { mustDo(t, f.Delete("/h5md/modules/trajvault_electronic")) }, nil},
		{"E2", finding.Error, "n_states missing", func(t *testing.T, f *h5.File) { mustDo(t, f.Delete("/parameters/n_states")) }, nil},
		{"E3", finding.Error, "n_states disagrees", func(t *testing.T, f *h5.File) {
			rewrite(t, f, "/parameters/n_states", h5.Int32, func(v []float64, d []int) ([]float64, []int) { return []float64{3}, d })
		}, nil},
		{"E4", finding.Error, "active state out of range", func(t *testing.T, f *h5.File) {
			rewrite(t, f, obs+"/active_state/value", h5.Int32, func(v []float64, d []int) ([]float64, []int) { v[3] = 5; return v, d })
		}, nil},
		// Module version 1.0 kept its elements under /observables/electronic;
		// its rules still apply there.
		{"E5", finding.Error, "population above 1, module 1.0 layout", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SetInts(trajfile.OurModule, "version", []int32{1, 0}, false))
			mustDo(t, f.CreateGroup(trajfile.LegacyElectronicGroup))
			for _, p := range []string{trajfile.Populations, trajfile.HopsGroup} {
				old, _ := trajfile.Legacy(p)
				mustDo(t, f.HardLink(p, old))
				mustDo(t, f.Delete(p))
			}
			old, _ := trajfile.Legacy(trajfile.Populations)
			rewrite(t, f, old+"/value", h5.Float64, func(v []float64, d []int) ([]float64, []int) { v[0] = 1.2; return v, d })
		}, nil},
		{"E5", finding.Error, "population above 1", func(t *testing.T, f *h5.File) {
			rewrite(t, f, obs+"/populations/value", h5.Float64, func(v []float64, d []int) ([]float64, []int) { v[0] = 1.2; return v, d })
		}, nil},
		{"E6", finding.Warning, "populations do not sum to 1", func(t *testing.T, f *h5.File) {
			rewrite(t, f, obs+"/populations/value", h5.Float64, func(v []float64, d []int) ([]float64, []int) {
				for i := range v {
					v[i] = 0.3
				}
				return v, d
			})
		}, nil},
		{"E7", finding.Error, "hop kind 2", func(t *testing.T, f *h5.File) {
			rewrite(t, f, hops+"/kind", h5.Int32, func(v []float64, d []int) ([]float64, []int) { v[0] = 2; return v, d })
		}, nil},
		{"E8", finding.Error, "hop outside run", func(t *testing.T, f *h5.File) {
			rewrite(t, f, hops+"/step", h5.Int64, func(v []float64, d []int) ([]float64, []int) { v[len(v)-1] = 99999; return v, d })
		}, nil},
		{"E9", finding.Warning, "symmetric couplings", func(t *testing.T, f *h5.File) {
			rewrite(t, f, obs+"/couplings/value", h5.Float64, func(v []float64, d []int) ([]float64, []int) {
				for i := 0; i < len(v); i += 4 {
					v[i+2] = v[i+1]
				}
				return v, d
			})
		}, nil},
		{"E10", finding.Warning, "state change without hop", func(t *testing.T, f *h5.File) {
			rewrite(t, f, hops+"/kind", h5.Int32, func(v []float64, d []int) ([]float64, []int) {
				for i := range v {
					v[i] = 1
				}
				return v, d
			})
		}, nil},
		{"E11", finding.Error, "module version 1.5", func(t *testing.T, f *h5.File) {
			mustDo(t, f.SetInts("/h5md/modules/trajvault_electronic", "version", []int32{1, 5}, false))
		}, nil},
		{"R1", finding.Note, "provenance removed", func(t *testing.T, f *h5.File) {
			mustDo(t, f.DeleteAttr("/parameters", "trajvault_provenance"))
		}, converted},
		{"R2", finding.Error, "record cut off", editRecord(func(s string) string { return s[:len(s)/2] }), converted},
		{"R2", finding.Error, "sources not a list", editRecord(func(s string) string {
			return strings.Replace(s, `"sources":[`, `"sources":7,"x":[`, 1)
		}), converted},
		{"R3", finding.Error, "sha256 in capitals", editRecord(func(s string) string {
			i := strings.Index(s, `"sha256":"`) + len(`"sha256":"`)
			return s[:i] + strings.ToUpper(s[i:i+64]) + s[i+64:]
		}), converted},
		{"R3", finding.Error, "no sources", editRecord(func(s string) string {
			return regexp.MustCompile(`"sources":\[[^\]]*\]`).ReplaceAllString(s, `"sources":[]`)
		}), converted},
		{"R4", finding.Error, "recipe text removed", editRecord(func(s string) string {
			return regexp.MustCompile(`"recipe":"(\\.|[^"\\])*",`).ReplaceAllString(s, "")
		}), converted},
		{"R5", finding.Error, "position unit disagrees", editRecord(func(s string) string {
			return strings.Replace(s, `"position":"angstrom"`, `"position":"nm"`, 1)
		}), converted},
		{"R5", finding.Error, "energy unit missing", editRecord(func(s string) string {
			return regexp.MustCompile(`"energy":"[^"]*",?`).ReplaceAllString(s, "")
		}), converted},
		{"R6", finding.Error, "tool version empty", editRecord(func(s string) string {
			return regexp.MustCompile(`"tool_version":"[^"]*"`).ReplaceAllString(s, `"tool_version":""`)
		}), converted},
		{"R7", finding.Error, "constant set empty", editRecord(func(s string) string {
			return regexp.MustCompile(`"constant_set":"[^"]*"`).ReplaceAllString(s, `"constant_set":""`)
		}), converted},
	}
	covered := map[string]bool{}
	for _, c := range cases {
		covered[c.code] = true
		t.Run(c.code+" "+c.name, func(t *testing.T) {
			from := c.from
			if from == nil {
				from = base
			}
			path := from(t)
			f, err := h5.OpenRW(path)
			mustDo(t, err)
			if c.mutate != nil {
				c.mutate(t, f)
			}
			mustDo(t, f.Close())
			// The fixtures break trajvault files: every rule applies.
			rep, err := File(path, Options{Profile: ProfileTrajvault})
			if err != nil {
				t.Fatal(err)
			}
			found := false
			for _, fd := range rep.Findings {
				if fd.Code == c.code && fd.Severity == c.sev {
					found = true
				}
			}
			if !found {
				t.Errorf("want %s %s; got:", c.sev, c.code)
				for _, fd := range rep.Findings {
					t.Log(fd)
				}
			}
			if c.sev != finding.Error && rep.Errors > 0 {
				t.Errorf("a warning fixture produced errors:")
				for _, fd := range rep.Findings {
					t.Log(fd)
				}
			}
		})
	}
	for _, code := range Codes {
		if !covered[code] && code != "V28" { // V28: see TestForeignFiles (h5py's lzf filter)
			t.Errorf("rule %s has no fixture", code)
		}
	}
}

// TestCodesDocumented: every code validate can emit is in layout.md.
func TestCodesDocumented(t *testing.T) {
	md := string(schema.LayoutMarkdown())
	for _, code := range append(Codes, BundleCodes...) {
		if !strings.Contains(md, "| "+code+" |") {
			t.Errorf("rule %s is not in the rules table of schema/layout.md", code)
		}
	}
}

func TestUnreadableFiles(t *testing.T) {
	dir := t.TempDir()
	good := base(t)
	raw, _ := os.ReadFile(good)
	files := map[string][]byte{
		"empty.h5":     nil,
		"text.h5":      []byte("3\nwater\nO 0 0 0\n"),
		"truncated.h5": raw[:len(raw)/3],
	}
	for name, b := range files {
		p := filepath.Join(dir, name)
		os.WriteFile(p, b, 0o644)
		if _, err := File(p, Options{}); err == nil {
			t.Errorf("%s: no error", name)
		} else if strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error is not one line: %q", name, err)
		}
	}
}

// TestRepeatsFolded: three bad boundary entries are one V11 finding at
// box@boundary that counts the other two, and the report counts all
// three errors (issue 9: repeats were dropped without a word).
func TestRepeatsFolded(t *testing.T) {
	path := base(t)
	f, err := h5.OpenRW(path)
	mustDo(t, err)
	mustDo(t, f.SetStrings(pg+"/box", "boundary", []string{"x", "y", "z"}))
	mustDo(t, f.Close())
	rep, err := File(path, Options{})
	mustDo(t, err)
	var got []finding.Finding
	for _, fd := range rep.Findings {
		if fd.Code == "V11" {
			got = append(got, fd)
		}
	}
	if len(got) != 1 || got[0].More != 2 || got[0].Path != pg+"/box@boundary" {
		t.Fatalf("V11 findings %+v, want one at %s/box@boundary with 2 more", got, pg)
	}
	if !strings.HasSuffix(got[0].String(), "(and 2 more like this)") {
		t.Errorf("human form lacks the count: %q", got[0].String())
	}
	if rep.Errors != 3 {
		t.Errorf("errors = %d, want 3 (folded ones counted)", rep.Errors)
	}
}

// TestProfilesDocumented: the Profile column of layout.md's rules
// tables names, for every code, the profile RuleProfiles gives it.
func TestProfilesDocumented(t *testing.T) {
	md := string(schema.LayoutMarkdown())
	row := regexp.MustCompile(`(?m)^\| ([VER]\d+) \| [^|]+ \| ([a-z0-9]+) \|`)
	doc := map[string]string{}
	for _, m := range row.FindAllStringSubmatch(md, -1) {
		doc[m[1]] = m[2]
	}
	for _, code := range Codes {
		p, ok := RuleProfiles[code]
		if !ok {
			t.Errorf("%s has no profile in RuleProfiles", code)
			continue
		}
		if doc[code] != string(p) {
			t.Errorf("%s: layout.md says profile %q, the validator %q", code, doc[code], p)
		}
	}
	for code := range RuleProfiles {
		if !slices.Contains(Codes, code) && !slices.Contains(OpenCodes, code) {
			t.Errorf("RuleProfiles names %s, which is not in Codes or OpenCodes", code)
		}
	}
}

// TestModule10Clean: a valid file in the layout of electronic module
// version 1.0 (elements under /observables/electronic) stays valid.
func TestModule10Clean(t *testing.T) {
	path := base(t)
	f, err := h5.OpenRW(path)
	mustDo(t, err)
	mustDo(t, f.SetInts(trajfile.OurModule, "version", []int32{1, 0}, false))
	mustDo(t, f.CreateGroup(trajfile.LegacyElectronicGroup))
	for _, p := range append(append([]string(nil), trajfile.ElectronicElements...), trajfile.HopsGroup) {
		old, _ := trajfile.Legacy(p)
		mustDo(t, f.HardLink(p, old))
		mustDo(t, f.Delete(p))
	}
	mustDo(t, f.Close())
	rep, err := File(path, Options{})
	mustDo(t, err)
	if rep.Profile != string(ProfileTrajvault) || rep.Errors != 0 || rep.Warnings != 0 {
		t.Errorf("profile %s, %d errors, %d warnings; want trajvault and none", rep.Profile, rep.Errors, rep.Warnings)
		for _, f := range rep.Findings {
			t.Log(f)
		}
	}
}
