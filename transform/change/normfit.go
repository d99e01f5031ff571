package change

import (
	"errors"
	"fmt"
	"math"
	"runtime"

	"bandfold/bands"
	"bandfold/transform"
)

// Normalization is the relative radiometric normalisation of one date onto a
// reference date's scale, band by band: x' = Offset + Gain·x.
type Normalization struct {
	Bands []BandFit
	// Stable is the number of sampled pixels the last regression used.
	Stable int
	// Rounds is the number of refinements after the first fit; Settled
	// reports whether the gains stopped moving (relative change below
	// settleTol) within maxRounds.
	Rounds  int
	Settled bool
}

// The refinement's bounds: the gains have settled when no band's gain moves
// by more than settleTol (relative) in a round; at most maxRounds rounds.
const (
	settleTol = 1e-7
	maxRounds = 30
)

// FirstFitPixels bounds the pixels the first no-change model is fitted on:
// its iterations cost most of the normalisation, and a first estimate that
// only picks the stable pixels (scored over the whole sample) needs no more
// (the relative standard error of a covariance from 50 000 pixels is about
// sqrt(2/50000) = 0.6%).
const FirstFitPixels = 50_000

// FitNormalization fits date onto ref's radiometric scale from a sample of
// pixels valid on both (pixel-major, p bands a pixel, the same pixels in
// the same order). Two stages (after Canty and Nielsen, "Automatic
// radiometric normalization of multitemporal satellite imagery with the
// iteratively re-weighted MAD transformation", Remote Sensing of
// Environment 112, 2008, which also iterates the selection of invariant
// pixels):
//
//  1. First fit: each date standardised by its median and 1.4826·MAD, a
//     pooled principal component basis (99% of the variance, at least
//     min(p, 3) components), a robust no-change model of the standardised
//     score differences, the stable pixels (no-change p-value ≥ 0.5, see
//     Stable), and per band an orthogonal regression of ref on date.
//  2. Refinement, until the gains settle: the differences of the
//     normalised date and ref in ref's units, a robust no-change model of
//     them over all p bands, the stable pixels chosen again on it, and per
//     band an orthogonal regression of ref on the normalised date, whose
//     line is composed with the current one.
//
// The refinement removes two biases of the first fit. Orthogonal
// regression assumes errors of equal variance on both axes, which holds in
// ref's units but not between two radiometric scales (digital numbers of
// two sensors differ by factors of tens); and the first selection is made
// in standardised units, so it is not symmetric about the final line. At
// the fixed point the regression line of the normalised date on ref has
// gain 1, and the selection (on the difference, symmetric about that line)
// no longer tilts it.
//
// A sample in which both dates are equal gives the identity. Errors wrap
// ErrTooFewStable when too few pixels are stable, and name the band that
// cannot be fitted.
//
// The independent pieces of each stage run on the process's cores
// (runtime.GOMAXPROCS): the robust scales and the regressions of the
// bands, the starting values of the no-change models' components, and the
// scores and the normalised values of the pixels, a range at a time. Each
// is formed as one goroutine would form it, and the sums over pixels of
// the models' moments in one, so the fit is the same bit for bit on any
// number of cores.
func FitNormalization(ref, date []float64, p int) (Normalization, error) {
	return fitNormalization(ref, date, p, par(runtime.GOMAXPROCS(0)))
}

// fitNormalization is FitNormalization on w.
func fitNormalization(ref, date []float64, p int, w par) (Normalization, error) {
	if len(ref) != len(date) || p < 1 || len(ref)%p != 0 {
		panic(fmt.Sprintf("change: normalise %d and %d values of %d bands", len(ref), len(date), p))
	}
	if equal(ref, date) {
		fits := make([]BandFit, p)
		for j := range fits {
			fits[j] = BandFit{Gain: 1, Correlation: 1}
		}
		return Normalization{Bands: fits, Stable: len(ref) / p, Settled: true}, nil
	}
	fits, stable, err := firstFit(ref, date, p, w)
	if err != nil {
		return Normalization{}, err
	}
	out := Normalization{Bands: fits, Stable: stable}
	r := &rounds{w: w, norm: make([]float64, len(date)), d: make([]float64, len(date))}
	for out.Rounds < maxRounds {
		w.chunks(len(date)/p, func(_, lo, hi int) { ApplyNormalization(r.norm[lo*p:hi*p], date[lo*p:hi*p], out.Bands) })
		next, stable, err := r.refine(ref, p)
		if err != nil {
			// The first fit stands: a refinement that cannot be made (too few
			// stable pixels in p dimensions) does not undo it.
			if errors.Is(err, ErrTooFewStable) || errors.Is(err, ErrNoModel) {
				return out, nil
			}
			return Normalization{}, err
		}
		out.Rounds++
		moved := 0.0
		for j, f := range next {
			g := out.Bands[j]
			// Correlation is over this round's stable pixels, which the
			// gain 1 and offset 0 of a settled round leave unchanged.
			out.Bands[j] = BandFit{Gain: f.Gain * g.Gain, Offset: f.Offset + f.Gain*g.Offset, Correlation: f.Correlation}
			moved = math.Max(moved, math.Abs(f.Gain-1))
		}
		out.Stable = stable
		if moved <= settleTol {
			out.Settled = true
			break
		}
	}
	return out, nil
}

// ErrNoModel marks a no-change model that cannot be fitted on the
// differences (all equal, or degenerate).
var ErrNoModel = errors.New("no no-change model of the differences")

// rounds holds what the rounds of the refinement share: the normalised
// date, the differences, their scores and the stable flags, allocated once.
type rounds struct {
	w          par
	norm, d, z []float64
	stable     []bool
}

// refine is one round of the refinement: the stable pixels of the
// differences norm − ref in ref's units and the orthogonal regressions of
// ref on norm over them.
func (r *rounds) refine(ref []float64, p int) ([]BandFit, int, error) {
	r.w.chunks(len(r.d), func(_, lo, hi int) {
		for i := lo; i < hi; i++ {
			r.d[i] = r.norm[i] - ref[i]
		}
	})
	model, err := fit(Subsample(r.d, p, FirstFitPixels), p, DefaultTrim, r.w)
	if err != nil {
		return nil, 0, fmt.Errorf("%w: %v", ErrNoModel, err)
	}
	r.z = model.scores(r.z, r.d, r.w)
	var count int
	r.stable, count = Stable(r.stable, r.z, p)
	fits, err := normalize(ref, r.norm, p, r.stable, r.w)
	return fits, count, err
}

// firstFit is the first stage of FitNormalization.
func firstFit(ref, date []float64, p int, w par) ([]BandFit, int, error) {
	n := len(ref) / p
	sb, sa := standardise(ref, p, w), standardise(date, p, w)
	acc := bands.NewAccumulator(p)
	acc.AddPixels(sb, nil)
	acc.AddPixels(sa, nil)
	info := make([]transform.Band, p)
	mins, maxs := acc.Min(nil), acc.Max(nil)
	for j := range info {
		info[j] = transform.Band{Name: fmt.Sprintf("band %d", j+1), Index: j + 1, Scale: 1, Min: mins[j], Max: maxs[j]}
	}
	b, err := transform.NewBasis(transform.Covariance, info, int64(acc.Count()), acc.Mean(nil), acc.Covariance(nil))
	if err != nil {
		return nil, 0, err
	}
	k := max(transform.ComponentsFor(b.Eigenvalues, 0.99), min(p, 3))
	proj, err := transform.NewProjector(b, k)
	if err != nil {
		return nil, 0, err
	}
	dx := sa // the standardised differences, in place
	for i := range dx {
		dx[i] -= sb[i]
	}
	d := make([]float64, n*k)
	proj.Difference(d, dx)
	model, err := fit(Subsample(d, k, FirstFitPixels), k, DefaultTrim, w)
	if err != nil {
		return nil, 0, err
	}
	stable, count := Stable(nil, model.scores(nil, d, w), k)
	fits, err := normalize(ref, date, p, stable, w)
	return fits, count, err
}

// Subsample returns every m-th pixel of d (k values a pixel), the fewest m
// leaving at most most pixels: a systematic subsample of a random sample,
// itself random.
func Subsample(d []float64, k, most int) []float64 {
	n := len(d) / k
	m := (n + most - 1) / most
	if m <= 1 {
		return d
	}
	out := make([]float64, 0, (n/m+1)*k)
	for i := 0; i < n; i += m {
		out = append(out, d[i*k:i*k+k]...)
	}
	return out
}

// standardise returns x with each band centred on its median and divided
// by 1.4826·MAD (RobustScale).
func standardise(x []float64, p int, w par) []float64 {
	loc, scale := robustScale(x, p, w)
	out := make([]float64, len(x))
	w.chunks(len(x), func(_, lo, hi int) {
		for i := lo; i < hi; i++ {
			out[i] = (x[i] - loc[i%p]) / scale[i%p]
		}
	})
	return out
}

// ApplyNormalization sets dst to x (pixel-major, len(fits) bands) with each
// band's fit applied; fits nil copies x. dst and x may be the same slice.
func ApplyNormalization(dst, x []float64, fits []BandFit) {
	if fits == nil {
		copy(dst, x)
		return
	}
	p := len(fits)
	for i, v := range x {
		dst[i] = fits[i%p].Apply(v)
	}
}

func equal(a, b []float64) bool {
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// WithinRounding reports whether every value of b equals the value of a at
// the same place to within the rounding of single-precision data: |a − b| ≤
// 2⁻²⁰·max(|a|, |b|), sixteen units in the last place of a float32. Two
// dates whose sampled values all agree so closely hold the same data (a
// copy, or a copy passed through a normalisation): any difference is
// rounding, not change.
func WithinRounding(a, b []float64) bool {
	const tol = 1.0 / (1 << 20)
	for i := range a {
		if d := math.Abs(a[i] - b[i]); d > tol*math.Max(math.Abs(a[i]), math.Abs(b[i])) || d != d {
			return false
		}
	}
	return true
}
