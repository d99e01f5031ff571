package raster

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"github.com/airbusgeo/godal"
)

// TestEstimateDeflateSize: on an invented 8-band Int16 raster of 1000 x
// 1000 pixels (smooth gradients with seeded noise whose strength varies
// across the image, so that blocks compress unequally), the estimate from a
// systematic sample of its 16-row units is within 3 standard errors (a
// 99.7% interval, for the sampling) plus 1% (the cost of starting a DEFLATE
// stream per unit rather than per 256 x 256 block: a lost history of at
// most 32 KiB per 64 KiB unit, measured far below) of the size of the
// copy DeflateSize makes, which is the reference by definition; with a
// budget above the raster's size the estimate is that copy, exactly.
func TestEstimateDeflateSize(t *testing.T) {
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(7, 11))
	r := testRaster{w: 1000, h: 1000, bands: 8, dtype: godal.Int16, gt: [6]float64{0, 1, 0, 0, 0, -1},
		values: func(x, y, b int) float64 {
			return float64(100*b+x/3+y/5) + float64(1+x/100)*rng.NormFloat64()
		}}
	path := r.write(t, filepath.Join(dir, "r.tif"))
	exact, err := DeflateSize(path, dir)
	if err != nil {
		t.Fatal(err)
	}
	raw := int64(r.w * r.h * r.bands * 2)
	whole, err := EstimateDeflateSize(path, dir, raw)
	if err != nil || whole.Bytes != exact || whole.Sampled != 1 || whole.StdErr != 0 {
		t.Errorf("budget of the whole raster: %+v, %v; want the copy's %d bytes exactly", whole, err, exact)
	}
	est, err := EstimateDeflateSize(path, dir, raw/16)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("copy %d bytes; estimate %d ± %.0f from %.3f of the raster", exact, est.Bytes, est.StdErr, est.Sampled)
	if !(est.Sampled < 0.5) || !(est.StdErr > 0) {
		t.Errorf("estimate %+v: want a sample below half the raster with a standard error", est)
	}
	if d := math.Abs(float64(est.Bytes - exact)); d > 3*est.StdErr+0.01*float64(exact) {
		t.Errorf("estimate %d ± %.0f, copy %d: off by %.0f", est.Bytes, est.StdErr, exact, d)
	}
}
