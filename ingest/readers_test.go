package ingest

import (
	"bufio"
	"context"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"trajvault/internal/textnum"
	"trajvault/internal/trajfile"
)

// toySource reads an invented geometry format, one frame per line:
// "STEP TIME SYMBOL X Y Z [SYMBOL X Y Z ...]". It exists to show what a
// new reader needs: this file's source and a Reader value registered in
// the one list; nothing else in the package changes.
type toySource struct {
	path string
	f    *os.File
	sc   *bufio.Scanner
	line int
	fmts formatSet
}

func (s *toySource) file() string                        { return s.path }
func (s *toySource) provides() map[string]textnum.Format { return s.fmts }
func (s *toySource) timeFormat() textnum.Format          { return s.fmts["time"] }
func (s *toySource) units() map[string]string            { return nil }
func (s *toySource) hops() []hop                         { return nil }
func (s *toySource) close()                              { s.f.Close() }

func (s *toySource) next() (*record, error) {
	for s.sc.Scan() {
		s.line++
		fs := strings.Fields(s.sc.Text())
		if len(fs) == 0 {
			continue
		}
		if len(fs) < 6 || (len(fs)-2)%4 != 0 {
			return nil, &ParseError{File: s.path, Line: s.line, Err: detail(ErrFieldCount, "expected STEP TIME then SYMBOL X Y Z per atom")}
		}
		step, err := strconv.ParseInt(fs[0], 10, 64)
		if err != nil {
			return nil, &ParseError{File: s.path, Line: s.line, Column: 1, Err: detail(ErrNumber, "step %q", fs[0])}
		}
		tm, tf, err := textnum.Parse(fs[1])
		if err != nil {
			return nil, &ParseError{File: s.path, Line: s.line, Err: detail(ErrNumber, "time %q", fs[1])}
		}
		s.fmts.merge("time", tf)
		rec := &record{line: s.line, step: step, hasStep: true, time: tm, hasTime: true}
		var pos []float64
		for i := 2; i < len(fs); i += 4 {
			rec.symbols = append(rec.symbols, fs[i])
			for _, x := range fs[i+1 : i+4] {
				v, f, err := textnum.Parse(x)
				if err != nil {
					return nil, &ParseError{File: s.path, Line: s.line, Err: detail(ErrNumber, "coordinate %q", x)}
				}
				s.fmts.merge("position", f)
				pos = append(pos, v)
			}
		}
		rec.atoms = []atomColumn{{quantity: "position", values: pos}}
		return rec, nil
	}
	if err := s.sc.Err(); err != nil {
		return nil, err
	}
	return nil, io.EOF
}

var toyFormat = Reader{
	Kind: "toy", Role: RoleGeometry, Extensions: []string{".toy"}, ProvenanceRole: "geometry",
	Open: func(path string, _ any, _ *Recipe) (source, error) {
		f, err := os.Open(path)
		if err != nil {
			return nil, err
		}
		return &toySource{path: path, f: f, sc: bufio.NewScanner(f), fmts: formatSet{}}, nil
	},
}

// TestToyReader registers a toy geometry reader at the one registration
// point and converts a trajectory whose geometry is in that format, with
// an energy table joined by step. The table sorts first (readers open in
// registration order), so this also shows that the geometry is found by
// its role, not by position or format name.
func TestToyReader(t *testing.T) {
	defer register(&toyFormat)()
	dir := filepath.Join(t.TempDir(), "toy-run")
	os.MkdirAll(dir, 0o755)
	// H2 near its bond length 0.741 angstrom (NIST CCCBDB, from memory);
	// the values only need to come back as printed.
	os.WriteFile(filepath.Join(dir, "run.toy"), []byte("0 0.0 H 0.000 0.000 0.000 H 0.000 0.000 0.741\n10 5.0 H 0.000 0.000 0.010 H 0.000 0.000 0.751\n"), 0o644)
	os.WriteFile(filepath.Join(dir, "energies.dat"), []byte("# step Etot[hartree]\n0 -1.17447\n10 -1.17440\n"), 0o644)
	out := filepath.Join(t.TempDir(), "toy.h5")
	rep, res, err := ConvertFiles(context.Background(), []string{dir}, out,
		ConvertOptions{Options: Options{Units: map[string]string{"position": "angstrom", "time": "fs"}}})
	if err != nil {
		if rep != nil {
			t.Logf("%+v", rep.Problems)
		}
		t.Fatal(err)
	}
	if res.Frames != 2 || rep.Atoms != 2 || rep.Files[0].Format != KindTable || rep.Files[1].Format != "toy" {
		t.Fatalf("frames %d atoms %d files %s, %s", res.Frames, rep.Atoms, rep.Files[0].Format, rep.Files[1].Format)
	}
	r, err := trajfile.OpenReader(out)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	pos, _, err := r.Values(r.Particle(trajfile.Position), "angstrom")
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{0, 0, 0, 0, 0, 0.741, 0, 0, 0.010, 0, 0, 0.751}
	for i := range want {
		if d := pos[i] - want[i]; d > 1e-9 || d < -1e-9 || len(pos) != len(want) {
			t.Fatalf("positions %v, want %v", pos, want)
		}
	}
	etot, _, err := r.Values(trajfile.TotalEnergy, "hartree")
	if err != nil || len(etot) != 2 || etot[1] > -1.174395 || etot[1] < -1.174405 {
		t.Errorf("total energy %v (%v), want [-1.17447 -1.17440]", etot, err)
	}
}

// readerFiles are the files adding a reader touches besides its tests.
var readerFiles = []string{"ingest/FORMAT.go", "ingest/readers.go", "Makefile"}

// TestAddReaderDocumented: DEVELOPERS.md, "How to add a reader", names
// exactly the files a reader touches (TestToyReader shows they suffice)
// and none of the files that used to need changes.
func TestAddReaderDocumented(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("..", "DEVELOPERS.md"))
	if err != nil {
		t.Fatal(err)
	}
	doc := string(b)
	i := strings.Index(doc, "## How to add a reader")
	if i < 0 {
		t.Fatal("DEVELOPERS.md has no section \"How to add a reader\"")
	}
	sec := doc[i+3:]
	if j := strings.Index(sec, "\n## "); j >= 0 {
		sec = sec[:j]
	}
	for _, f := range readerFiles {
		if !strings.Contains(sec, "`"+f+"`") {
			t.Errorf("the section does not name `%s`", f)
		}
	}
	for _, f := range []string{"scan.go", "convert.go", "discover.go", "source.go"} {
		if strings.Contains(sec, f) {
			t.Errorf("the section says to change %s; a reader must not need it", f)
		}
	}
}

// TestNoFormatSwitches: scan, convert and discover know formats only
// through Reader: no assertions to a concrete source type, no format
// names compared, no geometry taken by position.
func TestNoFormatSwitches(t *testing.T) {
	bad := regexp.MustCompile(`\.\(\*\w+Source\)|Format == "|Kind == "|Files\[0\]|== "xyz"`)
	files, _ := filepath.Glob("*.go")
	for _, f := range files {
		if strings.HasSuffix(f, "_test.go") {
			continue
		}
		b, _ := os.ReadFile(f)
		for n, line := range strings.Split(string(b), "\n") {
			if bad.MatchString(line) {
				t.Errorf("%s:%d: %s", f, n+1, strings.TrimSpace(line))
			}
		}
	}
}
