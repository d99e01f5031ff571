package transform

import (
	"encoding/json"
	"math"
	"strings"
	"testing"
)

// TestPSNR checks PSNR = 10 log₁₀(peak²/mse). The expected values are worked
// by hand (no published table was at hand to quote): 20·log₁₀(255) =
// 48.1308036087 dB is the well-known ceiling of 8-bit imagery at MSE 1.
func TestPSNR(t *testing.T) {
	for _, tc := range []struct {
		mse, peak, want float64
	}{
		{1, 255, 48.13080360867910},   // 20·log₁₀ 255
		{100, 255, 28.13080360867910}, // 48.1308… − 10·log₁₀ 100
		{1, 65535, 96.32946607530499}, // 20·log₁₀ 65535, 16-bit
		{0.5, 2, 9.030899869919435},   // 10·log₁₀(4/0.5) = 10·log₁₀ 8
		{4, 2, 0},                     // peak² = mse
		{1e-300, 1e300, 9000},         // 20·300 + 10·300: no overflow of peak²
	} {
		checkRel(t, "PSNR", PSNR(tc.mse, tc.peak), tc.want, 1, 1e-14)
	}
	if v := PSNR(0, 1); !math.IsInf(v, 1) {
		t.Errorf("PSNR(0, 1) = %v, want +Inf", v)
	}
	if v := PSNR(1, 0); !math.IsInf(v, -1) {
		t.Errorf("PSNR(1, 0) = %v, want −Inf", v)
	}
}

// TestSpectralAngle uses vectors whose angles are known by construction.
func TestSpectralAngle(t *testing.T) {
	deg := math.Pi / 180
	for _, tc := range []struct {
		a, b []float64
		want float64 // radians
	}{
		{[]float64{1, 2, 3}, []float64{1, 2, 3}, 0},                             // identical
		{[]float64{1, 2, 3}, []float64{10, 20, 30}, 0},                          // scaled: SAM ignores brightness
		{[]float64{1, 0}, []float64{0, 5}, 90 * deg},                            // orthogonal
		{[]float64{1, 0}, []float64{1, 1}, 45 * deg},                            // diagonal
		{[]float64{2, 0, 0}, []float64{3, math.Sqrt(3), 0}, 30 * deg},           // tan 30° = √3/3
		{[]float64{1, -2, 3}, []float64{-2, 4, -6}, 180 * deg},                  // opposite
		{[]float64{0, 0}, []float64{0, 0}, 0},                                   // both zero: defined as 0
		{[]float64{0, 0}, []float64{1, 2}, 90 * deg},                            // one zero: defined as 90°
		{[]float64{3, 4}, []float64{3, 5}, math.Atan(5.0/3) - math.Atan(4.0/3)}, // difference of the polar angles
	} {
		checkRel(t, "SpectralAngle", SpectralAngle(tc.a, tc.b), tc.want, 1, 1e-15)
	}
}

// TestLoss checks the report on a hand-worked case: 2 pixels of 2 bands,
// orig (1,2), (3,4) and recon (1,2), (3,5).
func TestLoss(t *testing.T) {
	orig := []float64{1, 2, 3, 4, 99, 99}
	recon := []float64{1, 2, 3, 5, 0, 0}
	valid := []bool{true, true, false} // the third pixel is nodata
	l := NewLoss(2)
	l.Add(orig, recon, valid)
	r := l.Report()
	if l.Pixels() != 2 {
		t.Fatalf("Pixels = %d, want 2", l.Pixels())
	}
	// Band 1 has no error; band 2 errors 0 and −1: MSE 1/2.
	checkRel(t, "RMSE", r.RMSE, 0.5, 0, 1e-15) // √(1 / (2 pixels · 2 bands))
	checkRelSlice(t, "BandRMSE", r.BandRMSE, []float64{0, math.Sqrt(0.5)}, 0, 1e-15)
	if r.PSNR[0] != nil {
		t.Errorf("PSNR of an error-free band = %v, want nil", *r.PSNR[0])
	}
	// Band 2: peak 4 − 2 = 2, 10·log₁₀(4 / 0.5) = 10·log₁₀ 8.
	checkRel(t, "PSNR[1]", *r.PSNR[1], 10*math.Log10(8), 0, 1e-15)
	checkRel(t, "MeanPSNR", *r.MeanPSNR, 10*math.Log10(8), 0, 1e-15)
	// SAM: 0 for the first pixel, atan(5/3) − atan(4/3) = 5.9061° for
	// the second; the mean is half.
	checkRel(t, "MeanSAM", r.MeanSAM, (math.Atan(5.0/3)-math.Atan(4.0/3))*90/math.Pi, 0, 1e-14)
	checkRel(t, "MaxAbs", r.MaxAbs, 1, 0, 0)

	// The JSON keys are part of bandfold's interface; the values are those
	// checked above (10·log₁₀ 8 = 9.0308998699194358…, half of
	// 5.9061411°).
	data, err := json.Marshal(r)
	if err != nil {
		t.Fatal(err)
	}
	const want = `{"rmse":0.5,"band_rmse":[0,0.7071067811865476],"band_psnr_db":[null,9.030899869919436],` +
		`"mean_psnr_db":9.030899869919436,"mean_sam_deg":2.9530705568852493,"max_abs_error":1}`
	if string(data) != want {
		t.Errorf("JSON\n%s\nwant\n%s", data, want)
	}
}

// TestLossMerge checks that merging per-tile losses in order gives the
// report of one Loss over all tiles, and that an empty Loss reports zeros.
func TestLossMerge(t *testing.T) {
	const n, p = 300, 4
	x := correlated(60, n, p, 50)
	b := fit(t, Covariance, x, p)
	pr, _ := NewProjector(b, 2)
	y := make([]float64, n*2)
	xh := make([]float64, n*p)
	pr.Fold(y, x)
	pr.Unfold(xh, y)
	valid := make([]bool, n)
	for i := range valid {
		valid[i] = i%7 != 3
	}

	whole := NewLoss(p)
	whole.Add(x, xh, valid)
	merged := NewLoss(p)
	for _, tile := range [][2]int{{0, 100}, {100, 100}, {100, 250}, {250, 300}} { // includes an empty tile
		part := NewLoss(p)
		part.Add(x[tile[0]*p:tile[1]*p], xh[tile[0]*p:tile[1]*p], valid[tile[0]:tile[1]])
		merged.Merge(part)
	}
	w, m := whole.Report(), merged.Report()
	checkRel(t, "RMSE", m.RMSE, w.RMSE, 0, 1e-14)
	checkRelSlice(t, "BandRMSE", m.BandRMSE, w.BandRMSE, 0, 1e-14)
	checkRel(t, "MeanPSNR", *m.MeanPSNR, *w.MeanPSNR, 0, 1e-14)
	checkRel(t, "MeanSAM", m.MeanSAM, w.MeanSAM, 0, 1e-14)
	checkRel(t, "MaxAbs", m.MaxAbs, w.MaxAbs, 0, 0)

	// The residual sum of squares of all pixels is (n−1)(λ₃+λ₄); with a
	// nil mask every pixel counts.
	all := NewLoss(p)
	all.Add(x, xh, nil)
	checkRel(t, "RMSE² · n · p", all.Report().RMSE*all.Report().RMSE*n*p, (n-1)*(b.Eigenvalues[2]+b.Eigenvalues[3]), 0, 1e-9)

	empty := NewLoss(p).Report()
	if empty.RMSE != 0 || empty.MeanPSNR != nil || empty.MeanSAM != 0 || empty.PSNR[0] != nil {
		t.Errorf("empty report %+v", empty)
	}
}

func TestLossMisuse(t *testing.T) {
	for name, f := range map[string]func(){
		"NewLoss(0)":     func() { NewLoss(0) },
		"Add lengths":    func() { NewLoss(2).Add(make([]float64, 4), make([]float64, 2), nil) },
		"Add partial px": func() { NewLoss(2).Add(make([]float64, 3), make([]float64, 3), nil) },
		"Add mask":       func() { NewLoss(2).Add(make([]float64, 4), make([]float64, 4), []bool{true}) },
		"Merge bands":    func() { NewLoss(2).Merge(NewLoss(3)) },
		"SAM lengths":    func() { SpectralAngle([]float64{1}, []float64{1, 2}) },
	} {
		func() {
			defer func() {
				r := recover()
				if s, ok := r.(string); !ok || !strings.HasPrefix(s, "transform: ") {
					t.Errorf("%s: panic %v, want a transform: panic", name, r)
				}
			}()
			f()
		}()
	}
}
