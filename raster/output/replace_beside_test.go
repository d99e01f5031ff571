package output

import (
	"errors"
	"os"
	"path/filepath"
	"testing"
)

// TestReplaceBesideOtherFiles: Replace writes one file of a committed
// folder and leaves the files its manifest does not list alone, such as a
// survey drawn into a change folder (issue 24, item 6); it refuses a file
// of that name which the manifest does not list (someone else's) and a
// folder without bandfold's manifest, before writing anything. Known by
// construction: the folder holds what the test put there.
func TestReplaceBesideOtherFiles(t *testing.T) {
	root := t.TempDir()
	out := filepath.Join(root, "chg")
	d, err := CreateFolder(out, false)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(d.Path("report.html"), []byte("old"), 0o666)
	if err := d.Commit(); err != nil {
		t.Fatal(err)
	}
	manifest, _ := os.ReadFile(filepath.Join(out, ManifestName))
	os.WriteFile(filepath.Join(out, "survey.csv"), []byte("labels"), 0o666)
	if err := Replace(out, "report.html", []byte("new")); err != nil {
		t.Fatalf("beside an unlisted survey: %v", err)
	}
	if got, _ := os.ReadFile(filepath.Join(out, "report.html")); string(got) != "new" {
		t.Errorf("report.html holds %q, want %q", got, "new")
	}
	if got, _ := os.ReadFile(filepath.Join(out, "survey.csv")); string(got) != "labels" {
		t.Errorf("survey.csv holds %q, want it untouched", got)
	}
	if got, _ := os.ReadFile(filepath.Join(out, ManifestName)); string(got) != string(manifest) {
		t.Errorf("manifest %s, want it unchanged: %s", got, manifest)
	}
	if err := CheckFolder(out, true); !errors.Is(err, ErrForeignFolder) {
		t.Errorf("the folder with an unlisted survey may be replaced whole: %v", err)
	}
	cases := []struct {
		name, dir, file string
		foreign         bool
	}{
		{"unlisted file of that name", out, "survey.csv", false},
		{"no manifest", root, "report.html", true},
		{"the manifest itself", out, ManifestName, false},
	}
	for _, c := range cases {
		err := CheckReplace(c.dir, c.file)
		if err == nil || errors.Is(err, ErrForeignFolder) != c.foreign {
			t.Errorf("%s: %v", c.name, err)
		}
		if err := Replace(c.dir, c.file, []byte("x")); err == nil {
			t.Errorf("%s: replaced", c.name)
		}
	}
	if got, _ := os.ReadFile(filepath.Join(out, "survey.csv")); string(got) != "labels" {
		t.Errorf("survey.csv holds %q after the refusals", got)
	}
}
