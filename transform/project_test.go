package transform

import (
	"fmt"
	"math"
	"testing"

	"gonum.org/v1/gonum/floats"
)

// TestResidualIdentity checks, for covariance mode and every k = 1..p-1,
//
//	Σ_pixels ‖x − x̂‖² = (n − 1) Σ_{j>k} λ_j,
//
// which holds exactly when mean and covariance are the sample statistics of
// the same pixels: the residual is the projection of the centred data on the
// dropped eigenvectors, whose sum of squares is (n − 1) λ_j each. The data
// sit on an offset of 1000 to exercise the centring.
func TestResidualIdentity(t *testing.T) {
	for _, tc := range []struct {
		seed   uint64
		n, p   int
		offset float64
	}{{10, 300, 6, 1000}, {11, 1000, 12, 0}, {12, 40, 3, -50}, {13, 400, 40, 20}} { // 40 bands: the Gemm path
		x := correlated(tc.seed, tc.n, tc.p, tc.offset)
		b := fit(t, Covariance, x, tc.p)
		for k := 1; k < tc.p; k++ {
			pr, err := NewProjector(b, k)
			if err != nil {
				t.Fatal(err)
			}
			y := make([]float64, tc.n*k)
			xh := make([]float64, len(x))
			pr.Fold(y, x)
			pr.Unfold(xh, y)
			var sse float64
			for i := range x {
				sse += (x[i] - xh[i]) * (x[i] - xh[i])
			}
			want := float64(tc.n-1) * floats.Sum(b.Eigenvalues[k:])
			checkRel(t, fmt.Sprintf("seed %d k %d: residual sum of squares", tc.seed, k), sse, want, 0, 1e-9)

			// Scores are uncorrelated with variances λ₁..λ_k.
			for c := range k {
				var ss float64
				for i := range tc.n {
					ss += y[i*k+c] * y[i*k+c]
				}
				checkRel(t, fmt.Sprintf("seed %d: variance of score %d", tc.seed, c), ss/float64(tc.n-1), b.Eigenvalues[c], 0, 1e-9)
			}
		}
	}
}

// TestCorrelationRoundTrip checks that in correlation mode folding onto all
// p components and unfolding restores the pixels, and that the scores are
// those of the standardised bands: their variances are the eigenvalues of the
// correlation matrix, which sum to p.
func TestCorrelationRoundTrip(t *testing.T) {
	const n, p = 500, 8
	x := correlated(20, n, p, 300)
	b := fit(t, Correlation, x, p)
	checkRel(t, "Σλ of a correlation matrix", floats.Sum(b.Eigenvalues), p, 0, 1e-12)
	pr, err := NewProjector(b, p)
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, n*p)
	xh := make([]float64, n*p)
	pr.Fold(y, x)
	pr.Unfold(xh, y)
	// Relative to the data's scale, the largest magnitude in x.
	scale := floats.Max(absAll(x))
	for i := range x {
		if relDiff(xh[i], x[i], scale) > 1e-10 {
			t.Fatalf("x̂[%d] = %.15g, want %.15g", i, xh[i], x[i])
		}
	}
	for c := range p {
		var ss float64
		for i := range n {
			ss += y[i*p+c] * y[i*p+c]
		}
		checkRel(t, fmt.Sprintf("variance of score %d", c), ss/(n-1), b.Eigenvalues[c], 1, 1e-9)
	}
}

// TestProjectorIsolation checks that an invalid pixel (NaN) affects only its
// own outputs, and that Clone and blocks of any size give the same results.
func TestProjectorIsolation(t *testing.T) {
	const n, p, k = 64, 5, 2
	x := correlated(30, n, p, 10)
	b := fit(t, Covariance, x, p)
	pr, err := NewProjector(b, k)
	if err != nil {
		t.Fatal(err)
	}
	if pr.Bands() != p || pr.Components() != k {
		t.Fatalf("Bands, Components = %d, %d", pr.Bands(), pr.Components())
	}
	want := make([]float64, n*k)
	pr.Fold(want, x)

	bad := append([]float64(nil), x...)
	bad[7*p+3] = math.NaN()
	got := make([]float64, n*k)
	pr.Clone().Fold(got, bad)
	for i := range n {
		for c := range k {
			g, w := got[i*k+c], want[i*k+c]
			if i == 7 {
				if !math.IsNaN(g) {
					t.Errorf("score %d of the NaN pixel = %v, want NaN", c, g)
				}
			} else if g != w {
				t.Errorf("score (%d, %d) = %v with a NaN elsewhere, want %v", i, c, g, w)
			}
		}
	}

	// One pixel at a time gives the same scores to rounding.
	one := make([]float64, k)
	for i := range n {
		pr.Fold(one, x[i*p:(i+1)*p])
		for c := range k {
			checkRel(t, "single-pixel score", one[c], want[i*k+c], math.Sqrt(b.Eigenvalues[0]), 1e-13)
		}
	}
	pr.Fold(nil, nil) // an empty block is fine
	pr.Unfold(nil, nil)
}

// TestFusedMatchesBLAS checks that the fused loop used for few bands and the
// blas64.Gemm path agree to rounding.
func TestFusedMatchesBLAS(t *testing.T) {
	for _, tc := range []struct{ n, p, k int }{{1000, 7, 3}, {300, 32, 32}, {50, 1, 1}} {
		x := correlated(90, tc.n, tc.p, 100)
		b := fit(t, Correlation, x, tc.p)
		pr, err := NewProjector(b, tc.k)
		if err != nil {
			t.Fatal(err)
		}
		if !pr.fused() {
			t.Fatalf("p = %d does not take the fused path", tc.p)
		}
		y, yb := make([]float64, tc.n*tc.k), make([]float64, tc.n*tc.k)
		pr.Fold(y, x)
		pr.foldBLAS(yb, x, tc.n, nil)
		// Scores relative to the largest standard deviation of a score.
		checkRelSlice(t, fmt.Sprintf("p=%d fused vs Gemm score", tc.p), y, yb, math.Sqrt(b.Eigenvalues[0]), 1e-13)
		xh, xb := make([]float64, len(x)), make([]float64, len(x))
		pr.Unfold(xh, y)
		pr.unfoldBLAS(xb, y, tc.n)
		checkRelSlice(t, fmt.Sprintf("p=%d fused vs Gemm reconstruction", tc.p), xh, xb, 100, 1e-14)
	}
}

// TestFusedScoresBitForBit: the fused path's scores, taken four, two and
// one component at a time, are the plain per-component dot products in
// band order to the bit (by construction: each score's own sum runs in
// the same order), for every grouping of k.
func TestFusedScoresBitForBit(t *testing.T) {
	const n, p = 200, 9
	x := correlated(91, n, p, 100)
	b := fit(t, Covariance, x, p)
	for k := 1; k <= p; k++ {
		pr, y := foldWith(t, b, k, x)
		for i := range n {
			for c := range k {
				want := 0.0
				for j := range p {
					want += (x[i*p+j] - pr.mean[j]) * pr.foldT[c*p+j]
				}
				if y[i*k+c] != want {
					t.Fatalf("k = %d, pixel %d, component %d: %v, want %v", k, i, c, y[i*k+c], want)
				}
			}
		}
	}
}

func TestProjectorMisuse(t *testing.T) {
	b := fit(t, Covariance, correlated(40, 20, 3, 0), 3)
	for _, k := range []int{0, 4, -1} {
		if _, err := NewProjector(b, k); err == nil {
			t.Errorf("NewProjector(k = %d) succeeded", k)
		}
	}
	broken := *b
	broken.Mean = broken.Mean[:2]
	if _, err := NewProjector(&broken, 1); err == nil {
		t.Error("NewProjector accepted a basis with 2 means for 3 bands")
	}
	pr, err := NewProjector(b, 2)
	if err != nil {
		t.Fatal(err)
	}
	for name, f := range map[string]func(){
		"Fold x not a multiple of p": func() { pr.Fold(make([]float64, 2), make([]float64, 4)) },
		"Fold dst too short":         func() { pr.Fold(make([]float64, 1), make([]float64, 3)) },
		"Unfold y not a multiple":    func() { pr.Unfold(make([]float64, 3), make([]float64, 3)) },
		"Unfold dst too long":        func() { pr.Unfold(make([]float64, 4), make([]float64, 2)) },
	} {
		func() {
			defer func() {
				if r := recover(); r == nil {
					t.Errorf("%s: no panic", name)
				} else if s, ok := r.(string); !ok || s[:11] != "transform: " {
					t.Errorf("%s: panic %v without the transform prefix", name, r)
				}
			}()
			f()
		}()
	}
}

// BenchmarkFold folds a hyperspectral tile (p = 224 bands, k = 10, 36×256
// pixels) and a multispectral one (p = 7, k = 3, 512×512 pixels).
func BenchmarkFold(b *testing.B) {
	for _, bc := range []struct{ p, k, n int }{{224, 10, 36 * 256}, {7, 3, 512 * 512}} {
		b.Run(fmt.Sprintf("p=%d/k=%d/n=%d", bc.p, bc.k, bc.n), func(b *testing.B) {
			basis := fit(b, Covariance, correlated(50, 4*bc.p, bc.p, 100), bc.p)
			pr, err := NewProjector(basis, bc.k)
			if err != nil {
				b.Fatal(err)
			}
			x := correlated(51, bc.n, bc.p, 100)
			y := make([]float64, bc.n*bc.k)
			b.SetBytes(int64(8 * len(x)))
			for b.Loop() {
				pr.Fold(y, x)
			}
		})
	}
}
