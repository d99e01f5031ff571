package output

import (
	"encoding/json"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// TestReplace: a file replaced or added inside a committed folder is whole,
// listed in the manifest, leaves no temporary, and the folder stays a
// previous output; a foreign folder is refused (known by construction).
func TestReplace(t *testing.T) {
	root := t.TempDir()
	out := filepath.Join(root, "out")
	d, err := CreateFolder(out, false)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(d.Path("a.txt"), []byte("old"), 0o666)
	if err := d.Commit(); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ name, data string }{{"a.txt", "new"}, {"report.html", "<p>hi</p>"}} {
		if err := Replace(out, c.name, []byte(c.data)); err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if got, _ := os.ReadFile(filepath.Join(out, c.name)); string(got) != c.data {
			t.Errorf("%s holds %q, want %q", c.name, got, c.data)
		}
	}
	var m manifest
	raw, _ := os.ReadFile(filepath.Join(out, ManifestName))
	if err := json.Unmarshal(raw, &m); err != nil || !slices.Contains(m.Files, "report.html") || !slices.Contains(m.Files, "a.txt") {
		t.Errorf("manifest %s", raw)
	}
	entries, _ := os.ReadDir(out)
	if len(entries) != 3 {
		t.Errorf("folder holds %d entries, want 3 (a temporary left?)", len(entries))
	}
	if err := CheckFolder(out, true); err != nil {
		t.Errorf("the folder is no longer a previous output: %v", err)
	}
	foreign := filepath.Join(root, "foreign")
	os.Mkdir(foreign, 0o777)
	os.WriteFile(filepath.Join(foreign, "x"), nil, 0o666)
	if err := Replace(foreign, "report.html", nil); err == nil {
		t.Error("a foreign folder was written into")
	}
	if err := Replace(out, "../escape", nil); err == nil {
		t.Error("a name outside the folder was accepted")
	}
}
