package transform

import (
	"math"
	"testing"
)

// TestBudgetGains: for a 2-band basis with orthonormal vectors, the gains
// are 1 in covariance mode and Σ_b s_b² w_bj² in correlation mode, and for
// an MNF basis ‖Σ_N a_j‖² (hand-worked from the definitions).
func TestBudgetGains(t *testing.T) {
	vecs := [][]float64{{0.6, 0.8}, {-0.8, 0.6}}
	base := Basis{Bands: []Band{{Min: 0, Max: 10}, {Min: -5, Max: 5}}, Mean: []float64{2, 0}, StdDev: []float64{2, 3},
		Eigenvalues: []float64{4, 1}, Eigenvectors: vecs, Pixels: 5}
	cov, corr, mnf := base, base, base
	cov.Mode, corr.Mode = Covariance, Correlation
	mnf.Mode, mnf.Method, mnf.NoiseCovariance = Covariance, MNF, [][]float64{{2, 0}, {0, 0.5}}
	for _, c := range []struct {
		name string
		b    Basis
		want []float64
	}{
		{"covariance", cov, []float64{1, 1}},
		{"correlation", corr, []float64{4*0.36 + 9*0.64, 4*0.64 + 9*0.36}},
		// Σ_N a_1 = (1.2, 0.4), Σ_N a_2 = (-1.6, 0.3).
		{"mnf", mnf, []float64{1.44 + 0.16, 2.56 + 0.09}},
	} {
		for j, g := range c.b.BudgetGains() {
			if math.Abs(g-c.want[j]) > 1e-12 {
				t.Errorf("%s: gain %d = %v, want %v", c.name, j+1, g, c.want[j])
			}
		}
	}
	// (n−1)/n with n = 5; the noise RMS is √((2 + 0.5)/2); the peak the
	// widest band range, 10.
	if v := cov.BudgetVariances(); math.Abs(v[0]-3.2) > 1e-12 || math.Abs(v[1]-0.8) > 1e-12 {
		t.Errorf("variances %v, want 3.2 and 0.8", v)
	}
	if r, err := mnf.NoiseRMS(); err != nil || math.Abs(r-math.Sqrt(1.25)) > 1e-12 {
		t.Errorf("noise RMS %v, %v", r, err)
	}
	if _, err := cov.NoiseRMS(); err == nil {
		t.Error("noise RMS of a basis without noise estimate")
	}
	if p := cov.PeakRange(); p != 10 {
		t.Errorf("peak %v, want 10", p)
	}
}

// TestChooseCodeType: the score bounds are 8.8 and 9.4 (hand-worked in
// TestScoreBoundHoldsForFittedRange), so the codes of both components fit
// Int8 for steps from 9.4/127 up, Int16 from 9.4/32767 and Int32 below.
func TestChooseCodeType(t *testing.T) {
	b := &Basis{Mode: Covariance, Bands: []Band{{Min: 0, Max: 10}, {Min: -5, Max: 5}}, Mean: []float64{2, 0}, StdDev: []float64{1, 1},
		Eigenvalues: []float64{4, 1e-6}, Eigenvectors: [][]float64{{0.6, 0.8}, {-0.8, 0.6}}}
	for _, c := range []struct {
		k    int
		step float64
		want string
	}{
		{2, 0.1, "Int8"}, {2, 0.07, "Int16"}, {1, 0.07, "Int8"}, {2, 1e-3, "Int16"}, {2, 1e-5, "Int32"},
	} {
		ct, err := b.ChooseCodeType(c.k, c.step)
		if err != nil || ct.Name != c.want {
			t.Errorf("k %d step %v: %v, %v; want %s", c.k, c.step, ct.Name, err, c.want)
		}
	}
	if _, err := b.ChooseCodeType(2, 1e-12); err == nil {
		t.Error("codes beyond Int32 accepted")
	}
	if q := CodeTypes[0].Code(1e9, 1); q != 127 {
		t.Errorf("saturated code %v, want 127 (-128 is nodata)", q)
	}
}

// TestRateTable: each row's truncation RMSE is √(Σ_{j>k} λ'_j / p), its
// step √(12 λ'_{k+1}) and its rate the Gaussian rate at that level
// (the definitions, unit gains).
func TestRateTable(t *testing.T) {
	b := &Basis{Mode: Covariance, Bands: []Band{{DataType: "Byte", Max: 100}, {DataType: "Byte", Max: 50}}, Mean: []float64{0, 0}, StdDev: []float64{1, 1},
		Eigenvalues: []float64{64, 4}, Eigenvectors: [][]float64{{1, 0}, {0, 1}}, Pixels: 1 << 40}
	rows := b.RateTable()
	r := rows[0]
	if math.Abs(r.TruncationRMSE-math.Sqrt(2)) > 1e-9 || math.Abs(r.Step-math.Sqrt(48)) > 1e-9 || math.Abs(r.BitsPerPixel-2) > 1e-9 {
		t.Errorf("row 1 %+v: want truncation √2, step √48, 2 bits", r)
	}
	if r.SizeRatio == nil || math.Abs(*r.SizeRatio-8) > 1e-9 || r.PSNR == nil || math.Abs(*r.PSNR-PSNR(2, 100)) > 1e-9 {
		t.Errorf("row 1 ratio %v psnr %v: want 16/2 and PSNR(2, 100)", r.SizeRatio, r.PSNR)
	}
	if rows[1].TruncationRMSE != 0 || rows[1].PSNR != nil {
		t.Errorf("row 2 %+v: want no truncation error", rows[1])
	}
}
