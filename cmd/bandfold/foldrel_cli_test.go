package main

import (
	"path/filepath"
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
