package units

import (
	"strings"
)

// Alias is a spelling of a unit symbol found in files of other writers,
// accepted for its canonical symbol. Parse reads it; the validator warns
// and says what to write.
type Alias struct {
	Spelling, Canonical, Note string
}

// Aliases is the documented alias table of unit symbols (schema/layout.md,
// "Spellings accepted"). Besides these, a non-SI symbol of the table
// (angstrom, bohr, hartree, au_time) is accepted in any letter case and
// with a plural s ("Angstroms", "BOHR"). SI symbols are never matched
// without regard to case: "Ms" is a megasecond, "ms" a millisecond, and
// "A" stays the ampere.
var Aliases = []Alias{
	{"Angstrom", "angstrom", "capitalised, as several writers spell it"},
	{"Ang", "angstrom", "abbreviation in legacy logs"},
	{"ang", "angstrom", "abbreviation in legacy logs"},
	{"AA", "angstrom", "TeX-style abbreviation"},
	{"\u00c5", "angstrom", "the letter itself; the units module asks for ASCII"},
	{"\u212b", "angstrom", "the angstrom sign U+212B"},
	{"Eh", "hartree", "symbol of the hartree energy"},
	{"Ha", "hartree", "abbreviation of hartree"},
	{"amu", "u", "atomic mass unit, = u"},
	{"AMU", "u", "atomic mass unit, = u"},
	{"dalton", "Da", "name of the unit"},
	{"Newton", "N", "name of the unit"},
	{"newton", "N", "name of the unit"},
	{"second", "s", "name of the unit"},
	{"sec", "s", "abbreviation"},
	{"mole", "mol", "name of the unit"},
	{"Kelvin", "K", "name of the unit"},
	{"kelvin", "K", "name of the unit"},
}

// caseFree are the symbols accepted in any letter case (multi-letter
// names that no prefix combination can imitate).
var caseFree = []string{"angstrom", "bohr", "hartree", "au_time"}

// aliasOf returns the canonical symbol of one factor's symbol.
func aliasOf(sym string) (string, bool) {
	for _, a := range Aliases {
		if a.Spelling == sym {
			return a.Canonical, true
		}
	}
	for _, c := range caseFree {
		if strings.EqualFold(sym, c) || strings.EqualFold(sym, c+"s") {
			return c, true
		}
	}
	return "", false
}

// Canonicalize rewrites a unit string as other writers spell it into the
// H5MD grammar with canonical symbols: "kcal/mol" -> "kcal mol-1",
// "kJ/(mol*nm)" -> "kJ mol-1 nm-1", "Angstrom ps-1" -> "angstrom ps-1",
// "cm^-1" -> "cm-1", "1/ps" -> "ps-1". Products may be written with "*" or
// spaces; one "/" divides by everything after it (parentheses optional);
// powers may be written "^n" or "**n". It reports false when nothing was
// rewritten or the result is not well formed; Parse checks the symbols.
func Canonicalize(text string) (string, bool) {
	s := strings.TrimSpace(text)
	s = strings.NewReplacer("**", "^", "*", " ", "·", " ").Replace(s)
	num, den := s, ""
	if i := strings.IndexByte(s, '/'); i >= 0 {
		num, den = s[:i], s[i+1:]
		if strings.IndexByte(den, '/') >= 0 {
			return "", false // a/b/c: ambiguous as written
		}
		den = strings.TrimSuffix(strings.TrimPrefix(strings.TrimSpace(den), "("), ")")
	}
	var out []string
	add := func(part string, sign int) bool {
		for _, f := range strings.Fields(part) {
			if sign > 0 && f == "1" && len(out) == 0 && den != "" {
				continue // "1/cm"
			}
			base, pow := f, 1
			if i := strings.IndexByte(f, '^'); i >= 0 {
				base = f[:i]
				p := strings.TrimSuffix(strings.TrimPrefix(f[i+1:], "("), ")")
				n, ok := atoiSigned(p)
				if !ok || n == 0 {
					return false
				}
				pow = n
			} else if b, p, ok := splitPower(f); ok && b != f {
				base, pow = b, p
			}
			if isNumber(base) {
				if sign < 0 {
					return false
				}
				out = append(out, f)
				continue
			}
			if c, ok := aliasOf(base); ok {
				base = c
			}
			pow *= sign
			switch {
			case pow == 1:
				out = append(out, base)
			case pow > 0:
				out = append(out, base+"+"+itoa(pow))
			default:
				out = append(out, base+itoa(pow))
			}
		}
		return true
	}
	if !add(num, 1) || !add(den, -1) {
		return "", false
	}
	c := strings.Join(out, " ")
	if c == "" || c == strings.Join(strings.Fields(text), " ") {
		// Nothing but spacing changed: spacing is the grammar's own
		// rule, not a spelling of other writers.
		return "", false
	}
	return c, true
}

func atoiSigned(s string) (int, bool) {
	neg := false
	switch {
	case strings.HasPrefix(s, "-"):
		neg, s = true, s[1:]
	case strings.HasPrefix(s, "+"):
		s = s[1:]
	}
	if s == "" || len(s) > 3 {
		return 0, false
	}
	n := 0
	for _, r := range s {
		if r < '0' || r > '9' {
			return 0, false
		}
		n = 10*n + int(r-'0')
	}
	if neg {
		n = -n
	}
	return n, true
}

func itoa(n int) string {
	if n < 0 {
		return "-" + itoa(-n)
	}
	if n < 10 {
		return string(rune('0' + n))
	}
	return itoa(n/10) + string(rune('0'+n%10))
}
