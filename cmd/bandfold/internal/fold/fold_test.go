package fold_test

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/tiles"
	"bandfold/transform"
)

// TestComponentsAreUncorrelatedWithEigenvalueVariances checks, on the real
// Landsat 7 subset (Debian's r-cran-stars), the defining properties of
// principal components (common practice): the component images are
// uncorrelated (largest off-diagonal correlation below 1e-6, computed with
// gonum's stat.CorrelationMatrix) and the sample variance of component i
// (gonum's stat.Variance) equals eigenvalue i to 1e-6 relative.
func TestComponentsAreUncorrelatedWithEigenvalueVariances(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	b, basis := jobtest.LearnLandsat(t, dir)
	comps := filepath.Join(dir, "c.tif")
	res := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Out: comps, Components: 6, Type: "float64"})
	// Known by construction: every pixel of the fitting scene, all six
	// components, so the kept share is all of the variance on both.
	if res.Status != "written" || res.Output != comps || res.Pixels != jobtest.LandsatPixels || res.Components != 6 || res.Type != "Float64" {
		t.Errorf("fold result %+v", res)
	}
	if !jobtest.RelClose(res.ExplainedFit, 1, 1e-12) || res.ExplainedScene == nil || !jobtest.RelClose(*res.ExplainedScene, 1, 1e-9) {
		t.Errorf("explained fit %v scene %v, want 1 and 1", res.ExplainedFit, res.ExplainedScene)
	}
	y := jobtest.ReadValid(t, comps)
	if n, k := y.Dims(); n != jobtest.LandsatPixels || k != 6 {
		t.Fatalf("%s: %d valid pixels of %d bands", comps, n, k)
	}
	var corr mat.SymDense
	stat.CorrelationMatrix(&corr, y, nil)
	worst := 0.0
	for i := range 6 {
		for j := range i {
			worst = math.Max(worst, math.Abs(corr.At(i, j)))
		}
		col := mat.Col(nil, i, y)
		if v := stat.Variance(col, nil); !jobtest.RelClose(v, b.Eigenvalues[i], 1e-6) {
			t.Errorf("component %d variance %v, eigenvalue %v", i+1, v, b.Eigenvalues[i])
		}
	}
	if worst >= 1e-6 {
		t.Errorf("largest off-diagonal correlation %g", worst)
	}
}

// TestFoldUnfoldRestoresWithinRounding: with every component, folding then
// unfolding to the original Byte type gives back the Landsat bands exactly
// (the reconstruction is within rounding of the original), and with int16
// components within the quantisation step.
func TestFoldUnfoldRestoresWithinRounding(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	_, basis := jobtest.LearnLandsat(t, dir)
	for _, typ := range []string{"float32", "int16"} {
		comps, restored := filepath.Join(dir, typ+".c.tif"), filepath.Join(dir, typ+".r.tif")
		f := jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Out: comps, Components: 6, Type: typ})
		// Int16Scaling covers the fitted range, so nothing clamps on the
		// fitting scene (known by construction).
		if f.Saturated != 0 {
			t.Errorf("%s: %v of the scores clamped", typ, f.Saturated)
		}
		res, err := fold.Unfold(t.Context(), jobtest.TestEnv, fold.UnfoldOptions{Components: comps, Basis: basis, Out: restored, Compare: jobtest.Landsat})
		if err != nil {
			t.Fatal(err)
		}
		if res.LossReport == nil || res.RMSEWritten == nil {
			t.Fatalf("%s: no loss measured: %+v", typ, res)
		}
		if *res.RMSEWritten != 0 {
			t.Errorf("%s: written values differ from the original: rmse %v", typ, *res.RMSEWritten)
		}
		if res.MaxAbs >= 0.5 {
			t.Errorf("%s: max abs error %v not within rounding", typ, res.MaxAbs)
		}
		// The original's type and size (gdalinfo of the Landsat subset).
		if res.Type != "Byte" || res.Bands != 6 || res.Components != 6 || res.Pixels != jobtest.LandsatPixels || res.ComparedPixels != jobtest.LandsatPixels || res.Compared != jobtest.Landsat {
			t.Errorf("%s: restored %+v", typ, res)
		}
		// The written pixels, read back, are the original's.
		_, got, _ := jobtest.ReadImage(t, restored, tiles.Tile{})
		_, want, _ := jobtest.ReadImage(t, jobtest.Landsat, tiles.Tile{})
		for i := range want {
			if got[i] != want[i] {
				t.Errorf("%s: restored value %d is %v, original %v", typ, i, got[i], want[i])
				break
			}
		}
	}
}

// TestReconstructionErrorIdentity checks the published identity of principal
// component reconstruction (e.g. Jolliffe, Principal Component Analysis,
// 2nd ed., sec. 3.5; common practice): on the pixels the basis was fitted
// on, sum ||x - x_hat||^2 = (n - 1) * (sum of the dropped eigenvalues), for
// k = 1..p-1 in covariance mode, through the float64 path, to 1e-9
// relative. The sum comes from Unfold's own rmse: rmse^2 * n * p.
func TestReconstructionErrorIdentity(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	b, basis := jobtest.LearnLandsat(t, dir)
	n, p := float64(b.Pixels), float64(len(b.Bands))
	for k := 1; k < len(b.Bands); k++ {
		comps, restored := filepath.Join(dir, fmt.Sprintf("%d.c.tif", k)), filepath.Join(dir, fmt.Sprintf("%d.r.tif", k))
		jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Out: comps, Components: k, Type: "float64"})
		res, err := fold.Unfold(t.Context(), jobtest.TestEnv, fold.UnfoldOptions{Components: comps, Basis: basis, Out: restored, Type: "float64", Compare: jobtest.Landsat})
		if err != nil {
			t.Fatal(err)
		}
		if res.LossReport == nil || res.Components != k || res.Type != "Float64" {
			t.Fatalf("k=%d: unfold result %+v", k, res)
		}
		dropped := 0.0
		for _, v := range b.Eigenvalues[k:] {
			dropped += v
		}
		if sse := res.RMSE * res.RMSE * n * p; !jobtest.RelClose(sse, (n-1)*dropped, 1e-9) {
			t.Errorf("k=%d: sum of squared errors %v, (n-1) x dropped eigenvalues %v", k, sse, (n-1)*dropped)
		}
	}
}

// TestFoldReportsExplainedVarianceOnAnotherScene: a basis fitted on bands
// 1-3 and applied to bands 4-6 of the same scene does not fit, so the
// scene's explained share is below the fit's, with a warning when it is 5
// points below; on the fitting scene both shares agree.
func TestFoldReportsExplainedVarianceOnAnotherScene(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	basis := filepath.Join(dir, "b.json")
	b := jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Bands: []int{1, 2, 3}}, Out: basis, Components: 1}).Basis
	// The fit's share of one component: the basis's own cumulative share.
	wantFit := transform.Cumulative(b.Eigenvalues)[0]

	env, log := jobtest.LoggingEnv()
	r := jobtest.Fold(t, env, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Bands: []int{4, 5, 6}}, IgnoreBandNames: true,
		Basis: basis, Out: filepath.Join(dir, "c.tif")})
	if r.ExplainedScene == nil {
		t.Fatal("no explained share on the scene")
	}
	if !jobtest.RelClose(r.ExplainedFit, wantFit, 1e-12) || *r.ExplainedScene <= 0 || *r.ExplainedScene >= r.ExplainedFit {
		t.Errorf("explained fit %v (basis %v) scene %v", r.ExplainedFit, wantFit, *r.ExplainedScene)
	}
	if warned := strings.Contains(log.String(), "the basis may no longer fit this scene"); warned != (*r.ExplainedScene < r.ExplainedFit-0.05) {
		t.Errorf("explained fit %v scene %v: warned %v; log %q", r.ExplainedFit, *r.ExplainedScene, warned, log.String())
	}

	// The fitting scene itself: both shares agree.
	r = jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Bands: []int{1, 2, 3}}, Basis: basis, Out: filepath.Join(dir, "d.tif")})
	if r.ExplainedScene == nil || !jobtest.RelClose(r.ExplainedFit, *r.ExplainedScene, 1e-9) {
		t.Errorf("fitting scene: explained fit %v scene %v", r.ExplainedFit, r.ExplainedScene)
	}
}

// TestFoldIsIdenticalForAnyWorkerCount: 1, 2 and 7 workers write the same
// component values and report the same figures to the last bit, and unfold
// the same way.
func TestFoldIsIdenticalForAnyWorkerCount(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	_, basis := jobtest.LearnLandsat(t, dir)
	type run struct {
		fold   *fold.FoldScene
		unfold *fold.UnfoldResult
		pixels []float64
	}
	runs := map[int]run{}
	for _, w := range []int{1, 2, 7} {
		env := jobtest.WorkersEnv(w)
		comps := filepath.Join(dir, fmt.Sprintf("w%d.c.tif", w))
		f := jobtest.Fold(t, env, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Tile: 40}, Basis: basis, Out: comps, Components: 4, Type: "float64"})
		u, err := fold.Unfold(t.Context(), env, fold.UnfoldOptions{Components: comps, Basis: basis, Out: filepath.Join(dir, fmt.Sprintf("w%d.r.tif", w)),
			Input: jobkit.Input{Tile: 40}, Type: "float64", Compare: jobtest.Landsat})
		if err != nil {
			t.Fatal(err)
		}
		_, px, _ := jobtest.ReadImage(t, comps, tiles.Tile{})
		runs[w] = run{f, u, px}
	}
	one := runs[1]
	for _, w := range []int{2, 7} {
		r := runs[w]
		if r.fold.Pixels != one.fold.Pixels || *r.fold.ExplainedScene != *one.fold.ExplainedScene || r.fold.ExplainedFit != one.fold.ExplainedFit {
			t.Errorf("workers %d: fold %+v, 1 worker %+v", w, r.fold, one.fold)
		}
		for i := range one.pixels {
			if r.pixels[i] != one.pixels[i] {
				t.Fatalf("workers %d: component value %d is %v, 1 worker %v", w, i, r.pixels[i], one.pixels[i])
			}
		}
		if r.unfold.RMSE != one.unfold.RMSE || r.unfold.MaxAbs != one.unfold.MaxAbs || r.unfold.MeanSAM != one.unfold.MeanSAM {
			t.Errorf("workers %d: unfold rmse %v max %v sam %v, 1 worker %v %v %v", w,
				r.unfold.RMSE, r.unfold.MaxAbs, r.unfold.MeanSAM, one.unfold.RMSE, one.unfold.MaxAbs, one.unfold.MeanSAM)
		}
	}
}

// TestFoldUnfoldRefusals: inputs that do not go with the basis, bad option
// values and broken files are refused with a message naming the problem,
// and nothing is written.
func TestFoldUnfoldRefusals(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	_, basis := jobtest.LearnLandsat(t, dir)
	basis5 := filepath.Join(dir, "b5.json")
	jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{jobtest.Landsat}, Input: jobkit.Input{Bands: []int{1, 2, 3, 4, 5}}, Out: basis5})
	comps := filepath.Join(dir, "c.tif")
	jobtest.Fold(t, jobtest.TestEnv, fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Out: comps, Components: 6})
	broken := filepath.Join(dir, "broken.json")
	if err := os.WriteFile(broken, []byte(`{"format": "bandfold-basis", "version": 1`), 0o644); err != nil {
		t.Fatal(err)
	}
	other := filepath.Join(dir, "other.tif")
	jobtest.Synth(t, other, 6, 40, 30, 1)
	four := filepath.Join(dir, "four.tif")
	jobtest.Synth(t, four, 4, 40, 30, 1)
	named := filepath.Join(dir, "named.tif")
	jobtest.WriteNamed(t, named, other, []string{"a", "b", "c", "d", "e", "f"})
	namedBasis := filepath.Join(dir, "named.json")
	jobtest.Learn(t, jobtest.TestEnv, learn.LearnOptions{Scenes: []string{named}, Out: namedBasis})
	renamed := filepath.Join(dir, "renamed.tif")
	jobtest.WriteNamed(t, renamed, other, []string{"a", "b", "c", "e", "d", "f"})
	out := filepath.Join(dir, "out.tif")

	// Each case runs Fold with fold or Unfold with unfold, writing to out.
	tests := []struct {
		name   string
		fold   *fold.FoldOptions
		unfold *fold.UnfoldOptions
		usage  bool
		want   []string
	}{
		// A basis fitted on --bands 1-5 of the 6-band subset takes those
		// bands of a 6-band image (TestFoldTakesTheBasisBands); an image of
		// 4 bands is refused.
		{"band count", &fold.FoldOptions{Scenes: []string{four}, Basis: basis5}, nil, false,
			[]string{"four.tif has 4 bands", "b5.json was fitted on bands 1-5 of a 6-band stack"}},
		{"band names", &fold.FoldOptions{Scenes: []string{renamed}, Basis: namedBasis}, nil, false,
			[]string{"has bands [a, b, c, e, d, f]", "[a, b, c, d, e, f]", "--ignore-band-names"}},
		{"too many components", &fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Components: 7}, nil, true,
			[]string{"--components 7", "has 6 components"}},
		{"unreadable basis", &fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: broken}, nil, false,
			[]string{"broken.json", "malformed"}},
		{"missing basis", &fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: filepath.Join(dir, "none.json")}, nil, false,
			[]string{"none.json", "no such file"}},
		{"bad type", &fold.FoldOptions{Scenes: []string{jobtest.Landsat}, Basis: basis, Type: "int8"}, nil, true,
			[]string{`--type "int8"`, "want float32, float64 or int16"}},
		{"two scenes to one output", &fold.FoldOptions{Scenes: []string{jobtest.Landsat, other}, Basis: basis}, nil, true,
			[]string{"use --out-dir for 2 scenes"}},
		{"components beyond basis", nil, &fold.UnfoldOptions{Components: comps, Basis: basis5}, false,
			[]string{"c.tif has 6 bands but the basis", "has only 5 components"}},
		{"other basis", nil, &fold.UnfoldOptions{Components: comps, Basis: namedBasis}, false,
			[]string{"was folded with basis", "--ignore-basis-mismatch"}},
		{"compare grid", nil, &fold.UnfoldOptions{Components: comps, Basis: basis, Compare: other}, false,
			[]string{"other.tif is not on the grid of", "c.tif"}},
		{"unfold bad basis", nil, &fold.UnfoldOptions{Components: comps, Basis: broken}, false,
			[]string{"broken.json", "malformed"}},
		{"unfold bad type", nil, &fold.UnfoldOptions{Components: comps, Basis: basis, Type: "int8"}, true,
			[]string{`--type "int8"`, "want same, float32 or float64"}},
	}
	for _, tc := range tests {
		var err error
		if tc.fold != nil {
			o := *tc.fold
			o.Out = out
			_, err = fold.Fold(t.Context(), jobtest.TestEnv, o)
		} else {
			o := *tc.unfold
			o.Out = out
			_, err = fold.Unfold(t.Context(), jobtest.TestEnv, o)
		}
		jobtest.WantError(t, tc.name, err, tc.usage, tc.want...)
		jobtest.MustNotExist(t, tc.name, out)
	}
	jobtest.NoTemporaries(t, dir)
}

// TestBatchFoldSkipsCompleteOutputsAndGoesOnAfterFailures: a batch with a
// missing scene writes the others and returns ErrBatchFailed with each
// scene's result; a rerun skips what is complete and writes what is
// missing; a complete output made with other options is refused, not
// replaced; shards split the list.
func TestBatchFoldSkipsCompleteOutputsAndGoesOnAfterFailures(t *testing.T) {
	dir := t.TempDir()
	scenes, basis := synthScenes(t, dir, 3, 64, 48)
	outDir := filepath.Join(dir, "out")
	missing := filepath.Join(dir, "missing.tif")
	list := filepath.Join(dir, "list.txt")
	// Relative paths in a list are relative to the list's folder.
	if err := os.WriteFile(list, []byte("# scenes\n"+filepath.Base(scenes[1])+"\n\n"+missing+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	outName := func(i int) string { return filepath.Join(outDir, fmt.Sprintf("scene%d.components.tif", i)) }

	var seen []string
	res, err := fold.FoldBatch(t.Context(), jobtest.TestEnv, fold.FoldOptions{Scenes: scenes[:1], List: list, Basis: basis, OutDir: outDir,
		OnScene: func(s fold.FoldScene) { seen = append(seen, s.Input) }})
	if !errors.Is(err, jobkit.ErrBatchFailed) {
		t.Fatalf("a failed scene must give ErrBatchFailed, got %v", err)
	}
	if res == nil || res.Scenes != 3 || res.Written != 2 || res.Failed != 1 || res.Skipped != 0 || len(res.Results) != 3 || res.Shard != "0/1" {
		t.Fatalf("batch result %+v", res)
	}
	wantInputs := []string{scenes[0], scenes[1], missing}
	if len(seen) != len(wantInputs) {
		t.Fatalf("OnScene saw %v, want %v", seen, wantInputs)
	}
	for i, r := range res.Results {
		if r.Input != wantInputs[i] || seen[i] != wantInputs[i] {
			t.Errorf("scene %d: input %s (reported %s), want %s", i, r.Input, seen[i], wantInputs[i])
		}
	}
	for i, r := range res.Results[:2] {
		if r.Status != "written" || r.Output != outName(i) || r.Pixels != 64*48 || r.Error != "" {
			t.Errorf("scene %d: %+v", i, r)
		}
	}
	if r := res.Results[2]; r.Status != "failed" || !strings.Contains(r.Error, "missing.tif") || r.Output != filepath.Join(outDir, "missing.components.tif") {
		t.Errorf("missing scene: %+v", r)
	}
	jobtest.MustNotExist(t, "failed scene", filepath.Join(outDir, "missing.components.tif"))

	// The rerun skips what is complete and writes what was missing.
	res, err = fold.FoldBatch(t.Context(), jobtest.TestEnv, fold.FoldOptions{Scenes: []string{filepath.Join(dir, "scene*.tif")}, Basis: basis, OutDir: outDir})
	if err != nil {
		t.Fatalf("rerun: %v", err)
	}
	if res.Scenes != 3 || res.Skipped != 2 || res.Written != 1 || res.Failed != 0 {
		t.Errorf("rerun result %+v", res)
	}
	for i, want := range []string{"skipped", "skipped", "written"} {
		if r := res.Results[i]; r.Status != want || r.Input != scenes[i] {
			t.Errorf("rerun scene %d: %s %s, want %s %s", i, r.Input, r.Status, scenes[i], want)
		}
	}

	// Complete outputs made with other options are refused, not replaced.
	before, err := os.Stat(outName(0))
	if err != nil {
		t.Fatal(err)
	}
	res, err = fold.FoldBatch(t.Context(), jobtest.TestEnv, fold.FoldOptions{Scenes: scenes[:1], Basis: basis, OutDir: outDir, Components: 1})
	if !errors.Is(err, jobkit.ErrBatchFailed) || res == nil || res.Failed != 1 {
		t.Fatalf("other options: %v, %+v", err, res)
	}
	if r := res.Results[0]; !strings.Contains(r.Error, "exists but was written with other inputs or options") || !strings.Contains(r.Error, "--overwrite") {
		t.Errorf("other options: %+v", r)
	}
	if after, err := os.Stat(outName(0)); err != nil || !after.ModTime().Equal(before.ModTime()) || after.Size() != before.Size() {
		t.Errorf("other options: %s was replaced (%v)", outName(0), err)
	}

	// Shards split the list: 0/2 takes scenes 0 and 2.
	res, err = fold.FoldBatch(t.Context(), jobtest.TestEnv, fold.FoldOptions{Scenes: []string{filepath.Join(dir, "scene*.tif")}, Basis: basis, OutDir: outDir,
		Shard: jobkit.Shard{I: 0, N: 2}, Overwrite: true})
	if err != nil {
		t.Fatalf("shard 0/2: %v", err)
	}
	if res.Shard != "0/2" || res.Scenes != 2 || res.Written != 2 || len(res.Results) != 2 ||
		res.Results[0].Input != scenes[0] || res.Results[1].Input != scenes[2] {
		t.Errorf("shard 0/2: %+v", res)
	}
	jobtest.NoTemporaries(t, outDir)
}
