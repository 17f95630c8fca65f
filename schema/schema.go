// Package schema holds trajvault's documented layout: the machine-readable
// element list (layout.json, described for people in layout.md), the JSON
// Schema that checks it, and the JSON Schema of validate's findings.
package schema

import (
	"bytes"
	"embed"
	"encoding/json"
	"fmt"
	"regexp"
	"sort"
	"strings"
	"sync"

	"github.com/santhosh-tekuri/jsonschema/v5"
)

//go:embed layout.json
var layoutJSON []byte

//go:embed layout.schema.json
var layoutSchemaJSON []byte

//go:embed findings.schema.json
var findingsSchemaJSON []byte

//go:embed layout.md
var layoutMD []byte

// Element is one documented object of the layout.
type Element struct {
	Path     string `json:"path"`  // "/a/b" or "/a/b@attr"; {group} stands for any particle group
	Kind     string `json:"kind"`  // group, attribute, dataset, time-dependent
	DType    string `json:"dtype"` // int, float, string
	Shape    string `json:"shape"` // scalar or [X][Y]..., X a number or a symbol
	Unit     string `json:"unit"`  // dimension name; "" = no unit
	Required bool   `json:"required"`
	Module   bool   `json:"module"` // part of the trajvault_electronic module
	Doc      string `json:"doc"`
}

// Object and Attr split Path into object path and attribute name.
func (e Element) Object() string {
	if i := strings.IndexByte(e.Path, '@'); i >= 0 {
		return e.Path[:i]
	}
	return e.Path
}

// Attr is the attribute name, or "" when the element is an object.
func (e Element) Attr() string {
	if i := strings.IndexByte(e.Path, '@'); i >= 0 {
		return e.Path[i+1:]
	}
	return ""
}

var dimRE = regexp.MustCompile(`\[([0-9A-Z]+)\]`)

// Dims returns the shape's dimensions as symbols or numbers; nil for a
// scalar. For time-dependent elements the first is T.
func (e Element) Dims() []string {
	if e.Shape == "scalar" || e.Shape == "" {
		return nil
	}
	var out []string
	for _, m := range dimRE.FindAllStringSubmatch(e.Shape, -1) {
		out = append(out, m[1])
	}
	return out
}

// Layout is the parsed layout.json.
type Layout struct {
	Name        string            `json:"name"`
	Version     string            `json:"version"`
	H5MDVersion []int             `json:"h5md_version"`
	Module      Module            `json:"module"`
	Symbols     map[string]string `json:"symbols"`
	Elements    []Element         `json:"elements"`
}

// Module names trajvault's electronic-state module.
type Module struct {
	Name    string `json:"name"`
	Version []int  `json:"version"`
}

// Find returns the element with the given templated path.
func (l *Layout) Find(path string) (Element, bool) {
	for _, e := range l.Elements {
		if e.Path == path {
			return e, true
		}
	}
	return Element{}, false
}

// current parses the embedded layout on first use, not at start-up:
// commands that never validate (export, inspect) start faster.
var current = sync.OnceValue(func() *Layout {
	l, err := parseLayout(layoutJSON)
	if err != nil {
		panic("schema: embedded layout.json: " + err.Error())
	}
	return l
})

// Current is the layout this build checks against.
func Current() *Layout { return current() }

func compile(name string, src []byte) (*jsonschema.Schema, error) {
	c := jsonschema.NewCompiler()
	c.Draft = jsonschema.Draft2020
	if err := c.AddResource(name, bytes.NewReader(src)); err != nil {
		return nil, err
	}
	return c.Compile(name)
}

func parseLayout(src []byte) (*Layout, error) {
	sch, err := compile("layout.schema.json", layoutSchemaJSON)
	if err != nil {
		return nil, err
	}
	var doc any
	if err := json.Unmarshal(src, &doc); err != nil {
		return nil, err
	}
	if err := sch.Validate(doc); err != nil {
		return nil, fmt.Errorf("does not match layout.schema.json: %w", err)
	}
	var l Layout
	dec := json.NewDecoder(bytes.NewReader(src))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&l); err != nil {
		return nil, err
	}
	return &l, nil
}

// FindingsSchema compiles the JSON Schema of `validate --json` output.
func FindingsSchema() (*jsonschema.Schema, error) {
	return compile("findings.schema.json", findingsSchemaJSON)
}

// LayoutMarkdown is layout.md, the human-readable spec.
func LayoutMarkdown() []byte { return layoutMD }

//go:embed recipe.schema.json
var recipeSchemaJSON []byte

// RecipeSchema compiles the JSON Schema of recipe files.
func RecipeSchema() (*jsonschema.Schema, error) {
	return compile("recipe.schema.json", recipeSchemaJSON)
}

//go:embed audit.schema.json
var auditSchemaJSON []byte

// AuditSchema compiles the JSON Schema of `audit --json` output.
func AuditSchema() (*jsonschema.Schema, error) {
	return compile("audit.schema.json", auditSchemaJSON)
}

//go:embed deposit.schema.json
var depositSchemaJSON []byte

// DepositSchema compiles the JSON Schema of deposit.yaml.
func DepositSchema() (*jsonschema.Schema, error) {
	return compile("deposit.schema.json", depositSchemaJSON)
}

//go:embed profiles/*.json
var profilesFS embed.FS

// Profiles are the built-in funder profiles, JSON Schemas applied to a
// bundle's datacite.json: one file schema/profiles/NAME.json each, found
// here by name, so adding a profile is adding its file.
var Profiles = func() []string {
	entries, _ := profilesFS.ReadDir("profiles")
	var names []string
	for _, e := range entries {
		if n, ok := strings.CutSuffix(e.Name(), ".json"); ok {
			names = append(names, n)
		}
	}
	sort.Strings(names)
	return names
}()

// Profile compiles a built-in profile by name, or a user's JSON Schema
// file when name is a path ending in .json.
func Profile(name string) (*jsonschema.Schema, error) {
	c := jsonschema.NewCompiler()
	c.Draft = jsonschema.Draft2020
	for _, p := range Profiles {
		b, _ := profilesFS.ReadFile("profiles/" + p + ".json")
		if err := c.AddResource("https://trajvault.invalid/schema/profiles/"+p+".json", bytes.NewReader(b)); err != nil {
			return nil, err
		}
	}
	if strings.HasSuffix(name, ".json") {
		return c.Compile(name)
	}
	for _, p := range Profiles {
		if p == name {
			return c.Compile("https://trajvault.invalid/schema/profiles/" + p + ".json")
		}
	}
	return nil, fmt.Errorf("unknown profile %q (built in: %s; or a JSON Schema file)", name, strings.Join(Profiles, ", "))
}

//go:embed compare.schema.json
var compareSchemaJSON []byte

// CompareSchema compiles the JSON Schema of `compare --json` output.
func CompareSchema() (*jsonschema.Schema, error) {
	return compile("compare.schema.json", compareSchemaJSON)
}

//go:embed envelope.schema.json
var envelopeSchemaJSON []byte

// EnvelopeSchema compiles the JSON Schema of every command's --json
// output: one envelope whose result follows the command's own schema
// (audit.schema.json, compare.schema.json, or the envelope's $defs).
func EnvelopeSchema() (*jsonschema.Schema, error) {
	c := jsonschema.NewCompiler()
	c.Draft = jsonschema.Draft2020
	for _, r := range []struct {
		name string
		src  []byte
	}{
		{"audit.schema.json", auditSchemaJSON},
		{"compare.schema.json", compareSchemaJSON},
		{"envelope.schema.json", envelopeSchemaJSON},
	} {
		if err := c.AddResource("https://trajvault.invalid/schema/"+r.name, bytes.NewReader(r.src)); err != nil {
			return nil, err
		}
	}
	return c.Compile("https://trajvault.invalid/schema/envelope.schema.json")
}
