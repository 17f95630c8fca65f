// Package textnum parses numbers as legacy logs print them and remembers
// how they were printed, so that they can be stored at exactly the
// printed precision and printed again digit for digit.
//
// Accepted forms (common practice in Fortran and C output): optional sign,
// digits with an optional decimal point, an optional exponent introduced by
// E, e, D or d ("1.0D-03"), or by a bare sign after the mantissa when the
// exponent needs three digits and Fortran drops the letter ("1.0-100").
//
// A third class is the shortest round-trip form: the fewest digits that
// read back to the same float64, as Python's repr (and str) and Go's
// strconv.FormatFloat(x, 'g', -1, 64) print ("9.82332134688519", "0.0").
// Its number of decimals varies from value to value, so it is neither
// fixed nor exponent notation; it is printed again by the same rule.
package textnum

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Format is how a number was printed.
type Format struct {
	// Exp is true for exponent notation; then Sig counts significant
	// digits of the mantissa, else Decimals counts digits after the point.
	Exp      bool
	Decimals int
	Sig      int
	// ExpChar is the exponent letter as printed ('E', 'e', 'D', 'd'), or
	// 0 when the letter was dropped.
	ExpChar byte
	// Shortest is the shortest round-trip class (it overrides the fields
	// above when printing): ShortRepr or ShortG, or 0.
	Shortest byte

	// cand has bit ShortRepr/ShortG set while every value so far was
	// printed exactly as that formatter prints it; mixed is set once
	// values differ in decimals or notation. A column is of the shortest
	// class only when both hold: values that all share one number of
	// decimals are fixed notation (the same text, and exact scale-offset
	// storage).
	cand  uint8
	mixed bool
}

// Styles of the shortest round-trip class.
const (
	// ShortRepr is Python's repr of a float (Python 3 float_repr_style
	// "short"): fixed notation with at least one decimal ("0.0", "12.5")
	// when the decimal exponent is in [-4, 16), else "1.5e-07", "1e+16".
	ShortRepr byte = 'r'
	// ShortG is Go's strconv.FormatFloat(x, 'g', -1, 64): no ".0" on
	// integers ("0", "12"), exponent notation when the decimal exponent
	// is below -4 or at least 6 ("1.234567e+06"; fmt's %v, unlike it,
	// switches at 21).
	ShortG byte = 'g'
)

const (
	candRepr uint8 = 1 << iota
	candG
)

// Fixed reports fixed notation at Decimals (the only class with one
// resolution, Step, for all values).
func (f Format) Fixed() bool { return !f.Exp && f.Shortest == 0 }

// MayBeShortest reports whether every value merged so far was printed in
// a shortest round-trip style, so that a reader still needs to test the
// next value with ParseShort.
func (f Format) MayBeShortest() bool { return f.cand != 0 }

// ParseShort is Parse that also notes whether s is exactly what a
// shortest round-trip formatter prints for its value (see Format.Merge).
// Readers call it while the column's format MayBeShortest, and Parse
// after that (the test costs a float formatting).
func ParseShort(s string, check bool) (float64, Format, error) {
	var f Format
	v, err := ParseShortTo(s, check, &f)
	return v, f, err
}

// ParseShortTo is ParseShort storing the format in *f: readers call it
// for every number, and a Format returned by value is copied through
// memory twice per call (a tenth of the parsing time, measured).
func ParseShortTo(s string, check bool, f *Format) (float64, error) {
	v, err := parseTo(s, f)
	if err != nil || !check {
		return v, err
	}
	if c, ok := intCand(s); ok {
		f.cand = c
		return v, nil
	}
	if s == repr(v) {
		f.cand |= candRepr
	}
	if s == strconv.FormatFloat(v, 'g', -1, 64) {
		f.cand |= candG
	}
	return v, nil
}

// intCand is ParseShort's test for an integer written without point or
// exponent, whose columns (steps, states) would otherwise be formatted
// on every row, as they never leave the 'g' class: ok is false for other
// fields. repr always writes a point or an exponent ("12.0", "1e+16"),
// so an integer is never ShortRepr. With at most 6 digits its value is
// exact and below 10^6, which 'g' writes in fixed notation without
// leading zeros or a plus sign ("-0" for negative zero), so the field is
// ShortG exactly when it is written that way; longer integers take the
// general test (TestIntCand compares both on random integers).
func intCand(s string) (uint8, bool) {
	d := s
	if d != "" && d[0] == '-' {
		d = d[1:]
	}
	if d == "" || len(d) > 6 {
		return 0, false
	}
	for i := 0; i < len(d); i++ {
		if d[i] < '0' || d[i] > '9' {
			return 0, false
		}
	}
	if len(d) > 1 && d[0] == '0' {
		return 0, true // leading zero: neither style writes it
	}
	return candG, true
}

// repr is Python's repr of a float64 (float_repr_style "short", Python
// 3.1 and later): the shortest digits that round-trip (as Go's 'e', -1),
// in fixed notation with at least one decimal when -4 <= exponent < 16,
// else as "d.ddde+XX" with at least two exponent digits.
func repr(v float64) string {
	switch {
	case math.IsNaN(v):
		return "nan"
	case math.IsInf(v, 1):
		return "inf"
	case math.IsInf(v, -1):
		return "-inf"
	}
	e := strconv.FormatFloat(v, 'e', -1, 64)
	k := strings.LastIndexByte(e, 'e')
	exp, _ := strconv.Atoi(e[k+1:])
	if v == 0 || (exp >= -4 && exp < 16) {
		s := strconv.FormatFloat(v, 'f', -1, 64)
		if !strings.ContainsRune(s, '.') {
			s += ".0"
		}
		return s
	}
	return e
}

// ErrSyntax is returned for a field that is not a number.
var ErrSyntax = errors.New("not a number")

// Parse parses one field. The value is the float64 nearest to the decimal
// number written (strconv.ParseFloat after normalising the exponent).
func Parse(s string) (float64, Format, error) {
	var f Format
	v, err := parseTo(s, &f)
	return v, f, err
}

// parseTo is Parse storing the format in *f.
func parseTo(s string, f *Format) (float64, error) {
	*f = Format{}
	n := len(s)
	if n == 0 {
		return 0, ErrSyntax
	}
	i := 0
	if s[0] == '+' || s[0] == '-' {
		i++
	}
	start := i
	// Digits before and after the point in two tight loops (this is the
	// hottest code of convert): sig counts digits from the first nonzero
	// one, m holds them as an integer while sig <= 19.
	sig, dec := 0, 0
	var m uint64
	for ; i < n; i++ {
		c := s[i] - '0'
		if c > 9 {
			break
		}
		if sig > 0 || c != 0 {
			sig++
			if sig <= 19 {
				m = m*10 + uint64(c)
			}
		}
	}
	digits := i - start
	if i < n && s[i] == '.' {
		i++
		for ; i < n; i++ {
			c := s[i] - '0'
			if c > 9 {
				break
			}
			dec++
			if sig > 0 || c != 0 {
				sig++
				if sig <= 19 {
					m = m*10 + uint64(c)
				}
			}
		}
		digits += dec
	}
	if digits == 0 {
		return 0, ErrSyntax
	}
	f.Decimals = dec
	if i == n {
		// Fast path for fixed notation (Clinger's exact case, common
		// practice in float parsers): with at most 15 significant digits
		// m < 10^15 < 2^53 and 10^dec (dec <= 22) are both exact float64
		// values, so the one IEEE division m / 10^dec is correctly
		// rounded: the same bits strconv.ParseFloat returns, without its
		// second scan (checked bit for bit in TestFastPathBits).
		if sig <= 15 && dec <= 22 {
			v := float64(m) / pow10[dec]
			if s[0] == '-' {
				v = -v
			}
			return v, nil
		}
		return parseFloat(s, s, "")
	}
	mant := s[:i]
	c := s[i]
	var exp string
	switch {
	case c == 'E' || c == 'e' || c == 'D' || c == 'd':
		f.ExpChar = c
		exp = s[i+1:]
	case (c == '+' || c == '-') && i > start:
		exp = s[i:] // Fortran drops the letter for 3-digit exponents
	default:
		return 0, ErrSyntax
	}
	if !validExp(exp) {
		return 0, ErrSyntax
	}
	f.Exp = true
	f.Sig = max(sig, 1)
	return parseFloat(s, mant, exp)
}

// parseFloat is strconv.ParseFloat of mant with exponent exp ("" for
// none); s, the whole field, is for the range error.
func parseFloat(s, mant, exp string) (float64, error) {
	norm := mant
	if exp != "" {
		norm = mant + "e" + exp
	}
	v, err := strconv.ParseFloat(norm, 64)
	if err != nil {
		var ne *strconv.NumError
		if errors.As(err, &ne) && ne.Err == strconv.ErrRange {
			return v, fmt.Errorf("%w: %s is out of the float64 range", ErrSyntax, s)
		}
		return 0, ErrSyntax
	}
	return v, nil
}

// pow10 holds the powers of ten that are exact in float64 (10^22 is the
// largest: 5^22 < 2^53).
var pow10 = [23]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9,
	1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

func validExp(e string) bool {
	if e != "" && (e[0] == '+' || e[0] == '-') {
		e = e[1:]
	}
	if e == "" {
		return false
	}
	for i := 0; i < len(e); i++ {
		if e[i] < '0' || e[i] > '9' {
			return false
		}
	}
	return true
}

// Merge widens f to cover g: a column's format is the widest of its
// values, so that every value is reproduced.
//
// Merging also tracks the shortest round-trip class: it holds while both
// sides were printed in one shortest style, and is chosen once the
// values differ in decimals or notation (then no fixed or exponent format
// reproduces them all).
func (f Format) Merge(g Format) Format {
	f.mixed = f.mixed || g.mixed || f.Exp != g.Exp || f.Decimals != g.Decimals || (f.Exp && f.Sig != g.Sig)
	f.cand &= g.cand
	f.Shortest = 0
	if f.mixed && f.cand&candRepr != 0 {
		f.Shortest = ShortRepr
	} else if f.mixed && f.cand&candG != 0 {
		f.Shortest = ShortG
	}
	if g.Exp && !f.Exp {
		f.Exp, f.ExpChar = true, g.ExpChar
	}
	f.Decimals = max(f.Decimals, g.Decimals)
	f.Sig = max(f.Sig, g.Sig)
	if f.ExpChar == 0 {
		f.ExpChar = g.ExpChar
	}
	return f
}

// String is the form stored in files: "fixed:6" or "exp:10:E"; "exp:N:F"
// marks Fortran's dropped exponent letter (E for two-digit exponents,
// none for three digits).
//
// The shortest round-trip class is "short:r" (Python repr) or "short:g"
// (Go 'g', -1).
func (f Format) String() string {
	if f.Shortest != 0 {
		return "short:" + string(f.Shortest)
	}
	if f.Exp {
		c := "F"
		if f.ExpChar != 0 {
			c = string(f.ExpChar)
		}
		return fmt.Sprintf("exp:%d:%s", f.Sig, c)
	}
	return fmt.Sprintf("fixed:%d", f.Decimals)
}

// ParseFormat reads the String form back.
func ParseFormat(s string) (Format, error) {
	parts := strings.Split(s, ":")
	switch {
	case len(parts) == 2 && parts[0] == "short" && (parts[1] == "r" || parts[1] == "g"):
		c := map[string]uint8{"r": candRepr, "g": candG}[parts[1]]
		return Format{Shortest: parts[1][0], cand: c, mixed: true}, nil
	case len(parts) == 2 && parts[0] == "fixed":
		d, err := strconv.Atoi(parts[1])
		if err != nil || d < 0 || d > 30 {
			break
		}
		return Format{Decimals: d}, nil
	case len(parts) == 3 && parts[0] == "exp" && len(parts[2]) == 1:
		n, err := strconv.Atoi(parts[1])
		if err != nil || n < 1 || n > 30 {
			break
		}
		c := parts[2][0]
		switch c {
		case 'F':
			c = 0
		case 'E', 'e', 'D', 'd':
		default:
			return Format{}, fmt.Errorf("textnum: bad exponent letter in %q", s)
		}
		return Format{Exp: true, Sig: n, ExpChar: c}, nil
	}
	return Format{}, fmt.Errorf("textnum: bad format %q (want fixed:N, exp:N:E or short:r)", s)
}

// Append formats v in f: fixed notation with Decimals digits after the
// point, or exponent notation with Sig significant digits and a two-digit
// (or longer) exponent, using the recorded exponent letter.
//
// The shortest round-trip class prints the shortest digits that read back
// to v, in its style.
func (f Format) Append(dst []byte, v float64) []byte {
	switch f.Shortest {
	case ShortRepr:
		return append(dst, repr(v)...)
	case ShortG:
		return strconv.AppendFloat(dst, v, 'g', -1, 64)
	}
	if !f.Exp {
		return strconv.AppendFloat(dst, v, 'f', f.Decimals, 64)
	}
	b := strconv.AppendFloat(nil, v, 'e', max(f.Sig-1, 0), 64)
	if f.ExpChar != 'e' && f.ExpChar != 0 {
		for i := range b {
			if b[i] == 'e' {
				b[i] = f.ExpChar
			}
		}
	} else if f.ExpChar == 0 {
		// Dropped letter: Fortran writes it only for 2-digit exponents.
		for i := range b {
			if b[i] == 'e' {
				if len(b)-i-2 > 2 {
					b = append(b[:i], b[i+1:]...)
				} else {
					b[i] = 'E'
				}
				break
			}
		}
	}
	return append(dst, b...)
}

// Step is the resolution of fixed-format values (10^-Decimals), or 0 for
// exponent notation and the shortest class, where the resolution varies
// with the value.
func (f Format) Step() float64 {
	if !f.Fixed() {
		return 0
	}
	return math.Pow10(-f.Decimals)
}
