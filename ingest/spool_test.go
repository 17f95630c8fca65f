package ingest

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"syscall"
	"testing"

	"trajvault/internal/demo"
	"trajvault/internal/outdir"
	"trajvault/internal/testenv"
)

// randomRecord draws a record with every field the spool carries: NaN
// payloads (NaN marks a skipped state index), negative zeros,
// infinities, subnormals, nil and empty slices.
func randomRecord(rng *rand.Rand, prevSyms []string) *record {
	f := func() float64 {
		switch rng.IntN(8) {
		case 0:
			// A quiet NaN with a random payload (IEEE 754-2008, 6.2.1).
			return math.Float64frombits(0x7ff8000000000000 | rng.Uint64()&0x0007ffffffffffff)
		case 1:
			return math.Copysign(0, -1)
		case 2:
			return math.Inf(1 - 2*rng.IntN(2))
		case 3:
			return math.Float64frombits(rng.Uint64() & 0x000fffffffffffff) // subnormal
		}
		return math.Float64frombits(rng.Uint64())
	}
	// fsDec draws values and the atomColumn.dec a reader would give
	// them: D+1 (D at least their decimals) for values read from fixed
	// notation, else 0.
	fsDec := func() ([]float64, int) {
		switch rng.IntN(4) {
		case 0:
			return nil, 0
		case 1:
			return []float64{}, rng.IntN(3)
		}
		v := make([]float64, rng.IntN(9))
		mode, d := rng.IntN(3), rng.IntN(16)
		dec := 0
		for i := range v {
			switch mode {
			case 0:
				v[i] = f()
			case 1: // printed with d decimals: written scaled
				v[i] = float64(rng.Int64N(2e9)-1e9) / exact10[d]
				dec = d + 1 + rng.IntN(3)
			default: // decimals differ within the column
				v[i] = float64(rng.Int64N(2e12)-1e12) / exact10[rng.IntN(16)]
				dec = 16
			}
		}
		return v, dec
	}
	fs := func() []float64 { v, _ := fsDec(); return v }
	r := &record{line: rng.IntN(1 << 40), step: rng.Int64() - math.MaxInt64/2, hasStep: rng.IntN(2) == 0,
		time: f(), hasTime: rng.IntN(2) == 0, active: rng.IntN(200) - 100, hasActive: rng.IntN(2) == 0,
		stateE: fs(), pop: fs()}
	for i := range r.scalar {
		r.scalar[i], r.hasScalar[i] = f(), rng.IntN(2) == 0
	}
	// Sources leave an absent field zero (the spool does not carry it).
	if !r.hasStep {
		r.step = 0
	}
	if !r.hasTime {
		r.time = 0
	}
	for i, ok := range r.hasScalar {
		if !ok {
			r.scalar[i] = 0
		}
	}
	if !r.hasActive {
		r.active = 0
	}
	switch rng.IntN(4) {
	case 0: // no symbols: a record of a table
	case 1:
		if prevSyms != nil {
			r.symbols = prevSyms // same atoms as before
			break
		}
		fallthrough
	default:
		r.symbols = make([]string, rng.IntN(4))
		for i := range r.symbols {
			r.symbols[i] = []string{"H", "C", "O", "Xx", ""}[rng.IntN(5)]
		}
	}
	cols := func(names []string) []atomColumn {
		var cs []atomColumn
		for _, n := range names {
			if rng.IntN(3) > 0 {
				v, dec := fsDec()
				cs = append(cs, atomColumn{quantity: n, values: v, dec: dec})
			}
		}
		return cs
	}
	r.atoms = cols([]string{"position", "velocity", "force"})
	r.extras = cols([]string{"tags", "charge"})
	return r
}

// sameBits compares float slices bit for bit (math.Float64bits: the
// IEEE 754 binary64 encoding), nil apart from empty.
func sameBits(a, b []float64) bool {
	if (a == nil) != (b == nil) || len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return false
		}
	}
	return true
}

func sameRecord(a, b *record) string {
	switch {
	case a.line != b.line || a.hasStep != b.hasStep || a.step != b.step || a.hasTime != b.hasTime ||
		math.Float64bits(a.time) != math.Float64bits(b.time) || a.hasScalar != b.hasScalar ||
		a.hasActive != b.hasActive || a.active != b.active:
		return "scalars"
	case math.Float64bits(a.scalar[0]) != math.Float64bits(b.scalar[0]) || math.Float64bits(a.scalar[1]) != math.Float64bits(b.scalar[1]) ||
		math.Float64bits(a.scalar[2]) != math.Float64bits(b.scalar[2]):
		return "energies"
	case !sameBits(a.stateE, b.stateE) || !sameBits(a.pop, b.pop):
		return "states"
	case (a.symbols == nil) != (b.symbols == nil) || !slices.Equal(a.symbols, b.symbols):
		return "symbols"
	case len(a.atoms) != len(b.atoms) || len(a.extras) != len(b.extras) || (a.atoms == nil) != (b.atoms == nil) || (a.extras == nil) != (b.extras == nil):
		return "columns"
	}
	for i := range a.atoms {
		if a.atoms[i].quantity != b.atoms[i].quantity || !sameBits(a.atoms[i].values, b.atoms[i].values) {
			return "atoms " + a.atoms[i].quantity
		}
	}
	for i := range a.extras {
		if a.extras[i].quantity != b.extras[i].quantity || !sameBits(a.extras[i].values, b.extras[i].values) {
			return "extras " + a.extras[i].quantity
		}
	}
	return ""
}

// TestSpoolRoundTrip (property test, seeded): records written to a spool
// read back bit for bit, in their sections, with nil and empty slices
// kept apart, and the file and its owner marker go with Discard.
func TestSpoolRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(14, 2))
	dir := t.TempDir()
	w, err := newSpool(dir, "traj-1")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(w.sf.path + outdir.MarkerSuffix); err != nil {
		t.Errorf("no owner marker beside the spool: %v", err)
	}
	if !strings.HasPrefix(filepath.Base(w.sf.path), ".") {
		t.Errorf("spool %s: not a hidden name", w.sf.path)
	}
	var want [][]*record
	for s := 0; s < 3; s++ {
		w.begin()
		var recs []*record
		var prev []string
		for i := rng.IntN(400); i > 0; i-- {
			r := randomRecord(rng, prev)
			if r.symbols != nil {
				prev = r.symbols
			}
			if err := w.write(r); err != nil {
				t.Fatal(err)
			}
			recs = append(recs, r)
		}
		w.end()
		want = append(want, recs)
	}
	sf, err := w.finish()
	if err != nil {
		t.Fatal(err)
	}
	rep := &TrajReport{spool: sf}
	f, err := os.Open(sf.path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	for s, recs := range want {
		src := newSpoolSource(f, sf.sections[s], &FileReport{File: fmt.Sprint("section ", s)})
		for i, r := range recs {
			got, err := src.next()
			if err != nil {
				t.Fatalf("section %d record %d: %v", s, i, err)
			}
			if d := sameRecord(r, got); d != "" {
				t.Fatalf("section %d record %d: %s differ\nwrote %+v\nread  %+v", s, i, d, r, got)
			}
		}
		if _, err := src.next(); err != io.EOF {
			t.Errorf("section %d: after the last record %v, want io.EOF", s, err)
		}
	}
	rep.Discard()
	rep.Discard()
	for _, p := range []string{sf.path, sf.path + outdir.MarkerSuffix} {
		if _, err := os.Stat(p); !os.IsNotExist(err) {
			t.Errorf("%s still there after Discard (%v)", p, err)
		}
	}
}

// TestSpoolCutIsAnError: a spool cut inside a record is an error, not a
// clean end (as archive/tar's io.ErrUnexpectedEOF).
func TestSpoolCutIsAnError(t *testing.T) {
	w, err := newSpool(t.TempDir(), "traj-1")
	if err != nil {
		t.Fatal(err)
	}
	defer w.sf.remove()
	w.begin()
	r := &record{line: 3, symbols: []string{"H"}, atoms: []atomColumn{{quantity: "position", values: []float64{1, 2, 3}}}}
	if err := w.write(r); err != nil {
		t.Fatal(err)
	}
	w.end()
	sf, err := w.finish()
	if err != nil {
		t.Fatal(err)
	}
	f, _ := os.Open(sf.path)
	defer f.Close()
	sec := sf.sections[0]
	sec[1] -= 5
	_, err = newSpoolSource(f, sec, &FileReport{File: "geom.xyz"}).next()
	if !errors.Is(err, errSpool) {
		t.Errorf("cut spool: %v, want errSpool", err)
	}
}

// TestSpoolDamagedLengths: a spool whose lengths claim more than its
// section holds is an error before anything is allocated by them (a
// 2^31-value claim in 16 bytes must not ask for 16 GiB).
func TestSpoolDamagedLengths(t *testing.T) {
	for _, c := range []struct {
		name string
		body []byte
	}{
		// flags 0, line 1, then state energies claiming 2^31 values.
		{"state energies", append([]byte{0, 1}, binary.AppendUvarint(nil, 1<<31)...)},
		// flags 0, line 1, no energies, no populations, 2^24 columns.
		{"columns", append([]byte{0, 1, 0, 0}, binary.AppendUvarint(nil, 1<<24)...)},
	} {
		p := filepath.Join(t.TempDir(), "spool")
		body := append(c.body, make([]byte, 8)...)
		os.WriteFile(p, body, 0o600)
		f, _ := os.Open(p)
		var before, after runtime.MemStats
		runtime.ReadMemStats(&before)
		_, err := newSpoolSource(f, [2]int64{0, int64(len(body))}, &FileReport{File: "geom.xyz"}).next()
		runtime.ReadMemStats(&after)
		f.Close()
		if !errors.Is(err, errSpool) {
			t.Errorf("%s: %v, want errSpool", c.name, err)
		}
		if grew := after.TotalAlloc - before.TotalAlloc; grew > 1<<20 {
			t.Errorf("%s: %d bytes allocated reading a %d-byte spool", c.name, grew, len(body))
		}
	}
}

// TestDiscardThenConvert: a report whose spool was discarded (a scan
// refused without --drop-partial) converts from the text when the
// conversion drops the cut frame, instead of opening the removed spool.
func TestDiscardThenConvert(t *testing.T) {
	dir := t.TempDir()
	tr, err := TrajectoryFrom([]string{filepath.Join("..", "testdata", "ensembles", "problems", "p1-truncated-frame")}, nil)
	if err != nil {
		t.Fatal(err)
	}
	opt := Options{Units: map[string]string{"position": "angstrom"}, SpoolDir: dir}
	rep, err := Scan(context.Background(), tr, opt)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Refusal(false) == nil {
		t.Fatal("p1-truncated-frame not refused without --drop-partial")
	}
	copt := ConvertOptions{Options: opt}
	copt.DropPartial = true
	if _, err := Convert(context.Background(), rep, filepath.Join(dir, "o.h5"), copt); err != nil {
		t.Errorf("convert after the spool was discarded: %v", err)
	}
	if left := spoolFiles(dir); len(left) > 0 {
		t.Errorf("left behind: %v", left)
	}
}

// spoolFiles lists the spools and owner markers left in dir.
func spoolFiles(dir string) []string {
	var left []string
	es, _ := os.ReadDir(dir)
	for _, e := range es {
		if strings.Contains(e.Name(), ".trajvault-spool-") || strings.HasSuffix(e.Name(), outdir.MarkerSuffix) {
			left = append(left, e.Name())
		}
	}
	return left
}

// TestSpoolSameFiles: converting through the spool (ConvertFiles) gives
// files with the same data as converting from the text read again (Scan
// without a SpoolDir, then Convert), by h5diff, for the demo logs
// (recipe, four files, hops), a restarted run (repeated steps dropped),
// a cut last frame (--drop-partial) and the clean and problem folders of
// testdata that convert; no spool is left behind.
func TestSpoolSameFiles(t *testing.T) {
	rc, err := LoadRecipe(testdata("recipes", "tarnol.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	type tcase struct {
		name string
		dir  string
		opt  ConvertOptions
	}
	var cases []tcase
	for _, v := range []struct {
		name string
		mod  func(*demo.LogOptions)
	}{
		{"demo", func(o *demo.LogOptions) {}},
		{"demo-restart", func(o *demo.LogOptions) { o.RestartOverlap = 7 }},
		{"demo-cut", func(o *demo.LogOptions) { o.TruncateLast = true }},
		{"demo-molecules", func(o *demo.LogOptions) { o.Molecules = 3; o.Decimals = 10 }},
	} {
		o := demo.LogOptions{Options: demo.DefaultOptions, Decimals: 8}
		o.Steps = 300
		v.mod(&o)
		dir := filepath.Join(t.TempDir(), "traj-001")
		if err := demo.WriteLogs(dir, o); err != nil {
			t.Fatal(err)
		}
		opt := ConvertOptions{Options: Options{Recipe: rc, DropPartial: true}}
		cases = append(cases, tcase{v.name, dir, opt})
	}
	for _, d := range []string{"clean/traj-1", "clean/traj-2", "problems/p1-truncated-frame", "problems/p5-restart", "problems/p13-conflict"} {
		opt := ConvertOptions{Options: Options{Units: posUnit.Units, DropPartial: true}}
		cases = append(cases, tcase{d, testdata("ensembles", d), opt})
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			out := t.TempDir()
			t.Setenv("SOURCE_DATE_EPOCH", "1700000000")
			traj, err := TrajectoryFrom([]string{c.dir}, c.opt.Recipe)
			if err != nil {
				t.Fatal(err)
			}
			rep, err := Scan(context.Background(), traj, c.opt.Options)
			if err != nil {
				t.Fatal(err)
			}
			if p := rep.Refusal(true); p != nil {
				t.Fatalf("refused: %+v", p)
			}
			if rep.spool != nil {
				t.Fatal("Scan without a SpoolDir made a spool")
			}
			a := filepath.Join(out, "text.h5")
			if _, err := Convert(context.Background(), rep, a, c.opt); err != nil {
				t.Fatal(err)
			}
			b := filepath.Join(out, "spool.h5")
			rep2, _, err := ConvertFiles(context.Background(), []string{c.dir}, b, c.opt)
			if err != nil {
				t.Fatal(err)
			}
			if rep2.spool == nil {
				t.Error("ConvertFiles did not spool")
			}
			testenv.H5DiffData(t, a, b)
			if left := spoolFiles(out); len(left) > 0 {
				t.Errorf("left behind: %v", left)
			}
		})
	}
}

// TestSpoolRemovedWhenNotConverted: a scan with a SpoolDir whose report
// is refused keeps no spool; Discard removes the spool of a report not
// converted; ConvertAll removes the spools of reports an error left
// unconverted; a failed conversion removes its spool.
func TestSpoolRemovedWhenNotConverted(t *testing.T) {
	dir := t.TempDir()
	opt := Options{SpoolDir: dir, Units: posUnit.Units}
	bad, err := TrajectoryFrom([]string{testdata("ensembles", "problems", "p9-bad-number")}, nil)
	if err != nil {
		t.Fatal(err)
	}
	rep, err := Scan(context.Background(), bad, opt)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Refusal(false) == nil {
		t.Fatal("p9 not refused")
	}
	if left := spoolFiles(dir); len(left) > 0 {
		t.Errorf("refused scan left %v", left)
	}
	good, err := TrajectoryFrom([]string{testdata("ensembles", "clean", "traj-1")}, nil)
	if err != nil {
		t.Fatal(err)
	}
	rep, err = Scan(context.Background(), good, opt)
	if err != nil || rep.spool == nil {
		t.Fatalf("clean: %v, spool %v", err, rep.spool)
	}
	if left := spoolFiles(dir); len(left) != 2 {
		t.Errorf("want the spool and its marker, found %v", left)
	}
	rep.Discard()
	if left := spoolFiles(dir); len(left) > 0 {
		t.Errorf("after Discard: %v", left)
	}
	// A conversion that fails (its output folder is gone) removes the
	// spool too.
	rep, err = Scan(context.Background(), good, opt)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Convert(context.Background(), rep, filepath.Join(dir, "no-such-folder", "x.h5"), ConvertOptions{Options: opt}); err == nil {
		t.Fatal("conversion into a missing folder succeeded")
	}
	if left := spoolFiles(dir); len(left) > 0 {
		t.Errorf("after a failed conversion: %v", left)
	}
	// ConvertAll stopped by a cancelled context converts nothing and
	// removes every spool.
	reps, err := ScanAll(context.Background(), []*Trajectory{good}, opt, 1, nil)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := ConvertAll(ctx, reps, t.TempDir(), ConvertOptions{Options: opt}, 1, nil); !errors.Is(err, context.Canceled) {
		t.Errorf("ConvertAll after cancel: %v", err)
	}
	if left := spoolFiles(dir); len(left) > 0 {
		t.Errorf("after ConvertAll was cancelled: %v", left)
	}
}

// TestSpoolWriteFails: a spool that cannot be written (a full disk,
// ENOSPC) fails the scan with an I/O error naming the spool and the
// cause, and leaves nothing behind. The full disk is the Linux device
// /dev/full (every write fails with ENOSPC, full(4)), put in place of
// the spool's file.
func TestSpoolWriteFails(t *testing.T) {
	full, err := os.OpenFile("/dev/full", os.O_WRONLY, 0)
	if err != nil {
		t.Skip("no /dev/full:", err)
	}
	dir := t.TempDir()
	w, err := newSpool(dir, "traj-1")
	if err != nil {
		t.Fatal(err)
	}
	w.f.Close()
	w.f = full
	w.bw.Reset(full)
	w.begin()
	big := &record{atoms: []atomColumn{{quantity: "position", values: make([]float64, 1<<16)}}}
	var werr error
	for i := 0; i < 8 && werr == nil; i++ {
		werr = w.write(big)
	}
	if werr == nil {
		_, werr = w.finish()
	} else {
		werr = w.failure()
	}
	if !errors.Is(werr, syscall.ENOSPC) || !strings.Contains(werr.Error(), w.sf.path) {
		t.Errorf("error %v: want ENOSPC naming the spool", werr)
	}
	if left := spoolFiles(dir); len(left) > 0 {
		t.Errorf("left behind: %v", left)
	}
}

// TestShortestAcrossFrames: a column ruled out of the shortest round-trip
// class in one frame is not tested again in later frames, and the file's
// format is what the rule says for all values together (textnum's
// package comment): a column printed as Python's repr throughout is
// "short:r" (repr(0.5) is '0.5', repr(2.0) is '2.0', from memory), one
// with a trailing zero in any frame is fixed at its widest decimals.
func TestShortestAcrossFrames(t *testing.T) {
	frames := [][2][]string{ // per frame: repr column, mixed column
		{{"0.5", "0.25", "1.125"}, {"0.5", "0.25", "1.5"}},
		{{"2.0", "0.5", "0.75"}, {"0.50", "0.25", "1.5"}}, // trailing zero
		{{"0.125", "3.5", "0.0"}, {"0.125", "2.5", "0.5"}},
	}
	var b strings.Builder
	for i, f := range frames {
		fmt.Fprintf(&b, "1\nProperties=species:S:1:pos:R:3:tags:R:3 step=%d time=%d.5\nH %s %s\n", i, i, strings.Join(f[0], " "), strings.Join(f[1], " "))
	}
	p := filepath.Join(t.TempDir(), "g.xyz")
	if err := os.WriteFile(p, []byte(b.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := openXYZ(p, nil)
	if err != nil {
		t.Fatal(err)
	}
	defer s.close()
	for {
		if _, err := s.next(); err == io.EOF {
			break
		} else if err != nil {
			t.Fatal(err)
		}
		s.recycle()
	}
	got := map[string]string{}
	for q, f := range s.provides() {
		got[q] = f.String()
	}
	want := map[string]string{"position": "short:r", ExtraPrefix + "tags": "fixed:3", "time": "fixed:1"}
	for q, w := range want {
		if got[q] != w {
			t.Errorf("%s: format %s, want %s (all: %v)", q, got[q], w, got)
		}
	}
	if !s.r.notShort["tags"] || s.r.notShort["pos"] {
		t.Errorf("ruled out: %v, want tags alone", s.r.notShort)
	}
}

// TestHashedFile: an input hashed as it is read gives the SHA-256 of the
// whole file once read to its end, and nothing before. Known answer: the
// FIPS 180-2 example, SHA-256("abc") = ba7816bf...f20015ad (Appendix B.1).
func TestHashedFile(t *testing.T) {
	p := filepath.Join(t.TempDir(), "abc.txt")
	if err := os.WriteFile(p, []byte("abc"), 0o644); err != nil {
		t.Fatal(err)
	}
	h, err := openHashed(p)
	if err != nil {
		t.Fatal(err)
	}
	defer h.Close()
	var b [2]byte
	if _, err := io.ReadFull(h, b[:]); err != nil {
		t.Fatal(err)
	}
	if _, ok := h.sum(p); ok {
		t.Error("a digest after reading part of the file")
	}
	if _, err := io.ReadAll(h); err != nil {
		t.Fatal(err)
	}
	s, ok := h.sum(p)
	if !ok || s.Bytes != 3 || s.SHA256 != "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad" {
		t.Errorf("digest %+v %v", s, ok)
	}
}

// TestSpoolScaled: per-atom values printed with D decimals are written as
// scaled integers (fewer bytes than IEEE bits) and still read back bit
// for bit; a column with a negative zero or a value with no short
// decimal form (0.1 + 0.2, the classic, is 0.30000000000000004) falls
// back to IEEE bits for that column.
func TestSpoolScaled(t *testing.T) {
	cases := []struct {
		name   string
		v      []float64
		scaled bool
	}{
		{"8 decimals", []float64{-0.00814041, 0.75970671, 12.5, 0}, true},
		{"growing decimals", []float64{1, 0.5, 0.25, 0.125, 1e-10}, true},
		{"negative zero", []float64{1.5, math.Copysign(0, -1)}, false},
		{"no short form", []float64{0.1 + 0.2, 1e300}, false},
	}
	for _, c := range cases {
		w := &spoolWriter{}
		w.begin()
		w.scaled(0, c.v)
		// w.buf: uvarint n+1 (one byte here), then 0 for raw bits or
		// decimals + 1.
		if got := w.buf[1] != 0; got != c.scaled {
			t.Errorf("%s: scaled %v, want %v (%d bytes)", c.name, got, c.scaled, len(w.buf))
		}
		if c.scaled && len(w.buf) >= 8*len(c.v) {
			t.Errorf("%s: %d bytes for %d values", c.name, len(w.buf), len(c.v))
		}
		src := spoolReader(bytes.NewReader(w.buf), int64(len(w.buf)), &FileReport{File: c.name})
		got, err := src.scaled("values")
		if err != nil || !sameBits(got, c.v) {
			t.Errorf("%s: read %v (%v), wrote %v", c.name, got, err, c.v)
		}
	}
}

// TestSpoolFixedBits: numbers read from fixed notation (random digit
// strings of up to 16 significant digits and 0 to 17 decimals) written
// through the spool's fast path for columns of known decimals read back
// bit for bit as strconv.ParseFloat (correctly rounded, IEEE 754) reads
// the text; the path declines what it cannot write exactly.
func TestSpoolFixedBits(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	written := 0
	for i := 0; i < 20000; i++ {
		d := rng.IntN(18)
		v := make([]float64, 1+rng.IntN(6))
		for j := range v {
			digits := 1 + rng.IntN(16)
			s := strconv.FormatUint(rng.Uint64N(uint64(math.Pow10(digits))), 10)
			for len(s) <= d {
				s = "0" + s
			}
			e := rng.IntN(d + 1) // this value's decimals, at most d
			s = s[:len(s)-e] + "." + s[len(s)-e:]
			if rng.IntN(2) == 0 {
				s = "-" + s
			}
			x, err := strconv.ParseFloat(s, 64)
			if err != nil {
				t.Fatal(s, err)
			}
			v[j] = x
		}
		w := &spoolWriter{}
		w.begin()
		if !w.fixed(v, d) {
			continue // declined (a magnitude beyond 2^50, or -0): scaled writes it
		}
		src := spoolReader(bytes.NewReader(w.buf), int64(len(w.buf)), &FileReport{File: "fixed"})
		got, err := src.scaled("values")
		if err != nil || !sameBits(got, v) {
			t.Fatalf("%d decimals: wrote %v, read %v (%v)", d, v, got, err)
		}
		written++
	}
	if written < 5000 {
		t.Errorf("the fast path took %d of 20000 columns", written)
	}
}
