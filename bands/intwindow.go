package bands

import "fmt"

// Int16Window is a Window of integer pixels stored band-sequentially, as
// AddInt16Tile takes them: the value of band b at pixel (r, c) is
// X[b·W·H + r·W + c] + Shift[b] (Shift nil meaning zeros). Valid, P, W,
// H, OwnW and OwnH are as in Window.
type Int16Window struct {
	X          []int16
	Shift      []int32
	Valid      []bool
	P, W, H    int
	OwnW, OwnH int
}

func (w Int16Window) check() {
	if w.P < 1 || w.OwnW < 0 || w.OwnH < 0 || w.OwnW > w.W || w.OwnH > w.H || w.W-w.OwnW > 1 || w.H-w.OwnH > 1 ||
		len(w.X) != w.W*w.H*w.P || len(w.Valid) != w.W*w.H || (w.Shift != nil && len(w.Shift) != w.P) {
		panic(fmt.Sprintf("bands: int16 window %d×%d (own %d×%d) of %d bands with %d values, %d flags and %d shifts",
			w.W, w.H, w.OwnW, w.OwnH, w.P, len(w.X), len(w.Valid), len(w.Shift)))
	}
}

// AddInt16Window adds to mom the pixels that win owns, and to noise the
// shift differences of its pairs selected by s (the pairs of
// ShiftDifferences: both pixels valid, the first one owned), with the
// integer kernel of AddInt16Tile. The differences are formed in int32 and
// go to the kernel band-sequentially, one pass for the horizontal pairs
// and one for the vertical ones, where each band's differences in the
// window span at most 65534 (adjacent pixels differ far less than their
// range); otherwise, as the pixels do when they do not fit, they take
// AddPixels' path, converted a chunk at a time. On exact accumulators the
// sums are the same integers, and so the statistics the same bits, as
// those of AddWindow (or mom.AddPixels and noise.AddShiftDifferences) on
// the same pixels as float64, pixel-major; on ordinary ones they agree to
// rounding.
//
// It panics if win is malformed or either accumulator has another band
// count.
func AddInt16Window(mom, noise *Accumulator, win Int16Window, s Shift) {
	win.check()
	if win.P != mom.p || win.P != noise.p {
		panic(fmt.Sprintf("bands: window of %d bands for accumulators of %d and %d", win.P, mom.p, noise.p))
	}
	ks := intSpare.get(win.P)
	defer intSpare.put(ks)
	w, n := win.W, win.W*win.H
	owned := func(i int) bool { return i%w < win.OwnW && i/w < win.OwnH }
	ks.own = grow(ks.own, n)
	for i := range ks.own {
		ks.own[i] = win.Valid[i] && owned(i)
	}
	mom.addInt(ks, intTile{x: win.X, ld: n, p: win.P, n: n, valid: ks.own}, win.Shift)
	// A pair (i, i+off) counts when both are valid, i is owned and i+off
	// is in the window: the next column or the next row.
	pairs := func(off int, inWindow func(i int) bool) {
		m := n - off
		if m <= 0 {
			return
		}
		ks.pairs = grow(ks.pairs, m)
		for i := range ks.pairs {
			ks.pairs[i] = win.Valid[i] && win.Valid[i+off] && owned(i) && inWindow(i)
		}
		noise.addInt(ks, intTile{x: win.X, ld: n, p: win.P, n: m, off: off, valid: ks.pairs}, nil)
	}
	if s&Horizontal != 0 {
		pairs(1, func(i int) bool { return i%w+1 < w })
	}
	if s&Vertical != 0 {
		pairs(w, func(i int) bool { return i/w+1 < win.H })
	}
}
