package audit

import (
	"encoding/json"
	"math"
	"strings"
	"testing"

	"trajvault/schema"
)

// TestValuesNotFinite: a check value that is NaN or infinite (a damaged
// file can give one) is written as JSON null, so that the report stays
// one valid JSON document (RFC 8259 sec. 6 has no NaN) that follows
// schema/audit.schema.json; finite values are written as encoding/json
// writes them.
func TestValuesNotFinite(t *testing.T) {
	c := Check{Name: "energy", Code: "A1", Verdict: Fail, Summary: "x",
		Values: Values{"drift": math.NaN(), "max": math.Inf(1), "rms": 1.5e-7, "n": 1000000}}
	b, err := json.Marshal(c)
	if err != nil {
		t.Fatal(err)
	}
	want := `"values":{"drift":null,"max":null,"n":1000000,"rms":1.5e-7}`
	if !json.Valid(b) || !strings.Contains(string(b), want) {
		t.Errorf("got %s, want it to hold %s", b, want)
	}
	rep := map[string]any{"caution": "c", "trajectories": []any{}, "ensemble": []any{json.RawMessage(b)}, "flagged": 0, "verdict": "fail"}
	raw, _ := json.Marshal(rep)
	var doc any
	json.Unmarshal(raw, &doc)
	sch, err := schema.AuditSchema()
	if err != nil {
		t.Fatal(err)
	}
	if err := sch.Validate(doc); err != nil {
		t.Errorf("does not follow audit.schema.json: %v", err)
	}
}
