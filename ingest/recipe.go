package ingest

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"regexp"
	"strings"

	"gopkg.in/yaml.v3"

	"trajvault/internal/quantity"

	"trajvault/schema"
)

// Recipe says how to read an ensemble: a small YAML file, checked against
// schema/recipe.schema.json. The zero Recipe reads every folder with
// defaults (the XYZ file and tables found in it).
type Recipe struct {
	Version      int         `yaml:"recipe" json:"recipe"`
	Description  string      `yaml:"description" json:"description,omitempty"`
	Trajectories string      `yaml:"trajectories" json:"trajectories,omitempty"`
	StateBase    *int        `yaml:"state_base" json:"state_base,omitempty"`
	Units        Units       `yaml:"units" json:"units,omitempty"`
	Geometry     *GeoSpec    `yaml:"geometry" json:"geometry,omitempty"`
	Tables       []TableSpec `yaml:"tables" json:"tables,omitempty"`
	Logs         []LogSpec   `yaml:"logs" json:"logs,omitempty"`

	comment []*regexp.Regexp
	// Path and Text are the recipe file and its content, embedded in the
	// provenance of every converted file.
	Path string `yaml:"-" json:"-"`
	Text string `yaml:"-" json:"-"`
}

// Units of the quantities in the logs, by unit kind (quantity.Kinds);
// a kind left out is not given.
type Units map[string]string

// GeoSpec names the geometry file of a trajectory.
type GeoSpec struct {
	File    string            `yaml:"file" json:"file"`
	Columns map[string]string `yaml:"columns" json:"columns,omitempty"`
	Comment []string          `yaml:"comment" json:"comment,omitempty"`
}

// TableSpec names a column table and maps extra column names.
type TableSpec struct {
	File    string            `yaml:"file" json:"file"`
	Columns map[string]string `yaml:"columns" json:"columns,omitempty"`
}

// LogSpec is a line-oriented log read with regular expressions.
type LogSpec struct {
	File  string `yaml:"file" json:"file"`
	Rules []Rule `yaml:"rules" json:"rules"`
}

// Rule is one regular expression; its named groups name quantities.
type Rule struct {
	Match string `yaml:"match" json:"match"`
	Event string `yaml:"event" json:"event,omitempty"`
	re    *regexp.Regexp
}

// LoadRecipe reads and checks a recipe file.
func LoadRecipe(path string) (*Recipe, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var doc any
	if err := yaml.Unmarshal(raw, &doc); err != nil {
		return nil, fmt.Errorf("%s: not valid YAML: %v", path, err)
	}
	js, err := json.Marshal(doc)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	var generic any
	json.Unmarshal(js, &generic)
	sch, err := schema.RecipeSchema()
	if err != nil {
		return nil, err
	}
	if err := sch.Validate(generic); err != nil {
		return nil, fmt.Errorf("%s: does not match schema/recipe.schema.json: %v", path, err)
	}
	var r Recipe
	dec := yaml.NewDecoder(bytes.NewReader(raw))
	dec.KnownFields(true)
	if err := dec.Decode(&r); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	if err := r.compile(); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	r.Path, r.Text = path, string(raw)
	return &r, nil
}

// knownGroup reports whether a rule may use the named group: a quantity
// of the vocabulary that is not per atom, or one of the group names that
// index states and describe hops.
func knownGroup(g string) bool {
	switch g {
	case "state", "hop_from", "hop_to", "hop_kind":
		return true
	}
	q, ok := quantity.Lookup(g)
	return ok && !q.PerAtom || strings.HasPrefix(g, "state_energy_") || strings.HasPrefix(g, "population_")
}

func knownGroups() string {
	var s []string
	for _, q := range quantity.All() {
		if !q.PerAtom {
			s = append(s, q.Name)
		}
	}
	return strings.Join(append(s, "state", "state_energy_K", "population_K", "hop_from", "hop_to", "hop_kind"), ", ")
}

func (r *Recipe) compile() error {
	if err := r.checkPatterns(); err != nil {
		return err
	}
	for k := range r.Units {
		if _, ok := quantity.LookupKind(k); !ok {
			return fmt.Errorf("units: unknown kind %q (kinds: %s)", k, quantity.KindNames())
		}
	}
	if r.Geometry != nil {
		for _, c := range r.Geometry.Comment {
			re, err := regexp.Compile(c)
			if err != nil {
				return fmt.Errorf("geometry comment pattern %q: %v", c, err)
			}
			r.comment = append(r.comment, re)
		}
	}
	for i := range r.Logs {
		for j := range r.Logs[i].Rules {
			rule := &r.Logs[i].Rules[j]
			re, err := regexp.Compile(rule.Match)
			if err != nil {
				return fmt.Errorf("logs[%d].rules[%d] %q: %v", i, j, rule.Match, err)
			}
			for _, g := range re.SubexpNames()[1:] {
				if g == "" {
					continue
				}
				if !knownGroup(g) {
					return fmt.Errorf("logs[%d].rules[%d]: unknown group name %q (known: %s)", i, j, g, knownGroups())
				}
			}
			rule.re = re
		}
	}
	for _, t := range r.Tables {
		for col, q := range t.Columns {
			if _, _, err := quantity.Recipe(q); err != nil {
				return fmt.Errorf("tables %s: column %s: %v", t.File, col, err)
			}
		}
	}
	return nil
}
