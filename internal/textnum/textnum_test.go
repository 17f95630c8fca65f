package textnum

import (
	"errors"
	"fmt"
	"math"
	"math/rand"
	"os/exec"
	"strconv"
	"strings"
	"testing"

	"trajvault/internal/testenv"
)

// Number forms: C printf %f/%e/%g (ISO C, fprintf) and Fortran F/E/D edit
// descriptors (ISO Fortran: a three-digit exponent drops the letter,
// e.g. 1.0-100) - common practice in MD logs.
func TestParse(t *testing.T) {
	cases := []struct {
		in   string
		v    float64
		f    Format
		fail bool
	}{
		{"1.5", 1.5, Format{Decimals: 1}, false},
		{"-0.000120", -0.00012, Format{Decimals: 6}, false},
		{"+42", 42, Format{}, false},
		{"1.0D-03", 1e-3, Format{Exp: true, Sig: 2, Decimals: 1, ExpChar: 'D'}, false},
		{"1.0d+00", 1, Format{Exp: true, Sig: 2, Decimals: 1, ExpChar: 'd'}, false},
		{"1.0-100", 1e-100, Format{Exp: true, Sig: 2, Decimals: 1}, false},
		{"-2.5000E+02", -250, Format{Exp: true, Sig: 5, Decimals: 4, ExpChar: 'E'}, false},
		{"6.02214076e23", 6.02214076e23, Format{Exp: true, Sig: 9, Decimals: 8, ExpChar: 'e'}, false},
		{"0.0", 0, Format{Decimals: 1}, false},
		{"abc", 0, Format{}, true},
		{"1.2.3", 0, Format{}, true},
		{"1e", 0, Format{}, true},
		{"-", 0, Format{}, true},
		{".", 0, Format{}, true},
		{"NaN", 0, Format{}, true},
		{"1e999", 0, Format{}, true},
	}
	for _, c := range cases {
		v, f, err := Parse(c.in)
		if c.fail {
			if !errors.Is(err, ErrSyntax) {
				t.Errorf("Parse(%q) err = %v, want ErrSyntax", c.in, err)
			}
			continue
		}
		if err != nil || v != c.v || f != c.f {
			t.Errorf("Parse(%q) = %v %+v %v, want %v %+v", c.in, v, f, err, c.v, c.f)
		}
	}
}

// TestRoundTrip: printing a parsed value in its own format gives back the
// same text, for the forms logs use.
func TestRoundTrip(t *testing.T) {
	for _, s := range []string{"1.5", "-0.000120", "12.345678901", "1.0D-03", "-2.5000E+02", "3.14159265358979E+00", "1.0-100", "9.999999e-01", "0.00"} {
		v, f, err := Parse(s)
		if err != nil {
			t.Fatal(err)
		}
		if got := string(f.Append(nil, v)); got != s {
			t.Errorf("%q -> %v %v -> %q", s, v, f, got)
		}
		g, err := ParseFormat(f.String())
		if err != nil || g.Exp != f.Exp || (g.Exp && (g.Sig != f.Sig || g.ExpChar != f.ExpChar)) || (!g.Exp && g.Decimals != f.Decimals) {
			t.Errorf("format %v does not round-trip: %v %v", f, g, err)
		}
	}
}

func FuzzParse(f *testing.F) {
	for _, s := range []string{"1.5", "1.0D-03", "1.0-100", "-", "+.5e3", "00012.3400"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		v, fm, err := Parse(s)
		if err != nil {
			return
		}
		// Printing and parsing again must give the same value at the
		// recorded precision.
		out := fm.Append(nil, v)
		w, _, err := Parse(string(out))
		if err != nil {
			t.Fatalf("%q -> %q does not parse: %v", s, out, err)
		}
		if string(fm.Append(nil, w)) != string(out) {
			t.Fatalf("%q: %q then %q", s, out, fm.Append(nil, w))
		}
	})
}

// TestShortestClass: numbers printed in shortest round-trip form (Python's
// repr, as extended-XYZ writers print energy= and time=; Go's
// strconv.FormatFloat 'g' -1) form their own class and print back
// exactly as they were written; columns whose values share one number of
// decimals stay fixed notation. Issue 10 rows: 9.82332134688519 came back
// as 9.823321346885191, 0.0 as 0.000000000000000.
func TestShortestClass(t *testing.T) {
	cases := []struct {
		name   string
		column []string
		want   string
	}{
		{"issue 10: repr energies and times", []string{"0.0", "9.82332134688519", "-2079.6127468", "1e-05", "1.5e+16"}, "short:r"},
		{"Go 'g' -1", []string{"0", "9.82332134688519", "1e-05", "1e+21", "12"}, "short:g"},
		{"one number of decimals is fixed", []string{"0.5", "1.0", "1.5"}, "fixed:1"},
		{"printf %.8f with a trailing zero", []string{"0.12345678", "0.12345670", "1.50000000"}, "fixed:8"},
		{"exponent %.3e", []string{"1.234e-05", "5.000e+00"}, "exp:4:e"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var f Format
			vals := make([]float64, len(c.column))
			for i, s := range c.column {
				v, fm, err := ParseShort(s, i == 0 || f.MayBeShortest())
				if err != nil {
					t.Fatal(err)
				}
				vals[i] = v
				if i == 0 {
					f = fm
				} else {
					f = f.Merge(fm)
				}
			}
			if f.String() != c.want {
				t.Fatalf("format %s, want %s", f, c.want)
			}
			g, err := ParseFormat(f.String())
			if err != nil {
				t.Fatal(err)
			}
			for i, v := range vals {
				if got := string(g.Append(nil, v)); got != c.column[i] {
					t.Errorf("%q printed back as %q", c.column[i], got)
				}
			}
		})
	}
}

// TestReprMatchesPython: repr agrees with Debian's python3 on seeded
// random doubles over the whole exponent range and on the values where
// the notation switches (1e-4, 1e-5, 1e15, 1e16).
func TestReprMatchesPython(t *testing.T) {
	py := testenv.Python()
	if _, err := exec.LookPath(py); err != nil {
		t.Skipf("no %s: %v", py, err)
	}
	rng := rand.New(rand.NewSource(7))
	vals := []float64{0, math.Copysign(0, -1), 1, -1, 1e-4, 1e-5, 9.999e-5, 1e15, 1e16, 123456789012345.6, 0.1, 1.0 / 3, 9.82332134688519, 2.5e-308, math.MaxFloat64}
	for i := 0; i < 300; i++ {
		vals = append(vals, math.Float64frombits(rng.Uint64()&^(0x7ff<<52)|uint64(1023+rng.Intn(80)-40)<<52))
	}
	var in strings.Builder
	for _, v := range vals {
		fmt.Fprintf(&in, "%d\n", math.Float64bits(v))
	}
	cmd := exec.Command(py, "-c", "import struct,sys\nfor l in sys.stdin: print(repr(struct.unpack('<d', struct.pack('<Q', int(l)))[0]))")
	cmd.Stdin = strings.NewReader(in.String())
	out, err := cmd.Output()
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	if len(lines) != len(vals) {
		t.Fatalf("python printed %d lines for %d values", len(lines), len(vals))
	}
	for i, v := range vals {
		if got := repr(v); got != lines[i] {
			t.Errorf("repr(%b) = %q, Python %q", math.Float64bits(v), got, lines[i])
		}
		if v == 0 {
			continue
		}
		// And the value is recognised as repr-printed.
		_, f, err := ParseShort(lines[i], true)
		if err != nil || f.cand&candRepr == 0 {
			t.Errorf("%q not recognised as repr: %v", lines[i], err)
		}
	}
}

// TestFastPathBits checks the fixed-notation fast path in Parse against
// strconv.ParseFloat (the standard library's correctly rounded parser) bit
// for bit, over random digit strings of every length and decimal count the
// fast path takes, and a little beyond it (where Parse must fall back).
func TestFastPathBits(t *testing.T) {
	rng := rand.New(rand.NewSource(1))
	n := 0
	for range 400000 {
		nd := 1 + rng.Intn(20)  // digits in all
		dec := rng.Intn(nd + 1) // of them after the point
		var b []byte
		if rng.Intn(2) == 0 {
			b = append(b, '-')
		}
		lead := rng.Intn(4) // leading zeros do not count as significant
		for range lead {
			b = append(b, '0')
		}
		for k := range nd {
			if k == nd-dec {
				if k == 0 {
					b = append(b, '0')
				}
				b = append(b, '.')
			}
			b = append(b, byte('0'+rng.Intn(10)))
		}
		s := string(b)
		got, f, err := Parse(s)
		want, werr := strconv.ParseFloat(s, 64)
		if err != nil || werr != nil {
			t.Fatalf("%q: Parse error %v, ParseFloat error %v", s, err, werr)
		}
		if math.Float64bits(got) != math.Float64bits(want) {
			t.Fatalf("%q: Parse gives %v (%#x), strconv.ParseFloat %v (%#x)", s, got, math.Float64bits(got), want, math.Float64bits(want))
		}
		if f.Decimals != dec || f.Exp {
			t.Fatalf("%q: format %v, want fixed:%d", s, f, dec)
		}
		n++
	}
	// Signed zeros and the edges of the exact range.
	for _, s := range []string{"-0.000", "0.0", "999999999999999", "0.999999999999999",
		"9007199254740993", "-0.0000000000000000000001", "1234567890.12345", "0.0000000000000000000000123"} {
		got, _, _ := Parse(s)
		want, _ := strconv.ParseFloat(s, 64)
		if math.Float64bits(got) != math.Float64bits(want) {
			t.Errorf("%q: Parse gives %#x, strconv.ParseFloat %#x", s, math.Float64bits(got), math.Float64bits(want))
		}
	}
}

// BenchmarkParseFixed is for profiling only; performance figures come
// from make bench.
func BenchmarkParseFixed(b *testing.B) {
	fields := []string{"-1.234567890", "0.000123", "12.500000", "-0.93512345", "3.14159265"}
	for i := 0; b.Loop(); i++ {
		if _, _, err := Parse(fields[i%len(fields)]); err != nil {
			b.Fatal(err)
		}
	}
}

// TestMergeIdempotent checks what readers rely on to skip Merge for a
// value printed like the one before: f.Merge(g).Merge(g) == f.Merge(g)
// for every reachable f, and g.Merge(g) == g for a parsed g. Formats
// come from parsing random fields of every notation (fixed, E/D/dropped
// exponent letters, shortest forms) and merging random runs of them,
// with and without the shortest test. The algebraic argument (Merge is
// a max, AND or OR per field, Shortest a function of mixed and cand) is
// in ingest's Column.mergeRaw; this test would catch a field added to
// Format that breaks it.
func TestMergeIdempotent(t *testing.T) {
	rng := rand.New(rand.NewSource(14))
	fields := func() string {
		v := (rng.Float64() - 0.5) * math.Pow10(rng.Intn(12)-6)
		switch rng.Intn(6) {
		case 0:
			return strconv.FormatFloat(v, 'f', rng.Intn(10), 64)
		case 1:
			return strconv.FormatFloat(v, 'E', rng.Intn(10), 64)
		case 2:
			return strings.Replace(strconv.FormatFloat(v, 'e', rng.Intn(10), 64), "e", "D", 1)
		case 3:
			return repr(v)
		case 4:
			return strconv.FormatFloat(v, 'g', -1, 64)
		}
		return "1.5-100" // Fortran, letter dropped
	}
	parsed := func() Format {
		s := fields()
		_, f, err := ParseShort(s, rng.Intn(2) == 0)
		if err != nil {
			t.Fatalf("ParseShort(%q): %v", s, err)
		}
		return f
	}
	for i := 0; i < 20000; i++ {
		g := parsed()
		if m := g.Merge(g); m != g {
			t.Fatalf("g.Merge(g) = %+v, want g = %+v", m, g)
		}
		f := parsed()
		for n := rng.Intn(5); n > 0; n-- {
			f = f.Merge(parsed())
		}
		once := f.Merge(g)
		if twice := once.Merge(g); twice != once {
			t.Fatalf("f=%+v g=%+v: f.Merge(g) = %+v, merged again %+v", f, g, once, twice)
		}
	}
}

// TestIntCand: the shortcut for integers gives the same class as the
// general test (formatting with repr and strconv 'g', -1) on random
// integers with signs, leading zeros and up to 8 digits.
func TestIntCand(t *testing.T) {
	rng := rand.New(rand.NewSource(6))
	for i := 0; i < 50000; i++ {
		s := strconv.FormatInt(rng.Int63n(int64(math.Pow10(rng.Intn(8)+1))), 10)
		if rng.Intn(5) == 0 {
			s = strings.Repeat("0", rng.Intn(3)+1) + s
		}
		switch rng.Intn(4) {
		case 0:
			s = "-" + s
		case 1:
			s = "+" + s
		}
		v, f, err := ParseShort(s, true)
		if err != nil {
			t.Fatal(s, err)
		}
		var want uint8
		if s == repr(v) {
			want |= candRepr
		}
		if s == strconv.FormatFloat(v, 'g', -1, 64) {
			want |= candG
		}
		if f.cand != want {
			t.Fatalf("%q: cand %b, general test %b", s, f.cand, want)
		}
	}
	for _, s := range []string{"0", "-0", "00", "123456", "1234567", "-000001"} {
		v, f, _ := ParseShort(s, true)
		want := s == strconv.FormatFloat(v, 'g', -1, 64)
		if (f.cand&candG != 0) != want {
			t.Errorf("%q: 'g' class %v, want %v", s, f.cand&candG != 0, want)
		}
	}
}
