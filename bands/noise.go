package bands

import (
	"fmt"
	"iter"
	"math/bits"

	"gonum.org/v1/gonum/mat"
)

// Shift selects the pairs of adjacent pixels whose differences estimate the
// noise: horizontal pairs (r, c)–(r, c+1), vertical pairs (r, c)–(r+1, c),
// or both sets pooled.
type Shift int

const (
	Horizontal Shift = 1 << iota
	Vertical
	Both = Horizontal | Vertical
)

// ParseShift parses "horizontal", "vertical" or "both".
func ParseShift(s string) (Shift, error) {
	switch s {
	case "horizontal":
		return Horizontal, nil
	case "vertical":
		return Vertical, nil
	case "both":
		return Both, nil
	}
	return 0, fmt.Errorf("noise pairs %q: want horizontal, vertical or both", s)
}

func (s Shift) String() string {
	switch s {
	case Horizontal:
		return "horizontal"
	case Vertical:
		return "vertical"
	case Both:
		return "both"
	}
	return fmt.Sprintf("Shift(%d)", int(s))
}

// Halo returns the extra columns and rows a window must carry beyond the
// pixels it owns: one column for horizontal pairs, one row for vertical
// ones.
func (s Shift) Halo() (cols, rows int) {
	if s&Horizontal != 0 {
		cols = 1
	}
	if s&Vertical != 0 {
		rows = 1
	}
	return cols, rows
}

// Window is a block of W×H pixels of P bands, pixel-major and row by row
// (the values of pixel (r, c) are X[(r·W+c)·P : (r·W+c+1)·P]), with their
// validity. The first OwnW columns and OwnH rows are the pixels the window
// owns; the rest is a halo of at most one column and one row read from the
// neighbouring tiles (or nothing at the raster's right and bottom edges).
//
// Bound, when not zero, is the caller's guarantee that every valid value is
// an integer of magnitude at most Bound, as for pixels of an integer data
// type read unscaled; AddWindow then need not check the values.
type Window struct {
	X          []float64
	Valid      []bool
	P, W, H    int
	OwnW, OwnH int
	Bound      float64
}

func (w Window) check() {
	if w.P < 1 || w.OwnW < 0 || w.OwnH < 0 || w.OwnW > w.W || w.OwnH > w.H || w.W-w.OwnW > 1 || w.H-w.OwnH > 1 ||
		len(w.X) != w.W*w.H*w.P || len(w.Valid) != w.W*w.H {
		panic(fmt.Sprintf("bands: window %d×%d (own %d×%d) of %d bands with %d values and %d flags",
			w.W, w.H, w.OwnW, w.OwnH, w.P, len(w.X), len(w.Valid)))
	}
}

// ShiftDifferences appends to dst the difference vectors of the adjacent
// pixel pairs of win selected by s, x(r, c+1) − x(r, c) for horizontal
// pairs and x(r+1, c) − x(r, c) for vertical ones, and returns dst. A pair
// counts when both pixels are valid (in every band) and its first pixel,
// (r, c), is owned by the window; its second pixel may lie in the halo. So
// when a raster is cut into tiles that each own their pixels and carry the
// one-column and one-row halo, every adjacent pair of the raster is counted
// exactly once, whatever the tiling. The differences are appended row by
// row, horizontal before vertical within a pixel.
//
// Accumulated with an Accumulator (AddPixels, Merge), they give the
// shift-difference noise estimate of Switzer & Green (1984) used by Green,
// Berman, Switzer & Craig (1988): see NoiseCovariance.
func ShiftDifferences(dst []float64, win Window, s Shift) []float64 {
	win.check()
	for y, x := range win.pairs(s) {
		dst = appendDiff(dst, y, x)
	}
	return dst
}

// pairs yields the valid pixel pairs of the window's own part for s, row by
// row, horizontal before vertical within a pixel: the neighbour's values,
// then the pixel's.
func (win Window) pairs(s Shift) iter.Seq2[[]float64, []float64] {
	return func(yield func([]float64, []float64) bool) {
		p, w := win.P, win.W
		for r := range win.OwnH {
			for c := range win.OwnW {
				i := r*w + c
				if !win.Valid[i] {
					continue
				}
				x := win.X[i*p : i*p+p]
				if s&Horizontal != 0 && c+1 < w && win.Valid[i+1] && !yield(win.X[(i+1)*p:(i+2)*p], x) {
					return
				}
				if s&Vertical != 0 && r+1 < win.H && win.Valid[i+w] && !yield(win.X[(i+w)*p:(i+w+1)*p], x) {
					return
				}
			}
		}
	}
}

// AddShiftDifferences adds to a the difference vectors that
// ShiftDifferences would append for win and s, in the same order, without
// the copy: on the BLAS path each difference is written straight into the
// chunk that goes to Syrk. The statistics equal those of
// a.AddPixels(ShiftDifferences(nil, win, s), nil) up to rounding (and
// exactly on the fused path). It panics if win is malformed or has another
// band count than a.
func (a *Accumulator) AddShiftDifferences(win Window, s Shift) {
	win.check()
	if win.P != a.p {
		panic(fmt.Sprintf("bands: window of %d bands for an accumulator of %d", win.P, a.p))
	}
	if a.exact == nil && useFused(a.p) {
		a.diffs = ShiftDifferences(a.diffs[:0], win, s)
		a.add(a.diffs, nil, true)
		return
	}
	chunk := a.prepare(false, win.OwnW*win.OwnH*bits.OnesCount(uint(s&Both)))
	b, k := a.blk, 0
	b.inexact = false
	flush := func() {
		switch {
		case k == 0:
			return
		case a.exact != nil:
			a.addRaw(k)
		default:
			b.n = float64(k)
			b.comomentBLAS(k)
			a.fold(b.n, b.mean, b.com, b.min, b.max)
		}
		k, b.inexact = 0, false
	}
	for y, x := range win.pairs(s) {
		if k = b.putRaw(k, y, x, a.exact == nil); k == chunk {
			flush()
		}
	}
	flush()
}

func appendDiff(dst, a, b []float64) []float64 {
	for j, v := range a {
		dst = append(dst, v-b[j])
	}
	return dst
}

// NoiseCovariance returns the shift-difference estimate of the noise
// covariance from an Accumulator d of difference vectors δ (ShiftDifferences):
//
//	Σ_N = ½ · Cov(δ) = ½ · M_δ / (n − 1),
//
// the sample covariance of the n difference vectors with the n − 1
// denominator, halved because a difference of two pixels with independent
// noise of covariance Σ_N has covariance 2 Σ_N (Switzer & Green 1984; Green
// et al. 1988, section III). All NaN when fewer than two pairs were seen.
// dst is handled as in Accumulator.CoMoment.
func NoiseCovariance(d *Accumulator, dst *mat.SymDense) *mat.SymDense {
	dst = d.Covariance(dst)
	dst.ScaleSym(0.5, dst)
	return dst
}
