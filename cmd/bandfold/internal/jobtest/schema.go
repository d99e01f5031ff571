package jobtest

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"testing"

	"github.com/santhosh-tekuri/jsonschema/v6"
)

// SchemaDir holds the JSON Schemas of bandfold's documents (docs/schemas).
const SchemaDir = "../../../../docs/schemas"

// ValidJSON validates data against the JSON Schema docs/schemas/NAME.schema.json
// (JSON Schema draft 2020-12, checked with santhosh-tekuri/jsonschema).
func ValidJSON(t *testing.T, name string, data []byte) {
	t.Helper()
	ValidJSONIn(t, SchemaDir, name, data)
}

// ValidJSONIn is ValidJSON with the schema folder given (for tests in
// another folder depth).
func ValidJSONIn(t *testing.T, dir, name string, data []byte) {
	t.Helper()
	path := filepath.Join(dir, name+".schema.json")
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	doc, err := jsonschema.UnmarshalJSON(bytes.NewReader(raw))
	if err != nil {
		t.Fatalf("schema %s: %v", path, err)
	}
	c := jsonschema.NewCompiler()
	if err := c.AddResource(path, doc); err != nil {
		t.Fatalf("schema %s: %v", path, err)
	}
	sch, err := c.Compile(path)
	if err != nil {
		t.Fatalf("schema %s: %v", path, err)
	}
	v, err := jsonschema.UnmarshalJSON(bytes.NewReader(data))
	if err != nil {
		t.Fatalf("not JSON for %s: %v", name, err)
	}
	if err := sch.Validate(v); err != nil {
		t.Errorf("a document against %s: %v", name, err)
	}
}

// ValidJSONFile validates the JSON file at path against a schema.
func ValidJSONFile(t *testing.T, name, path string) {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	ValidJSON(t, name, data)
}

// MarshalOf is the JSON of v, failing the test on error.
func MarshalOf(t *testing.T, v any) []byte {
	t.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return b
}
