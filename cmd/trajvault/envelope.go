package main

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"io"

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

// printEnvelopeStream is printEnvelope for a result too large to build in
// memory (the values of a selection): writeResult writes the result's
// JSON itself, after the other members; ok is true and there are no
// findings. Call it once every usage error has been ruled out: an error
// while writeResult writes leaves the document incomplete, and is
// returned (exit 2).
func printEnvelopeStream(g *globals, command string, writeResult func(io.Writer) error) error {
	e := envelope{Tool: toolInfo{"trajvault", toolVersion()}, Command: command, OK: true, Findings: []finding.Finding{}}
	b, err := json.MarshalIndent(e, "", "  ")
	if err != nil {
		return err
	}
	w := bufio.NewWriter(g.stdout)
	w.Write(bytes.TrimSuffix(b, []byte("\n}")))
	w.WriteString(",\n  \"result\": ")
	if err := writeResult(w); err != nil {
		w.Flush()
		return err
	}
	w.WriteString("}\n")
	return w.Flush()
}
