package series

import (
	"fmt"
	"math"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/transform"
	"bandfold/transform/change"
)

// The pieces of a pair of dates' change statistic that change and timeline
// share, so that the two commands compute the same flags from the same
// sample, basis and settings.

var Nan = math.NaN()

// PairFit is a pair of dates' robust no-change model and threshold.
type PairFit struct {
	Model *change.Model // nil when identical
	Zs    []float64     // the sample's Z values
	Zcut  float64
	Eta   *float64 // Otsu separability, for otsu
	// Identical is set when the sample's band differences are all zero: no
	// model is fitted and nothing is flagged.
	Identical bool
}

// fitPair fits the robust no-change model on the sample's score
// differences d = W_k^T dx (dx: the band differences, n x p) and resolves
// the threshold; what names the pair in errors.
func fitPair(dx []float64, p int, proj *transform.Projector, t change.Threshold, what string) (*PairFit, error) {
	k := proj.Components()
	if allZero(dx) {
		return &PairFit{Identical: true}, nil // every Z is 0, and a pixel is flagged only above the cut
	}
	d := make([]float64, len(dx)/p*k)
	proj.Difference(d, dx)
	model, err := change.Fit(d, k, t.Trim())
	if err != nil {
		return nil, fmt.Errorf("no-change model of %s: %w", what, err)
	}
	f := &PairFit{Model: model, Zs: model.Scores(nil, d)}
	if f.Zcut, err = t.Resolve(k, f.Zs); err != nil {
		return nil, jobkit.Usagef("--threshold %s: %v", t, err)
	}
	if t.Rule == change.RuleOtsu {
		if eta, err := change.OtsuSeparability(f.Zs); err == nil {
			f.Eta = &eta
		}
	}
	return f, nil
}

// warnings are the doubts about a fitted pair: a model that did not
// converge, an Otsu split that separates poorly (eta below
// change.OtsuBound) and a sample-based cut (otsu, sigma:N) below the
// chi-square median, where it flags more than half of the unchanged pixels.
func (f *PairFit) warnings(t change.Threshold, k int) []string {
	if f.Model == nil {
		return nil
	}
	var out []string
	if !f.Model.Converged {
		out = append(out, fmt.Sprintf("the no-change model did not converge in %d iterations: the threshold and the p-values are uncertain; look at diagnostics.png", f.Model.Iterations))
	}
	if f.Eta != nil && *f.Eta < change.OtsuBound {
		out = append(out, fmt.Sprintf("--threshold otsu: the histogram of log(1+Z) separates poorly (Otsu's eta = %.3f, below %.2f, that of a uniform histogram): there may be no change class to split off; prefer chisq:Q", *f.Eta, change.OtsuBound))
	}
	if med := ChisqMedian(k); (t.Rule == change.RuleOtsu || t.Rule == change.RuleSigma) && f.Zcut < med {
		out = append(out, fmt.Sprintf("--threshold %s cuts at Z = %.4g, below the chi-square median %.4g of the no-change model (k = %d): more than half of the unchanged pixels would be mapped as change; prefer chisq:Q", t, f.Zcut, med, k))
	}
	return out
}

// defaultComponents is the number of components kept of a basis fitted for
// change: the fewest reaching 99% of the variance, at least min(p, 3).
func defaultComponents(b *transform.Basis, p int) int {
	return max(transform.ComponentsFor(b.Eigenvalues, 0.99), min(p, 3))
}

// projectorFor keeps requested components of b (b's own number when 0).
func projectorFor(b *transform.Basis, requested, p int) (*transform.Projector, error) {
	k := b.Components
	if requested > 0 {
		k = requested
	}
	if k > p {
		return nil, jobkit.Usagef("--components %d: the images have %d bands", k, p)
	}
	return transform.NewProjector(b, k)
}

// PairScorer computes a pair's change statistic tile by tile: one per
// worker.
type PairScorer struct {
	proj  *transform.Projector
	Sc    *change.Scorer      // nil when the dates are identical
	bs    *change.BandScorer  // Z straight from the band differences
	norms [2][]change.BandFit // each date onto the reference's scale; nil for none
	zcut  float64
	dx    []float64 // the last tile's band differences, n x p
	d     []float64
}

func newPairScorer(proj *transform.Projector, f *PairFit, normA, normB []change.BandFit) *PairScorer {
	s := &PairScorer{proj: proj.Clone(), norms: [2][]change.BandFit{normA, normB}, zcut: f.Zcut}
	if f.Model != nil {
		s.Sc, s.bs = f.Model.Scorer(), f.Model.BandScorer(differenceMap(s.proj))
	}
	return s
}

// differenceMap returns the linear map of Projector.Difference as a k x p
// matrix, row-major: column j is the difference of the unit vector e_j, so
// its values are the projector's own.
func differenceMap(proj *transform.Projector) []float64 {
	p, k := proj.Bands(), proj.Components()
	a, e, d := make([]float64, k*p), make([]float64, p), make([]float64, k)
	for j := range p {
		clear(e)
		e[j] = 1
		proj.Difference(d, e)
		for i, v := range d {
			a[i*p+j] = v
		}
	}
	return a
}

// diffInto sets dx to the band differences of the normalised later date b
// and the normalised earlier date a, pixel-major.
func diffInto(dx, xa, xb []float64, norms [2][]change.BandFit) {
	na, nb := norms[0], norms[1]
	if na == nil && nb == nil {
		for i := range xb {
			dx[i] = xb[i] - xa[i]
		}
		return
	}
	for i := range xb {
		a, b := xa[i], xb[i]
		if na != nil {
			a = na[i%len(na)].Apply(a)
		}
		if nb != nil {
			b = nb[i%len(nb)].Apply(b)
		}
		dx[i] = b - a
	}
}

// score sets, for each pixel of a tile, Z (NaN where not valid), the top
// component (1-based; 0 for none) and the flag (1 above the cut, 0 not,
// 255 not valid); it leaves the band differences in s.dx.
func (s *PairScorer) score(xa, xb []float64, valid []bool, z []float64, top, flags []uint8) {
	p := s.proj.Bands()
	s.dx = jobkit.Grow(s.dx, len(xa))
	diffInto(s.dx, xa, xb, s.norms)
	for i, ok := range valid {
		switch {
		case !ok:
			z[i], top[i], flags[i] = Nan, 0, 255
		case s.bs == nil:
			z[i], top[i], flags[i] = 0, 0, 0
		default:
			zi, t := s.bs.ZTop(s.dx[i*p : i*p+p])
			z[i], top[i], flags[i] = zi, uint8(t+1), 0
			if zi > s.zcut {
				flags[i] = 1
			}
		}
	}
}

// Differences returns the score differences d = W_k^T dx of the last tile
// scored, n x k.
func (s *PairScorer) Differences() []float64 {
	s.d = jobkit.Grow(s.d, len(s.dx)/s.proj.Bands()*s.proj.Components())
	s.proj.Difference(s.d, s.dx)
	return s.d
}

func allZero(x []float64) bool {
	for _, v := range x {
		if v != 0 {
			return false
		}
	}
	return true
}
