package transform

import (
	"fmt"
	"math"
	"testing"

	"bandfold/bands"
)

// TestErrorMeterMatchesReconstruction: for covariance and correlation
// principal components and an MNF basis, through the fused (p ≤ 32) and
// the BLAS path, the squared error the meter gives from the codes
// round(y/Δ)Δ equals Σ (x − Unfold(codes))² summed directly (the
// identity ‖x − x̂‖² = ‖x − mean‖² − 2ŷᵀz + ŷᵀGŷ is exact; the tolerance
// 1e-10 is ε x ‖x − mean‖² / ‖x − x̂‖² with room, the errors here being
// above 1e-4 of the signal). FoldNorms gives Fold's scores bit for bit.
func TestErrorMeterMatchesReconstruction(t *testing.T) {
	const n = 3000
	type tc struct {
		name string
		b    *Basis
		x    []float64
		k    int
	}
	var cases []tc
	for _, p := range []int{7, 40} {
		x := correlated(uint64(p), n, p, 500)
		cases = append(cases, tc{fmt.Sprintf("covariance p=%d", p), fit(t, Covariance, x, p), x, 3},
			tc{fmt.Sprintf("correlation p=%d", p), fit(t, Correlation, x, p), x, 3})
	}
	mnf := func(p int) tc {
		sig := []float64{900, 400, 100}
		_, u := lowRank(4, p, sig)
		nv := make([]float64, p)
		for j := range nv {
			nv[j] = 0.2 + float64(j%5)
		}
		x, _ := sampledCube(8, n, u, sig, nv)
		acc := bands.NewAccumulator(p)
		acc.AddPixels(x, nil)
		b, err := NewMNFBasis(testBands(p), n, acc.Mean(nil), acc.Covariance(nil), diagSym(nv), n)
		if err != nil {
			t.Fatal(err)
		}
		return tc{fmt.Sprintf("mnf p=%d", p), b, x, 4}
	}
	cases = append(cases, mnf(12), mnf(40))
	for _, c := range cases {
		p := len(c.b.Bands)
		pr, err := NewProjector(c.b, c.k)
		if err != nil {
			t.Fatal(err)
		}
		y, y2, sq := make([]float64, n*c.k), make([]float64, n*c.k), make([]float64, n)
		pr.Fold(y, c.x)
		pr.FoldNorms(y2, sq, c.x)
		for i := range y {
			if y[i] != y2[i] {
				t.Fatalf("%s: FoldNorms score %d is %v, Fold's %v", c.name, i, y2[i], y[i])
			}
		}
		step := 0.3 * math.Sqrt(c.b.Eigenvalues[c.k-1])
		codes := make([]float64, len(y))
		for i, v := range y {
			codes[i] = math.Round(v/step) * step
		}
		xh := make([]float64, len(c.x))
		pr.Unfold(xh, codes)
		want, signal := 0.0, 0.0
		for i, v := range c.x {
			want += (v - xh[i]) * (v - xh[i])
			d := v - c.b.Mean[i%p]
			signal += d * d
		}
		m := NewErrorMeter(pr).Clone()
		z := m.Cross(c.x, y)
		got, sqWant := 0.0, 0.0
		for i := range n {
			got += m.Squared(sq[i], z[i*c.k:i*c.k+c.k], codes[i*c.k:i*c.k+c.k])
		}
		for _, s := range sq {
			sqWant += s
		}
		if math.Abs(got-want) > 1e-10*want || math.Abs(sqWant-signal) > 1e-12*signal {
			t.Errorf("%s: meter %v, direct %v (relative %.2g); Σ‖x − mean‖² %v, want %v", c.name, got, want, math.Abs(got-want)/want, sqWant, signal)
		}
		if want < 1e-4*signal {
			t.Errorf("%s: error %v too small against the signal %v for the test to mean anything", c.name, want, signal)
		}
	}
}
