package main

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"bandfold/raster"
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
	_, basis := synthScene(t, dir, 5, 64, 48)
	list := filepath.Join(dir, "list.txt")
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

// TestInertAndLeakyLearnOptionsCLI (issue 24, items 10 and 11): options
// that cannot be right or would change nothing, and data whose sums
// overflow, are one line on stderr naming the flag or file and the
// problem, with exit 2 for the command line and 1 for the data, and
// nothing is written. huge.tif holds values of 1e300 (their squares pass
// the float64 range: known by construction); the scene is invented (demo
// synth).
func TestInertAndLeakyLearnOptionsCLI(t *testing.T) {
	dir := t.TempDir()
	scene, _ := synthScene(t, dir, 4, 30, 20)
	huge, part := filepath.Join(dir, "huge.tif"), filepath.Join(dir, "p.json")
	mustRun(t, "learn", scene, "--partial", part, "--quiet")
	values := make([]float64, 20*10*3)
	for i := range values {
		values[i] = float64(i%7-3) * 1e300
	}
	writeScene(t, huge, raster.Grid{Width: 20, Height: 10}, 3, "Float64", nil, values)
	out := filepath.Join(dir, "new.json")
	learn := func(extra ...string) []string { return append([]string{"learn", scene, "--out", out}, extra...) }
	checkBadInputs(t, []badInput{
		{"min-snr nan", learn("--method", "mnf", "--min-snr", "nan"), 2, "--min-snr NaN: want a finite number, 0 or more"},
		{"min-snr inf", learn("--method", "mnf", "--min-snr", "inf"), 2, "--min-snr +Inf: want a finite number, 0 or more"},
		{"min-snr with -k", learn("--method", "mnf", "--min-snr", "2", "-k", "3"), 2, "--min-snr with --components 3: give one rule"},
		{"min-snr with --variance", learn("--method", "mnf", "--min-snr", "2", "--variance", "0.9"), 2, "--min-snr with --variance: give one rule"},
		{"noise with pca", learn("--noise", "vertical"), 2, "--noise vertical with --method pca: principal components use no noise estimate"},
		{"merge min-snr on pca partials", []string{"merge", part, "--out", out, "--min-snr", "2"}, 2, "--min-snr needs partials of learn --method mnf: " + part},
		{"merge min-snr with --variance", []string{"merge", part, "--out", out, "--min-snr", "2", "--variance", "0.9"}, 2, "--min-snr with --variance"},
		{"values of 1e300", []string{"learn", huge, "--out", out}, 1, huge + ": the values are too large to sum"},
		{"values of 1e300, partial", []string{"learn", huge, "--partial", out}, 1, huge + ": the values are too large to sum"},
	}, out)
}

// TestListFilesCLI (issue 24, item 10): a --list saved with a byte-order
// mark is read (its first image found), and a list with a line too long
// to be paths is one line naming the list and the line, exit 1, nothing
// written (before: "bufio.Scanner: token too long").
func TestListFilesCLI(t *testing.T) {
	dir := t.TempDir()
	_, basis := synthScene(t, dir, 4, 30, 20)
	bom, long := filepath.Join(dir, "bom.txt"), filepath.Join(dir, "long.txt")
	writeFile(t, bom, "\ufeffs.tif\n")
	writeFile(t, long, "s.tif\n"+strings.Repeat("a", 100000)+"\n")
	outDir := filepath.Join(dir, "out")
	mustRun(t, "fold", "--list", bom, "--basis", basis, "--out-dir", outDir, "--quiet")
	if _, err := os.Stat(filepath.Join(outDir, "s.components.tif")); err != nil {
		t.Errorf("list with a byte-order mark: %v", err)
	}
	newDir := filepath.Join(dir, "new")
	checkBadInputs(t, []badInput{
		{"line too long", []string{"fold", "--list", long, "--basis", basis, "--out-dir", newDir}, 1, "list " + long + ": line 2 is longer than 64 KiB"},
	}, newDir)
}

// TestBadBasisFileCLI (issue 24, item 10): a basis file edited by hand is
// refused in one line naming the file, the key and what is wrong with it,
// exit 1, nothing written: a fraction where a count belongs (reported as
// "json: cannot unmarshal number 2.5 into Go struct field
// Basis.components" in the issue) and dates that are not dates (before:
// Go's "Time.UnmarshalJSON" and its layout "2006-01-02T15:04:05Z07:00").
// The basis is learnt from an invented scene (demo synth) and edited.
func TestBadBasisFileCLI(t *testing.T) {
	dir := t.TempDir()
	scene, basis := synthScene(t, dir, 4, 30, 20)
	data, err := os.ReadFile(basis)
	if err != nil {
		t.Fatal(err)
	}
	// edited writes the basis with the first match of pattern replaced.
	edited := func(name, pattern, with string) string {
		re := regexp.MustCompile(pattern)
		if !re.Match(data) {
			t.Fatalf("%s: no %s in %s", name, pattern, basis)
		}
		path := filepath.Join(dir, name+".json")
		writeFile(t, path, re.ReplaceAllString(string(data), with))
		return path
	}
	fraction := edited("fraction", `"components": \d+`, `"components": 2.5`)
	yesterday := edited("yesterday", `"created": "[^"]*"`, `"created": "yesterday"`)
	number := edited("number", `"mod_time": "[^"]*"`, `"mod_time": 5`)
	out := filepath.Join(dir, "c.tif")
	fold := func(b string) []string { return []string{"fold", scene, "--basis", b, "--out", out} }
	checkBadInputs(t, []badInput{
		{"components 2.5", fold(fraction), 1, "basis " + fraction + ": components must be a whole number, got 2.5"},
		{"created in words", fold(yesterday), 1, "basis " + yesterday + `: a date and time (created, inputs.mod_time) must be a string like "2024-05-01T10:30:00Z", got "yesterday"`},
		{"mod_time a number", fold(number), 1, "basis " + number + ": a date and time (created, inputs.mod_time) must be a string"},
	}, out)
}

// synthScene writes an invented scene of the given bands and size with
// demo synth into dir as s.tif and learns its basis into b.json, both
// returned.
func synthScene(t *testing.T, dir string, bands, width, height int) (scene, basis string) {
	t.Helper()
	scene, basis = filepath.Join(dir, "s.tif"), filepath.Join(dir, "b.json")
	mustRun(t, "demo", "synth", "--bands", strconv.Itoa(bands), "--width", strconv.Itoa(width), "--height", strconv.Itoa(height), "--out", scene, "--quiet")
	mustRun(t, "learn", scene, "--out", basis, "--quiet")
	return scene, basis
}
