package pack

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"strings"

	"github.com/santhosh-tekuri/jsonschema/v5"
	"gopkg.in/yaml.v3"

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

// DepositError lists what is wrong with deposit.yaml, field by field.
type DepositError struct {
	File     string
	Problems []string
}

func (e *DepositError) Error() string {
	return fmt.Sprintf("%s: %d problems:\n  %s", e.File, len(e.Problems), strings.Join(e.Problems, "\n  "))
}

// LoadDeposit reads and checks deposit.yaml.
func LoadDeposit(path string) (*Deposit, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var doc any
	if err := yaml.Unmarshal(raw, &doc); err != nil {
		return nil, &DepositError{File: path, Problems: []string{"not valid YAML: " + err.Error()}}
	}
	js, _ := json.Marshal(doc)
	var generic any
	json.Unmarshal(js, &generic)
	sch, err := schema.DepositSchema()
	if err != nil {
		return nil, err
	}
	var problems []string
	if err := sch.Validate(generic); err != nil {
		var ve *jsonschema.ValidationError
		if errors.As(err, &ve) {
			problems = append(problems, flatten(ve)...)
		} else {
			problems = append(problems, err.Error())
		}
	}
	var d Deposit
	dec := yaml.NewDecoder(bytes.NewReader(raw))
	dec.KnownFields(true)
	if err := dec.Decode(&d); err != nil && len(problems) == 0 {
		problems = append(problems, err.Error())
	}
	for i, c := range d.Creators {
		if c.ORCID != "" && !ValidORCID(c.ORCID) {
			problems = append(problems, fmt.Sprintf("/creators/%d/orcid: %s fails the ORCID check digit (ISO 7064 MOD 11-2); copy it from orcid.org", i, c.ORCID))
		}
	}
	if len(problems) > 0 {
		return nil, &DepositError{File: path, Problems: problems}
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

// DepositTemplate is the commented deposit.yaml that init writes.
const DepositTemplate = `# deposit.yaml: what a repository and a reader need to know about these
# data (trajvault; checked against schema/deposit.schema.json).
# Licensing and third-party rights remain the depositor's responsibility.
deposit: 1
title: {{.Title}}
description: >-
  {{.Description}}
version: "1.0"
license: {{.License}}          # SPDX id: CC-BY-4.0 (suggested), CC0-1.0, ...
keywords: [molecular dynamics, surface hopping, excited states]
publisher: ""                  # the repository, once chosen
# identifier: 10.xxxx/xxxxx    # DOI of the dataset, when reserved
# related_publication: 10.xxxx/xxxxx
contact:
  name: "{{.ContactName}}"
  email: "{{.ContactEmail}}"
creators:
{{range .Creators}}  - name: "{{.Name}}"          # Family, Given
{{if .ORCID}}    orcid: "{{.ORCID}}"
{{else}}    # orcid: 0000-0000-0000-0000
{{end}}{{if .Affiliation}}    affiliation: "{{.Affiliation}}"
{{end}}{{end}}funding: []                    # - {funder: ..., programme: ..., grant: ...}
simulation:
  method: "{{.Method}}"
  electronic_structure: ""     # level of theory and basis
  # states: 2
  # time_step_fs: 0.5
  # electronic_substeps: 20
  initial_conditions: ""       # e.g. Wigner sampling at 300 K
  thermostat: none
  program:
    name: "{{.ProgramName}}"
    version: "{{.ProgramVersion}}"
    # commit: abcdef0
  # cpu_hours: 0
`
