package change

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"bandfold/bands"
)

// DefaultTrim is the trimming quantile q used by Fit when a threshold rule
// does not name one (see Threshold.Trim).
const DefaultTrim = 0.999

// DefaultSampleSize is the number of pixels a caller should draw (with a
// Sampler) to fit a Model. The estimate of a k×k covariance from 200 000
// pixels has a relative standard error of about sqrt(2/200000) ≈ 0.3 %, far
// below anything visible in a change map, and Fit on it takes about 0.1 s for
// k = 3 and under a second for k = 20 on one core.
const DefaultSampleSize = 200_000

const (
	// maxIterations bounds the trimming iterations of Fit.
	maxIterations = 30
	// stopDenominator: Fit stops when fewer than n/stopDenominator pixels
	// (0.01 %) changed flag in the last iteration.
	stopDenominator = 10_000
	// maxCond is the largest condition number of the no-change covariance
	// that Fit and NewModel accept; beyond it Z loses most of its digits.
	maxCond = 1e12
	// madScale makes the MAD a consistent estimate of the standard deviation
	// of a Gaussian: 1/Φ⁻¹(3/4) = 1.4826.
	madScale = 1.482602218505602
)

var (
	// ErrTooFewPixels is returned by Fit when there are fewer than k+1
	// pixels, or fewer than k+1 are left unflagged, so that a k×k
	// covariance cannot be estimated.
	ErrTooFewPixels = errors.New("too few pixels")
	// ErrSingular is returned when the no-change covariance is not
	// positive definite or is too ill-conditioned to invert (condition
	// number above 1e12), for example when one component difference is
	// constant or a linear combination of the others.
	ErrSingular = errors.New("singular no-change covariance")
)

// Model is the no-change distribution of the component-score differences: a
// location and a covariance, with a record of how they were estimated.
//
// Location and Covariance are copies kept for reporting and saving; scoring
// uses the Cholesky factor computed by Fit or NewModel, so changing them
// afterwards has no effect. A Model is immutable and safe for concurrent use;
// each goroutine that scores pixels takes its own Scorer.
type Model struct {
	// Location is the no-change mean m of the differences (length k).
	Location []float64
	// Covariance is the no-change covariance S (k×k), already multiplied
	// by the consistency factor for trimming.
	Covariance *mat.SymDense

	// Trim is the trimming quantile q used by Fit.
	Trim float64
	// Iterations is the number of trimming iterations Fit made.
	Iterations int
	// Converged reports whether Fit stopped because fewer than 0.01 % of
	// the pixels changed flag, rather than at the iteration limit.
	Converged bool
	// Sample is the number of pixels Fit was given.
	Sample int
	// Flagged is the number of those pixels flagged as change by the last
	// iteration (the ones left out of Location and Covariance).
	Flagged int

	k   int
	loc []float64 // copy of Location
	l   []float64 // lower Cholesky factor of S, row-major k×k
	inv []float64 // 1/L_ii
}

// K returns the number of components of the model.
func (m *Model) K() int { return m.k }

// Fit estimates the no-change model from the differences d, pixel-major with k
// components per pixel, trimming at quantile trim (q, in (0, 1); usually
// Threshold.Trim or DefaultTrim).
//
// The estimate starts from the per-component median and 1.4826·MAD (if more
// than half the values of a component are equal its MAD is 0 and the mean
// absolute deviation from the median times sqrt(π/2) is used instead, which is
// also consistent for a Gaussian) and then alternates flagging pixels with
// Z > χ²_{k,q} and re-estimating the mean and covariance from the pixels not
// flagged, as described in the package documentation. The covariance of the
// retained pixels (divisor n−1) is multiplied by the consistency factor
//
//	q / F_{k+2}(χ²_{k,q})
//
// because a Gaussian N(μ, Σ) truncated to its q-ellipsoid
// {x : (x−μ)ᵀΣ⁻¹(x−μ) ≤ χ²_{k,q}} has covariance Σ·F_{k+2}(χ²_{k,q})/q. This
// is the usual consistency factor of trimmed covariance estimators such as the
// MCD (C. Croux and G. Haesbroeck, "Influence function and efficiency of the
// minimum covariance determinant scatter matrix estimator", Journal of
// Multivariate Analysis 71, 1999).
//
// Fit returns an error wrapping ErrTooFewPixels if there are fewer than k+1
// pixels or fewer than k+1 are left unflagged (the algebraic minimum for a
// k×k covariance; a useful estimate needs thousands), one wrapping
// ErrSingular if a covariance cannot be factorised, and an error if d holds a
// NaN or an infinity. If the flags are still moving after 30 iterations Fit
// returns the last estimate with Converged false.
//
// Fit panics if k < 1, if len(d) is not a multiple of k or if trim is not in
// (0, 1).
func Fit(d []float64, k int, trim float64) (*Model, error) {
	return fit(d, k, trim, serial)
}

// fit is Fit with its independent pieces on w: the robust starting values
// of the components, and the scores of each trimming iteration.
func fit(d []float64, k int, trim float64, w par) (*Model, error) {
	if k < 1 {
		panic(fmt.Sprintf("change: k = %d < 1", k))
	}
	if len(d)%k != 0 {
		panic(fmt.Sprintf("change: len(d) = %d is not a multiple of k = %d", len(d), k))
	}
	if !(trim > 0 && trim < 1) {
		panic(fmt.Sprintf("change: trimming quantile %v not in (0, 1)", trim))
	}
	n := len(d) / k
	if n < k+1 {
		return nil, fmt.Errorf("%w: %d pixels for %d components, need at least %d", ErrTooFewPixels, n, k, k+1)
	}
	for i, v := range d {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("difference %v at pixel %d, component %d", v, i/k, i%k)
		}
	}

	cut := distuv.ChiSquared{K: float64(k)}.Quantile(trim)
	consistency := trim / distuv.ChiSquared{K: float64(k + 2)}.CDF(cut)

	m := &Model{Trim: trim, Sample: n, k: k, loc: make([]float64, k), l: make([]float64, k*k), inv: make([]float64, k)}
	if err := m.start(d, w); err != nil {
		return nil, err
	}

	keep := make([]bool, n) // not flagged
	for p := range keep {
		keep[p] = true
	}
	acc := bands.NewAccumulator(k)
	cov := mat.NewSymDense(k, nil)
	for it := 1; ; it++ {
		changed, flagged := m.trim(d, keep, cut, w)
		if n-flagged < k+1 {
			return nil, fmt.Errorf("%w: %d of %d pixels left after trimming at q = %v, need at least %d",
				ErrTooFewPixels, n-flagged, n, trim, k+1)
		}
		trimmedMoments(acc, m.loc, cov, d, keep)
		cov.ScaleSym(consistency, cov)
		if err := m.factorise(cov); err != nil {
			return nil, fmt.Errorf("%w (iteration %d, %d pixels retained)", err, it, n-flagged)
		}
		m.Iterations, m.Flagged = it, flagged
		if it > 1 && changed*stopDenominator < n {
			m.Converged = true
			break
		}
		if it == maxIterations {
			break
		}
	}
	m.Location = slices.Clone(m.loc)
	m.Covariance = cov
	return m, nil
}

// trim sets keep[p] to whether pixel p of d scores at most cut under m,
// and returns how many flags changed and how many pixels are above cut.
func (m *Model) trim(d []float64, keep []bool, cut float64, w par) (changed, flagged int) {
	k := m.k
	counts := make([][2]int, w.pieces(len(keep))) // by piece: changed, flagged
	w.chunks(len(keep), func(i, lo, hi int) {
		c := &counts[i]
		sc := m.Scorer()
		for p := lo; p < hi; p++ {
			f := sc.Z(d[p*k:(p+1)*k]) > cut
			if f == keep[p] {
				c[0]++
				keep[p] = !f
			}
			if f {
				c[1]++
			}
		}
	})
	for _, c := range counts {
		changed, flagged = changed+c[0], flagged+c[1]
	}
	return changed, flagged
}

// start sets the initial location (median) and diagonal factor (robust
// scale) of m from d, the components on w.
func (m *Model) start(d []float64, w par) error {
	k := m.k
	n := len(d) / k
	return w.each(k, func(j int) error {
		col := make([]float64, n)
		for p := range n {
			col[p] = d[p*k+j]
		}
		med := medianOf(col)
		var meanAbs float64
		for p, v := range col {
			col[p] = math.Abs(v - med)
			meanAbs += col[p]
		}
		s := madScale * medianOf(col)
		if s == 0 {
			s = math.Sqrt(math.Pi/2) * meanAbs / float64(n)
		}
		if s == 0 {
			return fmt.Errorf("%w: component %d is constant", ErrSingular, j)
		}
		m.loc[j] = med
		m.l[j*k+j] = s
		m.inv[j] = 1 / s
		return nil
	})
}

// medianOf returns the median of the non-empty s, free of NaN (the mean
// of the two middle values when their number is even), reordering s.
func medianOf(s []float64) float64 {
	h := len(s) / 2
	selectNth(s, h, func(v float64) float64 { return v })
	if len(s)%2 == 1 {
		return s[h]
	}
	lo := slices.Max(s[:h])
	return lo + (s[h]-lo)/2
}

// trimmedMoments sets loc to the mean and cov to the covariance (divisor
// kept−1) of the pixels of d whose keep flag is set, accumulating them in acc
// (emptied first), whose co-moment merge keeps full precision however far
// the differences are from zero.
func trimmedMoments(acc *bands.Accumulator, loc []float64, cov *mat.SymDense, d []float64, keep []bool) {
	acc.Reset()
	acc.AddPixels(d, keep)
	acc.Mean(loc)
	acc.Covariance(cov)
}

// factorise stores the lower Cholesky factor of cov in m.
func (m *Model) factorise(cov mat.Symmetric) error {
	var chol mat.Cholesky
	if !chol.Factorize(cov) {
		return fmt.Errorf("%w: not positive definite", ErrSingular)
	}
	if c := chol.Cond(); c > maxCond {
		return fmt.Errorf("%w: condition number %.3g", ErrSingular, c)
	}
	var lower mat.TriDense
	chol.LTo(&lower)
	k := m.k
	for i := range k {
		for j := 0; j <= i; j++ {
			m.l[i*k+j] = lower.At(i, j)
		}
		m.inv[i] = 1 / m.l[i*k+i]
	}
	return nil
}

// NewModel returns a Model with the given location and covariance, for
// example one saved from an earlier Fit, ready to score pixels. Only Location
// and Covariance are set among the exported fields; the caller may fill in
// the others.
//
// NewModel returns an error wrapping ErrSingular if cov is not positive
// definite or is too ill-conditioned, and an error if a value is not finite.
// It panics if location is empty or cov is not len(location)×len(location).
func NewModel(location []float64, cov mat.Symmetric) (*Model, error) {
	k := len(location)
	if k == 0 {
		panic("change: empty location")
	}
	if cov.SymmetricDim() != k {
		panic(fmt.Sprintf("change: covariance is %d×%d, location has length %d", cov.SymmetricDim(), cov.SymmetricDim(), k))
	}
	for j, v := range location {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("location %v at component %d", v, j)
		}
	}
	for i := range k {
		for j := i; j < k; j++ {
			if v := cov.At(i, j); math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, fmt.Errorf("covariance %v at (%d, %d)", v, i, j)
			}
		}
	}
	m := &Model{k: k, loc: slices.Clone(location), l: make([]float64, k*k), inv: make([]float64, k)}
	if err := m.factorise(cov); err != nil {
		return nil, err
	}
	m.Location = slices.Clone(location)
	m.Covariance = mat.NewSymDense(k, nil)
	m.Covariance.CopySym(cov)
	return m, nil
}

// Scores returns Z for every pixel of the pixel-major block d, in dst if it
// has room (dst is resliced to the number of pixels) or in a new slice. It
// panics if len(d) is not a multiple of K.
func (m *Model) Scores(dst, d []float64) []float64 {
	return m.scores(dst, d, serial)
}

// scores is Scores with pieces of the pixels on w.
func (m *Model) scores(dst, d []float64, w par) []float64 {
	if len(d)%m.k != 0 {
		panic(fmt.Sprintf("change: len(d) = %d is not a multiple of k = %d", len(d), m.k))
	}
	n := len(d) / m.k
	if cap(dst) < n {
		dst = make([]float64, n)
	}
	dst = dst[:n]
	w.chunks(n, func(_, lo, hi int) {
		sc := m.Scorer()
		for p := lo; p < hi; p++ {
			dst[p] = sc.Z(d[p*m.k : (p+1)*m.k])
		}
	})
	return dst
}

// Scorer computes the change statistic of single pixels for a Model. It holds
// its own scratch space, so it must not be shared between goroutines; take
// one Scorer per worker from Model.Scorer (it is cheap: one slice of length
// k).
type Scorer struct {
	k   int
	loc []float64
	l   []float64
	inv []float64
	y   []float64
}

// Scorer returns a new Scorer for m.
func (m *Model) Scorer() *Scorer {
	if m.l == nil {
		panic("change: Model not made by Fit or NewModel")
	}
	return &Scorer{k: m.k, loc: m.loc, l: m.l, inv: m.inv, y: make([]float64, m.k)}
}

// Z returns the Mahalanobis statistic
//
//	Z = (d − m)ᵀ S⁻¹ (d − m) = |L⁻¹ (d − m)|²
//
// of the difference vector d, with S = L·Lᵀ the Cholesky factorisation of the
// no-change covariance. Where nothing changed Z is approximately chi-square
// with k degrees of freedom. Z panics if len(d) != k.
func (s *Scorer) Z(d []float64) float64 {
	z, _ := s.whiten(d, false)
	return z
}

// ZTop returns Z for d and the index of the component contributing most to
// it. The contribution of component i is y_i², where y = L⁻¹(d − m) are the
// whitened coordinates, so that Z = Σ y_i² exactly: y_i is the part of the
// difference in component i that the differences in components 0..i−1 do not
// predict under the no-change model, in units of its no-change standard
// deviation. The attribution therefore follows the order of the components
// (the order of decreasing variance for principal components): a change seen
// in component 0 and, through the no-change correlation, in component 1 is
// credited to component 0. Ties go to the lowest index. ZTop panics if
// len(d) != k.
func (s *Scorer) ZTop(d []float64) (z float64, top int) {
	return s.whiten(d, true)
}

func (s *Scorer) whiten(d []float64, wantTop bool) (z float64, top int) {
	k := s.k
	if len(d) != k {
		panic(fmt.Sprintf("change: difference vector has length %d, model has k = %d", len(d), k))
	}
	y := s.y
	var best float64
	for i := range k {
		v := d[i] - s.loc[i]
		for j, lij := range s.l[i*k : i*k+i] {
			v -= lij * y[j]
		}
		yi := v * s.inv[i]
		y[i] = yi
		yi2 := yi * yi
		z += yi2
		if wantTop && yi2 > best {
			best, top = yi2, i
		}
	}
	return z, top
}

// Centre sets dst to d − m, the difference centred on the no-change location,
// and returns it. If dst is nil a new slice is allocated. Centre panics if
// len(d) != k or dst is neither nil nor of length k.
func (s *Scorer) Centre(dst, d []float64) []float64 {
	if len(d) != s.k {
		panic(fmt.Sprintf("change: difference vector has length %d, model has k = %d", len(d), s.k))
	}
	if dst == nil {
		dst = make([]float64, s.k)
	}
	if len(dst) != s.k {
		panic(fmt.Sprintf("change: dst has length %d, model has k = %d", len(dst), s.k))
	}
	for i, v := range d {
		dst[i] = v - s.loc[i]
	}
	return dst
}

// PValue returns the probability that a chi-square variable with k degrees of
// freedom exceeds z: the survival function Q(k/2, z/2), the regularized upper
// incomplete gamma function, computed directly (gonum's
// distuv.ChiSquared.Survival) rather than as 1 − CDF, which rounds to 0
// beyond z ≈ 80 for k = 3 and loses all relative precision well before. For
// z ≤ 0 it returns 1. PValue panics if k < 1.
//
// For k up to 100 and z up to 1400 it sums the closed form instead, which is
// exact and several times faster (Abramowitz & Stegun 26.4.4 and 26.4.5):
// Q(1, z) = erfc(sqrt(z/2)), Q(2, z) = exp(-z/2), and
// Q(k+2, z) = Q(k, z) + a_k with a_k = (z/2)^(k/2) exp(-z/2) / Gamma(k/2 + 1),
// a_(k+2) = a_k (z/2) / (k/2 + 1); every term is positive, so the sum keeps
// full relative precision in the tail. Beyond those limits exp(-z/2) could
// underflow while the sum does not, and gonum's routine is used.
func PValue(z float64, k int) float64 {
	if k < 1 {
		panic(fmt.Sprintf("change: k = %d < 1", k))
	}
	if z <= 0 {
		return 1
	}
	if k > 100 || z > 1400 || math.IsNaN(z) {
		return distuv.ChiSquared{K: float64(k)}.Survival(z)
	}
	half := z / 2
	var q, a float64
	j := k % 2
	if j == 1 {
		q = math.Erfc(math.Sqrt(half))
		a = math.Sqrt(2*z/math.Pi) * math.Exp(-half)
	} else {
		j = 2
		q = math.Exp(-half)
		a = half * q
	}
	for ; j < k; j += 2 {
		q += a
		a *= half / (float64(j)/2 + 1)
	}
	return q
}
