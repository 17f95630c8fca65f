package main

import (
	"encoding/json"
	"fmt"

	"trajvault/internal/finding"
)

// envelope is the one JSON document a command prints with --json, one per
// run (schema/envelope.schema.json): who made it, which command, whether
// it went well, what it found and what it did. The command's own document
// is result; its findings are never repeated inside result.
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
	return printEnvelopeOK(g, command, finding.Count(findings, finding.Error) == 0, findings, result)
}

// printEnvelopeOK is printEnvelope for commands whose exit status is not
// decided by errors alone (scan fails on warnings; validate exits 2 on an
// unreadable file): ok is what the exit status says.
func printEnvelopeOK(g *globals, command string, ok bool, findings []finding.Finding, result any) error {
	if findings == nil {
		findings = []finding.Finding{}
	}
	e := envelope{Tool: toolInfo{"trajvault", toolVersion()}, Command: command,
		OK: ok, Findings: findings, Result: result}
	b, err := json.MarshalIndent(e, "", "  ")
	if err != nil {
		return err
	}
	_, err = fmt.Fprintln(g.stdout, string(b))
	return err
}
