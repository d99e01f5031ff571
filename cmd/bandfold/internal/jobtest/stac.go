package jobtest

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/tiles/testenv"
)

// STACItemCopy writes the STAC item at src (a fixture of make testdata,
// scripts/stac.sh, whose hrefs are "./FILE") to dst with its hrefs made
// absolute, so that the copy points at the same files from anywhere, after
// edits: pairs of strings, the first of each replaced once by the second.
func STACItemCopy(t *testing.T, src, dst string, edits ...string) string {
	t.Helper()
	testenv.NeedFile(t, src, "make testdata")
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	abs, err := filepath.Abs(filepath.Dir(src))
	if err != nil {
		t.Fatal(err)
	}
	doc := strings.ReplaceAll(string(data), `"href": "./`, `"href": "`+filepath.ToSlash(abs)+"/")
	for i := 0; i+1 < len(edits); i += 2 {
		if !strings.Contains(doc, edits[i]) {
			t.Fatalf("item %s holds no %q to replace", src, edits[i])
		}
		doc = strings.Replace(doc, edits[i], edits[i+1], 1)
	}
	if err := os.WriteFile(dst, []byte(doc), 0o644); err != nil {
		t.Fatal(err)
	}
	return dst
}
