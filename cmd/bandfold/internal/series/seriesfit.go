package series

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/tiles"
	"bandfold/transform"
	"bandfold/transform/change"
)

// pairSample returns the sample of the pair (a, b) of dates: a's values,
// then b's, pixel-major.
func (r *Run) pairSample(a, b int) (xa, xb []float64) {
	lo, hi := min(a, b), max(a, b)
	q := slices.Index(r.sampled, [2]int{lo, hi})
	x, y := r.stats.sample.Pair(q)
	if a > b {
		return y, x
	}
	return x, y
}

// Normalize fits every date onto the reference date directly
// (change.FitNormalization on the pair's sample), so that no error
// accumulates along a series; a fit that fails or cannot be trusted leaves
// the date as given, with a warning. With --normalize none it warns when a
// date looks radiometrically incomparable with the reference.
func (r *Run) Normalize(context.Context) error {
	r.StartAreas() // beside the fits, which leave a core idle
	p := r.Scenes[0].Len()
	r.norms = make([][]change.BandFit, len(r.Scenes))
	r.NormSums = make([]NormalizationSummary, len(r.Scenes))
	for d := range r.Scenes {
		r.NormSums[d] = NormalizationSummary{Method: r.C.Normalize, Bands: []BandNormalized{}}
		if d == r.Ref {
			continue
		}
		if r.C.Normalize == NormalizeNone {
			r.checkComparable(d)
			continue
		}
		fit, err := r.fitNormalization(d, p)
		if err != nil {
			r.warnf("radiometric normalisation of %s onto %s failed (%v): it is compared as given; check the dates are on comparable scales or pass --calibrate", r.Name(d), r.Name(r.Ref), err)
			continue
		}
		sum := &r.NormSums[d]
		sum.Rule, sum.StablePixels, sum.Rounds = change.StableRule, fit.Stable, fit.Rounds
		for j, f := range fit.Bands {
			sum.Bands = append(sum.Bands, BandNormalized{Band: j + 1, BandFit: f})
		}
		if j, ok := trustworthy(fit.Bands); ok {
			r.norms[d], sum.Applied = fit.Bands, true
		} else {
			r.warnf("radiometric normalisation of %s onto %s not applied: in band %d the stable pixels give gain %.3g with correlation %.2f (need a positive gain and at least %.1f): it is compared as given; check that the dates show the same place",
				r.Name(d), r.Name(r.Ref), j+1, fit.Bands[j].Gain, fit.Bands[j].Correlation, minCorrelation)
		}
	}
	return nil
}

// pairDifferences returns the scored pair q's sample of normalised band
// differences (all zero when the dates agree within rounding: the pair is
// identical). FitModels forms them a pair at a time, so that a series
// holds the dates' sample and the differences of the pairs being fitted,
// not those of every pair at once.
func (r *Run) pairDifferences(q int) []float64 {
	pr := r.pairs[q]
	xa, xb := r.pairSample(pr[0], pr[1])
	change.ApplyNormalization(xa, xa, r.norms[pr[0]])
	change.ApplyNormalization(xb, xb, r.norms[pr[1]])
	dx := make([]float64, len(xa))
	if !change.WithinRounding(xa, xb) {
		for i := range dx {
			dx[i] = xb[i] - xa[i]
		}
	}
	return dx
}

// NormFit is one date's fit onto the reference date as a staged run's
// model file keeps it (Err: why it failed), so that the later stages take
// the fit stage's fits rather than fitting again.
type NormFit struct {
	Fit change.Normalization
	Err string
}

// fitNormalization fits date d onto the reference date, or takes the
// model file's fit (map and finish), and keeps it for the model file.
func (r *Run) fitNormalization(d, p int) (change.Normalization, error) {
	if r.st.model.Norms != nil {
		nf := r.st.model.Norms[d]
		if nf.Err != "" {
			return nf.Fit, errors.New(nf.Err)
		}
		return nf.Fit, nil
	}
	xr, xd := r.pairSample(r.Ref, d)
	fit, err := change.FitNormalization(xr, xd, p)
	if r.st.normFits == nil {
		r.st.normFits = make([]NormFit, len(r.Scenes))
	}
	r.st.normFits[d].Fit = fit
	if err != nil {
		r.st.normFits[d].Err = err.Error()
	}
	return fit, err
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

// incomparable is the factor by which two dates' valid-pixel means or
// standard deviations must differ in some band for --normalize none to
// warn.
const incomparable = 3.0

// checkComparable warns when, in some band, date d's and the reference
// date's valid-pixel means or standard deviations differ by more than a
// factor of 3.
func (r *Run) checkComparable(d int) {
	a, b := r.stats.acc[r.Ref], r.stats.acc[d]
	mb, ma := a.Mean(nil), b.Mean(nil)
	sb, sa := a.StdDev(nil), b.StdDev(nil)
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
				r.Name(r.Ref), r.Name(d), j+1, rm, rs, incomparable)
			return
		}
	}
}

// NormDescription states a date's normalisation for metadata.
func (r *Run) NormDescription(d int) string {
	norm := r.norms[d]
	if norm == nil {
		switch {
		case d == r.Ref:
			return "reference date"
		case r.C.Normalize == NormalizeNone:
			return "none"
		}
		return "stable (not applied: see the warnings)"
	}
	parts := []string{fmt.Sprintf("stable, onto %s as offset + gain x value over %d stable pixels", r.NameIn(r.Ref), r.NormSums[d].StablePixels)}
	for j, f := range norm {
		parts = append(parts, fmt.Sprintf("band %d gain %.6g offset %.6g", j+1, f.Gain, f.Offset))
	}
	return strings.Join(parts, "; ")
}

// FitBasis fits the basis on all dates pooled, each normalised, keeping
// the fewest components reaching 99% of the variance, at least min(p, 3);
// or takes the given one.
func (r *Run) FitBasis(context.Context) error {
	b, name := r.given, r.C.Basis
	p := r.Scenes[0].Len()
	if b == nil {
		var pooled *bands.Accumulator
		for d, acc := range r.stats.acc {
			a := acc
			if norm := r.norms[d]; norm != nil {
				gain, offset := make([]float64, p), make([]float64, p)
				for j, f := range norm {
					gain[j], offset[j] = f.Gain, f.Offset
				}
				var err error
				if a, err = bands.Affine(acc, gain, offset); err != nil {
					return err
				}
			}
			if pooled == nil {
				var err error
				if pooled, err = bands.FromState(a.State()); err != nil {
					return err
				}
			} else {
				pooled.Merge(a)
			}
		}
		what := jobkit.DescribeAll(r.Scenes) + " (every date, pooled)"
		if len(r.Scenes) == 2 {
			what = r.Args[0] + " and " + r.Args[1] + " (pixels valid on both dates)"
		}
		var err error
		if b, err = jobkit.FitBasis(r.Env, pooled, transform.Covariance, jobkit.BasisBands(r.Scenes[0]), what); err != nil {
			return err
		}
		if b.Inputs, err = jobkit.Fingerprints(r.Scenes); err != nil {
			return err
		}
		b.Components = defaultComponents(b, p)
		name = "fitted on all dates"
		if len(r.Scenes) == 2 {
			name = "fitted on both dates"
		}
	}
	proj, err := projectorFor(b, r.C.Components, p)
	if err != nil {
		return err
	}
	r.basis, r.BasisName, r.Proj = b, name, proj
	return nil
}

// BasisIn is the basis as a document in d records it: the --basis file
// relative to the document's folder, or how the basis was fitted.
func (r *Run) BasisIn(d jobkit.DocPaths) string {
	if r.C.Basis != "" {
		return d.Input(r.C.Basis)
	}
	return r.BasisName
}

// FitModels fits every pair's own no-change model and threshold, the
// pairs in parallel (tiles.Each).
func (r *Run) FitModels(ctx context.Context) error {
	p := r.Scenes[0].Len()
	r.Fits = make([]*PairFit, len(r.pairs))
	err := tiles.Each(ctx, len(r.pairs), r.Env.WorkerCount(), func(q int) error {
		pr := r.pairs[q]
		f, err := fitPair(r.pairDifferences(q), p, r.Proj.Clone(), r.C.Threshold, r.Args[pr[0]]+" and "+r.Args[pr[1]])
		r.Fits[q] = f
		return err
	})
	if err != nil {
		return err
	}
	r.stats.sample = nil // the fits are all later steps need of it
	k := r.Proj.Components()
	for q, pr := range r.pairs {
		if r.Fits[q].Identical {
			r.Env.Warn("%s and %s are identical over the sampled pixels (any difference is within the data's rounding): no change is mapped between them", r.Name(pr[0]), r.Name(pr[1]))
		}
		for _, w := range r.Fits[q].warnings(r.C.Threshold, k) {
			if len(r.pairs) == 1 {
				r.warnf("%s", w)
			} else {
				r.warnf("%s to %s: %s", r.Dates[pr[0]].Label, r.Dates[pr[1]].Label, w)
			}
		}
	}
	return nil
}
