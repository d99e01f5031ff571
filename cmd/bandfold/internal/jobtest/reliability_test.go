package jobtest

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"

	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/raster/output"
)

// Each test here keeps one defect of a reliability sweep fixed. The data
// are constructed, so the right behaviour is known by construction.

// gridSpec is a small UTM grid of w x h pixels at 10 m for constructed
// rasters.
func gridSpec(t *testing.T, w, h, bands int, dtype string, nodata *float64) raster.Spec {
	t.Helper()
	wkt, err := raster.EPSG(32633)
	if err != nil {
		t.Fatal(err)
	}
	return raster.Spec{Grid: raster.Grid{Width: w, Height: h, GeoTransform: [6]float64{500000, 10, 0, 6000000, 0, -10},
		HasGeoTransform: true, Projection: wkt}, Bands: bands, DataType: dtype, NoData: nodata}
}

// correlatedPixels returns n pixels of p correlated bands (a shared factor
// plus noise), scaled by gain.
func correlatedPixels(n, p int, seed uint64, gain float64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 11))
	x := make([]float64, n*p)
	for i := range n {
		f := rng.NormFloat64()
		for j := range p {
			x[i*p+j] = gain * (100 + 20*float64(j+1)*f + 5*rng.NormFloat64())
		}
	}
	return x
}

// TestUndefinedRatesAreNull: a reference without a changed pixel makes
// precision and recall 0/0: the run succeeds and the JSON says null; a
// constant scene has no variance to explain: fold succeeds, null again.
func TestUndefinedRatesAreNull(t *testing.T) {
	dir := t.TempDir()
	ctx := context.Background()
	a, b, ref := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif"), filepath.Join(dir, "ref.tif")
	w, h, p := 40, 30, 4
	spec := gridSpec(t, w, h, p, "Float32", nil)
	WriteRasterFile(t, a, spec, correlatedPixels(w*h, p, 1, 1))
	WriteRasterFile(t, b, spec, correlatedPixels(w*h, p, 2, 1))
	WriteRasterFile(t, ref, gridSpec(t, w, h, 1, "Byte", nil), make([]float64, w*h)) // no change anywhere
	res, err := pairchange.Change(ctx, TestEnv, pairchange.ChangeOptions{Before: a, After: b, Reference: ref, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "chg")}})
	if err != nil {
		t.Fatalf("change against a no-change reference: %v", err)
	}
	r := res.Reference
	if r == nil || r.TruePositive+r.FalseNegative != 0 {
		t.Fatalf("reference %+v: want no changed reference pixel", r)
	}
	if r.Recall != nil {
		t.Errorf("recall %v, want undefined (nil)", *r.Recall)
	}
	js, err := json.Marshal(res)
	if err != nil {
		t.Fatalf("summary does not marshal: %v", err)
	}
	if !strings.Contains(string(js), `"recall":null`) {
		t.Errorf("summary JSON lacks \"recall\":null: %s", js)
	}

	flat := filepath.Join(dir, "flat.tif")
	constant := make([]float64, w*h*p)
	for i := range constant {
		constant[i] = 7
	}
	WriteRasterFile(t, flat, spec, constant)
	basis := filepath.Join(dir, "b.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{a}, Out: basis})
	fs, err := fold.Fold(ctx, TestEnv, fold.FoldOptions{Scenes: []string{flat}, Basis: basis, Out: filepath.Join(dir, "flat.pc.tif")})
	if err != nil {
		t.Fatalf("fold of a constant scene: %v", err)
	}
	if fs.ExplainedScene != nil {
		t.Errorf("explained share on a constant scene %v, want undefined", *fs.ExplainedScene)
	}
	if js, err := json.Marshal(fs); err != nil || !strings.Contains(string(js), `"explained_scene":null`) {
		t.Errorf("fold JSON %s, %v: want explained_scene null", js, err)
	}
}

// TestNaNNoData: float rasters whose nodata is NaN (declared, or given as
// --nodata nan) learn, fold and change like any other.
func TestNaNNoData(t *testing.T) {
	dir := t.TempDir()
	ctx := context.Background()
	w, h, p := 40, 30, 4
	nan := math.NaN()
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	for i, path := range []string{a, b} {
		x := correlatedPixels(w*h, p, uint64(i+1), 1)
		for px := 0; px < w*h; px += 7 { // every 7th pixel is nodata
			for j := range p {
				x[px*p+j] = nan
			}
		}
		WriteRasterFile(t, path, gridSpec(t, w, h, p, "Float32", &nan), x)
	}
	basis := filepath.Join(dir, "b.json")
	lr := Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{a}, Out: basis})
	want := int64(w*h - (w*h+6)/7) // pixels not on the every-7th grid
	if lr.Basis.Pixels != want {
		t.Errorf("learn counted %d valid pixels, want %d", lr.Basis.Pixels, want)
	}
	if nd := lr.Basis.Bands[0].NoData; nd == nil || !math.IsNaN(*nd) {
		t.Errorf("basis records nodata %v, want NaN", nd)
	}
	if _, err := learn.Learn(ctx, TestEnv, learn.LearnOptions{Scenes: []string{a}, Out: filepath.Join(dir, "b2.json"), Variance: 0.99,
		Input: jobkit.Input{NoData: []float64{nan}}}); err != nil {
		t.Errorf("learn with --nodata nan: %v", err)
	}
	if _, err := fold.Fold(ctx, TestEnv, fold.FoldOptions{Scenes: []string{b}, Basis: basis, Out: filepath.Join(dir, "c.tif")}); err != nil {
		t.Errorf("fold: %v", err)
	}
	res, err := pairchange.Change(ctx, TestEnv, pairchange.ChangeOptions{Before: a, After: b, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "chg")}})
	if err != nil {
		t.Fatalf("change: %v", err)
	}
	if res.ValidPixels != want {
		t.Errorf("change counted %d valid pixels, want %d", res.ValidPixels, want)
	}
}

// TestCompletionRecordHoldsEveryOption: a batch rerun skips an output only
// when everything that shapes it is the same; a single --out never skips.
func TestCompletionRecordHoldsEveryOption(t *testing.T) {
	dir := t.TempDir()
	ctx := context.Background()
	scene := filepath.Join(dir, "s.tif")
	Synth(t, scene, 6, 40, 30, 1)
	basis := filepath.Join(dir, "b.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{scene}, Out: basis})
	out := filepath.Join(dir, "out")
	base := fold.FoldOptions{Scenes: []string{scene}, Basis: basis, OutDir: out}
	if _, err := fold.FoldBatch(ctx, TestEnv, base); err != nil {
		t.Fatal(err)
	}
	same, err := fold.FoldBatch(ctx, TestEnv, base)
	if err != nil || same.Skipped != 1 {
		t.Fatalf("rerun with the same options: %+v, %v; want skipped", same, err)
	}
	for name, change := range map[string]func(*fold.FoldOptions){
		"nodata":           func(o *fold.FoldOptions) { o.Input.NoData = []float64{0} },
		"format":           func(o *fold.FoldOptions) { o.Format = raster.COG },
		"creation options": func(o *fold.FoldOptions) { o.CreationOptions = []string{"ZLEVEL=9"} },
		"components":       func(o *fold.FoldOptions) { o.Components = 1 },
		"type":             func(o *fold.FoldOptions) { o.Type = "int16" },
		"bands": func(o *fold.FoldOptions) {
			o.Input.Bands = []int{1, 2, 3, 4, 5, 6}
			o.Input.Tile = 16
		},
	} {
		o := base
		change(&o)
		res, err := fold.FoldBatch(ctx, TestEnv, o)
		if !errors.Is(err, jobkit.ErrBatchFailed) || res == nil || res.Failed != 1 || !strings.Contains(res.Results[0].Error, "other inputs or options") {
			t.Errorf("%s changed: %+v, %v; want the scene refused as written with other options", name, res, err)
		}
	}
	if _, err := fold.Fold(ctx, TestEnv, fold.FoldOptions{Scenes: []string{scene}, Basis: basis, Out: filepath.Join(out, "s.components.tif")}); !errors.Is(err, output.ErrExists) {
		t.Errorf("single --out onto a complete output: %v, want ErrExists", err)
	}
}

// TestOverflowIsNotData: scores beyond float32 are an error naming the
// file; int16 storage of a scene 30 times brighter than the fitting one
// reports the clamped share and warns.
func TestOverflowIsNotData(t *testing.T) {
	dir := t.TempDir()
	ctx := context.Background()
	w, h, p := 40, 30, 4
	fit, bright, huge := filepath.Join(dir, "fit.tif"), filepath.Join(dir, "bright.tif"), filepath.Join(dir, "huge.tif")
	spec := gridSpec(t, w, h, p, "Float64", nil)
	WriteRasterFile(t, fit, spec, correlatedPixels(w*h, p, 1, 1))
	WriteRasterFile(t, bright, spec, correlatedPixels(w*h, p, 2, 30))
	WriteRasterFile(t, huge, spec, correlatedPixels(w*h, p, 3, 1e153))
	basis := filepath.Join(dir, "b.json")
	Learn(t, TestEnv, learn.LearnOptions{Scenes: []string{fit}, Out: basis, Components: 2})

	_, err := fold.Fold(ctx, TestEnv, fold.FoldOptions{Scenes: []string{huge}, Basis: basis, Out: filepath.Join(dir, "huge.pc.tif")})
	WantError(t, "scores beyond float32", err, false, huge, "component 1", "Float32")
	MustNotExist(t, "scores beyond float32", filepath.Join(dir, "huge.pc.tif"))

	env, logs := LoggingEnv()
	res, err := fold.Fold(ctx, env, fold.FoldOptions{Scenes: []string{bright}, Basis: basis, Out: filepath.Join(dir, "bright.pc.tif"), Type: "int16"})
	if err != nil {
		t.Fatal(err)
	}
	if res.Saturated <= 0.001 {
		t.Errorf("saturated share %v, want above 0.1%% for a scene 30 times brighter", res.Saturated)
	}
	if !strings.Contains(logs.String(), "exceed the int16 range") {
		t.Errorf("no saturation warning; log: %s", logs)
	}
}

// TestMessagesNameTheProblem: a one-band selection says how many bands
// the file has; a band that is NaN everywhere is named.
func TestMessagesNameTheProblem(t *testing.T) {
	dir := t.TempDir()
	ctx := context.Background()
	scene := filepath.Join(dir, "s.tif")
	Synth(t, scene, 6, 40, 30, 1)
	_, err := learn.Learn(ctx, TestEnv, learn.LearnOptions{Scenes: []string{scene}, Out: filepath.Join(dir, "b.json"), Variance: 0.99, Input: jobkit.Input{Bands: []int{3}}})
	WantError(t, "one band selected", err, true, scene, "has 6 bands", "selects only 1")

	w, h, p := 40, 30, 3
	x := correlatedPixels(w*h, p, 1, 1)
	for i := range w * h {
		x[i*p+1] = math.NaN()
	}
	holed := filepath.Join(dir, "holed.tif")
	WriteRasterFile(t, holed, gridSpec(t, w, h, p, "Float32", nil), x)
	_, err = learn.Learn(ctx, TestEnv, learn.LearnOptions{Scenes: []string{holed}, Out: filepath.Join(dir, "h.json"), Variance: 0.99})
	WantError(t, "all-NaN band", err, false, holed, "band 2", "everywhere")
	MustNotExist(t, "all-NaN band", filepath.Join(dir, "h.json"))
}
