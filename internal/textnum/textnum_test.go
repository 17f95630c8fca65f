package textnum

import (
	"errors"
	"testing"
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
