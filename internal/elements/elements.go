// Package elements maps chemical element symbols to atomic numbers and
// standard atomic masses.
//
// Masses are the IUPAC 2013/2021 standard atomic weights, conventional
// values where IUPAC gives an interval (common practice; values for
// H..Ar and the common heavier elements from memory of the IUPAC table,
// CIAAW, ciaaw.org; elements without a stable isotope carry the mass
// number of their longest-lived isotope).
package elements

import (
	"sort"
	"strconv"
	"strings"
)

var symbols = strings.Fields(`H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn
Ga Ge As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb
Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm
Md No Lr Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og`)

// masses[Z-1] in u, for Z = 1..36 and a few common heavier elements.
var masses = map[int]float64{
	1: 1.008, 2: 4.002602, 3: 6.94, 4: 9.0121831, 5: 10.81, 6: 12.011, 7: 14.007, 8: 15.999,
	9: 18.998403163, 10: 20.1797, 11: 22.98976928, 12: 24.305, 13: 26.9815385, 14: 28.085,
	15: 30.973761998, 16: 32.06, 17: 35.45, 18: 39.948, 19: 39.0983, 20: 40.078, 21: 44.955908,
	22: 47.867, 23: 50.9415, 24: 51.9961, 25: 54.938044, 26: 55.845, 27: 58.933194, 28: 58.6934,
	29: 63.546, 30: 65.38, 31: 69.723, 32: 72.630, 33: 74.921595, 34: 78.971, 35: 79.904,
	36: 83.798, 44: 101.07, 45: 102.90550, 46: 106.42, 47: 107.8682, 53: 126.90447, 76: 190.23,
	77: 192.217, 78: 195.084, 79: 196.966569, 80: 200.592,
}

// Symbol returns the symbol of atomic number z, or "" when unknown.
func Symbol(z int) string {
	if z < 1 || z > len(symbols) {
		return ""
	}
	return symbols[z-1]
}

// Number returns the atomic number of a symbol (case-insensitive, as logs
// write "CL" or "cl"), or 0.
func Number(sym string) int {
	for i, s := range symbols {
		if strings.EqualFold(s, sym) {
			return i + 1
		}
	}
	return 0
}

// Mass returns the standard atomic weight of z in u, and whether it is
// tabulated here.
func Mass(z int) (float64, bool) {
	m, ok := masses[z]
	return m, ok
}

// Formula writes atomic numbers as a Hill-order formula: C first, H
// second, then alphabetical; without carbon, all alphabetical (common
// practice, the Hill system of Chemical Abstracts).
func Formula(zs []int) string {
	count := map[string]int{}
	for _, z := range zs {
		s := Symbol(z)
		if s == "" {
			s = "X"
		}
		count[s]++
	}
	var order []string
	if count["C"] > 0 {
		order = append(order, "C")
		if count["H"] > 0 {
			order = append(order, "H")
		}
	}
	var rest []string
	for s := range count {
		if len(order) > 0 && (s == "C" || (s == "H" && count["C"] > 0)) {
			continue
		}
		rest = append(rest, s)
	}
	sort.Strings(rest)
	order = append(order, rest...)
	var b strings.Builder
	for _, s := range order {
		b.WriteString(s)
		if count[s] > 1 {
			b.WriteString(strconv.Itoa(count[s]))
		}
	}
	return b.String()
}
