package schema

import (
	"bufio"
	"bytes"
	"encoding/json"
	"strings"
	"testing"

	"trajvault/internal/trajfile"
	"trajvault/internal/units"
)

// TestLayoutMatchesMarkdown checks that layout.md's element table and
// layout.json list the same elements with the same attributes.
func TestLayoutMatchesMarkdown(t *testing.T) {
	rows := map[string][]string{}
	inTable := false
	sc := bufio.NewScanner(bytes.NewReader(layoutMD))
	for sc.Scan() {
		line := sc.Text()
		if strings.HasPrefix(line, "| Path | Kind |") {
			inTable = true
			continue
		}
		if inTable && !strings.HasPrefix(line, "|") {
			break
		}
		if !inTable || strings.HasPrefix(line, "|---") {
			continue
		}
		line = strings.ReplaceAll(line, `\|`, "\x00")
		cells := strings.Split(strings.Trim(line, "|"), "|")
		for i := range cells {
			cells[i] = strings.ReplaceAll(strings.TrimSpace(cells[i]), "\x00", "|")
		}
		rows[strings.Trim(cells[0], "`")] = cells
	}
	if len(rows) == 0 {
		t.Fatal("no element table found in layout.md")
	}
	dash := func(s string) string {
		if s == "" {
			return "-"
		}
		return s
	}
	yes := map[bool]string{true: "yes", false: "no"}
	for _, e := range Current().Elements {
		r, ok := rows[e.Path]
		if !ok {
			t.Errorf("%s: in layout.json, missing from layout.md", e.Path)
			continue
		}
		delete(rows, e.Path)
		want := []string{"`" + e.Path + "`", e.Kind, dash(e.DType), dash(e.Shape), dash(e.Unit), yes[e.Required], e.Doc}
		for i := 1; i < len(want); i++ {
			if r[i] != want[i] {
				t.Errorf("%s column %d: layout.md %q, layout.json %q", e.Path, i+1, r[i], want[i])
			}
		}
	}
	for p := range rows {
		t.Errorf("%s: in layout.md, missing from layout.json", p)
	}
}

// TestLayoutSchemaRejects checks that the JSON Schema can fail.
func TestLayoutSchemaRejects(t *testing.T) {
	var doc map[string]any
	json.Unmarshal(layoutJSON, &doc)
	doc["elements"].([]any)[0].(map[string]any)["kind"] = "table"
	bad, _ := json.Marshal(doc)
	if _, err := parseLayout(bad); err == nil {
		t.Error("layout with an unknown kind passed the schema")
	}
	doc["elements"].([]any)[0].(map[string]any)["kind"] = "dataset"
	bad, _ = json.Marshal(doc)
	if _, err := parseLayout(bad); err == nil {
		t.Error("dataset element without dtype/shape passed the schema")
	}
}

func TestModule(t *testing.T) {
	l := Current()
	if l.Module.Name != "trajvault_electronic" || len(l.Module.Version) != 2 {
		t.Errorf("module = %+v", l.Module)
	}
	if _, err := FindingsSchema(); err != nil {
		t.Error(err)
	}
}

// TestAliasesDocumented checks that every entry of the alias table is
// shown in layout.md's table of accepted spellings with its canonical
// symbol.
func TestAliasesDocumented(t *testing.T) {
	md := string(layoutMD)
	for _, a := range units.Aliases {
		found := false
		for _, line := range strings.Split(md, "\n") {
			if strings.Contains(line, "`"+a.Spelling+"`") && strings.Contains(line, "| `"+a.Canonical+"` |") {
				found = true
			}
		}
		if !found && a.Spelling != "\u212b" { // U+212B shares the row of U+00C5
			t.Errorf("alias %q -> %q is not in layout.md's alias table", a.Spelling, a.Canonical)
		}
	}
}

// TestSymbolsDocumented checks that every unit symbol the parser knows is
// named in layout.md, so the documented table is the real one.
func TestSymbolsDocumented(t *testing.T) {
	md := string(layoutMD)
	for _, s := range units.Symbols {
		if !strings.Contains(md, "`"+s.Name+"`") && !strings.Contains(md, " "+s.Name+" ") {
			t.Errorf("unit symbol %q is not documented in layout.md", s.Name)
		}
	}
}

// TestProfilesCompile: every built-in funder profile is a valid JSON
// Schema (draft 2020-12) and each can be named on the command line.
func TestProfilesCompile(t *testing.T) {
	if len(Profiles) < 3 {
		t.Fatalf("built-in profiles %v: expected minimal, fair and eu-grant at least", Profiles)
	}
	for _, p := range Profiles {
		if _, err := Profile(p); err != nil {
			t.Errorf("profile %s: %v", p, err)
		}
	}
	if _, err := Profile("no-such-profile"); err == nil {
		t.Error("an unknown profile name was accepted")
	}
}

// TestParameterAttrsDocumented: every /parameters attribute convert
// writes, named by its constant in internal/trajfile, is an element of
// the documented layout (layout.json, hence layout.md).
func TestParameterAttrsDocumented(t *testing.T) {
	for _, name := range []string{trajfile.StateBaseAttr, trajfile.MomentumUnitAttr, trajfile.MomentumFormatAttr} {
		if _, ok := Current().Find(trajfile.ParametersGroup + "@" + name); !ok {
			t.Errorf("%s@%s is not in layout.json/layout.md", trajfile.ParametersGroup, name)
		}
	}
}

// TestEnvelopeSchema: the envelope schema compiles with the result
// schemas it refers to, and it can fail: a document of another shape, an
// audit finding with a compare code, a validate result without files
// (JSON Schema draft 2020-12, if/then and $ref across resources).
func TestEnvelopeSchema(t *testing.T) {
	sch, err := EnvelopeSchema()
	if err != nil {
		t.Fatal(err)
	}
	doc := func(s string) any {
		var v any
		if err := json.Unmarshal([]byte(s), &v); err != nil {
			t.Fatal(err)
		}
		return v
	}
	tool := `"tool":{"name":"trajvault","version":"v1"}`
	cases := []struct {
		name, doc string
		ok        bool
	}{
		{"validate", `{` + tool + `,"command":"validate","ok":true,"findings":[],"result":{"files":[{"file":"a.h5","layout_version":"1.1","errors":0,"warnings":0}]}}`, true},
		{"validate without files", `{` + tool + `,"command":"validate","ok":true,"findings":[],"result":{}}`, false},
		{"no tool", `{"command":"validate","ok":true,"findings":[]}`, false},
		{"unknown command", `{` + tool + `,"command":"frobnicate","ok":true,"findings":[]}`, false},
		{"finding without message", `{` + tool + `,"command":"scan","ok":false,"findings":[{"code":"P1","severity":"error"}],"result":{"trajectories":[]}}`, false},
		{"audit finding with a compare code", `{` + tool + `,"command":"audit","ok":false,"findings":[{"code":"C2","severity":"error","message":"x"}],` +
			`"result":{"caution":"c","trajectories":[],"ensemble":[],"flagged":0,"verdict":"ok"}}`, false},
		{"audit", `{` + tool + `,"command":"audit","ok":true,"findings":[{"code":"A1","severity":"note","message":"x"}],` +
			`"result":{"caution":"c","trajectories":[],"ensemble":[],"flagged":0,"verdict":"ok"}}`, true},
		{"audit result with findings", `{` + tool + `,"command":"audit","ok":true,"findings":[],` +
			`"result":{"caution":"c","trajectories":[],"ensemble":[],"flagged":0,"verdict":"ok","findings":[]}}`, false},
	}
	for _, c := range cases {
		err := sch.Validate(doc(c.doc))
		if (err == nil) != c.ok {
			t.Errorf("%s: valid=%v, want %v (%v)", c.name, err == nil, c.ok, err)
		}
	}
}
