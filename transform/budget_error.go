package transform

import (
	"fmt"
	"math"
)

// ErrorMeter measures the squared error of bands rebuilt from quantised
// scores, ‖x − x̂‖² with x̂ = mean + U ŷ (U the p×k reconstruction matrix of
// a Projector, see Unfold), without rebuilding the bands. Expanding the
// square,
//
//	‖x − x̂‖² = ‖x − mean‖² − 2 ŷᵀ z + ŷᵀ G ŷ,   z = Uᵀ (x − mean),  G = UᵀU,
//
// which costs O(k²) per pixel once ‖x − mean‖² is known (FoldNorms gives it
// with the scores) instead of the O(k p) product and O(p) pass of a
// reconstruction. For covariance-mode principal components the fold matrix
// is U itself, so z is the scores y and no second product is needed; for
// correlation mode and MNF, z takes one more p×k product (Cross).
//
// The identity is exact; in floating point the three terms cancel to the
// error, so its relative precision is about ε ‖x − mean‖² / ‖x − x̂‖²:
// 1e-13 for an error of 1% of the signal. Rounding below zero is clamped.
//
// An ErrorMeter keeps scratch memory; Clone gives each worker its own.
type ErrorMeter struct {
	k    int
	gram []float64 // k×k, row-major
	// cross computes z when it differs from the scores: a Projector whose
	// fold matrix is U (nil when the fold matrix already is).
	cross *Projector
	z     []float64
}

// NewErrorMeter returns the ErrorMeter of the reconstruction of pr.
func NewErrorMeter(pr *Projector) *ErrorMeter {
	p, k := pr.p, pr.k
	m := &ErrorMeter{k: k, gram: make([]float64, k*k)}
	for a := range k {
		ua := pr.unfold.Data[a*p : a*p+p]
		for b := range k {
			ub := pr.unfold.Data[b*p : b*p+p]
			s := 0.0
			for j, v := range ua {
				s += v * ub[j]
			}
			m.gram[a*k+b] = s
		}
	}
	same := true
	for j := range p {
		for c := range k {
			same = same && pr.fold.Data[j*k+c] == pr.unfold.Data[c*p+j]
		}
	}
	if !same {
		cross := pr.Clone()
		cross.fold.Data = make([]float64, p*k)
		for j := range p {
			for c := range k {
				cross.fold.Data[j*k+c] = pr.unfold.Data[c*p+j]
			}
		}
		cross.transposeFold()
		m.cross = cross
	}
	return m
}

// Clone returns an ErrorMeter sharing m's matrices with its own scratch.
func (m *ErrorMeter) Clone() *ErrorMeter {
	c := *m
	c.z = nil
	if m.cross != nil {
		c.cross = m.cross.Clone()
	}
	return &c
}

// Cross returns z = Uᵀ (x − mean) for each pixel of x (pixel-major, k per
// pixel), given the scores y = Fold(x): y itself when the fold matrix is U,
// else computed into the meter's scratch.
func (m *ErrorMeter) Cross(x, y []float64) []float64 {
	if m.cross == nil {
		return y
	}
	m.z = grow(m.z, len(y))
	m.cross.Fold(m.z, x)
	return m.z
}

// Squared returns ‖x − x̂‖² of one pixel from sq = ‖x − mean‖², its z (see
// Cross) and the quantised scores yhat it is rebuilt from. It panics if z
// or yhat do not hold k values.
func (m *ErrorMeter) Squared(sq float64, z, yhat []float64) float64 {
	k := m.k
	if len(z) != k || len(yhat) != k {
		panic(fmt.Sprintf("transform: ErrorMeter.Squared with %d and %d scores for %d components", len(z), len(yhat), k))
	}
	e := sq
	for a, ya := range yhat {
		g := m.gram[a*k : a*k+k]
		q := 0.0
		for b, yb := range yhat {
			q += g[b] * yb
		}
		e += ya * (q - 2*z[a])
	}
	return math.Max(e, 0)
}

// FoldNorms is Fold that also stores in sq the squared distance of each
// pixel from the mean, ‖x_i − mean‖² (n values), computed while the pixel
// is centred. It panics on the shapes Fold panics on, or if len(sq) is not
// n.
func (pr *Projector) FoldNorms(dst, sq, x []float64) {
	n := blockSize("FoldNorms", dst, x, pr.k, pr.p)
	if len(sq) != n {
		panic(fmt.Sprintf("transform: FoldNorms: %d norms for %d pixels", len(sq), n))
	}
	if !pr.fused() {
		pr.foldBLAS(dst, x, n, sq)
		return
	}
	pr.foldFused(dst, sq, x)
}

// grow returns s resized to n, reallocated only when too small.
func grow(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}
