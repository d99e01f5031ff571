package job

import (
	"context"
	"fmt"
	"math"
	"path/filepath"
	"strings"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/transform"
	"bandfold/transform/change"
)

// The values of --normalize.
const (
	NormalizeStable = "stable"
	NormalizeNone   = "none"
)

// incomparable is the factor by which the dates' valid-pixel means or
// standard deviations must differ in some band for --normalize none to warn.
const incomparable = 3.0

// NormalizationSummary is the relative radiometric normalisation of AFTER
// onto BEFORE's scale.
type NormalizationSummary struct {
	Method string `json:"method"`
	// Rule states how the stable pixels were chosen.
	Rule         string `json:"rule,omitempty"`
	StablePixels int    `json:"stable_pixels"`
	// Applied is false when the fit was refused (a band's correlation over
	// the stable pixels below minCorrelation, or a gain not positive).
	Applied bool             `json:"applied"`
	Bands   []BandNormalized `json:"bands"`
}

// BandNormalized is one band's normalisation: after' = offset + gain x
// after, with the correlation of the dates over the stable pixels.
type BandNormalized struct {
	Band int `json:"band"`
	change.BandFit
}

// normalize fits the relative radiometric normalisation of AFTER onto
// BEFORE's scale on the sample (no pass over the images): a first no-change
// model on each date standardised by its own median and 1.4826 x MAD picks
// the stable pixels (p >= 0.5), and an orthogonal regression per band over
// them gives gain and offset (change.Normalize). With --normalize none it
// only warns when the dates look radiometrically incomparable. Either way
// it leaves the sample's band differences in r.dx and the pooled
// co-moments of BEFORE and the normalised AFTER in r.pooled.
func (r *changeRun) normalize(context.Context) error {
	p := r.before.Len()
	_, both := r.stats.sample.Pixels()
	n := len(both) / (2 * p)
	xb, xa := make([]float64, n*p), make([]float64, n*p)
	for i := range n {
		copy(xb[i*p:i*p+p], both[i*2*p:i*2*p+p])
		copy(xa[i*p:i*p+p], both[i*2*p+p:i*2*p+2*p])
	}
	r.sum0 = NormalizationSummary{Method: r.o.Normalize, Bands: []BandNormalized{}}
	identical := true
	for i := range xb {
		identical = identical && xb[i] == xa[i]
	}
	if r.o.Normalize == NormalizeStable && !identical {
		fits, stable, err := firstFit(xb, xa, p)
		if err != nil {
			r.warnf("radiometric normalisation of %s onto %s failed (%v): the dates are compared as given; check they are on comparable scales or pass --calibrate", r.o.After, r.o.Before, err)
		} else {
			r.sum0.Rule, r.sum0.StablePixels = change.StableRule, stable
			for j, f := range fits {
				r.sum0.Bands = append(r.sum0.Bands, BandNormalized{Band: j + 1, BandFit: f})
			}
			if j, ok := trustworthy(fits); ok {
				r.norm, r.sum0.Applied = fits, true
			} else {
				r.warnf("radiometric normalisation of %s onto %s not applied: in band %d the stable pixels give gain %.3g with correlation %.2f (need a positive gain and at least %.1f): the dates are compared as given; check that they show the same place",
					r.o.After, r.o.Before, j+1, fits[j].Gain, fits[j].Correlation, minCorrelation)
			}
		}
	}
	if r.o.Normalize == NormalizeNone {
		r.checkComparable()
	}
	r.dx = make([]float64, n*p)
	diffInto(r.dx, xb, xa, r.norm)
	r.stats.sample = nil // the differences are all later steps need
	var err error
	r.pooled, err = pool(r.stats.accB, r.stats.accA, r.norm)
	return err
}

// minCorrelation is the least correlation of the dates over the stable
// pixels, in every band, for the normalisation to be applied: below it the
// regression line is poorly determined (the dates hardly agree anywhere).
const minCorrelation = 0.5

// trustworthy reports whether every band's fit has a positive gain and a
// correlation of at least minCorrelation, else the first band that fails.
func trustworthy(fits []change.BandFit) (int, bool) {
	for j, f := range fits {
		if !(f.Gain > 0) || !(f.Correlation >= minCorrelation) {
			return j, false
		}
	}
	return 0, true
}

// firstFit is the first estimate of the normalisation: the robust
// standardisation of each date, a pooled basis and no-change model on the
// standardised sample, the stable pixels and the orthogonal regressions.
func firstFit(xb, xa []float64, p int) ([]change.BandFit, int, error) {
	n := len(xb) / p
	sb, sa := standardise(xb, p), standardise(xa, p)
	acc := bands.NewAccumulator(p)
	acc.AddPixels(sb, nil)
	acc.AddPixels(sa, nil)
	info := make([]transform.Band, p)
	for j := range info {
		info[j] = transform.Band{Name: fmt.Sprintf("band %d", j+1), Index: j + 1, Scale: 1}
	}
	mins, maxs := acc.Min(nil), acc.Max(nil)
	for j := range info {
		info[j].Min, info[j].Max = mins[j], maxs[j]
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
	model, err := change.Fit(firstFitSample(d, k), k, change.DefaultTrim)
	if err != nil {
		return nil, 0, err
	}
	stable, count := change.Stable(nil, model.Scores(nil, d), k)
	fits, err := change.Normalize(xb, xa, p, stable)
	return fits, count, err
}

// firstFitPixels bounds the pixels the first no-change model is fitted on:
// its iterations cost most of the normalisation, and a first estimate that
// only picks the stable pixels (scored over the whole sample) needs no more
// (the relative standard error of a covariance from 50 000 pixels is about
// sqrt(2/50000) = 0.6%).
const firstFitPixels = 50_000

// firstFitSample returns every m-th pixel of d (k values a pixel), the
// fewest m leaving at most firstFitPixels: a systematic subsample of a
// random sample, itself random.
func firstFitSample(d []float64, k int) []float64 {
	n := len(d) / k
	m := (n + firstFitPixels - 1) / firstFitPixels
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
// by 1.4826 x MAD.
func standardise(x []float64, p int) []float64 {
	loc, scale := change.RobustScale(x, p)
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = (v - loc[i%p]) / scale[i%p]
	}
	return out
}

// diffInto sets dx to the band differences of the normalised AFTER and
// BEFORE, pixel-major; norm nil is no normalisation.
func diffInto(dx, xb, xa []float64, norm []change.BandFit) {
	if norm == nil {
		for i := range xa {
			dx[i] = xa[i] - xb[i]
		}
		return
	}
	p := len(norm)
	for i := 0; i < len(xa); i += p {
		a, b, d := xa[i:i+p], xb[i:i+p], dx[i:i+p]
		for j, f := range norm {
			d[j] = f.Apply(a[j]) - b[j]
		}
	}
}

// pool returns the pooled co-moments of BEFORE and of AFTER transformed by
// norm.
func pool(accB, accA *bands.Accumulator, norm []change.BandFit) (*bands.Accumulator, error) {
	out, err := bands.FromState(accB.State())
	if err != nil {
		return nil, err
	}
	a, err := normalized(accA, norm)
	if err != nil {
		return nil, err
	}
	out.Merge(a)
	return out, nil
}

// normalized returns the co-moments of the pixels of acc transformed by
// norm (nil: unchanged): the mean of a·x + c is a·mean + c and its
// co-moments a_i·a_j·M_ij.
func normalized(acc *bands.Accumulator, norm []change.BandFit) (*bands.Accumulator, error) {
	st := acc.State()
	st.Exact = nil // the transformed statistics are no longer integer sums
	for i, f := range norm {
		st.Mean[i] = f.Apply(st.Mean[i])
		for j := range st.CoMoment[i] {
			st.CoMoment[i][j] *= f.Gain * norm[j].Gain
		}
		if st.Count > 0 {
			lo, hi := f.Apply(st.Min[i]), f.Apply(st.Max[i])
			st.Min[i], st.Max[i] = min(lo, hi), max(lo, hi)
		}
	}
	return bands.FromState(st)
}

// checkComparable warns when, in some band, the dates' valid-pixel means or
// standard deviations differ by more than a factor of 3.
func (r *changeRun) checkComparable() {
	mb, ma := r.stats.accB.Mean(nil), r.stats.accA.Mean(nil)
	sb, sa := r.stats.accB.StdDev(nil), r.stats.accA.StdDev(nil)
	ratio := func(x, y float64) float64 {
		x, y = math.Abs(x), math.Abs(y)
		if x == 0 && y == 0 {
			return 1
		}
		return max(x, y) / math.Max(min(x, y), 1e-300)
	}
	for j := range mb {
		if rm, rs := ratio(mb[j], ma[j]), ratio(sb[j], sa[j]); rm > incomparable || rs > incomparable {
			r.warnf("%s and %s look radiometrically incomparable: in band %d the valid-pixel means differ %.3gx and the standard deviations %.3gx (more than %gx); the map may show the difference of scales, not change: use --normalize stable or --calibrate",
				r.o.Before, r.o.After, j+1, rm, rs, incomparable)
			return
		}
	}
}

// normDescription states the normalisation for metadata.
func (r *changeRun) normDescription() string {
	if r.norm == nil {
		if r.o.Normalize == NormalizeNone {
			return "none"
		}
		return "stable (not applied: see the warnings)"
	}
	parts := []string{fmt.Sprintf("stable, AFTER onto BEFORE as offset + gain x after over %d stable pixels", r.sum0.StablePixels)}
	for j, f := range r.norm {
		parts = append(parts, fmt.Sprintf("band %d gain %.6g offset %.6g", j+1, f.Gain, f.Offset))
	}
	return strings.Join(parts, "; ")
}

// dateLabel names a date for people: its acquisition date from the
// metadata, when there is one, and its file name.
func (r *changeRun) dateLabel(s *raster.Stack, arg string) string {
	name := filepath.Base(arg)
	if s == nil {
		return name
	}
	for _, key := range []string{"ACQUISITION_DATE", "DATE_ACQUIRED", "TIFFTAG_DATETIME"} {
		if v := strings.TrimSpace(s.Metadata[key]); v != "" {
			return v + " (" + name + ")"
		}
	}
	return name
}

// normalizations are the values --normalize takes.
var normalizations = []string{NormalizeStable, NormalizeNone}

func checkNormalize(o *ChangeOptions) error {
	var err error
	o.Normalize, err = ParseNormalize(o.Normalize)
	return err
}

// ParseNormalize checks a --normalize value; empty is the default, stable.
func ParseNormalize(s string) (string, error) {
	if s == "" {
		return NormalizeStable, nil
	}
	if !contains(normalizations, s) {
		return s, Usagef("--normalize %q: want stable or none", s)
	}
	return s, nil
}
