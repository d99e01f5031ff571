package figures

import (
	"image"
	"image/png"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestWritePNG(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "ql.png")
	if err := WritePNG(path, image.NewRGBA(image.Rect(0, 0, 900, 20))); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	cfg, err := png.DecodeConfig(f)
	if err != nil || cfg.Width != 900 || cfg.Height != 20 {
		t.Fatalf("decoded %+v, %v", cfg, err)
	}
	assertOnly(t, dir, "ql.png")
}

func TestWritePNGErrorsLeaveNoTemp(t *testing.T) {
	dir := t.TempDir()
	// Encoding fails: a zero-size image is not a valid PNG.
	if err := WritePNG(filepath.Join(dir, "empty.png"), image.NewRGBA(image.Rect(0, 0, 0, 0))); err == nil {
		t.Error("zero-size image: no error")
	}
	// Renaming fails: the target is a non-empty folder.
	target := filepath.Join(dir, "taken.png")
	if err := os.MkdirAll(filepath.Join(target, "x"), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := WritePNG(target, image.NewRGBA(image.Rect(0, 0, 2, 2))); err == nil {
		t.Error("folder in the way: no error")
	}
	assertOnly(t, dir, "taken.png")
}

func TestWritePNGMissingFolder(t *testing.T) {
	path := filepath.Join(t.TempDir(), "missing", "ql.png")
	err := WritePNG(path, image.NewRGBA(image.Rect(0, 0, 2, 2)))
	if err == nil || !strings.Contains(err.Error(), path) {
		t.Errorf("error %v does not name %s", err, path)
	}
}

// assertOnly fails unless dir holds exactly the named entries.
func assertOnly(t *testing.T, dir string, names ...string) {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range entries {
		got = append(got, e.Name())
	}
	if strings.Join(got, ",") != strings.Join(names, ",") {
		t.Errorf("folder holds %v, want %v", got, names)
	}
}
