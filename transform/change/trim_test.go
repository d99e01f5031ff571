package change

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"

	"bandfold/bands"
)

// TestTrimmedMomentsMatchGonum: the mean and covariance of the kept pixels
// are those of gonum's stat.Mean and stat.CovarianceMatrix with weights 1
// for kept and 0 for flagged pixels (a reference library), to 1e-12 of
// sqrt(S_ii·S_jj), on differences far from zero and with a few thousand
// pixels left out, spread over several accumulation chunks.
func TestTrimmedMomentsMatchGonum(t *testing.T) {
	const n, k = 20_000, 3
	rng := rand.New(rand.NewPCG(21, 22))
	d := gaussian(rng, n, []float64{1e4, -3e3, 0.5}, testA)
	keep := make([]bool, n)
	weights := make([]float64, n)
	for p := range keep {
		keep[p] = rng.Float64() > 0.1
		if keep[p] {
			weights[p] = 1
		}
	}
	loc := make([]float64, k)
	cov := mat.NewSymDense(k, nil)
	trimmedMoments(bands.NewAccumulator(k), loc, cov, d, keep)

	x := mat.NewDense(n, k, d)
	var want mat.SymDense
	stat.CovarianceMatrix(&want, x, weights)
	for i := range k {
		m := stat.Mean(mat.Col(nil, i, x), weights)
		sd := math.Sqrt(want.At(i, i))
		if math.Abs(loc[i]-m) > 1e-12*math.Abs(m) {
			t.Errorf("location[%d] = %.15g, gonum %.15g", i, loc[i], m)
		}
		for j := range k {
			scale := sd * math.Sqrt(want.At(j, j))
			if math.Abs(cov.At(i, j)-want.At(i, j)) > 1e-12*scale {
				t.Errorf("covariance(%d,%d) = %.15g, gonum %.15g", i, j, cov.At(i, j), want.At(i, j))
			}
		}
	}
}
