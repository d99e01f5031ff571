package bands

import (
	"errors"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

func TestCorrelationOf(t *testing.T) {
	rnd := rand.New(rand.NewPCG(31, 32))
	for _, p := range []int{1, 3, 12} {
		x := correlatedPixels(rnd, 2000, p)
		data := mat.NewDense(2000, p, x)
		var cov, want mat.SymDense
		stat.CovarianceMatrix(&cov, data, nil)
		// gonum stat.CorrelationMatrix (reference library).
		stat.CorrelationMatrix(&want, data, nil)
		got, err := CorrelationOf(&cov)
		if err != nil {
			t.Fatal(err)
		}
		checkRel(t, "CorrelationOf", relDiffSym(got, &want), tolExact)
		for i := range p {
			if got.At(i, i) != 1 {
				t.Errorf("p = %d: diagonal %d is %v, want exactly 1", p, i, got.At(i, i))
			}
		}
		// The accumulator's correlation is the same computation on its
		// co-moment matrix.
		a := NewAccumulator(p)
		a.AddPixels(x, nil)
		acc, err := a.Correlation(nil)
		if err != nil {
			t.Fatal(err)
		}
		checkRel(t, "Accumulator.Correlation", relDiffSym(acc, got), tolExact)
	}

	// A zero or negative variance names the lowest such band.
	for _, tc := range []struct {
		diag []float64
		band int
	}{{[]float64{1, 0, 2}, 1}, {[]float64{1, 2, -1}, 2}, {[]float64{0, 0, 1}, 0}} {
		cov := mat.NewSymDense(3, nil)
		for i, v := range tc.diag {
			cov.SetSym(i, i, v)
		}
		_, err := CorrelationOf(cov)
		var zv *ZeroVarianceError
		if !errors.As(err, &zv) || zv.Band != tc.band || !errors.Is(err, ErrZeroVariance) {
			t.Errorf("CorrelationOf(diag %v): %v, want zero variance in band %d", tc.diag, err, tc.band)
		}
	}
}
