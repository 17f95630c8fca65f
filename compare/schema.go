package compare

import (
	"bytes"
	_ "embed"

	"github.com/santhosh-tekuri/jsonschema/v5"
)

// SchemaJSON is the JSON Schema (draft 2020-12) of `trajvault compare
// --json`.
//
//go:embed compare.schema.json
var SchemaJSON []byte

// Schema compiles SchemaJSON.
func Schema() (*jsonschema.Schema, error) {
	c := jsonschema.NewCompiler()
	c.Draft = jsonschema.Draft2020
	const url = "https://trajvault.invalid/schema/compare.schema.json"
	if err := c.AddResource(url, bytes.NewReader(SchemaJSON)); err != nil {
		return nil, err
	}
	return c.Compile(url)
}
