package ingest

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"testing"
)

// Fuzz tests: no input may panic a reader, and every error is a
// *ParseError with a line inside the input (or an I/O error). Seeds come
// from testdata/. `make test` runs each briefly; `make fuzz` longer.

func seedFiles(f *testing.F, pattern string) {
	m, _ := filepath.Glob(testdata("ensembles", "*", "*", pattern))
	for _, p := range m {
		if b, err := os.ReadFile(p); err == nil {
			f.Add(b)
		}
	}
}

func checkErr(t *testing.T, err error, data []byte) {
	if err == nil || err == io.EOF {
		return
	}
	var pe *ParseError
	if !errors.As(err, &pe) {
		t.Fatalf("error is not a *ParseError: %v", err)
	}
	lines := bytes.Count(data, []byte("\n")) + 1
	if pe.Line < 1 || pe.Line > lines {
		t.Fatalf("error line %d outside 1..%d: %v", pe.Line, lines, err)
	}
}

func FuzzXYZ(f *testing.F) {
	seedFiles(f, "*.xyz")
	f.Add([]byte("2\nProperties=species:S:1:pos:R:3:velo:R:3 time=1.0D+00\nH 0 0 0 1 2 3\nH 1 1 1 1 2 3\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		r := NewXYZReader(bytes.NewReader(data), "fuzz.xyz")
		for i := 0; i < 1000; i++ {
			fr, err := r.Next()
			if err != nil {
				checkErr(t, err, data)
				return
			}
			if c := fr.Column("pos"); c == nil || len(c.Values) != 3*len(fr.Symbols) {
				t.Fatalf("frame without 3N positions")
			}
		}
	})
}

func FuzzTable(f *testing.F) {
	seedFiles(f, "*.dat")
	f.Add([]byte("\ufeffstep,E1[eV],P1\r\n1,1.0D-03,0.5\r\n"))
	f.Fuzz(func(t *testing.T, data []byte) {
		tr, err := NewTableReader(bytes.NewReader(data), "fuzz.dat")
		if err != nil {
			checkErr(t, err, data)
			return
		}
		row := make([]float64, len(tr.Columns))
		for i := 0; i < 10000; i++ {
			if _, err := tr.Next(row); err != nil {
				checkErr(t, err, data)
				if err == io.EOF {
					return
				}
			}
		}
	})
}

func FuzzLog(f *testing.F) {
	f.Add([]byte("[step      10] switch 2 -> 1 accepted\n[step 12] switch 1 -> 2 frustrated\n"))
	f.Add([]byte("step 5 t= 1.5\nE(1) = -1.0D+00\nE(2) = 2\n"))
	spec := &LogSpec{Rules: []Rule{
		{Match: `^\[step +(?P<step>\d+)\] switch (?P<hop_from>\d+) -> (?P<hop_to>\d+) (?P<hop_kind>\w+)$`, Event: "hop"},
		{Match: `^step (?P<step>\S+) t= *(?P<time>\S+)`},
		{Match: `^E\((?P<state>\d+)\) = (?P<state_energy>\S+)`},
	}}
	for i := range spec.Rules {
		spec.Rules[i].re = regexp.MustCompile(spec.Rules[i].Match)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		dir := t.TempDir()
		p := filepath.Join(dir, "x.log")
		os.WriteFile(p, data, 0o644)
		s, err := openLog(p, spec)
		if err != nil {
			t.Fatal(err)
		}
		defer s.close()
		for i := 0; i < 10000; i++ {
			if _, err := s.next(); err != nil {
				checkErr(t, err, data)
				return
			}
		}
	})
}
