package jobkit

import (
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/gonum/mat"

	"bandfold/transform"
)

// TestDocPaths: a document's paths are relative to its folder for local
// files and as given otherwise, and Resolve leads back to the same file
// (true by construction: each case names a file the test made, and the
// relative path is checked by opening it from the document's folder).
func TestDocPaths(t *testing.T) {
	root := t.TempDir()
	t.Chdir(root)
	for _, f := range []string{"data/a.tif", "data/b.tif", "items.json", "out/change/change.tif", "out/report.html"} {
		if err := os.MkdirAll(filepath.Dir(f), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(f, nil, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	d := DocPaths{Dir: "out/change"}
	abs := filepath.Join(root, "data/a.tif")
	for _, tc := range []struct{ name, in, want string }{
		{"relative file", "data/a.tif", "../../data/a.tif"},
		{"absolute file", abs, "../../data/a.tif"},
		{"stack", "data/a.tif, data/b.tif", "../../data/a.tif,../../data/b.tif"},
		{"member of an ItemCollection", "items.json#LC08", "../../items.json#LC08"},
		{"URL", "https://example.org/item.json", "https://example.org/item.json"},
		{"GDAL virtual path", "/vsicurl/https://example.org/a.tif", "/vsicurl/https://example.org/a.tif"},
		{"no local file", "NETCDF:x.nc:var", "NETCDF:x.nc:var"},
	} {
		if got := d.Input(tc.in); got != tc.want {
			t.Errorf("%s: Input(%q) = %q, want %q", tc.name, tc.in, got, tc.want)
		}
	}
	for _, tc := range []struct{ name, in, want string }{
		{"in the folder", "out/change/change.tif", "change.tif"},
		{"absolute, in the folder", filepath.Join(root, "out/change/change.tif"), "change.tif"},
		{"beside the folder", "out/report.html", "../report.html"},
	} {
		got := d.Outputs(tc.in)[0]
		if got != tc.want {
			t.Errorf("%s: Outputs(%q) = %q, want %q", tc.name, tc.in, got, tc.want)
		}
		if !sameFile(t, d.Resolve(got), tc.in) {
			t.Errorf("%s: Resolve(%q) = %q, not %s", tc.name, got, d.Resolve(got), tc.in)
		}
	}
	if got := d.Entries([]string{"change.tif"}); got[0] != "change.tif" {
		t.Errorf("Entries: %q, want change.tif", got)
	}
	if _, err := os.Stat(filepath.Join(d.Dir, d.Input("data/b.tif"))); err != nil {
		t.Errorf("the recorded input does not lead back from the document's folder: %v", err)
	}
}

func sameFile(t *testing.T, a, b string) bool {
	t.Helper()
	fa, err := os.Stat(a)
	if err != nil {
		return false
	}
	fb, err := os.Stat(b)
	return err == nil && os.SameFile(fa, fb)
}

// TestBasisInputsRelative: a basis file names its inputs relative to its
// own folder, as the documents beside outputs do (true by construction:
// the file and the basis are made where the test says).
func TestBasisInputsRelative(t *testing.T) {
	root := t.TempDir()
	t.Chdir(root)
	if err := os.MkdirAll("scenes", 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile("scenes/a.tif", []byte{1}, 0o644); err != nil {
		t.Fatal(err)
	}
	fp, err := transform.FileFingerprint("scenes/a.tif")
	if err != nil {
		t.Fatal(err)
	}
	b, err := transform.NewBasis(transform.Covariance, []transform.Band{{Name: "b1", Index: 1, Scale: 1}, {Name: "b2", Index: 2, Scale: 1}}, 10, []float64{0, 0}, mat.NewSymDense(2, []float64{2, 1, 1, 2}))
	if err != nil {
		t.Fatal(err)
	}
	b.Inputs = []transform.Fingerprint{fp}
	if err := os.MkdirAll("bases", 0o755); err != nil {
		t.Fatal(err)
	}
	if err := WriteBasis(b, "bases/site.basis.json", false); err != nil {
		t.Fatal(err)
	}
	got, err := transform.ReadBasis("bases/site.basis.json")
	if err != nil {
		t.Fatal(err)
	}
	if got.Inputs[0].Path != "../scenes/a.tif" {
		t.Errorf("the basis names its input %q, want ../scenes/a.tif", got.Inputs[0].Path)
	}
}
