package pack

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/github/go-spdx/v2/spdxexp"
	"github.com/santhosh-tekuri/jsonschema/v5"
	"gopkg.in/yaml.v3"

	"trajvault/internal/finding"
	"trajvault/schema"
)

// Deposit is deposit.yaml: what a repository and a reader need to know
// about the data, checked by schema/deposit.schema.json.
type Deposit struct {
	Format             int        `yaml:"deposit" json:"deposit"`
	Title              string     `yaml:"title" json:"title"`
	Description        string     `yaml:"description" json:"description"`
	Version            string     `yaml:"version" json:"version,omitempty"`
	License            string     `yaml:"license" json:"license"`
	Keywords           []string   `yaml:"keywords" json:"keywords,omitempty"`
	Publisher          string     `yaml:"publisher" json:"publisher,omitempty"`
	Identifier         string     `yaml:"identifier" json:"identifier,omitempty"`
	RelatedPublication string     `yaml:"related_publication" json:"related_publication,omitempty"`
	Contact            *Contact   `yaml:"contact" json:"contact,omitempty"`
	Creators           []Creator  `yaml:"creators" json:"creators"`
	Funding            []Funding  `yaml:"funding" json:"funding,omitempty"`
	Simulation         Simulation `yaml:"simulation" json:"simulation"`
}

// Contact is who answers questions about the data.
type Contact struct {
	Name  string `yaml:"name" json:"name"`
	Email string `yaml:"email" json:"email"`
}

// Creator is an author of the data.
type Creator struct {
	Name        string `yaml:"name" json:"name"`
	ORCID       string `yaml:"orcid" json:"orcid,omitempty"`
	Affiliation string `yaml:"affiliation" json:"affiliation,omitempty"`
	ROR         string `yaml:"ror" json:"ror,omitempty"`
}

// Funding is one grant.
type Funding struct {
	Funder    string `yaml:"funder" json:"funder"`
	FunderID  string `yaml:"funder_id" json:"funder_id,omitempty"`
	Programme string `yaml:"programme" json:"programme,omitempty"`
	Grant     string `yaml:"grant" json:"grant,omitempty"`
}

// Simulation records how the runs were made.
type Simulation struct {
	Method              string  `yaml:"method" json:"method"`
	ElectronicStructure string  `yaml:"electronic_structure" json:"electronic_structure,omitempty"`
	States              int     `yaml:"states" json:"states,omitempty"`
	TimeStepFs          float64 `yaml:"time_step_fs" json:"time_step_fs,omitempty"`
	ElectronicSubsteps  int     `yaml:"electronic_substeps" json:"electronic_substeps,omitempty"`
	InitialConditions   string  `yaml:"initial_conditions" json:"initial_conditions,omitempty"`
	Thermostat          string  `yaml:"thermostat" json:"thermostat,omitempty"`
	Program             Program `yaml:"program" json:"program"`
	CPUHours            float64 `yaml:"cpu_hours" json:"cpu_hours,omitempty"`
}

// Program is the simulation code.
type Program struct {
	Name    string `yaml:"name" json:"name"`
	Version string `yaml:"version" json:"version"`
	Commit  string `yaml:"commit" json:"commit,omitempty"`
}

// Codes of the findings about deposit.yaml.
const (
	DSyntax      = "D1" // not valid YAML
	DSchema      = "D2" // against schema/deposit.schema.json
	DPlaceholder = "D3" // a template placeholder is left
	DLicense     = "D4" // not an SPDX License List identifier
	DORCID       = "D5" // ORCID check digit wrong
)

// DepositError lists what is wrong with deposit.yaml, field by field: each
// finding's Path is the field (a JSON pointer such as /creators/0/orcid).
type DepositError struct {
	File     string
	Findings []finding.Finding
}

func (e *DepositError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %d problem", e.File, len(e.Findings))
	if len(e.Findings) != 1 {
		b.WriteString("s")
	}
	b.WriteString(":")
	for _, f := range e.Findings {
		fmt.Fprintf(&b, "\n  %s %s: %s", f.Code, f.Path, f.Message)
	}
	return b.String()
}

// problems collects deposit findings from "field: message" lines.
type problems struct {
	file string
	list []finding.Finding
}

func (p *problems) add(code, line string) {
	field, msg, ok := strings.Cut(line, ": ")
	if !ok || !strings.HasPrefix(field, "/") {
		field, msg = "/", line
	}
	p.list = append(p.list, finding.Finding{Code: code, Severity: finding.Error,
		Location: finding.Location{File: p.file, Path: field}, Message: msg})
}

// LoadDeposit reads and checks deposit.yaml.
func LoadDeposit(path string) (*Deposit, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	probs := &problems{file: path}
	var doc any
	if err := yaml.Unmarshal(raw, &doc); err != nil {
		probs.add(DSyntax, "not valid YAML: "+err.Error())
		return nil, &DepositError{File: path, Findings: probs.list}
	}
	js, _ := json.Marshal(doc)
	var generic any
	json.Unmarshal(js, &generic)
	sch, err := schema.DepositSchema()
	if err != nil {
		return nil, err
	}
	if err := sch.Validate(generic); err != nil {
		var ve *jsonschema.ValidationError
		if errors.As(err, &ve) {
			for _, l := range flatten(ve) {
				probs.add(DSchema, l)
			}
		} else {
			probs.add(DSchema, err.Error())
		}
	}
	var d Deposit
	dec := yaml.NewDecoder(bytes.NewReader(raw))
	dec.KnownFields(true)
	if err := dec.Decode(&d); err != nil && len(probs.list) == 0 {
		probs.add(DSchema, err.Error())
	}
	for _, l := range d.placeholders() {
		probs.add(DPlaceholder, l)
	}
	if d.License != "" {
		if ok, _ := spdxexp.ActiveLicense(d.License); !ok {
			probs.add(DLicense, fmt.Sprintf("/license: %q is not an identifier of the SPDX License List; write one such as CC-BY-4.0 or CC0-1.0 (https://spdx.org/licenses/)", d.License))
		}
	}
	for i, c := range d.Creators {
		if c.ORCID != "" && !ValidORCID(c.ORCID) {
			probs.add(DORCID, fmt.Sprintf("/creators/%d/orcid: %s fails the ORCID check digit (ISO 7064 MOD 11-2); copy it from orcid.org", i, c.ORCID))
		}
	}
	if len(probs.list) > 0 {
		return nil, &DepositError{File: path, Findings: probs.list}
	}
	return &d, nil
}

// flatten turns a schema validation error into "field: what is expected"
// lines.
func flatten(ve *jsonschema.ValidationError) []string {
	if len(ve.Causes) == 0 {
		loc := ve.InstanceLocation
		if loc == "" {
			loc = "/"
		}
		return []string{loc + ": " + ve.Message}
	}
	var out []string
	for _, c := range ve.Causes {
		out = append(out, flatten(c)...)
	}
	return out
}

// ValidORCID checks an ORCID iD's check digit (ISO 7064 MOD 11-2, as
// ORCID documents for its identifiers; common practice).
func ValidORCID(id string) bool {
	digits := strings.ReplaceAll(id, "-", "")
	if len(digits) != 16 {
		return false
	}
	total := 0
	for _, c := range digits[:15] {
		if c < '0' || c > '9' {
			return false
		}
		total = (total + int(c-'0')) * 2
	}
	r := (12 - total%11) % 11
	want := byte('0' + r)
	if r == 10 {
		want = 'X'
	}
	return digits[15] == want
}

// Template values that init writes where the depositor has said nothing;
// a deposit that still holds one is refused (they would be published).
const (
	PlaceholderTitle       = "TITLE OF THE DATA SET"
	PlaceholderDescription = "What was simulated, why, and what the files hold."
	PlaceholderCreator     = "Family, Given"
	PlaceholderEmail       = "name@example.org"
	PlaceholderProgram     = "PROGRAM"
	PlaceholderVersion     = "VERSION"
)

// placeholders names every field that still holds a template value.
func (d *Deposit) placeholders() []string {
	var out []string
	check := func(field, got, placeholder, what string) {
		if strings.TrimSpace(got) == placeholder {
			out = append(out, fmt.Sprintf("%s: still the template's %q; %s", field, placeholder, what))
		}
	}
	check("/title", d.Title, PlaceholderTitle, "write the title of the data set")
	check("/description", d.Description, PlaceholderDescription, "describe what was simulated and what the files hold")
	for i, c := range d.Creators {
		check(fmt.Sprintf("/creators/%d/name", i), c.Name, PlaceholderCreator, "write the creator's name as \"Family, Given\"")
	}
	if d.Contact != nil {
		check("/contact/email", d.Contact.Email, PlaceholderEmail, "write the contact's e-mail address")
	}
	check("/simulation/program/name", d.Simulation.Program.Name, PlaceholderProgram, "name the simulation program")
	check("/simulation/program/version", d.Simulation.Program.Version, PlaceholderVersion, "give the program's version")
	return out
}

// DepositFields are what init knows when it writes deposit.yaml; empty
// fields get the template's placeholders, which LoadDeposit refuses.
type DepositFields struct {
	Title, Description, License, Method string
	Creators                            []Creator
	Contact                             Contact
	Program                             Program
}

// RenderDeposit writes deposit.yaml for f through the YAML encoder, so that
// any text (colons, #, quotes) comes out as valid YAML, with comments that
// say what each field is for.
func RenderDeposit(f DepositFields) ([]byte, error) {
	or := func(v, placeholder string) string {
		if strings.TrimSpace(v) == "" {
			return placeholder
		}
		return v
	}
	if len(f.Creators) == 0 {
		f.Creators = []Creator{{Name: PlaceholderCreator}}
	}
	if f.Contact.Name == "" {
		f.Contact.Name = f.Creators[0].Name
	}
	str := func(v string) *yaml.Node { return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!str", Value: v} }
	num := func(v string) *yaml.Node { return &yaml.Node{Kind: yaml.ScalarNode, Tag: "!!int", Value: v} }
	mapping := func(pairs ...any) *yaml.Node {
		m := &yaml.Node{Kind: yaml.MappingNode}
		for i := 0; i < len(pairs); i += 3 {
			k := str(pairs[i].(string))
			k.Tag = ""
			v := pairs[i+1].(*yaml.Node)
			// A comment starting with "> " goes at the end of the line.
			if c := pairs[i+2].(string); strings.HasPrefix(c, "> ") {
				v.LineComment = c[2:]
			} else if c != "" {
				k.HeadComment = c
			}
			m.Content = append(m.Content, k, v)
		}
		return m
	}
	creators := &yaml.Node{Kind: yaml.SequenceNode}
	for _, c := range f.Creators {
		pairs := []any{"name", str(c.Name), "> Family, Given"}
		if c.ORCID != "" {
			pairs = append(pairs, "orcid", str(c.ORCID), "")
		}
		if c.Affiliation != "" {
			pairs = append(pairs, "affiliation", str(c.Affiliation), "")
		}
		creators.Content = append(creators.Content, mapping(pairs...))
	}
	keywords := &yaml.Node{Kind: yaml.SequenceNode, Style: yaml.FlowStyle}
	for _, k := range []string{"molecular dynamics", "excited states"} {
		keywords.Content = append(keywords.Content, str(k))
	}
	doc := mapping(
		"deposit", num("1"), "deposit.yaml: what a repository and a reader need to know about these data\n(trajvault; checked by trajvault init --check).\nLicensing and third-party rights remain the depositor's responsibility.",
		"title", str(or(f.Title, PlaceholderTitle)), "",
		"description", str(or(f.Description, PlaceholderDescription)), "",
		"version", str("1.0"), "",
		"license", str(or(f.License, "CC-BY-4.0")), "> SPDX id: CC-BY-4.0 (suggested), CC0-1.0, ...",
		"keywords", keywords, "",
		"publisher", str(""), "the repository, once chosen\nidentifier: 10.xxxx/xxxxx  (DOI of the data set, when reserved)\nrelated_publication: 10.xxxx/xxxxx",
		"contact", mapping("name", str(f.Contact.Name), "", "email", str(or(f.Contact.Email, PlaceholderEmail)), ""), "",
		"creators", creators, "",
		"funding", &yaml.Node{Kind: yaml.SequenceNode, Style: yaml.FlowStyle}, "- {funder: ..., funder_id: ..., programme: ..., grant: ...}",
		"simulation", mapping(
			"method", str(f.Method), "",
			"electronic_structure", str(""), "> level of theory and basis",
			"initial_conditions", str(""), "states: 2\ntime_step_fs: 0.5\nelectronic_substeps: 20\ne.g. Wigner sampling at 300 K",
			"thermostat", str("none"), "",
			"program", mapping("name", str(or(f.Program.Name, PlaceholderProgram)), "",
				"version", str(or(f.Program.Version, PlaceholderVersion)), "> commit: abcdef0 (optional)"), "cpu_hours: 0",
		), "",
	)
	var b bytes.Buffer
	enc := yaml.NewEncoder(&b)
	enc.SetIndent(2)
	if err := enc.Encode(&yaml.Node{Kind: yaml.DocumentNode, Content: []*yaml.Node{doc}}); err != nil {
		return nil, err
	}
	if err := enc.Close(); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}
