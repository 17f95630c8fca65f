package finding

import (
	"strings"
	"testing"
)

func TestListFoldsRepeats(t *testing.T) {
	l := List{PerPlace: 2}
	for i := 0; i < 5; i++ {
		l.Addf("V9", Error, Location{File: "a.h5", Path: "/x"}, "bad %d", i)
	}
	l.Addf("V9", Error, Location{File: "a.h5", Path: "/y"}, "other")
	fs := l.Findings()
	if len(fs) != 3 || fs[1].More != 3 || fs[0].More != 0 {
		t.Fatalf("got %+v", fs)
	}
	if got := Count(fs, Error); got != 6 {
		t.Errorf("Count = %d, want 6 (folded ones included)", got)
	}
	if s := fs[1].String(); !strings.Contains(s, "and 3 more like this") {
		t.Errorf("String() = %q: the folded count must be printed", s)
	}
}

func TestLocationString(t *testing.T) {
	for _, c := range []struct {
		loc  Location
		want string
	}{
		{Location{File: "geom.xyz", Line: 12, Column: 3}, "geom.xyz:12:3"},
		{Location{File: "geom.xyz", Line: 12}, "geom.xyz:12"},
		{Location{File: "t.h5", Path: "/particles/all"}, "t.h5: /particles/all"},
		{Location{Path: "/h5md"}, "/h5md"},
		{Location{}, ""},
	} {
		if got := c.loc.String(); got != c.want {
			t.Errorf("%+v: got %q, want %q", c.loc, got, c.want)
		}
	}
}

func TestSortIsDeterministic(t *testing.T) {
	fs := []Finding{
		{Code: "B2", Severity: Warning, Location: Location{Path: "b"}},
		{Code: "V1", Severity: Error, Location: Location{Path: "z"}},
		{Code: "A1", Severity: Note},
		{Code: "V0", Severity: Error, Location: Location{Path: "a"}},
	}
	Sort(fs)
	var got []string
	for _, f := range fs {
		got = append(got, f.Code)
	}
	if strings.Join(got, " ") != "V0 V1 B2 A1" {
		t.Errorf("order %v", got)
	}
}
