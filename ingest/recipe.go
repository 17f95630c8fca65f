package ingest

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"regexp"
	"strconv"
	"strings"

	"gopkg.in/yaml.v3"

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

// Units of the quantities in the logs, by kind; "" = not given.
type Units struct {
	Position string `yaml:"position" json:"position,omitempty"`
	Velocity string `yaml:"velocity" json:"velocity,omitempty"`
	Force    string `yaml:"force" json:"force,omitempty"`
	Momentum string `yaml:"momentum" json:"momentum,omitempty"`
	Mass     string `yaml:"mass" json:"mass,omitempty"`
	Time     string `yaml:"time" json:"time,omitempty"`
	Energy   string `yaml:"energy" json:"energy,omitempty"`
}

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
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	r.Path, r.Text = path, string(raw)
	return &r, nil
}

// knownGroups are the named groups a rule may use.
var knownGroups = map[string]bool{
	"step": true, "time": true, "kinetic_energy": true, "potential_energy": true, "total_energy": true,
	"active_state": true, "state": true, "state_energy": true, "population": true,
	"hop_from": true, "hop_to": true, "hop_kind": true,
}

func (r *Recipe) compile() error {
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
				if !knownGroups[g] && !strings.HasPrefix(g, "state_energy_") && !strings.HasPrefix(g, "population_") {
					return fmt.Errorf("logs[%d].rules[%d]: unknown group name %q (known: step, time, kinetic_energy, potential_energy, total_energy, active_state, state, state_energy, population, state_energy_K, population_K, hop_from, hop_to, hop_kind)", i, j, g)
				}
			}
			rule.re = re
		}
	}
	for _, t := range r.Tables {
		for col, q := range t.Columns {
			if _, _, err := parseQuantity(q); err != nil {
				return fmt.Errorf("tables %s: column %s: %v", t.File, col, err)
			}
		}
	}
	return nil
}

// parseQuantity reads "kinetic_energy" or "state_energy:1".
func parseQuantity(q string) (string, int, error) {
	name, idx, hasIdx := strings.Cut(q, ":")
	k := -1
	if hasIdx {
		n, err := strconv.Atoi(idx)
		if err != nil || n < 0 {
			return "", 0, fmt.Errorf("bad state index in %q", q)
		}
		k = n
	}
	switch name {
	case "step", "time", "kinetic_energy", "potential_energy", "total_energy", "active_state", "ignore":
		if hasIdx {
			return "", 0, fmt.Errorf("%s takes no state index", name)
		}
	case "state_energy", "population":
		if !hasIdx {
			return "", 0, fmt.Errorf("%s needs a state index, e.g. %s:1", name, name)
		}
	default:
		return "", 0, fmt.Errorf("unknown quantity %q", name)
	}
	return name, k, nil
}
