package transform

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
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
