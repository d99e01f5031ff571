package bands_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat"

	"bandfold/bands"
)

// TestMomentsAgainstGonum: per-band means and variances over random blocks
// with random validity equal gonum's stat.MeanVariance on the valid pixels
// (a general-purpose reference library), to 1e-12 relative, and match the
// diagonal of Accumulator.Covariance.
func TestMomentsAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	const p, n = 5, 3000
	x := make([]float64, n*p)
	valid := make([]bool, n)
	for i := range x {
		x[i] = 1e6 + rng.NormFloat64()*float64(1+i%p)
	}
	for i := range valid {
		valid[i] = rng.Float64() < 0.8
	}
	m := bands.NewMoments(p)
	acc := bands.NewAccumulator(p)
	for start := 0; start < n; {
		end := min(n, start+1+rng.IntN(400))
		part := bands.NewMoments(p)
		part.AddPixels(x[start*p:end*p], valid[start:end])
		m.Merge(part)
		acc.AddPixels(x[start*p:end*p], valid[start:end])
		start = end
	}
	mean, vars := m.Mean(nil), m.Variance(nil)
	cov := acc.Covariance(nil)
	for b := range p {
		var col []float64
		for i := range n {
			if valid[i] {
				col = append(col, x[i*p+b])
			}
		}
		wm, wv := stat.MeanVariance(col, nil)
		if !relClose(mean[b], wm, 1e-12) || !relClose(vars[b], wv, 1e-10) || !relClose(vars[b], cov.At(b, b), 1e-10) {
			t.Errorf("band %d: mean %v var %v; gonum %v %v; accumulator %v", b, mean[b], vars[b], wm, wv, cov.At(b, b))
		}
	}
}

func relClose(a, b, rel float64) bool {
	return math.Abs(a-b) <= rel*math.Max(math.Abs(a), math.Abs(b))
}
