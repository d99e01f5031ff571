package bands

import (
	"fmt"
	"slices"
	"sync"
)

// AddWindow adds to mom the pixels that win owns, as mom.AddPixels of them
// would, and to noise the shift differences of its pairs selected by s, as
// noise.AddShiftDifferences(win, s) would.
//
// When both accumulators are exact, s includes horizontal pairs and every
// valid value of the window is an integer of magnitude at most MaxExact/2
// (checked, unless the window's Bound vouches for it),
// it takes three quarters of the arithmetic of the two calls. Its pixels
// are paired, (a, b) = the pixels of columns 2j and 2j+1 of a row, and for
// each pair the rows s = a + b and d = b − a go to two products: since
//
//	s·sᵀ + d·dᵀ = 2(a·aᵀ + b·bᵀ),
//
// half their sum is the pixels' own product, while the d rows are also half
// of the horizontal differences. The other half (odd columns, and the halo
// column) and any vertical pairs take a third product. Three products of
// n/2 rows each replace two of n; the exact sums are the same integers, so
// the statistics are bit-identical to those of the two calls. Pixels without
// a valid partner are added on their own. Otherwise AddWindow makes the two
// calls.
//
// It panics if win is malformed or either accumulator has another band
// count.
func AddWindow(mom, noise *Accumulator, win Window, s Shift) {
	win.check()
	if win.P != mom.p || win.P != noise.p {
		panic(fmt.Sprintf("bands: window of %d bands for accumulators of %d and %d", win.P, mom.p, noise.p))
	}
	if s&Horizontal == 0 || mom.exact == nil || noise.exact == nil || !win.halfExact() {
		mom.addOwned(win)
		noise.AddShiftDifferences(win, s)
		return
	}
	ps := spare.get(win.P)
	ps.add(mom, noise, win, s)
	spare.put(ps)
}

// spare keeps the scratch of AddWindow's paired path between calls: one per
// concurrent call rather than one per accumulator (a job keeps many
// accumulators waiting to be merged in order), and, unlike a sync.Pool,
// not dropped at each garbage collection, which made every few calls
// allocate (and fault in) 8 MiB afresh.
var spare = scratchList[*pairScratch]{make: newPairScratch}

// scratchList keeps scratch memory for a band count between calls (see
// spare).
type scratchList[T interface{ bands() int }] struct {
	sync.Mutex
	free []T
	make func(p int) T
}

func (l *scratchList[T]) get(p int) T {
	l.Lock()
	defer l.Unlock()
	for i, ps := range l.free {
		if ps.bands() == p {
			l.free = slices.Delete(l.free, i, i+1)
			return ps
		}
	}
	return l.make(p)
}

func (l *scratchList[T]) put(ps T) {
	l.Lock()
	defer l.Unlock()
	if len(l.free) >= maxSpare {
		l.free = l.free[1:]
	}
	l.free = append(l.free, ps)
}

// maxSpare bounds the scratch kept: more than the callers of one job at a
// time, on a machine of a few dozen cores.
const maxSpare = 64

// halfExact reports whether every valid value of win is an integer of
// magnitude at most MaxExact/2, so that sums and differences of two are
// within MaxExact: from the window's Bound when it has one.
func (w Window) halfExact() bool {
	if w.Bound > 0 {
		return w.Bound <= MaxExact/2
	}
	p := w.P
	for i, ok := range w.Valid {
		if !ok {
			continue
		}
		for _, v := range w.X[i*p : i*p+p] {
			if float64(int64(v)) != v || v > MaxExact/2 || v < -MaxExact/2 {
				return false
			}
		}
	}
	return true
}

// addOwned adds the pixels win owns: its first OwnH rows with the halo
// column masked off.
func (a *Accumulator) addOwned(win Window) {
	n := win.OwnH * win.W
	a.own = append(a.own[:0], win.Valid[:n]...)
	for i := win.OwnW; i < n; i += win.W {
		clear(a.own[i : i+win.W-win.OwnW])
	}
	a.AddPixels(win.X[:n*win.P], a.own)
}

// pairScratch holds the chunks of AddWindow's paired path: the sums and the
// differences of pairs, the other differences, and lone pixels.
type pairScratch struct {
	sum, diff, other, lone *block
	ks, ko, kl, chunk, p   int
}

func newPairScratch(p int) *pairScratch {
	chunk := blasChunk(p)
	nb := func() *block {
		b := newBlock(p)
		b.buf, b.aug = make([]float64, chunk*(p+1)), make([]float64, (p+1)*(p+1))
		return b
	}
	return &pairScratch{sum: nb(), diff: nb(), other: nb(), lone: nb(), chunk: chunk, p: p}
}

func (ps *pairScratch) bands() int { return ps.p }

// put stores v as row k of b's chunk, [v 1], and returns k + 1.
func (b *block) put(k int, v []float64) int {
	q := len(b.mean) + 1
	c := b.buf[k*q : k*q+q]
	c[q-1] = 1
	copy(c, v)
	return k + 1
}

func (ps *pairScratch) add(mom, noise *Accumulator, win Window, s Shift) {
	p, w := win.P, win.W
	ps.ks, ps.ko, ps.kl = 0, 0, 0
	px := func(i int) []float64 { return win.X[i*p : i*p+p] }
	for r := range win.OwnH {
		row := r * w
		for c := 0; c < win.OwnW; c += 2 {
			i := row + c
			switch {
			case c+1 == win.OwnW: // the last owned column, unpaired
				if win.Valid[i] {
					ps.putLone(mom, px(i))
				}
			case win.Valid[i] && win.Valid[i+1]:
				ps.putPair(mom, noise, px(i), px(i+1))
			default:
				if win.Valid[i] {
					ps.putLone(mom, px(i))
				}
				if win.Valid[i+1] {
					ps.putLone(mom, px(i+1))
				}
			}
			// The horizontal pair from column c+1, or from c when c is the
			// last owned column (its second pixel in the halo).
			if d := min(c+1, win.OwnW-1); d+1 < w && win.Valid[row+d] && win.Valid[row+d+1] {
				ps.putOther(noise, px(row+d+1), px(row+d))
			}
		}
		if s&Vertical != 0 && r+1 < win.H {
			for c := range win.OwnW {
				if i := row + c; win.Valid[i] && win.Valid[i+w] {
					ps.putOther(noise, px(i+w), px(i))
				}
			}
		}
	}
	ps.flushPairs(mom, noise)
	ps.flushOther(noise)
	ps.flushLone(mom)
}

// putPair stores the sum and the difference of the pixels a and b, and
// their extremes and that of the difference.
func (ps *pairScratch) putPair(mom, noise *Accumulator, a, b []float64) {
	q := len(a) + 1
	sc, dc := ps.sum.buf[ps.ks*q:ps.ks*q+q], ps.diff.buf[ps.ks*q:ps.ks*q+q]
	sc[q-1], dc[q-1] = 1, 1
	sc, dc, b = sc[:len(a)], dc[:len(a)], b[:len(a)]
	mlo, mhi, nlo, nhi := mom.min[:len(a)], mom.max[:len(a)], noise.min[:len(a)], noise.max[:len(a)]
	for j, x := range a {
		y := b[j]
		d := y - x
		sc[j], dc[j] = y+x, d
		if x < mlo[j] {
			mlo[j] = x
		}
		if y < mlo[j] {
			mlo[j] = y
		}
		if x > mhi[j] {
			mhi[j] = x
		}
		if y > mhi[j] {
			mhi[j] = y
		}
		if d < nlo[j] {
			nlo[j] = d
		}
		if d > nhi[j] {
			nhi[j] = d
		}
	}
	if ps.ks++; ps.ks == ps.chunk {
		ps.flushPairs(mom, noise)
	}
}

// putOther stores the difference x − y, and its extremes.
func (ps *pairScratch) putOther(noise *Accumulator, x, y []float64) {
	q := len(x) + 1
	c := ps.other.buf[ps.ko*q : ps.ko*q+q]
	c[q-1] = 1
	c, y = c[:len(x)], y[:len(x)]
	lo, hi := noise.min[:len(x)], noise.max[:len(x)]
	for j, v := range x {
		d := v - y[j]
		c[j] = d
		if d < lo[j] {
			lo[j] = d
		}
		if d > hi[j] {
			hi[j] = d
		}
	}
	if ps.ko++; ps.ko == ps.chunk {
		ps.flushOther(noise)
	}
}

// putLone stores the pixel x, and its extremes.
func (ps *pairScratch) putLone(mom *Accumulator, x []float64) {
	lo, hi := mom.min[:len(x)], mom.max[:len(x)]
	for j, v := range x {
		if v < lo[j] {
			lo[j] = v
		}
		if v > hi[j] {
			hi[j] = v
		}
	}
	if ps.kl = ps.lone.put(ps.kl, x); ps.kl == ps.chunk {
		ps.flushLone(mom)
	}
}

// flushPairs adds the chunks of pair sums and differences: half the sum of
// their products to mom (the pixels' own product, an even integer), the
// product of the differences to noise.
func (ps *pairScratch) flushPairs(mom, noise *Accumulator) {
	k := ps.ks
	if k == 0 {
		return
	}
	ps.sum.product(k)
	ps.diff.product(k)
	noise.addProduct(ps.diff.aug, k)
	e, p := mom.exact, mom.p
	q := p + 1
	sa, da := ps.sum.aug, ps.diff.aug
	for i := range p {
		row := e.prod[i*p+i : i*p+p]
		for j := range row {
			row[j].add((int64(sa[i*q+i+j]) + int64(da[i*q+i+j])) / 2)
		}
		e.sum[i].add(int64(sa[i*q+p]))
	}
	e.n += 2 * int64(k)
	mom.n = float64(e.n)
	mom.stale = true
	ps.ks = 0
}

func (ps *pairScratch) flushOther(noise *Accumulator) {
	if ps.ko > 0 {
		ps.other.product(ps.ko)
		noise.addProduct(ps.other.aug, ps.ko)
		ps.ko = 0
	}
}

func (ps *pairScratch) flushLone(mom *Accumulator) {
	if ps.kl > 0 {
		ps.lone.product(ps.kl)
		mom.addProduct(ps.lone.aug, ps.kl)
		ps.kl = 0
	}
}
