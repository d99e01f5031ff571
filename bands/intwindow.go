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
// integer kernel of AddInt16Tile. With horizontal pairs, on exact
// accumulators, where every band's values span at most 32767, the pixels
// and the horizontal differences go to the kernel together, paired as
// AddWindow pairs them (see the package documentation): three products of
// half the pixels instead of two of all, each chunk of the window read
// once. Otherwise the pixels take one pass, and the differences, formed in
// int32, one pass for the horizontal pairs, where each band's differences
// in the window span at most 65534 (adjacent pixels differ far less than
// their range). The vertical pairs take a pass of their own. Values or
// differences that do not fit take AddPixels' path, converted a chunk at a
// time. On exact accumulators the
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
	n := win.W * win.H
	paired := s&Horizontal != 0 && addPairs(mom, noise, ks, win)
	if !paired {
		ks.own = win.ownedPairs(grow(ks.own, n), 0, win.OwnW)
		mom.addInt(ks, intTile{x: win.X, ld: n, p: win.P, n: n, valid: ks.own}, win.Shift)
	}
	// The horizontal pairs of the columns with a next one (unless paired),
	// the vertical pairs of the rows with a next one (ownedPairs stops
	// before the last).
	for _, pr := range []struct {
		on        bool
		off, cols int
	}{{s&Horizontal != 0 && !paired, 1, min(win.OwnW, win.W-1)}, {s&Vertical != 0, win.W, win.OwnW}} {
		if !pr.on || pr.off >= n {
			continue
		}
		ks.pairs = win.ownedPairs(grow(ks.pairs, n-pr.off), pr.off, pr.cols)
		noise.addInt(ks, intTile{x: win.X, ld: n, p: win.P, n: n - pr.off, off: pr.off, valid: ks.pairs}, nil)
	}
}

// ownedPairs sets flags[i] to whether pixel i is owned and valid, lies in
// the first cols columns, and its partner i + off (itself for off 0) is
// valid and in the window; it returns flags, of n − off values. It works a
// row at a time: no division per pixel.
func (win Int16Window) ownedPairs(flags []bool, off, cols int) []bool {
	clear(flags)
	for i := 0; i < win.OwnH*win.W && i+cols+off <= len(win.Valid); i += win.W {
		a, b, f := win.Valid[i:i+cols], win.Valid[i+off:i+off+cols], flags[i:i+cols]
		for c := range f {
			f[c] = a[c] && b[c]
		}
	}
	return flags
}

// Int16Column is one column of the rows an Int16Window owns, stored
// band-sequentially: the value of band b at row r is X[b·H + r] plus the
// window's shift of band b, and Valid[r] says whether that pixel is valid.
// A tile keeps its edge columns (Int16Window.Column) so that the
// horizontal pairs across the edge it shares with its right neighbour can
// be added when both are at hand (AddInt16Pairs), without reading a halo
// column of the neighbour.
type Int16Column struct {
	X     []int16
	Valid []bool
	P, H  int
}

// Column returns column c (0 ≤ c < OwnW) of the rows w owns, copied into
// dst's storage when it has room, else into new storage. It panics if w
// is malformed or c out of range.
func (w Int16Window) Column(c int, dst Int16Column) Int16Column {
	w.check()
	if c < 0 || c >= w.OwnW {
		panic(fmt.Sprintf("bands: column %d of a window owning %d", c, w.OwnW))
	}
	h, n := w.OwnH, w.W*w.H
	dst.P, dst.H = w.P, h
	dst.X, dst.Valid = grow(dst.X, w.P*h), grow(dst.Valid, h)
	for b := range w.P {
		col := dst.X[b*h : b*h+h]
		for r := range col {
			col[r] = w.X[b*n+r*w.W+c]
		}
	}
	for r := range dst.Valid {
		dst.Valid[r] = w.Valid[r*w.W+c]
	}
	return dst
}

// AddInt16Pairs adds to noise the horizontal shift differences across a
// vertical tile edge, right(r) − left(r) for every row r where both pixels
// are valid: left the last column a tile owns, right the first column of
// its right neighbour, of the same stack (the shifts, the same, cancel).
// The differences go to the integer kernel of AddInt16Tile, or to
// AddPixels' path where a band's differences span more than 65534. On an
// exact accumulator the sums are the same integers, and so the statistics
// the same bits, as those of AddShiftDifferences(win, Horizontal) with win
// the two columns side by side as float64 (W 2, OwnW 1): with
// AddInt16Window on each tile (its window without the halo column where
// the neighbour's edge is paired here), every horizontal pair of the
// raster counts once, as with a halo. It panics if the columns differ in
// shape or band count from each other or from noise.
func AddInt16Pairs(noise *Accumulator, left, right Int16Column) {
	p, h := left.P, left.H
	if right.P != p || right.H != h || noise.p != p || len(left.X) != p*h || len(right.X) != p*h ||
		len(left.Valid) != h || len(right.Valid) != h {
		panic(fmt.Sprintf("bands: edge columns of %d×%d and %d×%d bands×rows (%d, %d values) for an accumulator of %d bands",
			p, h, right.P, right.H, len(left.X), len(right.X), noise.p))
	}
	ks := intSpare.get(p)
	defer intSpare.put(ks)
	// Band b's two columns side by side: left at b·2h, right h further on,
	// so that the kernel's difference at offset h is right − left.
	ks.edge = grow(ks.edge, 2*h*p)
	for b := range p {
		copy(ks.edge[2*b*h:], left.X[b*h:b*h+h])
		copy(ks.edge[2*b*h+h:], right.X[b*h:b*h+h])
	}
	ks.pairs = grow(ks.pairs, h)
	for r := range ks.pairs {
		ks.pairs[r] = left.Valid[r] && right.Valid[r]
	}
	noise.addInt(ks, intTile{x: ks.edge, ld: 2 * h, p: p, n: h, off: h, valid: ks.pairs}, nil)
}
