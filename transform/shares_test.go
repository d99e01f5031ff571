package transform

import (
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/bands"
)

func TestBrokenStickShares(t *testing.T) {
	// Worked by hand from b_k = (1/p) Σ_{i=k}^{p} 1/i for p = 4:
	// b₁ = (1 + 1/2 + 1/3 + 1/4)/4 = 25/48, b₂ = (1/2 + 1/3 + 1/4)/4 = 13/48,
	// b₃ = (1/3 + 1/4)/4 = 7/48, b₄ = (1/4)/4 = 3/48.
	checkRelSlice(t, "BrokenStickShares(4)", BrokenStickShares(4), []float64{25.0 / 48, 13.0 / 48, 7.0 / 48, 3.0 / 48}, 0, 1e-15)
	// p = 1: one piece, the whole stick (known by construction).
	checkRelSlice(t, "BrokenStickShares(1)", BrokenStickShares(1), []float64{1}, 0, 0)
	if got := BrokenStickShares(0); len(got) != 0 {
		t.Errorf("BrokenStickShares(0) = %v, want empty", got)
	}
	for _, p := range []int{2, 3, 7, 50, 224} {
		b := BrokenStickShares(p)
		// The pieces make up the stick (known by construction: Σ_k b_k =
		// (1/p) Σ_i i·(1/i) = 1) and are descending.
		checkRel(t, fmt.Sprintf("p = %d: Σ b_k", p), floats.Sum(b), 1, 0, 1e-14)
		for k := 1; k < p; k++ {
			if !(b[k] < b[k-1]) {
				t.Errorf("p = %d: b[%d] = %v is not below b[%d] = %v", p, k, b[k], k-1, b[k-1])
			}
		}
	}
	defer func() {
		if recover() == nil {
			t.Error("BrokenStickShares(-1) did not panic")
		}
	}()
	BrokenStickShares(-1)
}

// TestExplainedOn: on the pixels a basis was fitted on, the share of the
// scene's variance carried by k components is the cumulative eigenvalue share.
// The basis is fitted to gonum's stat.CovarianceMatrix (an independent
// reference), the moments are taken with bands.Moments.
func TestExplainedOn(t *testing.T) {
	const n, p = 600, 6
	x := correlated(40, n, p, 250)
	data := mat.NewDense(n, p, x)
	var cov mat.SymDense
	stat.CovarianceMatrix(&cov, data, nil)
	mean := make([]float64, p)
	for j := range p {
		mean[j] = stat.Mean(mat.Col(nil, j, data), nil)
	}
	scene := bands.NewMoments(p)
	scene.AddPixels(x, nil)
	for _, mode := range []Mode{Covariance, Correlation} {
		b, err := NewBasis(mode, testBands(p), n, mean, &cov)
		if err != nil {
			t.Fatal(err)
		}
		cum := Cumulative(b.Eigenvalues)
		for k := 1; k <= p; k++ {
			_, y := foldWith(t, b, k, x)
			scores := bands.NewMoments(k)
			scores.AddPixels(y, nil)
			checkRel(t, fmt.Sprintf("%s, k = %d: ExplainedOn", mode, k), ExplainedOn(b, scene, scores), cum[k-1], 1, 1e-12)
		}
	}

	// A constant scene has no variance to share: undefined.
	b, err := NewBasis(Covariance, testBands(p), n, mean, &cov)
	if err != nil {
		t.Fatal(err)
	}
	flat := bands.NewMoments(p)
	flat.AddPixels(make([]float64, 10*p), nil)
	scores := bands.NewMoments(1)
	scores.AddPixels(make([]float64, 10), nil)
	if got := ExplainedOn(b, flat, scores); !math.IsNaN(got) {
		t.Errorf("ExplainedOn a constant scene = %v, want NaN", got)
	}
	if got := ExplainedOn(b, bands.NewMoments(p), bands.NewMoments(1)); !math.IsNaN(got) {
		t.Errorf("ExplainedOn an empty scene = %v, want NaN", got)
	}
}

// TestDifference: the score differences of Difference equal Fold(after) −
// Fold(before), and W_kᵀ diag(1/s) dx computed with gonum's mat, on the fused
// path (few bands) and the Gemm path (more than fusedMaxBands).
func TestDifference(t *testing.T) {
	for _, tc := range []struct {
		n, p, k int
		mode    Mode
	}{
		{300, 6, 3, Covariance}, {300, 6, 6, Correlation}, {200, 40, 5, Covariance}, {1500, 40, 7, Correlation},
	} {
		name := fmt.Sprintf("%d bands, %d components, %s", tc.p, tc.k, tc.mode)
		before := correlated(uint64(50+tc.p), tc.n, tc.p, 300)
		after := correlated(uint64(60+tc.p), tc.n, tc.p, 310)
		b := fit(t, tc.mode, before, tc.p)
		pr, err := NewProjector(b, tc.k)
		if err != nil {
			t.Fatal(err)
		}
		if pr.fused() != (tc.p <= fusedMaxBands) {
			t.Fatalf("%s: fused path %v", name, pr.fused())
		}
		dx := make([]float64, len(before))
		floats.SubTo(dx, after, before)
		got := make([]float64, tc.n*tc.k)
		pr.Difference(got, dx)

		yb, ya := make([]float64, tc.n*tc.k), make([]float64, tc.n*tc.k)
		pr.Fold(yb, before)
		pr.Fold(ya, after)
		floats.Sub(ya, yb)

		// gonum mat: D = dX · diag(1/s) · W_k.
		w := mat.NewDense(tc.p, tc.k, nil)
		for c := range tc.k {
			for j := range tc.p {
				w.Set(j, c, b.Eigenvectors[c][j]/b.scale(j))
			}
		}
		var d mat.Dense
		d.Mul(mat.NewDense(tc.n, tc.p, dx), w)
		ref := d.RawMatrix().Data // n×k, stride k

		// Relative to the scale of the score differences.
		scale := floats.Max(absAll(ya))
		for i := range got {
			if relDiff(got[i], ya[i], scale) > 1e-12 {
				t.Fatalf("%s: Difference[%d] = %.15g, Fold(after) − Fold(before) = %.15g", name, i, got[i], ya[i])
			}
			if relDiff(got[i], ref[i], scale) > 1e-13 {
				t.Fatalf("%s: Difference[%d] = %.15g, gonum mat %.15g", name, i, got[i], ref[i])
			}
		}
	}
	pr, err := NewProjector(fit(t, Covariance, correlated(1, 10, 3, 0), 3), 2)
	if err != nil {
		t.Fatal(err)
	}
	pr.Difference(nil, nil) // no pixels: nothing to do
	defer func() {
		if recover() == nil {
			t.Error("Difference with a short dst did not panic")
		}
	}()
	pr.Difference(make([]float64, 3), make([]float64, 6))
}
