package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestBasisBandsCLI (issue 24, item 3): a basis fitted on --bands 2-6
// --exclude 2 of an invented 6-band scene (demo synth) folds, denoises and
// compares a 6-band image of the same kind without --bands, and an image
// of 5 bands is refused by fold, denoise and unfold --compare: exit 1, one
// line naming the image, the basis and the bands it kept (bands 2, 4, 5
// and 6 of a 6-band stack, known by construction: --exclude counts within
// the selection), nothing written.
func TestBasisBandsCLI(t *testing.T) {
	dir := t.TempDir()
	six, five := filepath.Join(dir, "six.tif"), filepath.Join(dir, "five.tif")
	mustRun(t, "demo", "synth", "--bands", "6", "--width", "40", "--height", "30", "--out", six, "--quiet")
	mustRun(t, "demo", "synth", "--bands", "5", "--width", "40", "--height", "30", "--out", five, "--quiet")
	basis, comps := filepath.Join(dir, "b.json"), filepath.Join(dir, "c.tif")
	mustRun(t, "learn", six, "--bands", "2-6", "--exclude", "2", "-k", "2", "--out", basis, "--quiet")
	mustRun(t, "fold", six, "--basis", basis, "--out", comps, "--quiet")
	mustRun(t, "denoise", six, "--basis", basis, "--out", filepath.Join(dir, "d.tif"), "--quiet")
	mustRun(t, "unfold", comps, "--basis", basis, "--compare", six, "--out", filepath.Join(dir, "u.tif"), "--quiet")
	out := filepath.Join(dir, "out.tif")
	want := "five.tif has 5 bands, but the basis " + basis + " was fitted on bands 2,4-6 of a 6-band stack"
	checkBadInputs(t, []badInput{
		{"fold", []string{"fold", five, "--basis", basis, "--out", out}, 1, want},
		{"denoise", []string{"denoise", five, "--basis", basis, "--out", out}, 1, want},
		{"unfold --compare", []string{"unfold", comps, "--basis", basis, "--compare", five, "--out", out}, 1, want},
	}, out)
}

// TestBatchResumeDamagedCLI (issue 24, item 7): a batch rerun from the
// command line writes again an output that was cut short after it was
// complete (before, it was counted as skipped): exit 0, a warning naming
// the file and why, "damaged" in its --json object, and the summary counts
// it as written; a further rerun skips it. The scene is invented (demo
// synth); the counts are known by construction.
func TestBatchResumeDamagedCLI(t *testing.T) {
	dir := t.TempDir()
	scene, basis, list := filepath.Join(dir, "s.tif"), filepath.Join(dir, "b.json"), filepath.Join(dir, "list.txt")
	mustRun(t, "demo", "synth", "--bands", "5", "--width", "64", "--height", "48", "--out", scene, "--quiet")
	mustRun(t, "learn", scene, "--out", basis, "--quiet")
	if err := os.WriteFile(list, []byte("s.tif\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	outDir := filepath.Join(dir, "out")
	batch := []string{"fold", "--list", list, "--basis", basis, "--out-dir", outDir, "--json"}
	mustRun(t, batch...)
	out := filepath.Join(outDir, "s.components.tif")
	fi, err := os.Stat(out)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Truncate(out, fi.Size()/2); err != nil {
		t.Fatal(err)
	}
	code, stdout, stderr := bandfold(t, batch...)
	var scene1, sum map[string]any
	lines := strings.Split(strings.TrimSpace(stdout), "\n")
	if len(lines) != 2 || json.Unmarshal([]byte(lines[0]), &scene1) != nil || json.Unmarshal([]byte(lines[1]), &sum) != nil {
		t.Fatalf("rerun: exit %d, stdout %q", code, stdout)
	}
	if code != 0 || scene1["status"] != "written" || !strings.Contains(fmt.Sprint(scene1["damaged"]), "cut short") ||
		sum["written"] != 1.0 || sum["skipped"] != 0.0 || !strings.Contains(stderr, "warning: "+out+" was complete but") {
		t.Errorf("rerun after damage: exit %d, scene %v, summary %v, stderr %q", code, scene1, sum, stderr)
	}
	if code, stdout, _ := bandfold(t, batch...); code != 0 || !strings.Contains(stdout, `"skipped":1`) {
		t.Errorf("rerun after the repair: exit %d, stdout %q", code, stdout)
	}
}
