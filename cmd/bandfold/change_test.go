package main

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/raster"
	"bandfold/tiles"
)

// noisyCopy writes the Landsat subset plus Gaussian noise that is correlated
// across bands (a shared component and a per-band one, with band-dependent
// sizes) and a radiometric offset per band: a second "date" on which
// nothing changed.
func noisyCopy(t *testing.T, path string, seed uint64, offset float64) {
	t.Helper()
	s, buf, _ := readImage(t, landsat, tiles.Tile{})
	tl := tiles.Tile{W: s.Width, H: s.Height}
	p := s.Len()
	rng := rand.New(rand.NewPCG(seed, 99))
	for i := range tl.Pixels() {
		shared := rng.NormFloat64()
		for b := range p {
			buf[i*p+b] += 1.5*shared*float64(b%3+1)/2 + float64(b+1)*0.4*rng.NormFloat64() + offset*float64(b+1)
		}
	}
	o, err := raster.Create(path, raster.Spec{Grid: s.Grid, Bands: p, DataType: "Float32"})
	if err != nil {
		t.Fatal(err)
	}
	if err := o.Write(tl, buf); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
}

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
	needLandsat(t)
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	noisyCopy(t, a, 1, 0)
	noisyCopy(t, b, 2, 3)
	out := mustRun(t, "change", a, b, "--out", filepath.Join(dir, "chg"), "--min-area", "0", "--json", "--quiet")
	var s changeSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	if s.ValidPixels != 349*352 {
		t.Errorf("valid pixels %d", s.ValidPixels)
	}
	if math.Abs(s.ChangedFrac-0.001) > 0.0004 {
		t.Errorf("flagged %.5f of unchanged pixels at chisq:0.999, want 0.001 +- 0.0004", s.ChangedFrac)
	}
	// The offset between dates goes to the location, not into Z.
	if math.Abs(s.Location[0]) < 1 {
		t.Errorf("location %v does not absorb the radiometric offset", s.Location)
	}
	t.Logf("flagged fraction %.5f, iterations %d, threshold %v", s.ChangedFrac, s.Iterations, s.Threshold)
}

// TestChangeOnTheDemoScenario runs change with default settings on a
// reduced-size run of the invented scenario, whose truth is known by
// construction: recall at least 0.9 and false alarms at most 0.5% of the
// unchanged pixels.
func TestChangeOnTheDemoScenario(t *testing.T) {
	dir := t.TempDir()
	o := &demoOptions{dir: dir, size: 512, seed: 7}
	mustRunFn(t, func(g *globals) error {
		_, _, err := writeScenario(t.Context(), g, o)
		return err
	})
	f := o.files()
	out := mustRun(t, "change", f.before, f.after, "--out", filepath.Join(dir, "chg"), "--reference", f.truth, "--json", "--quiet")
	var s changeSummary
	if err := json.Unmarshal([]byte(out), &s); err != nil {
		t.Fatal(err)
	}
	r := s.Reference
	if r == nil {
		t.Fatal("no reference in the summary")
	}
	if r.Recall < 0.9 || r.FalseAlarmRate > 0.005 {
		t.Errorf("recall %.3f (want >= 0.9), false alarms %.4f (want <= 0.005)", r.Recall, r.FalseAlarmRate)
	}
	if s.ChangedAreaHa == nil || math.Abs(*s.ChangedAreaHa-float64(s.ChangedPixels)*100/1e4) > 0.01**s.ChangedAreaHa {
		t.Errorf("area %v ha for %d pixels of 10 m", s.ChangedAreaHa, s.ChangedPixels)
	}
	for _, name := range []string{"change.tif", "magnitude.tif", "pvalue.tif", "changes.gpkg", "preview.png", "summary.json"} {
		if _, err := os.Stat(filepath.Join(dir, "chg", name)); err != nil {
			t.Errorf("missing %s", name)
		}
	}
	if !strings.Contains(s.Caution, "screening result") {
		t.Error("the summary lacks the caution")
	}
	t.Logf("recall %.4f precision %.4f false alarms %.5f", r.Recall, r.Precision, r.FalseAlarmRate)

	// The same numbers with one worker: tiles are merged in order and the
	// sample is chosen by pixel position, not by arrival.
	out = mustRun(t, "change", f.before, f.after, "--out", filepath.Join(dir, "chg1"), "--reference", f.truth, "--json", "--quiet", "--workers", "1")
	var one changeSummary
	json.Unmarshal([]byte(out), &one)
	if one.ChangedPixels != s.ChangedPixels || one.Threshold != s.Threshold || one.Location[0] != s.Location[0] || one.Covariance[0][0] != s.Covariance[0][0] {
		t.Errorf("1 worker differs from 2: %+v vs %+v", one.Threshold, s.Threshold)
	}
}

// mustRunFn runs f with globals set up as a command would have them.
func mustRunFn(t *testing.T, f func(*globals) error) {
	t.Helper()
	g := &globals{stdout: os.Stdout, stderr: os.Stderr, workers: 2, quiet: true}
	if err := g.setup(); err != nil {
		t.Fatal(err)
	}
	if err := f(g); err != nil {
		t.Fatal(err)
	}
}

func TestChangeBadInputs(t *testing.T) {
	needLandsat(t)
	dir := t.TempDir()
	small := filepath.Join(dir, "small.tif")
	mustRun(t, "demo", "synth", "--bands", "6", "--width", "40", "--height", "30", "--out", small, "--quiet")
	five := filepath.Join(dir, "five.tif")
	mustRun(t, "demo", "synth", "--bands", "5", "--width", "40", "--height", "30", "--out", five, "--quiet")
	out := filepath.Join(dir, "out")
	tests := []badInput{
		{"band counts", []string{"change", small, five, "--out", out}, 1, "both dates need the same bands"},
		{"grids", []string{"change", landsat, small, "--out", out}, 1, "pass --align"},
		{"threshold rule", []string{"change", landsat, landsat, "--out", out, "--threshold", "magic"}, 2, "magic"},
		{"threshold range", []string{"change", landsat, landsat, "--out", out, "--threshold", "chisq:1.5"}, 2, "chisq"},
		{"min area", []string{"change", landsat, landsat, "--out", out, "--min-area", "5 acres"}, 2, "--min-area"},
		{"reference grid", []string{"change", landsat, landsat, "--out", out, "--reference", small}, 1, "small.tif"},
		{"preview bands", []string{"change", landsat, landsat, "--out", out, "--preview-bands", "1,2,9"}, 2, "--preview-bands"},
		{"out parent", []string{"change", landsat, landsat, "--out", filepath.Join(dir, "no", "out")}, 1, "does not exist"},
	}
	checkBadInputs(t, tests, out)
	if left, _ := filepath.Glob(filepath.Join(dir, ".*")); len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// TestChangeNoValidPixels: a mask that is zero everywhere leaves no pixel
// valid on both dates.
func TestChangeNoValidPixels(t *testing.T) {
	dir := t.TempDir()
	a := filepath.Join(dir, "a.tif")
	mustRun(t, "demo", "synth", "--bands", "4", "--width", "40", "--height", "30", "--out", a, "--quiet")
	zero := filepath.Join(dir, "zero.tif")
	s, _ := raster.Open([]string{a})
	o, err := raster.Create(zero, raster.Spec{Grid: s.Grid, Bands: 1, DataType: "Byte"})
	if err != nil {
		t.Fatal(err)
	}
	o.Write(tiles.Tile{W: 40, H: 30}, make([]float64, 1200))
	o.Commit()
	code, _, errs := bandfold(t, "change", a, a, "--out", filepath.Join(dir, "out"), "--mask-after", zero)
	if code != 1 || !strings.Contains(errs, "no valid pixels") && !strings.Contains(errs, "no pixel is valid on both dates") {
		t.Errorf("exit %d: %s", code, errs)
	}
}

// TestChangeAlignAndNoCRS: --align warps AFTER onto BEFORE's grid (here the
// same pixels written on a grid shifted by whole pixels, so the warp is
// exact where both overlap), and images without a CRS give areas in pixels
// only, with a warning.
func TestChangeAlignAndNoCRS(t *testing.T) {
	dir := t.TempDir()
	o := &demoOptions{dir: dir, size: 256, seed: 3}
	mustRunFn(t, func(g *globals) error {
		_, _, err := writeScenario(t.Context(), g, o)
		return err
	})
	f := o.files()
	s, err := raster.Open([]string{f.after})
	if err != nil {
		t.Fatal(err)
	}
	// The after date cropped by 5 pixels on the left: another grid.
	cropped := filepath.Join(dir, "cropped.tif")
	g := s.Grid
	g.Width -= 5
	g.GeoTransform[0] += 5 * g.GeoTransform[1]
	copyWindow(t, f.after, cropped, g, 5, 0)
	code, _, errs := bandfold(t, "change", f.before, cropped, "--out", filepath.Join(dir, "no"))
	if code != 1 || !strings.Contains(errs, "--align") {
		t.Fatalf("grids differ: exit %d %s", code, errs)
	}
	out := mustRun(t, "change", f.before, cropped, "--align", "--resampling", "nearest", "--out", filepath.Join(dir, "aligned"), "--reference", f.truth, "--json", "--quiet")
	var sum changeSummary
	json.Unmarshal([]byte(out), &sum)
	if !sum.Aligned || sum.Reference == nil || sum.Reference.Recall < 0.9 {
		t.Errorf("aligned change: %+v", sum.Reference)
	}
	// No CRS: copy without georeferencing.
	bare := func(src, dst string) {
		s, _ := raster.Open([]string{src})
		g := s.Grid
		g.Projection = ""
		copyWindow(t, src, dst, g, 0, 0)
	}
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	bare(f.before, a)
	bare(f.after, b)
	code, out, errs = bandfold(t, "change", a, b, "--out", filepath.Join(dir, "bare"), "--json")
	if code != 0 || !strings.Contains(errs, "no CRS") {
		t.Fatalf("no CRS: exit %d, %s", code, errs)
	}
	json.Unmarshal([]byte(out), &sum)
	if sum.ChangedAreaM2 != nil || sum.ChangedPixels == 0 {
		t.Errorf("no CRS: area %v, pixels %d", sum.ChangedAreaM2, sum.ChangedPixels)
	}
}

// copyWindow writes the pixels of src from column x0, row y0 onwards onto
// grid g at dst, keeping nodata.
func copyWindow(t *testing.T, src, dst string, g raster.Grid, x0, y0 int) {
	t.Helper()
	s, buf, valid := readImage(t, src, tiles.Tile{X: x0, Y: y0, W: g.Width, H: g.Height})
	p := s.Len()
	nd := *s.Bands[0].NoData
	for i, ok := range valid {
		if !ok {
			for b := range p {
				buf[i*p+b] = nd
			}
		}
	}
	o, err := raster.Create(dst, raster.Spec{Grid: g, Bands: p, DataType: s.Bands[0].DataType, NoData: &nd})
	if err != nil {
		t.Fatal(err)
	}
	if err := o.Write(tiles.Tile{W: g.Width, H: g.Height}, buf); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
}
