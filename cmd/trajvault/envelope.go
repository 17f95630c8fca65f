package main

import (
	"encoding/json"
	"fmt"

	"trajvault/internal/finding"
)

// envelope is the one JSON document a command prints with --json: who
// made it, which command, what it found and what it did. Commands whose
// JSON predates it (validate, inspect, audit, compare) carry the same
// tool header in their own documents.
type envelope struct {
	Tool     toolInfo          `json:"tool"`
	Command  string            `json:"command"`
	OK       bool              `json:"ok"`
	Findings []finding.Finding `json:"findings"`
	Result   any               `json:"result,omitempty"`
}

type toolInfo struct {
	Name    string `json:"name"`
	Version string `json:"version"`
}

// printEnvelope writes the envelope of command on stdout. ok is false when
// any finding is an error.
func printEnvelope(g *globals, command string, findings []finding.Finding, result any) error {
	if findings == nil {
		findings = []finding.Finding{}
	}
	e := envelope{Tool: toolInfo{"trajvault", toolVersion()}, Command: command,
		OK: finding.Count(findings, finding.Error) == 0, Findings: findings, Result: result}
	b, err := json.MarshalIndent(e, "", "  ")
	if err != nil {
		return err
	}
	_, err = fmt.Fprintln(g.stdout, string(b))
	return err
}
