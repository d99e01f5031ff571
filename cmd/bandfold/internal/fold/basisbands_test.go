package fold_test

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/raster"
	"bandfold/tiles"
)

// sameValues fails unless the rasters at a and b hold the same values.
func sameValues(t *testing.T, name, a, b string) {
	t.Helper()
	_, x, _ := jobtest.ReadImage(t, a, tiles.Tile{})
	_, y, _ := jobtest.ReadImage(t, b, tiles.Tile{})
	if len(x) != len(y) {
		t.Fatalf("%s: %d values, want %d", name, len(x), len(y))
	}
	for i := range x {
		if x[i] != y[i] && !(x[i] != x[i] && y[i] != y[i]) {
			t.Errorf("%s: value %d is %v, want %v", name, i, x[i], y[i])
			return
		}
	}
}

// learnSelected fits, on scene, a basis on --bands 2-6 less --exclude 2
// (the second band of the selection, band 3 of the file), so it keeps
// bands 2, 4, 5 and 6 of the file (known by construction).
func learnSelected(t *testing.T, scene, out string) {
	t.Helper()
	jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{scene}, Input: jobkit.Input{Bands: []int{2, 3, 4, 5, 6}},
		Spectral: jobkit.Spectral{Exclude: []int{2}}, Components: 3, Out: out})
}

// keptBands is what learnSelected keeps.
var keptBands = []int{2, 4, 5, 6}

// TestFoldTakesTheBasisBands (issue 24, item 3): on the real Landsat 7
// subset, a basis fitted on --bands 2-6 --exclude 2 records that it kept
// bands 2, 4, 5 and 6 of its 6-band stack, and fold, denoise and unfold
// --compare without --bands use exactly those: their outputs equal those
// made with --bands 2,4-6 value for value (known by construction). Before,
// fold took bands 1, 3, 4 and 5. An older (version 2) basis, which records
// the bands' numbers in their one file but no source bands, gives the same.
func TestFoldTakesTheBasisBands(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	basis := filepath.Join(dir, "b.json")
	learnSelected(t, jobtest.Landsat, basis)
	explicit := jobkit.Input{Bands: keptBands}
	ref := filepath.Join(dir, "ref.tif")
	jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Input: explicit, Basis: basis, Out: ref})

	res := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Out: filepath.Join(dir, "c.tif")})
	sameValues(t, "fold", res.Output, ref)
	if res.ExplainedScene == nil {
		t.Fatal("fold on the fitting scene: no explained share of the scene")
	}
	if !jobtest.RelClose(*res.ExplainedScene, res.ExplainedFit, 1e-9) {
		t.Errorf("fold on the fitting scene: explained %v of the scene, %v of the fit", *res.ExplainedScene, res.ExplainedFit)
	}

	legacy := filepath.Join(dir, "v2.json")
	writeVersion2(t, basis, legacy)
	res = jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: legacy, Out: filepath.Join(dir, "v2.tif")})
	sameValues(t, "fold with a version 2 basis", res.Output, ref)

	denoised := []string{filepath.Join(dir, "d.tif"), filepath.Join(dir, "d-explicit.tif")}
	for i, in := range []jobkit.Input{{}, explicit} {
		out := denoised[i]
		if _, err := fold.Denoise(t.Context(), jobtest.TestEnv, fold.DenoiseOptions{Image: jobtest.Landsat, Basis: basis, Input: in, Out: out, Type: "float64"}); err != nil {
			t.Fatal(err)
		}
	}
	sameValues(t, "denoise", denoised[0], denoised[1])

	var rmse [2]float64
	for i, in := range []jobkit.Input{{}, explicit} {
		u, err := fold.Unfold(t.Context(), jobtest.TestEnv, fold.UnfoldOptions{Components: ref, Basis: basis, Compare: jobtest.Landsat, Input: in,
			Out: filepath.Join(dir, "u.tif"), Type: "float64", Overwrite: true})
		if err != nil {
			t.Fatal(err)
		}
		rmse[i] = u.RMSE
	}
	if rmse[0] != rmse[1] {
		t.Errorf("unfold --compare without --bands measures %v, with --bands 2,4-6 %v", rmse[0], rmse[1])
	}
}

// writeVersion2 writes the basis at src as version 2 wrote it: without
// source bands.
func writeVersion2(t *testing.T, src, dst string) {
	t.Helper()
	data, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(data), `"version": 3,`, `"version": 2,`, 1)
	start := strings.Index(text, `,
  "source_bands": {`)
	if start < 0 || !strings.Contains(text, `"version": 2,`) {
		t.Fatalf("%s: no version 3 or source bands to remove", src)
	}
	end := strings.Index(text[start:], "}") + start + 1
	if err := os.WriteFile(dst, []byte(text[:start]+text[end:]), 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestFoldTakesACubeCutToTheBasisBands (issue 24, item 3): a cube that holds
// only the bands the basis kept is folded whole when its band names are the
// basis's, giving the values of the full stack folded without --bands
// (known by construction: the same bands); a cut cube whose names differ or
// that has no names to check, and a cube of another band count, are
// refused naming the file, the basis and the bands it kept. The cubes are
// invented (Synth) with named bands a..f.
func TestFoldTakesACubeCutToTheBasisBands(t *testing.T) {
	dir := t.TempDir()
	synth, named := filepath.Join(dir, "synth.tif"), filepath.Join(dir, "named.tif")
	jobtest.Synth(t, synth, 6, 40, 30, 3)
	jobtest.WriteNamed(t, named, synth, []string{"a", "b", "c", "d", "e", "f"})
	basis := filepath.Join(dir, "b.json")
	learnSelected(t, named, basis)
	full := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{named}, Basis: basis, Out: filepath.Join(dir, "full.tif")})

	cut := func(name string, bands []int, names []string) string {
		path := filepath.Join(dir, name+".tif")
		writeBands(t, named, path, bands, names)
		return path
	}
	good := cut("cut", keptBands, []string{"b", "d", "e", "f"})
	res := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{good}, Basis: basis, Out: filepath.Join(dir, "cut.c.tif")})
	sameValues(t, "cut cube", res.Output, full.Output)

	out := filepath.Join(dir, "refused.tif")
	for _, tc := range []struct {
		name, scene string
		want        []string
	}{
		{"other names", cut("renamed", keptBands, []string{"b", "c", "e", "f"}), []string{"renamed.tif has as many bands as the basis", "b.json", "bands 2,4-6 of a 6-band stack", `band 2 is "c" where the basis has "d"`}},
		{"no names", cut("unnamed", keptBands, nil), []string{"unnamed.tif has as many bands as the basis", "band 1 has no name or wavelength", "--bands 1-4"}},
		{"five bands", cut("five", []int{1, 2, 4, 5, 6}, nil), []string{"five.tif has 5 bands", "b.json was fitted on bands 2,4-6 of a 6-band stack", "choose its bands with --bands"}},
	} {
		_, err := fold.Fold(t.Context(), jobtest.TestEnv, fold.FoldOptions{Scenes: []string{tc.scene}, Basis: basis, Out: out})
		jobtest.WantError(t, tc.name, err, false, tc.want...)
		jobtest.MustNotExist(t, tc.name, out)
	}
}

// writeBands copies the given 1-based bands of src to path, with the band
// descriptions names (none when nil).
func writeBands(t *testing.T, src, path string, bands []int, names []string) {
	t.Helper()
	s, x, _ := jobtest.ReadImage(t, src, tiles.Tile{})
	p, q := s.Len(), len(bands)
	out := make([]float64, 0, s.Width*s.Height*q)
	for i := range s.Width * s.Height {
		for _, b := range bands {
			out = append(out, x[i*p+b-1])
		}
	}
	jobtest.WriteRasterFile(t, path, raster.Spec{Grid: s.Grid, Bands: q, DataType: "Float32", Descriptions: names}, out)
}
