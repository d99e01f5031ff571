package bands

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

// Tolerances, all relative: a difference is measured in the Frobenius (or
// Euclidean) norm and divided by the norm of the expected value.
const (
	// tolExact is for results that differ from the reference only in the
	// order of floating-point operations.
	tolExact = 1e-12
	// tolShift is for data shifted by a large offset, whose own rounding
	// (about 1e-10 for values near 1e6) bounds the agreement.
	tolShift = 1e-9
)

// relDiff returns ‖got − want‖ / ‖want‖ for vectors, or ‖got‖ if want is zero.
func relDiff(got, want []float64) float64 {
	if len(got) != len(want) {
		return math.Inf(1)
	}
	var num, den float64
	for i := range want {
		d := got[i] - want[i]
		num += d * d
		den += want[i] * want[i]
	}
	if den == 0 {
		return math.Sqrt(num)
	}
	return math.Sqrt(num / den)
}

// symData returns the full row-major elements of a symmetric matrix.
func symData(m mat.Symmetric) []float64 {
	n := m.SymmetricDim()
	d := make([]float64, 0, n*n)
	for i := range n {
		for j := range n {
			d = append(d, m.At(i, j))
		}
	}
	return d
}

// relDiffSym returns ‖got − want‖_F / ‖want‖_F.
func relDiffSym(got, want mat.Symmetric) float64 {
	if got.SymmetricDim() != want.SymmetricDim() {
		return math.Inf(1)
	}
	return relDiff(symData(got), symData(want))
}

func checkRel(t *testing.T, what string, d, tol float64) {
	t.Helper()
	if !(d <= tol) {
		t.Errorf("%s: relative difference %.3g, want <= %.0g", what, d, tol)
	}
}

// correlatedPixels returns n pixels of p bands, pixel-major: a random mixture
// L·z of independent standard normals z, plus a per-band offset of 100·(j+1),
// so that bands are correlated and have means far from zero.
func correlatedPixels(rnd *rand.Rand, n, p int) []float64 {
	l := make([]float64, p*p)
	for i := range l {
		l[i] = rnd.NormFloat64()
	}
	z := make([]float64, p)
	x := make([]float64, n*p)
	for i := range n {
		for j := range z {
			z[j] = rnd.NormFloat64()
		}
		for j := range p {
			v := 100 * float64(j+1)
			for k, zk := range z {
				v += l[j*p+k] * zk
			}
			x[i*p+j] = v
		}
	}
	return x
}

// randomMask returns n validity flags, each set with probability frac.
func randomMask(rnd *rand.Rand, n int, frac float64) []bool {
	m := make([]bool, n)
	for i := range m {
		m[i] = rnd.Float64() < frac
	}
	return m
}

// randomSplits cuts n pixels into consecutive parts of random sizes from 0 to
// maxPart, returning the part boundaries 0 = b[0] ≤ b[1] ≤ … = n.
func randomSplits(rnd *rand.Rand, n, maxPart int) []int {
	b := []int{0}
	for at := 0; at < n; {
		at = min(at+rnd.IntN(maxPart+1), n)
		b = append(b, at)
	}
	return b
}

// validRows returns the valid pixels of x as the rows of a matrix.
func validRows(x []float64, valid []bool, p int) *mat.Dense {
	var rows []float64
	for i := range len(x) / p {
		if valid == nil || valid[i] {
			rows = append(rows, x[i*p:i*p+p]...)
		}
	}
	return mat.NewDense(len(rows)/p, p, rows)
}

// reference holds statistics computed in memory by gonum's stat package.
type reference struct {
	mean, sd   []float64
	cov, corr  *mat.SymDense
	min, max   []float64
	validCount int
}

// referenceStats computes the statistics of the valid pixels of x with gonum's
// stat.CovarianceMatrix, stat.CorrelationMatrix and stat.MeanStdDev, and the
// extremes by a direct scan.
func referenceStats(x []float64, valid []bool, p int) reference {
	m := validRows(x, valid, p)
	n, _ := m.Dims()
	r := reference{
		mean: make([]float64, p), sd: make([]float64, p),
		min: make([]float64, p), max: make([]float64, p),
		cov: mat.NewSymDense(p, nil), corr: mat.NewSymDense(p, nil),
		validCount: n,
	}
	stat.CovarianceMatrix(r.cov, m, nil)
	stat.CorrelationMatrix(r.corr, m, nil)
	col := make([]float64, n)
	for j := range p {
		mat.Col(col, j, m)
		r.mean[j], r.sd[j] = stat.MeanStdDev(col, nil)
		r.min[j], r.max[j] = math.Inf(1), math.Inf(-1)
		for _, v := range col {
			r.min[j] = min(r.min[j], v)
			r.max[j] = max(r.max[j], v)
		}
	}
	return r
}

// stateBitsEqual reports whether two states hold bitwise identical numbers in
// slices of the same lengths.
func stateBitsEqual(a, b State) bool {
	eq := func(x, y []float64) bool {
		if len(x) != len(y) {
			return false
		}
		for i := range x {
			if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
				return false
			}
		}
		return true
	}
	if math.Float64bits(a.Count) != math.Float64bits(b.Count) || len(a.CoMoment) != len(b.CoMoment) {
		return false
	}
	for i := range a.CoMoment {
		if !eq(a.CoMoment[i], b.CoMoment[i]) {
			return false
		}
	}
	return eq(a.Mean, b.Mean) && eq(a.Min, b.Min) && eq(a.Max, b.Max)
}

// kernels names the two co-moment kernels of AddPixels, so that tests can run
// both whatever the band count.
var kernels = []struct {
	name  string
	fused bool
}{{"fused", true}, {"syrk", false}}
