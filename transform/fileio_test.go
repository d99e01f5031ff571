package transform

import (
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func TestFlattenLeaves(t *testing.T) {
	for _, tc := range []struct {
		in   any
		want string
	}{
		{[]float64{1, 2.5, -3}, `[1, 2.5, -3]`},
		{[][]float64{{1, 2}, {3, 4}}, "[\n  [1, 2],\n  [3, 4]\n]"},
		{[]float64{}, `[]`},
		{map[string]any{"a": []any{"x, y", `q"[`, nil, true}}, "{\n  \"a\": [\"x, y\", \"q\\\"[\", null, true]\n}"},
		{map[string]any{"s": "[1,\n2]"}, "{\n  \"s\": \"[1,\\n2]\"\n}"},
		{[]any{map[string]any{"k": 1}, []int{2}}, "[\n  {\n    \"k\": 1\n  },\n  [2]\n]"},
	} {
		indented, err := json.MarshalIndent(tc.in, "", "  ")
		if err != nil {
			t.Fatal(err)
		}
		got := flattenLeaves(indented)
		if string(got) != tc.want {
			t.Errorf("flattenLeaves(%s) =\n%s\nwant\n%s", indented, got, tc.want)
		}
		// The JSON value is unchanged.
		var a, b bytes.Buffer
		if err := json.Compact(&a, indented); err != nil {
			t.Fatal(err)
		}
		if err := json.Compact(&b, got); err != nil {
			t.Fatalf("flattened JSON is invalid: %v", err)
		}
		if a.String() != b.String() {
			t.Errorf("flattening changed the value: %s → %s", a.String(), b.String())
		}
	}
}

func TestFileFingerprint(t *testing.T) {
	path := filepath.Join(t.TempDir(), "scene.tif")
	if err := os.WriteFile(path, []byte("12345"), 0o644); err != nil {
		t.Fatal(err)
	}
	mtime := time.Date(2023, 7, 1, 12, 0, 0, 0, time.UTC)
	if err := os.Chtimes(path, mtime, mtime); err != nil {
		t.Fatal(err)
	}
	f, err := FileFingerprint(path)
	if err != nil {
		t.Fatal(err)
	}
	if want := (Fingerprint{Path: path, Size: 5, ModTime: mtime}); f != want {
		t.Errorf("FileFingerprint = %+v, want %+v", f, want)
	}
	if _, err := FileFingerprint(path + ".absent"); err == nil {
		t.Error("FileFingerprint of a missing file succeeded")
	}
}

// TestReadFileInUserWords (issue 24, item 10): a basis or partial with a
// UTF-8 byte-order mark is read; a value of the wrong type is reported by
// its key, what it must be and what it is, never as "json: cannot
// unmarshal ..." (the messages are known by construction from each edit).
func TestReadFileInUserWords(t *testing.T) {
	dir := t.TempDir()
	good, err := goldenBasis().Marshal()
	if err != nil {
		t.Fatal(err)
	}
	bom := filepath.Join(dir, "bom.json")
	if err := os.WriteFile(bom, append([]byte("\ufeff"), good...), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadBasis(bom); err != nil {
		t.Errorf("basis with a byte-order mark: %v", err)
	}
	for _, tc := range []struct {
		name string
		data []byte
		want string
	}{
		{"fraction", editJSON(t, func(m map[string]any) { m["components"] = 2.5 }), "components must be a whole number, got 2.5"},
		{"string", editJSON(t, func(m map[string]any) { m["pixels"] = "1000" }), "pixels must be a whole number, got a string"},
		{"version", editJSON(t, func(m map[string]any) { m["version"] = "1" }), "version must be a whole number, got a string"},
		{"list", editJSON(t, func(m map[string]any) { m["mean"] = 3 }), "mean must be a list, got a number"},
		{"band member", editJSON(t, func(m map[string]any) { m["bands"].([]any)[0].(map[string]any)["index"] = "one" }), "bands: index must be a whole number, got a string"},
		{"unknown key", editJSON(t, func(m map[string]any) { m["eigenvalue"] = 1 }), `unknown key "eigenvalue"`},
		{"not JSON", []byte("{\n  \"format\": x\n}"), "not JSON at line 2, column 13"},
		{"truncated", good[:len(good)/2], "truncated"},
		// Issue 24, item 10: time.Time's own errors ("Time.UnmarshalJSON:
		// input is not a JSON string", "parsing time ... as
		// \"2006-01-02T15:04:05Z07:00\"") named no key and Go's layout.
		{"date not a string", editJSON(t, func(m map[string]any) { m["created"] = 5 }), `a date and time (created, inputs.mod_time) must be a string like "2024-05-01T10:30:00Z", got another kind of value`},
		{"date in words", editJSON(t, func(m map[string]any) { m["created"] = "yesterday" }), `must be a string like "2024-05-01T10:30:00Z", got "yesterday"`},
		{"input date", editJSON(t, func(m map[string]any) { m["inputs"].([]any)[0].(map[string]any)["mod_time"] = "2024-13-01" }), `got "2024-13-01"`},
	} {
		path := filepath.Join(dir, "x.json")
		if err := os.WriteFile(path, tc.data, 0o644); err != nil {
			t.Fatal(err)
		}
		_, err := ReadBasis(path)
		if !errors.Is(err, ErrMalformed) || !strings.Contains(err.Error(), tc.want) || strings.Contains(err.Error(), "unmarshal") || strings.Contains(err.Error(), "Go struct") ||
			strings.Contains(err.Error(), "UnmarshalJSON") || strings.Contains(err.Error(), "2006") {
			t.Errorf("%s: %v; want ErrMalformed saying %q", tc.name, err, tc.want)
		}
	}
}
