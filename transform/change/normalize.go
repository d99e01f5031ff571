package change

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// StableP is the no-change p-value at or above which a pixel counts as
// stable (radiometrically invariant) for the normalisation between dates:
// p ≥ 0.5 is Z at or below the chi-square median, the half of the no-change
// distribution nearest its centre.
const StableP = 0.5

// StableRule states the rule of Stable for people.
const StableRule = "stable pixels: no-change p-value >= 0.5 (Z at or below the chi-square median) in a first fit on each date's bands standardised by their median and 1.4826 x MAD"

// ErrTooFewStable is returned by Normalize when fewer stable pixels than it
// needs are given.
var ErrTooFewStable = errors.New("too few stable pixels")

// MinStable is the fewest stable pixels Normalize accepts.
const MinStable = 30

// Stable marks the pixels whose Z values, under a no-change model of k
// components, have a p-value of at least StableP, and returns their count.
// dst is grown to len(zs).
func Stable(dst []bool, zs []float64, k int) ([]bool, int) {
	med := distuv.ChiSquared{K: float64(k)}.Quantile(StableP)
	if cap(dst) < len(zs) {
		dst = make([]bool, len(zs))
	}
	dst = dst[:len(zs)]
	n := 0
	for i, z := range zs {
		dst[i] = z <= med
		if dst[i] {
			n++
		}
	}
	return dst, n
}

// RobustScale returns, per band of x (pixel-major, p bands per pixel), the
// median and 1.4826·MAD, a scale consistent for the standard deviation of a
// Gaussian (F. R. Hampel, "The influence curve and its role in robust
// estimation", JASA 69, 1974). A band whose MAD is 0 gets scale 1, so that
// standardising by it only centres it. It panics if len(x) is not a
// multiple of p.
func RobustScale(x []float64, p int) (loc, scale []float64) {
	return robustScale(x, p, serial)
}

// robustScale is RobustScale with the bands on w.
func robustScale(x []float64, p int, w par) (loc, scale []float64) {
	if p < 1 || len(x)%p != 0 {
		panic(fmt.Sprintf("change: %d values of %d bands", len(x), p))
	}
	n := len(x) / p
	loc, scale = make([]float64, p), make([]float64, p)
	w.each(p, func(j int) error {
		col := make([]float64, n)
		for i := range n {
			col[i] = x[i*p+j]
		}
		m := medianOf(col)
		for i := range col {
			col[i] = math.Abs(col[i] - m)
		}
		s := madScale * medianOf(col)
		if !(s > 0) {
			s = 1
		}
		loc[j], scale[j] = m, s
		return nil
	})
	return loc, scale
}

// BandFit is the relative radiometric normalisation of one band: AFTER onto
// BEFORE's scale as after' = Offset + Gain·after.
type BandFit struct {
	Gain        float64 `json:"gain"`
	Offset      float64 `json:"offset"`
	Correlation float64 `json:"correlation"`
}

// Apply returns Offset + Gain·v.
func (f BandFit) Apply(v float64) float64 { return f.Offset + f.Gain*v }

// Orthogonal fits y = offset + slope·x by orthogonal (total least squares)
// regression, which minimises the perpendicular distances to the line and
// so allows for errors of equal variance in both variables (W. A. Fuller,
// "Measurement Error Models", Wiley 1987, section 1.3.3):
//
//	slope = (s_yy − s_xx + sqrt((s_yy − s_xx)² + 4·s_xy²)) / (2·s_xy),
//	offset = ȳ − slope·x̄,
//
// with s the sample (co)variances. Ordinary least squares would bias the
// slope towards zero when x is noisy too, as both dates of a pair are. It
// also returns the correlation of x and y. It returns an error if fewer than
// two points are given or s_xy is 0 (no linear relation to fit). It panics if
// x and y differ in length.
func Orthogonal(x, y []float64) (BandFit, error) {
	if len(x) != len(y) {
		panic(fmt.Sprintf("change: %d x values but %d y values", len(x), len(y)))
	}
	n := float64(len(x))
	if len(x) < 2 {
		return BandFit{}, fmt.Errorf("%d points, need at least 2", len(x))
	}
	var mx, my float64
	for i := range x {
		mx += x[i]
		my += y[i]
	}
	mx, my = mx/n, my/n
	var sxx, syy, sxy float64
	for i := range x {
		dx, dy := x[i]-mx, y[i]-my
		sxx += dx * dx
		syy += dy * dy
		sxy += dx * dy
	}
	sxx, syy, sxy = sxx/(n-1), syy/(n-1), sxy/(n-1)
	if sxy == 0 {
		return BandFit{}, errors.New("no covariance between the dates")
	}
	d := syy - sxx
	slope := (d + math.Sqrt(d*d+4*sxy*sxy)) / (2 * sxy)
	return BandFit{Gain: slope, Offset: my - slope*mx, Correlation: sxy / math.Sqrt(sxx*syy)}, nil
}

// Normalize fits, per band, BEFORE on AFTER by Orthogonal over the stable
// pixels (before and after pixel-major with p bands per pixel), giving the
// transformation of AFTER onto BEFORE's scale (after Canty and Nielsen,
// "Automatic radiometric normalization of multitemporal satellite imagery
// with the iteratively re-weighted MAD transformation", Remote Sensing of
// Environment 112, 2008). It returns an error wrapping ErrTooFewStable when
// fewer than MinStable pixels are stable, and one naming the band when a
// band cannot be fitted. It panics on mismatched lengths.
func Normalize(before, after []float64, p int, stable []bool) ([]BandFit, error) {
	return normalize(before, after, p, stable, serial)
}

// normalize is Normalize with the bands on w.
func normalize(before, after []float64, p int, stable []bool, w par) ([]BandFit, error) {
	if len(before) != len(after) || p < 1 || len(before) != len(stable)*p {
		panic(fmt.Sprintf("change: normalise %d and %d values of %d bands with %d flags", len(before), len(after), p, len(stable)))
	}
	var at []int // the stable pixels
	for i, s := range stable {
		if s {
			at = append(at, i)
		}
	}
	if len(at) < MinStable {
		return nil, fmt.Errorf("%w: %d, need at least %d", ErrTooFewStable, len(at), MinStable)
	}
	// Each band's values of the stable pixels, gathered a pixel at a time.
	x, y := make([]float64, p*len(at)), make([]float64, p*len(at))
	w.chunks(len(at), func(_, lo, hi int) {
		for t := lo; t < hi; t++ {
			i := at[t]
			for j := range p {
				x[j*len(at)+t], y[j*len(at)+t] = after[i*p+j], before[i*p+j]
			}
		}
	})
	fits := make([]BandFit, p)
	err := w.each(p, func(j int) error {
		f, err := Orthogonal(x[j*len(at):(j+1)*len(at)], y[j*len(at):(j+1)*len(at)])
		if err != nil {
			return fmt.Errorf("band %d: %w", j+1, err)
		}
		fits[j] = f
		return nil
	})
	if err != nil {
		return nil, err
	}
	return fits, nil
}
