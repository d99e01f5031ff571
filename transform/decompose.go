package transform

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"

	"bandfold/bands"
)

// tieTol is the relative difference below which two loadings count as equally
// large for the sign rule of Decompose. It is far above the rounding error of
// an eigenvector (a few ulp times the condition of the problem), so genuine
// ties such as (1, -1)/√2 are recognised whatever LAPACK implementation
// computed them.
const tieTol = 1e-9

// Decomposition is the spectral decomposition A = V Λ Vᵀ of a symmetric p×p
// matrix A.
type Decomposition struct {
	// Values holds the p eigenvalues λ₁ ≥ λ₂ ≥ … ≥ λ_p in descending order.
	Values []float64
	// Vectors is the p×p orthogonal matrix V; column j is the unit
	// eigenvector of Values[j], the loadings of component j on the bands.
	Vectors *mat.Dense
}

// Decompose computes the eigenvalues and eigenvectors of the symmetric matrix
// s with gonum's mat.EigenSym and returns them with the eigenvalues in
// descending order.
//
// Eigenvectors are only defined up to sign; Decompose makes the sign
// deterministic by making the largest-magnitude loading of each eigenvector
// positive. Loadings whose magnitudes agree to a relative 1e-9 count as tied,
// and the one with the lowest band index decides. Eigenvectors of repeated
// eigenvalues are not unique beyond sign and are returned as LAPACK computes
// them.
//
// Decompose returns an error if s is empty or has a non-finite element, or if
// the factorisation fails.
func Decompose(s mat.Symmetric) (Decomposition, error) {
	p := s.SymmetricDim()
	if p == 0 {
		return Decomposition{}, errors.New("empty matrix")
	}
	for i := range p {
		for j := i; j < p; j++ {
			if v := s.At(i, j); !finite(v) {
				return Decomposition{}, fmt.Errorf("element (%d, %d) is %v", i, j, v)
			}
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(s, true) {
		return Decomposition{}, errors.New("eigen-decomposition failed")
	}
	asc := eig.Values(nil) // ascending
	var q mat.Dense
	eig.VectorsTo(&q)

	values := make([]float64, p)
	vectors := mat.NewDense(p, p, nil)
	col := make([]float64, p)
	for j := range p {
		src := p - 1 - j
		values[j] = asc[src]
		mat.Col(col, src, &q)
		orient(col)
		vectors.SetCol(j, col)
	}
	return Decomposition{Values: values, Vectors: vectors}, nil
}

// orient flips v, if needed, so that its largest-magnitude element is
// positive, the lowest index winning ties within tieTol.
func orient(v []float64) {
	big := 0.0
	for _, x := range v {
		big = max(big, math.Abs(x))
	}
	for _, x := range v {
		if math.Abs(x) >= big*(1-tieTol) {
			if x < 0 {
				floats.Scale(-1, v)
			}
			return
		}
	}
}

// Explained returns the share of the total of values, values[j] / Σᵢ values[i],
// for each component: the fraction of the total variance it explains when
// values are the eigenvalues of a covariance or correlation matrix. If the
// total is zero, every share is zero.
func Explained(values []float64) []float64 {
	total := floats.Sum(values)
	share := make([]float64, len(values))
	if total == 0 {
		return share
	}
	for j, v := range values {
		share[j] = v / total
	}
	return share
}

// Cumulative returns the cumulative shares of values: element k-1 is the
// fraction of the total explained by the first k components,
// Σ_{i≤k} values[i] / Σᵢ values[i]. The running sum is divided by the total
// only at the end, so the last element is exactly 1 (0 if the total is zero).
func Cumulative(values []float64) []float64 {
	cum := make([]float64, len(values))
	if len(values) == 0 {
		return cum
	}
	floats.CumSum(cum, values)
	total := cum[len(cum)-1]
	if total == 0 {
		clear(cum)
		return cum
	}
	for k := range cum {
		cum[k] /= total
	}
	return cum
}

// ExplainedOn returns the share of a scene's total variance carried by the
// kept components of b: with scene the per-band moments of the scene's valid
// pixels and scores the per-component moments of their scores (Fold's
// output),
//
//	Σ_i var(y_i) / Σ_j (var(x_j) / s_j²),
//
// where s_j is the scale of band j in b (1 in covariance mode, StdDev[j] in
// correlation mode). Both variances are about the scene's own means, so on
// the pixels b was fitted on this is Cumulative(b.Eigenvalues)[k-1] for k
// components; on another scene it tells how well the basis carries over. It
// returns NaN when the scene's total variance is zero or undefined (fewer
// than two pixels), where the share is undefined, and for an MNF basis.
// ExplainedOn panics if the
// band count of scene is not that of b.
func ExplainedOn(b *Basis, scene, scores *bands.Moments) float64 {
	v := scene.Variance(nil)
	if b.Method == MNF {
		// MNF scores are noise-whitened: their total is tr(Σ_N⁻¹ C), which
		// per-band variances cannot give.
		return math.NaN()
	}
	if len(v) != len(b.Bands) {
		panic(fmt.Sprintf("transform: ExplainedOn: moments of %d bands for a basis of %d", len(v), len(b.Bands)))
	}
	total := 0.0
	for j, x := range v {
		s := b.scale(j)
		total += x / (s * s)
	}
	if !(total > 0) {
		return math.NaN()
	}
	return floats.Sum(scores.Variance(nil)) / total
}

// ValidateFraction reports whether f can be passed to ComponentsFor: a
// fraction of the total variance in (0, 1].
func ValidateFraction(f float64) error {
	if !(f > 0 && f <= 1) {
		return fmt.Errorf("variance fraction %v is not in (0, 1]", f)
	}
	return nil
}

// ComponentsFor returns the smallest k whose cumulative share of values
// (see Cumulative) is at least fraction. If no k reaches it, which happens
// only when the total is zero, it returns len(values).
//
// ComponentsFor panics if values is empty or fraction is not in (0, 1]; check
// user input with ValidateFraction.
func ComponentsFor(values []float64, fraction float64) int {
	if len(values) == 0 {
		panic("transform: no eigenvalues")
	}
	if err := ValidateFraction(fraction); err != nil {
		panic(err.Error())
	}
	for k, c := range Cumulative(values) {
		if c >= fraction {
			return k + 1
		}
	}
	return len(values)
}

// BrokenStickShares returns the expected shares of the broken-stick model
// for p components (Jackson 1993, "Stopping rules in principal components
// analysis: a comparison of heuristical and statistical approaches",
// Ecology 74(8)):
//
//	b_k = (1/p) Σ_{i=k}^{p} 1/i,  k = 1..p,
//
// the expected length of the k-th longest piece of a stick of unit length
// broken at random into p pieces. They are descending and sum to 1. The sums
// are taken from the smallest term up. BrokenStickShares panics if p is
// negative.
func BrokenStickShares(p int) []float64 {
	if p < 0 {
		panic(fmt.Sprintf("transform: BrokenStickShares(%d)", p))
	}
	stick := make([]float64, p)
	var tail float64
	for i := p; i >= 1; i-- {
		tail += 1 / float64(i)
		stick[i-1] = tail / float64(p)
	}
	return stick
}

// BrokenStick returns the number of leading components retained by the
// broken-stick rule: component k is kept while its share of the total
// (Explained) exceeds the expected share b_k of BrokenStickShares. Counting
// stops at the first component that fails, so the result is between 0 and
// p-1 (the b_k sum to 1, as do the shares).
func BrokenStick(values []float64) int {
	share := Explained(values)
	for k, b := range BrokenStickShares(len(values)) {
		if !(share[k] > b) {
			return k
		}
	}
	return len(values)
}

// KaiserCount returns the number of values greater than 1: the Kaiser–Guttman
// rule, meaningful for the eigenvalues of a correlation matrix, where 1 is the
// variance of a single standardised band.
func KaiserCount(values []float64) int {
	n := 0
	for _, v := range values {
		if v > 1 {
			n++
		}
	}
	return n
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
