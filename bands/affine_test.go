package bands

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestAffineEqualsMappedPixels: the statistics Affine derives equal those
// accumulated from the mapped pixels themselves (the reference: the same
// accumulator fed x' = g·x + c), to 1e-12 relative, for gains of either
// sign.
func TestAffineEqualsMappedPixels(t *testing.T) {
	const n, p = 500, 3
	rng := rand.New(rand.NewPCG(1, 2))
	x := make([]float64, n*p)
	for i := range x {
		x[i] = 100 + 20*rng.NormFloat64()
	}
	gain, offset := []float64{0.5, -2, 30}, []float64{10, 0, -400}
	mapped := make([]float64, len(x))
	for i, v := range x {
		mapped[i] = gain[i%p]*v + offset[i%p]
	}
	a := NewExactAccumulator(p)
	a.AddPixels(x, nil)
	got, err := Affine(a, gain, offset)
	if err != nil {
		t.Fatal(err)
	}
	want := NewAccumulator(p)
	want.AddPixels(mapped, nil)
	close := func(what string, g, w []float64) {
		for i := range g {
			if d := math.Abs(g[i] - w[i]); d > 1e-12*math.Max(1, math.Abs(w[i])) {
				t.Errorf("%s[%d] = %.15g, want %.15g", what, i, g[i], w[i])
			}
		}
	}
	close("mean", got.Mean(nil), want.Mean(nil))
	close("covariance", got.Covariance(nil).RawSymmetric().Data, want.Covariance(nil).RawSymmetric().Data)
	close("min", got.Min(nil), want.Min(nil))
	close("max", got.Max(nil), want.Max(nil))
}
