package pairchange_test

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/jobtest"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// changeOutputs are the files of a change folder without --differences
// and --pvalues.
var changeOutputs = []string{"change.tif", "magnitude.tif", "changes.gpkg", "preview.png", "diagnostics.png", "report.html", "item.json", "summary.json"}

// TestChangeCalibrationOnUnchangedLandsat: the real Landsat 7 subset
// (Debian's r-cran-stars) against itself, each date with its own noise that
// correlates across bands, and a radiometric offset on one date. Nothing
// changed, so the differences are Gaussian by construction and Z follows the
// chi-square law the threshold assumes: at chisq:0.999 without sieving, the
// flagged fraction must be 0.1%. Tolerance: with n = 122,848 pixels the
// binomial standard error of 0.001 is 9.0e-5; the no-change covariance is
// itself estimated from the same pixels (relative error about
// sqrt(2/n) per entry, moving the tail by a few percent of 0.001), so we
// accept 0.001 +- 0.0004, about 4.4 standard errors.
func TestChangeCalibrationOnUnchangedLandsat(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	jobtest.NoisyCopy(t, a, 1, 0)
	jobtest.NoisyCopy(t, b, 2, 3)
	s := jobtest.RunChange(t, jobtest.TestEnv, pairchange.ChangeOptions{Before: a, After: b, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "chg")}})
	if s.ValidPixels != jobtest.LandsatPixels {
		t.Errorf("valid pixels %d, want %d", s.ValidPixels, jobtest.LandsatPixels)
	}
	// The default threshold and no minimum area (the zero MinArea).
	if s.Threshold.Rule != change.DefaultThreshold || s.MinAreaPixels != 0 || s.Identical || !s.Converged {
		t.Errorf("threshold %+v, min area %d px, identical %v, converged %v", s.Threshold, s.MinAreaPixels, s.Identical, s.Converged)
	}
	if math.Abs(s.ChangedFrac-0.001) > 0.0004 {
		t.Errorf("flagged %.5f of unchanged pixels at chisq:0.999, want 0.001 +- 0.0004", s.ChangedFrac)
	}
	// Known by construction: the fraction is the count over the valid
	// pixels.
	if s.ChangedFrac != float64(s.ChangedPixels)/float64(s.ValidPixels) {
		t.Errorf("fraction %v for %d of %d pixels", s.ChangedFrac, s.ChangedPixels, s.ValidPixels)
	}
	// The offset between dates goes to the normalisation (before = after
	// - 3 x band number by construction; 0.5 DN is several standard errors
	// of an offset fitted on thousands of stable pixels), not into Z.
	if len(s.Normalization.Bands) == 0 {
		t.Fatalf("no normalisation: %+v", s.Normalization)
	}
	for b, f := range s.Normalization.Bands {
		if math.Abs(f.Offset+3*float64(b+1)) > 0.5 || math.Abs(f.Gain-1) > 0.01 {
			t.Errorf("band %d: gain %v offset %v, want 1 and %v", b+1, f.Gain, f.Offset, -3*(b+1))
		}
	}
	t.Logf("flagged fraction %.5f, iterations %d, threshold %v", s.ChangedFrac, s.Iterations, s.Threshold)
}

// TestChangeOnTheDemoScenario runs change with the command's defaults
// (chisq:0.999, 4 px minimum area) on a 512-pixel run of the invented
// scenario, whose truth is known by construction: recall at least 0.9 and
// false alarms at most 0.5% of the unchanged pixels.
func TestChangeOnTheDemoScenario(t *testing.T) {
	dir := t.TempDir()
	f := jobtest.ScenarioFiles(t, dir, 512, 7)
	out := filepath.Join(dir, "chg")
	s := jobtest.RunChange(t, jobtest.TestEnv, pairchange.ChangeOptions{Before: f.Before, After: f.After, Reference: f.Truth, SharedOptions: series.SharedOptions{Out: out, MinArea: jobkit.MinArea{Px: 4}}})
	r := s.Reference
	if r == nil || r.Recall == nil || r.FalseAlarmRate == nil {
		t.Fatalf("no reference rates in the summary: %+v", r)
	}
	if *r.Recall < 0.9 || *r.FalseAlarmRate > 0.005 {
		t.Errorf("recall %.3f (want >= 0.9), false alarms %.4f (want <= 0.005)", *r.Recall, *r.FalseAlarmRate)
	}
	// Known by construction: the truth is compared on valid pixels only.
	if n := r.TruePositive + r.FalsePositive + r.FalseNegative + r.TrueNegative; n == 0 || n > s.ValidPixels || s.Paths.Resolve(r.File) != f.Truth {
		t.Errorf("reference %s counts %d pixels of %d valid", r.File, n, s.ValidPixels)
	}
	// The scenario's pixels are 10 m: 100 m² each, 1% for the projection.
	if s.ChangedAreaHa == nil || s.ChangedAreaM2 == nil || s.ChangedPixels == 0 ||
		math.Abs(*s.ChangedAreaHa-float64(s.ChangedPixels)*100/1e4) > 0.01**s.ChangedAreaHa || !jobtest.RelClose(*s.ChangedAreaM2, *s.ChangedAreaHa*1e4, 1e-12) {
		t.Errorf("area %v ha (%v m2) for %d pixels of 10 m", s.ChangedAreaHa, s.ChangedAreaM2, s.ChangedPixels)
	}
	if s.MinAreaPixels != 4 || s.Patches == 0 || s.Aligned || s.Identical || s.Basis != "fitted on both dates" || s.Components < 3 {
		t.Errorf("summary %+v", s)
	}
	if len(s.Outputs) != len(changeOutputs) {
		t.Errorf("outputs %v, want %v", s.Outputs, changeOutputs)
	}
	// Outputs are recorded relative to the folder (docs/formats.md).
	for _, name := range changeOutputs {
		path := filepath.Join(out, name)
		if !jobkit.Contains(s.Outputs, name) {
			t.Errorf("outputs %v lack %s", s.Outputs, name)
		}
		if _, err := os.Stat(path); err != nil {
			t.Errorf("missing %s: %v", name, err)
		}
	}
	if s.Caution != jobkit.Caution || !strings.Contains(s.Caution, "screening result") {
		t.Errorf("the summary's caution is %q", s.Caution)
	}
	jobtest.NoTemporaries(t, dir)
	if r.Precision != nil {
		t.Logf("recall %.4f precision %.4f false alarms %.5f", *r.Recall, *r.Precision, *r.FalseAlarmRate)
	}
}

// TestChangeIsIdenticalForAnyWorkerCount: 1, 2 and 7 workers give the same
// summary and the same change statistic at every pixel, to the last bit:
// tiles are merged in order and the sample is chosen by pixel position, not
// by arrival.
func TestChangeIsIdenticalForAnyWorkerCount(t *testing.T) {
	dir := t.TempDir()
	f := jobtest.ScenarioFiles(t, dir, 512, 7)
	type run struct {
		sum   *changefolder.ChangeResult
		z     []float64
		valid []bool
	}
	runs := map[int]run{}
	for _, w := range []int{1, 2, 7} {
		out := filepath.Join(dir, fmt.Sprintf("w%d", w))
		s := jobtest.RunChange(t, jobtest.WorkersEnv(w), pairchange.ChangeOptions{Before: f.Before, After: f.After, Reference: f.Truth, SharedOptions: series.SharedOptions{Out: out, MinArea: jobkit.MinArea{Px: 4}}})
		_, z, valid := jobtest.ReadImage(t, filepath.Join(out, "magnitude.tif"), tiles.Tile{})
		runs[w] = run{s, z, valid}
	}
	one := runs[1]
	for _, w := range []int{2, 7} {
		r := runs[w]
		a, b := r.sum, one.sum
		if a.ChangedAreaM2 == nil || b.ChangedAreaM2 == nil || a.Reference == nil || b.Reference == nil {
			t.Fatalf("workers %d: no area or reference: %+v, 1 worker %+v", w, a, b)
		}
		if a.ChangedPixels != b.ChangedPixels || a.ValidPixels != b.ValidPixels || a.Patches != b.Patches || a.Threshold != b.Threshold ||
			a.Iterations != b.Iterations || a.SamplePixels != b.SamplePixels || a.Components != b.Components || *a.ChangedAreaM2 != *b.ChangedAreaM2 ||
			a.Reference.Confusion != b.Reference.Confusion {
			t.Errorf("workers %d: summary %+v, 1 worker %+v", w, a, b)
		}
		for i := range b.Location {
			if a.Location[i] != b.Location[i] {
				t.Errorf("workers %d: location %v, 1 worker %v", w, a.Location, b.Location)
			}
			for j := range b.Location {
				if a.Covariance[i][j] != b.Covariance[i][j] {
					t.Errorf("workers %d: covariance %v, 1 worker %v", w, a.Covariance, b.Covariance)
				}
			}
		}
		for i := range one.valid {
			if r.valid[i] != one.valid[i] || (one.valid[i] && r.z[i] != one.z[i]) {
				t.Fatalf("workers %d: Z at pixel %d is %v (valid %v), 1 worker %v (valid %v)", w, i, r.z[i], r.valid[i], one.z[i], one.valid[i])
			}
		}
	}
}

// TestChangeAlignAndNoCRS: Align warps AFTER onto BEFORE's grid (here the
// same pixels written on a grid shifted by whole pixels, so the warp is
// exact where both overlap), and images without a CRS give areas in pixels
// only, with a warning.
func TestChangeAlignAndNoCRS(t *testing.T) {
	dir := t.TempDir()
	f := jobtest.ScenarioFiles(t, dir, 256, 3)
	s, err := raster.Open([]string{f.After})
	if err != nil {
		t.Fatal(err)
	}
	// The after date cropped by 5 pixels on the left: another grid.
	cropped := filepath.Join(dir, "cropped.tif")
	g := s.Grid
	g.Width -= 5
	g.GeoTransform[0] += 5 * g.GeoTransform[1]
	jobtest.CopyWindow(t, f.After, cropped, g, 5, 0)
	_, err = pairchange.Change(t.Context(), jobtest.TestEnv, pairchange.ChangeOptions{Before: f.Before, After: cropped, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "no")}})
	jobtest.WantError(t, "grids differ", err, false, "cropped.tif is not on the grid of", "pass --align to warp it onto that grid")
	jobtest.MustNotExist(t, "grids differ", filepath.Join(dir, "no"))

	env, log := jobtest.LoggingEnv()
	sum := jobtest.RunChange(t, env, pairchange.ChangeOptions{Before: f.Before, After: cropped,
		Reference: f.Truth, SharedOptions: series.SharedOptions{Align: true, Resampling: "nearest",
			Out: filepath.Join(dir, "aligned"), MinArea: jobkit.MinArea{Px: 4}}})
	// Truth of the scenario, known by construction, as on the same grid.
	if !sum.Aligned || sum.Reference == nil || sum.Reference.Recall == nil || *sum.Reference.Recall < 0.9 {
		t.Errorf("aligned change: aligned %v, reference %+v", sum.Aligned, sum.Reference)
	}
	if !strings.Contains(log.String(), "was warped onto the grid of") || !strings.Contains(log.String(), "nearest resampling") {
		t.Errorf("no warning of the warp: %q", log.String())
	}
	// The 5 columns AFTER lacks are invalid.
	if want := int64(s.Width-5) * int64(s.Height); sum.ValidPixels > want {
		t.Errorf("aligned change: %d valid pixels, at most %d overlap", sum.ValidPixels, want)
	}

	// No CRS: copies without georeferencing.
	bare := func(src, dst string) {
		s, err := raster.Open([]string{src})
		if err != nil {
			t.Fatal(err)
		}
		g := s.Grid
		g.Projection = ""
		jobtest.CopyWindow(t, src, dst, g, 0, 0)
	}
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	bare(f.Before, a)
	bare(f.After, b)
	env, log = jobtest.LoggingEnv()
	bareOut := filepath.Join(dir, "bare")
	sum = jobtest.RunChange(t, env, pairchange.ChangeOptions{Before: a, After: b, Differences: true, PValues: true, SharedOptions: series.SharedOptions{Out: bareOut, MinArea: jobkit.MinArea{Px: 4}}})
	if !strings.Contains(log.String(), "no CRS: areas are given in pixels only") {
		t.Errorf("no warning of the missing CRS: %q", log.String())
	}
	// Differences adds differences.tif, one band per component, and
	// PValues pvalue.tif.
	diffs, pvals := filepath.Join(bareOut, "differences.tif"), filepath.Join(bareOut, "pvalue.tif")
	if got := sum.Paths.ResolveAll(sum.Outputs); !jobkit.Contains(got, diffs) || !jobkit.Contains(got, pvals) || len(got) != len(changeOutputs)+2 {
		t.Errorf("outputs %v lack %s or %s", sum.Outputs, diffs, pvals)
	} else if ds, err := raster.Open([]string{diffs}); err != nil {
		t.Error(err)
	} else if ds.Len() != sum.Components {
		t.Errorf("%s has %d bands for %d components", diffs, ds.Len(), sum.Components)
	} else {
		checkPValues(t, pvals, filepath.Join(bareOut, "magnitude.tif"), sum.Components)
	}
	if sum.ChangedAreaM2 != nil || sum.ChangedAreaHa != nil || sum.ChangedPixels == 0 {
		t.Errorf("no CRS: area %v m2 %v ha, pixels %d", sum.ChangedAreaM2, sum.ChangedAreaHa, sum.ChangedPixels)
	}
	// A minimum area on the ground needs a CRS.
	_, err = pairchange.Change(t.Context(), jobtest.TestEnv, pairchange.ChangeOptions{Before: a, After: b, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "bare-ha"), MinArea: jobkit.MinArea{M2: 5000}}})
	jobtest.WantError(t, "ground area without CRS", err, true, "needs a CRS", "px")
	jobtest.MustNotExist(t, "ground area without CRS", filepath.Join(dir, "bare-ha"))
}

// TestChangeOfIdenticalDates: a scene against itself maps nothing and fits
// no model (known by construction: every difference is zero).
func TestChangeOfIdenticalDates(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	env, log := jobtest.LoggingEnv()
	s := jobtest.RunChange(t, env, pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "same")}})
	if !s.Identical || s.ChangedPixels != 0 || s.Patches != 0 || s.ValidPixels != jobtest.LandsatPixels || s.Threshold.Z != 0 || len(s.Location) != 0 {
		t.Errorf("identical dates: %+v", s)
	}
	if !strings.Contains(log.String(), "are identical over the") {
		t.Errorf("no warning of identical dates: %q", log.String())
	}
	// A given basis is used as it is, with its own k.
	b, basis := jobtest.LearnLandsat(t, dir)
	s = jobtest.RunChange(t, jobtest.TestEnv, pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Basis: basis, Out: filepath.Join(dir, "given")}})
	if s.Paths.Resolve(s.Basis) != basis || s.Components != b.Components || !s.Identical {
		t.Errorf("given basis %s (k=%d): summary basis %q, %d components, identical %v", basis, b.Components, s.Basis, s.Components, s.Identical)
	}
}

// TestChangeNoValidPixels: a mask that is zero everywhere leaves no pixel
// valid on both dates; nothing is written.
func TestChangeNoValidPixels(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.tif")
	jobtest.Synth(t, a, 4, 40, 30, 1)
	zero := filepath.Join(dir, "zero.tif")
	s, err := raster.Open([]string{a})
	if err != nil {
		t.Fatal(err)
	}
	jobtest.WriteRasterFile(t, zero, raster.Spec{Grid: s.Grid, Bands: 1, DataType: "Byte"}, make([]float64, 40*30))
	out := filepath.Join(dir, "out")
	res, err := pairchange.Change(t.Context(), jobtest.TestEnv, pairchange.ChangeOptions{Before: a, After: a, MaskAfter: []raster.MaskRule{{Path: zero}}, SharedOptions: series.SharedOptions{Out: out}})
	if res != nil {
		t.Errorf("a result without valid pixels: %+v", res)
	}
	jobtest.WantError(t, "no valid pixels", err, false, "mask "+zero+" marks every pixel invalid", "a.tif")
	jobtest.MustNotExist(t, "no valid pixels", out)
	jobtest.NoTemporaries(t, dir)
}

// TestChangeRefusals: dates and data that do not go together, and bad
// options, are refused with a message naming the problem, and leave no
// output folder or temporary behind.
func TestChangeRefusals(t *testing.T) {
	jobtest.NeedLandsat(t)
	dir := t.TempDir()
	small := filepath.Join(dir, "small.tif")
	jobtest.Synth(t, small, 6, 40, 30, 1)
	five := filepath.Join(dir, "five.tif")
	jobtest.Synth(t, five, 5, 40, 30, 2)
	out := filepath.Join(dir, "out")
	tests := []struct {
		name  string
		o     pairchange.ChangeOptions
		usage bool
		want  []string
	}{
		{"band counts", pairchange.ChangeOptions{Before: small, After: five}, false, []string{"small.tif has 6 bands but", "five.tif has 5", "both dates need the same bands"}},
		{"grids", pairchange.ChangeOptions{Before: jobtest.Landsat, After: small}, false, []string{"small.tif is not on the grid of", "pass --align"}},
		{"reference grid", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, Reference: small}, false, []string{"reference", "small.tif", "is not on the grid of the images"}},
		{"preview bands", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, PreviewBands: []int{1, 2, 9}}, true, []string{"--preview-bands", "band 9 out of range", "6 bands"}},
		{"resampling", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Resampling: "sinc"}}, true, []string{`--resampling "sinc"`}},
		{"sample", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Sample: 10}}, true, []string{"--sample 10", "at least 100"}},
		{"components", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Components: 7}}, true, []string{"--components 7", "6 bands"}},
		// Missing parent folders are made; a file in the way is refused.
		{"out under a file", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Out: filepath.Join(small, "out")}}, false, []string{"small.tif/out"}},
		{"out is a file", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Out: small}}, false, []string{"small.tif is a file, not a folder"}},
		{"no output", pairchange.ChangeOptions{Before: jobtest.Landsat, After: jobtest.Landsat, SharedOptions: series.SharedOptions{Out: "-"}}, true, []string{"no output folder"}},
	}
	for _, tc := range tests {
		o := tc.o
		switch o.Out {
		case "":
			o.Out = out
		case "-":
			o.Out = ""
		}
		res, err := pairchange.Change(t.Context(), jobtest.TestEnv, o)
		if res != nil {
			t.Errorf("%s: a result %+v", tc.name, res)
		}
		jobtest.WantError(t, tc.name, err, tc.usage, tc.want...)
		jobtest.MustNotExist(t, tc.name, out)
	}
	jobtest.NoTemporaries(t, dir)
}

// checkPValues: pvalue.tif holds the chi-square survival function with k
// degrees of freedom of magnitude.tif's Z (change.PValue, checked against
// gonum in package change) where Z is valid, and says so with its k; the
// tolerance allows for Z stored as float32.
func checkPValues(t *testing.T, pvals, mag string, k int) {
	t.Helper()
	_, z, valid := jobtest.ReadImage(t, mag, tiles.Tile{})
	s, pv, pvValid := jobtest.ReadImage(t, pvals, tiles.Tile{})
	defer s.Close()
	if want := "p-value of Z (chi-square, k = " + strconv.Itoa(k); !strings.Contains(s.Bands[0].Name, want) {
		t.Errorf("pvalue.tif band description %q lacks %q", s.Bands[0].Name, want)
	}
	for i := range z {
		if pvValid[i] != valid[i] {
			t.Fatalf("pixel %d: p-value valid %v, Z valid %v", i, pvValid[i], valid[i])
		}
		if want := change.PValue(z[i], k); valid[i] && math.Abs(pv[i]-want) > 1e-4*want+1e-30 {
			t.Fatalf("pixel %d: p-value %v of Z = %v, want %v", i, pv[i], z[i], want)
		}
	}
}
