// Package finding is the one shape of everything trajvault reports about
// its input: problems found while scanning text logs, layout and bag
// rules broken by a file or bundle, and audit verdicts. Every finding has
// a stable code (one code per rule), a severity, a message that says
// what to do, where it happened and, when it concerns one, the quantity.
// Commands decide only how to print findings.
package finding

import (
	"fmt"
	"sort"
	"strconv"
	"strings"
)

// Severity of a finding: errors make a run fail (exit 1), warnings and
// notes do not.
type Severity string

const (
	Error   Severity = "error"
	Warning Severity = "warning"
	Note    Severity = "note"
)

// rank orders severities, most severe first.
func (s Severity) rank() int {
	switch s {
	case Error:
		return 0
	case Warning:
		return 1
	}
	return 2
}

// Location says where a finding is. Line and Column count from 1; zero
// means unknown or the whole line (file) is at fault.
type Location struct {
	File   string `json:"file,omitempty"`
	Line   int    `json:"line,omitempty"`
	Column int    `json:"column,omitempty"`
	// Path is an HDF5 path inside File (e.g. /particles/all/position), or
	// a path inside a bag.
	Path string `json:"path,omitempty"`
}

// String formats the location as file:line:col: path (parts left out when
// unknown).
func (l Location) String() string {
	var b strings.Builder
	if l.File != "" {
		b.WriteString(l.File)
		if l.Line > 0 {
			b.WriteString(":" + strconv.Itoa(l.Line))
			if l.Column > 0 {
				b.WriteString(":" + strconv.Itoa(l.Column))
			}
		}
	}
	if l.Path != "" {
		if b.Len() > 0 {
			b.WriteString(": ")
		}
		b.WriteString(l.Path)
	}
	return b.String()
}

// Finding is one thing found.
type Finding struct {
	Code     string   `json:"code"`
	Severity Severity `json:"severity"`
	Location
	Quantity string `json:"quantity,omitempty"`
	Message  string `json:"message"`
	// More counts further findings of the same code at the same place
	// that were folded into this one (see List).
	More int `json:"more,omitempty"`
}

// String is the one-line human form: severity, code, place, message.
func (f Finding) String() string {
	s := fmt.Sprintf("%-7s %-4s ", f.Severity, f.Code)
	if loc := f.Location.String(); loc != "" {
		s += loc + ": "
	}
	s += f.Message
	if f.More > 0 {
		s += fmt.Sprintf(" (and %d more like this)", f.More)
	}
	return s
}

// List collects findings, keeping at most PerPlace of one code at one
// place (file and path); the last kept one counts the rest in More, so
// that nothing is dropped without a word.
type List struct {
	PerPlace int // 0 means keep all
	items    []Finding
	kept     map[string]int // code+place -> index of the last kept
	seen     map[string]int
}

// Add records f.
func (l *List) Add(f Finding) {
	if l.PerPlace > 0 {
		if l.kept == nil {
			l.kept, l.seen = map[string]int{}, map[string]int{}
		}
		key := f.Code + "\x00" + f.File + "\x00" + f.Path
		l.seen[key]++
		if l.seen[key] > l.PerPlace {
			l.items[l.kept[key]].More++
			return
		}
		l.kept[key] = len(l.items)
	}
	l.items = append(l.items, f)
}

// Addf records a finding with a formatted message.
func (l *List) Addf(code string, sev Severity, loc Location, format string, args ...any) {
	l.Add(Finding{Code: code, Severity: sev, Location: loc, Message: fmt.Sprintf(format, args...)})
}

// Findings returns what was recorded, in order of recording.
func (l *List) Findings() []Finding { return l.items }

// Count returns the number of findings of severity s, folded ones included.
func Count(fs []Finding, s Severity) int {
	n := 0
	for _, f := range fs {
		if f.Severity == s {
			n += 1 + f.More
		}
	}
	return n
}

// Sort orders findings for printing: most severe first, then by place and
// code, so that the same input gives the same output.
func Sort(fs []Finding) {
	sort.SliceStable(fs, func(i, j int) bool {
		a, b := fs[i], fs[j]
		if a.Severity.rank() != b.Severity.rank() {
			return a.Severity.rank() < b.Severity.rank()
		}
		if a.File != b.File {
			return a.File < b.File
		}
		if a.Line != b.Line {
			return a.Line < b.Line
		}
		if a.Path != b.Path {
			return a.Path < b.Path
		}
		return a.Code < b.Code
	})
}
