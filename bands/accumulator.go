package bands

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// Accumulator holds the running statistics of p-band pixels: a float64 count
// n, the per-band mean vector, the co-moment matrix
//
//	M = Σ (x − mean)(x − mean)ᵀ   (p×p, summed over valid pixels x)
//
// and the per-band minimum and maximum over valid pixels.
//
// The zero value is not usable; create an Accumulator with NewAccumulator,
// NewExactAccumulator or FromState. Methods that change an Accumulator
// (AddPixels, Merge into it, Reset) must not run concurrently with any other
// method on it; nor, on an exact accumulator, may any two methods, since the
// first to read the statistics after a change derives them from the exact
// sums.
type Accumulator struct {
	p    int
	n    float64
	mean []float64
	com  []float64 // p×p row-major; only the upper triangle is kept.
	min  []float64 // +Inf while n == 0.
	max  []float64 // −Inf while n == 0.

	d     []float64 // scratch for fold, length p.
	blk   *block    // scratch for AddPixels, allocated on first use.
	diffs []float64 // scratch for AddShiftDifferences on the fused path.
	own   []bool    // scratch for AddWindow: the owned pixels' validity.

	// exact holds the exact integer sums of an exact accumulator, nil
	// otherwise; wantExact makes Reset restore them. stale means mean and
	// com are not yet derived from them (see sync).
	exact     *exactSums
	wantExact bool
	stale     bool
}

// NewAccumulator returns an empty accumulator for pixels of p bands.
// It panics if p is not positive.
func NewAccumulator(p int) *Accumulator {
	if p <= 0 {
		panic("bands: non-positive band count")
	}
	a := &Accumulator{
		p:    p,
		mean: make([]float64, p),
		com:  make([]float64, p*p),
		min:  make([]float64, p),
		max:  make([]float64, p),
		d:    make([]float64, p),
	}
	a.Reset()
	return a
}

// Bands returns the number of bands p.
func (a *Accumulator) Bands() int { return a.p }

// Count returns the number of valid pixels accumulated.
func (a *Accumulator) Count() float64 { return a.n }

// Reset empties the accumulator, keeping its band count and scratch memory.
func (a *Accumulator) Reset() {
	a.n = 0
	a.stale = false
	if a.wantExact {
		if a.exact == nil {
			a.exact = newExactSums(a.p)
		}
		a.exact.reset()
	}
	clear(a.mean)
	clear(a.com)
	for i := range a.min {
		a.min[i] = math.Inf(1)
		a.max[i] = math.Inf(-1)
	}
}

// Merge folds the statistics of b into a, leaving b unchanged, so that a
// describes the union of the pixels seen by both. It uses the pairwise update
// of Chan, Golub and LeVeque (1979):
//
//	n = nA + nB, d = meanB − meanA,
//	mean = meanA + d·nB/n,
//	M = MA + MB + d·dᵀ·nA·nB/n,
//
// and takes the elementwise minimum and maximum. Merging an empty accumulator
// is a no-op, and merging into an empty one copies b exactly. Two exact
// accumulators merge by adding their exact sums; an exact accumulator that
// merges an ordinary one becomes ordinary. Merge panics if the band counts
// differ.
func (a *Accumulator) Merge(b *Accumulator) {
	if b.p != a.p {
		panic("bands: band count mismatch")
	}
	if a.exact != nil && b.exact != nil {
		a.mergeExact(b)
		return
	}
	if b.n == 0 {
		return
	}
	b.sync()
	a.dropExact()
	a.fold(b.n, b.mean, b.com, b.min, b.max)
}

// fold merges a set of statistics with count nb, mean mb, co-moment cb (upper
// triangle of a p×p row-major matrix) and extremes minb, maxb into a. The
// arguments may alias a's own storage.
func (a *Accumulator) fold(nb float64, mb, cb, minb, maxb []float64) {
	p := a.p
	na := a.n
	switch {
	case nb == 0:
		return
	case na == 0:
		copy(a.mean, mb)
		for i := 0; i < p; i++ {
			copy(a.com[i*p+i:i*p+p], cb[i*p+i:i*p+p])
		}
		copy(a.min, minb)
		copy(a.max, maxb)
		a.n = nb
		return
	}
	n := na + nb
	d := a.d
	for i, m := range mb {
		d[i] = m - a.mean[i]
	}
	f := na * nb / n
	for i, di := range d {
		fdi := f * di
		row := a.com[i*p+i : i*p+p]
		brow := cb[i*p+i : i*p+p]
		dd := d[i:]
		for j := range row {
			row[j] += brow[j] + fdi*dd[j]
		}
	}
	w := nb / n
	for i, di := range d {
		a.mean[i] += di * w
		a.min[i] = min(a.min[i], minb[i])
		a.max[i] = max(a.max[i], maxb[i])
	}
	a.n = n
}

// Mean returns the per-band means, each NaN if no pixel has been accumulated.
// If dst is nil a new slice is allocated; otherwise dst must have length p and
// is returned.
func (a *Accumulator) Mean(dst []float64) []float64 {
	a.sync()
	return a.perBand(dst, a.mean)
}

// Min returns the per-band minimum over valid pixels, each NaN if no pixel has
// been accumulated. dst is handled as in Mean.
func (a *Accumulator) Min(dst []float64) []float64 {
	return a.perBand(dst, a.min)
}

// Max returns the per-band maximum over valid pixels, each NaN if no pixel has
// been accumulated. dst is handled as in Mean.
func (a *Accumulator) Max(dst []float64) []float64 {
	return a.perBand(dst, a.max)
}

func (a *Accumulator) perBand(dst, src []float64) []float64 {
	dst = a.vector(dst)
	if a.n == 0 {
		fill(dst, math.NaN())
		return dst
	}
	copy(dst, src)
	return dst
}

// StdDev returns the per-band sample standard deviations
//
//	s_i = sqrt(M_ii / (n − 1)),
//
// each NaN if fewer than two pixels have been accumulated. dst is handled as
// in Mean.
func (a *Accumulator) StdDev(dst []float64) []float64 {
	a.sync()
	dst = a.vector(dst)
	if a.n <= 1 {
		fill(dst, math.NaN())
		return dst
	}
	for i := range dst {
		dst[i] = math.Sqrt(a.com[i*a.p+i] / (a.n - 1))
	}
	return dst
}

// CoMoment returns the co-moment matrix M = Σ (x − mean)(x − mean)ᵀ.
// If dst is nil a new matrix is allocated; if dst is empty it is resized to
// p×p; otherwise it must be p×p. The result is returned.
func (a *Accumulator) CoMoment(dst *mat.SymDense) *mat.SymDense {
	return a.scaled(dst, 1)
}

// Covariance returns the sample covariance matrix M / (n − 1), all NaN if
// fewer than two pixels have been accumulated. dst is handled as in CoMoment.
func (a *Accumulator) Covariance(dst *mat.SymDense) *mat.SymDense {
	if a.n <= 1 {
		return a.scaled(dst, math.NaN())
	}
	return a.scaled(dst, 1/(a.n-1))
}

// Correlation returns the correlation matrix of the accumulated pixels,
// CorrelationOf their co-moment matrix M (the divisor n − 1 cancels). A band
// whose minimum and maximum coincide counts as having zero variance even if
// rounding in a merged state left a tiny positive co-moment. If a band has
// zero variance (including when fewer than two pixels have been accumulated)
// it returns a *ZeroVarianceError naming the lowest such band, which wraps
// ErrZeroVariance, and leaves dst unchanged. dst is handled as in CoMoment.
func (a *Accumulator) Correlation(dst *mat.SymDense) (*mat.SymDense, error) {
	a.sync()
	p := a.p
	for i := 0; i < p; i++ {
		if a.com[i*p+i] <= 0 || a.min[i] == a.max[i] {
			return nil, &ZeroVarianceError{Band: i}
		}
	}
	// The upper triangle of com, row-major, is M: view it without a copy.
	m := mat.NewSymDense(p, a.com)
	dst = a.matrix(dst)
	if err := correlationTo(dst, m); err != nil {
		return nil, err
	}
	return dst, nil
}

// CorrelationOf returns the correlation matrix of the covariance (or
// co-moment) matrix cov,
//
//	R_ij = C_ij / (s_i · s_j),  s_i = sqrt(C_ii),
//
// with a unit diagonal. If a diagonal element is zero or negative it returns a
// *ZeroVarianceError naming the lowest such band, which wraps
// ErrZeroVariance. This is the one place bandfold turns a covariance into a
// correlation.
func CorrelationOf(cov mat.Symmetric) (*mat.SymDense, error) {
	dst := mat.NewSymDense(cov.SymmetricDim(), nil)
	if err := correlationTo(dst, cov); err != nil {
		return nil, err
	}
	return dst, nil
}

// correlationTo stores the correlation matrix of cov in dst, which must have
// its dimension, and leaves dst unchanged on error (see CorrelationOf).
func correlationTo(dst *mat.SymDense, cov mat.Symmetric) error {
	p := cov.SymmetricDim()
	s := make([]float64, p)
	for i := range s {
		v := cov.At(i, i)
		if v <= 0 {
			return &ZeroVarianceError{Band: i}
		}
		s[i] = math.Sqrt(v)
	}
	for i := 0; i < p; i++ {
		dst.SetSym(i, i, 1)
		for j := i + 1; j < p; j++ {
			dst.SetSym(i, j, cov.At(i, j)/(s[i]*s[j]))
		}
	}
	return nil
}

func (a *Accumulator) scaled(dst *mat.SymDense, f float64) *mat.SymDense {
	a.sync()
	dst = a.matrix(dst)
	p := a.p
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			dst.SetSym(i, j, a.com[i*p+j]*f)
		}
	}
	return dst
}

// vector returns dst, or a new slice of length p if dst is nil.
func (a *Accumulator) vector(dst []float64) []float64 {
	if dst == nil {
		return make([]float64, a.p)
	}
	if len(dst) != a.p {
		panic("bands: destination length mismatch")
	}
	return dst
}

// matrix returns dst sized p×p, allocating it if nil.
func (a *Accumulator) matrix(dst *mat.SymDense) *mat.SymDense {
	switch {
	case dst == nil:
		return mat.NewSymDense(a.p, nil)
	case dst.IsEmpty():
		dst.ReuseAsSym(a.p)
	case dst.SymmetricDim() != a.p:
		panic("bands: destination dimension mismatch")
	}
	return dst
}

func fill(s []float64, v float64) {
	for i := range s {
		s[i] = v
	}
}
