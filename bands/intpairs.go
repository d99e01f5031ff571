package bands

import "math"

// The paired path of AddInt16Window: the integer kernel's form of
// AddWindow's pairing of columns. The pixels of columns 2j and 2j+1 of a
// row, a and b, give the rows s = a + b and d = b − a, and since
//
//	s·sᵀ + d·dᵀ = 2(a·aᵀ + b·bᵀ),
//
// half the sum of their products is the pixels' own product while the d
// rows are also half of the horizontal differences; the other half, the
// next differences c − b (c the pixel of column 2j+2), is a third product.
// Three products of n/2 rows each replace two of n, and each chunk of the
// window is read once for all three (bf_pairs_products).

// pairKernel enables the paired path; benchmarks and tests turn it off to
// time and check the two passes it replaces.
var pairKernel = true

// pairScratch16 is the scratch of the paired path.
type pairScratch16 struct {
	chunks      []int16 // three chunks of qb rows of cw
	acc         []int64 // three qb×qb matrices: sums, differences, next differences
	centre, lim []int32 // the sums' then the differences' centres (2p) and step limits (2·(qb/4)²)
	ext         []int32 // 4p: each band's extremes of the values, then of the differences
	lo, hi      []int32 // the extremes of the values of the valid pairs
	dlo, dhi    []int32 // the extremes of their differences and the next differences
	dmag        []int32 // the differences' magnitude bounds, as intScratch.mag
	fp, fn      []bool  // by slot: the pair is valid, the next pair is
	lone, edges []int   // pixels without a valid partner; first pixels of pairs outside the slots
	gather      []int16
	u           []int64 // 2p: the values' offsets from the centred ones
}

func (ks *intScratch) pairScratch() *pairScratch16 {
	if ks.pr == nil {
		p, qb := ks.p, ks.qb
		nb := qb / 4
		ks.pr = &pairScratch16{chunks: make([]int16, 3*qb*ks.cw), acc: make([]int64, 3*qb*qb),
			centre: make([]int32, 2*p), lim: make([]int32, 2*nb*nb), ext: make([]int32, 4*p),
			lo: make([]int32, p), hi: make([]int32, p), dlo: make([]int32, p), dhi: make([]int32, p),
			dmag: make([]int32, qb), u: make([]int64, 2*p)}
	}
	return ks.pr
}

// pairView is the paired view of the rows a window owns: slot k is the
// pair of pixels i = (k / m)·w + 2·(k % m) and i + 1 (m pairs a row),
// band b's values x[b·ld + i] (plus the window's shift); fp and fn flag by
// slot whether the pair, and the next pair (pixels i + 1 and i + 2), are
// both valid.
type pairView struct {
	x         []int16
	ld, w, m  int
	p         int
	fp, fn    []bool
	centre    []int32
	lim       []int32
	firstSlot int
}

func (v pairView) pixel(k int) int { return (k/v.m)*v.w + 2*(k%v.m) }

// addPairs adds win's own pixels to mom and its horizontal shift
// differences to noise on the paired path, and reports whether it did: it
// adds nothing and returns false where the values of a band's valid pairs
// span more than 32767 (their sums more than 65534) or their differences
// more than 65534, for AddInt16Window's two passes to take over.
func addPairs(mom, noise *Accumulator, ks *intScratch, win Int16Window) bool {
	if mom.exact == nil || noise.exact == nil {
		return false
	}
	v, pairs, nexts, ok := ks.planWindow(win)
	if !ok {
		return false
	}
	pr := ks.pr
	for start := 0; pairs+nexts > 0 && start < len(v.fp); start += kernelPiece {
		clear(pr.acc)
		v.firstSlot = start
		cnt := min(len(v.fp)-start, kernelPiece)
		if kernelISA == Scalar {
			pairsGo(v, cnt, pr.acc, ks.qb)
		} else {
			pairsSIMD(kernelISA, v, cnt, pr.chunks, ks.cw, pr.acc)
		}
		addPairSums(mom, noise, ks, win.Shift)
	}
	if pairs > 0 {
		mom.widen(pr.lo, pr.hi, win.Shift)
	}
	if pairs+nexts > 0 {
		noise.widen(pr.dlo, pr.dhi, nil)
	}
	// The few pixels and differences outside the slots, gathered.
	if len(pr.lone) > 0 {
		pr.gather = win.gather(pr.gather, pr.lone, 0)
		mom.addInt(ks, ks.allValid(len(pr.lone)), win.Shift)
	}
	if len(pr.edges) > 0 {
		pr.gather = win.gather(pr.gather, pr.edges, 1)
		t := ks.allValid(len(pr.edges))
		t.ld, t.off = 2*t.n, t.n
		noise.addInt(ks, t, nil)
	}
	return true
}

// planWindow lays the paired view over win and plans the kernel's pass
// over it (ks.pr: flags, extremes, centres, step limits), and reports
// whether the paired path takes the window, with the numbers of valid
// pairs and next pairs.
func (ks *intScratch) planWindow(win Int16Window) (v pairView, pairs, nexts int, ok bool) {
	m := win.OwnW / 2
	if !pairKernel || m == 0 || win.OwnH == 0 || (kernelISA == Scalar && !scalarKernel) {
		return v, 0, 0, false
	}
	pr := ks.pairScratch()
	v = pairView{x: win.X, ld: win.W * win.H, w: win.W, m: m, p: win.P}
	v.fp, v.fn, pairs, nexts = win.pairFlags(pr)
	if pairs+nexts > 0 {
		v.extremes(pr)
		if !ks.planPairs(win.Shift) {
			return v, 0, 0, false
		}
		v.centre, v.lim = pr.centre, pr.lim
	}
	return v, pairs, nexts, true
}

// extremes sets pr.lo and pr.hi to each band's extremes over the values of
// v's valid pairs (lo > hi without one), and pr.dlo and pr.dhi over their
// differences and the valid next differences.
func (v pairView) extremes(pr *pairScratch16) {
	if kernelISA == Scalar {
		pairExtremesGo(v, pr.ext)
	} else {
		pairExtremesSIMD(v, pr.ext)
	}
	for b := range v.p {
		e := pr.ext[4*b : 4*b+4]
		pr.lo[b], pr.hi[b], pr.dlo[b], pr.dhi[b] = e[0], e[1], e[2], e[3]
	}
}

// pairExtremesGo sets ext[4b .. 4b+3] as bf_pairs_extremes does: the
// reference of the SIMD path.
func pairExtremesGo(v pairView, ext []int32) {
	for b := range v.p {
		e := ext[4*b : 4*b+4]
		e[0], e[1], e[2], e[3] = math.MaxInt32, math.MinInt32, math.MaxInt32, math.MinInt32
		for k := range v.fp {
			i := b*v.ld + v.pixel(k)
			x, y := int32(v.x[i]), int32(v.x[i+1])
			if v.fp[k] {
				e[0], e[1] = min(e[0], x, y), max(e[1], x, y)
				e[2], e[3] = min(e[2], y-x), max(e[3], y-x)
			}
			if v.fn[k] {
				d := int32(v.x[i+2]) - y
				e[2], e[3] = min(e[2], d), max(e[3], d)
			}
		}
	}
}

// allValid returns the tile of n pixels held in ks.pr.gather, every one
// valid.
func (ks *intScratch) allValid(n int) intTile {
	ks.ones = grow(ks.ones, n)
	for i := range ks.ones {
		ks.ones[i] = true
	}
	x := ks.pr.gather
	return intTile{x: x, ld: n, p: ks.p, n: n, valid: ks.ones}
}

// planPairs sets the centres and step limits of the paired path from the
// extremes of the valid pairs' values (pr.lo, pr.hi) and of their
// differences (pr.dlo, pr.dhi), and reports whether every band fits: the
// sum of two values lies in [2·lo, 2·hi], within ±(hi − lo) of lo + hi, so
// hi − lo must be at most int16Max; the differences are centred as plan
// centres values. The values plus shift must lie within ±MaxExact, as in
// plan. A band without valid pairs (lo > hi) has centre and magnitude 0.
func (ks *intScratch) planPairs(shift []int32) bool {
	p, pr := ks.p, ks.pr
	for b := range p {
		lo, hi, s := int64(pr.lo[b]), int64(pr.hi[b]), int64(shiftOf(shift, b))
		dlo, dhi := int64(pr.dlo[b]), int64(pr.dhi[b])
		if lo > hi {
			lo, hi = 0, 0
		}
		if hi-lo > int16Max || lo+s < -MaxExact || hi+s > MaxExact || dhi-dlo > maxKernelRange {
			return false
		}
		dc := (dlo + dhi) >> 1
		pr.centre[b], ks.mag[b] = int32(lo+hi), int32(hi-lo)
		pr.centre[p+b], pr.dmag[b] = int32(dc), int32(dhi-dc)
	}
	nn := len(pr.lim) / 2
	limits(ks.mag, p, pr.lim[:nn])
	limits(pr.dmag, p, pr.lim[nn:])
	return true
}

// pairFlags sets pr.fp and pr.fn for the slots of win's own rows and
// returns them with the number of slots each flags, and sets pr.lone and
// pr.edges to the own valid pixels outside a valid pair and the first
// pixels of the horizontal pairs no slot holds (from the last own column
// of an odd width).
func (win Int16Window) pairFlags(pr *pairScratch16) (fp, fn []bool, pairs, nexts int) {
	w, m := win.W, win.OwnW/2
	pr.fp, pr.fn = grow(pr.fp, win.OwnH*m), grow(pr.fn, win.OwnH*m)
	pr.lone, pr.edges = pr.lone[:0], pr.edges[:0]
	for r := range win.OwnH {
		row, f, g := win.Valid[r*w:(r+1)*w], pr.fp[r*m:(r+1)*m], pr.fn[r*m:(r+1)*m]
		for j := range f {
			a, b := row[2*j], row[2*j+1]
			f[j] = a && b
			g[j] = b && 2*j+2 < w && row[2*j+2]
			if f[j] {
				pairs++
			} else if a || b {
				pr.lone = append(pr.lone, r*w+2*j+b2i(b))
			}
			if g[j] {
				nexts++
			}
		}
		if c := 2 * m; c < win.OwnW && row[c] {
			pr.lone = append(pr.lone, r*w+c)
			if c+1 < w && row[c+1] {
				pr.edges = append(pr.edges, r*w+c)
			}
		}
	}
	return pr.fp, pr.fn, pairs, nexts
}

func b2i(b bool) int {
	if b {
		return 1
	}
	return 0
}

// gather returns, in dst's storage when it has room, the values of the
// pixels idx band by band; with off > 0, each band's values of the pixels
// idx + off follow them, so that the tile's difference at offset len(idx)
// is x(i + off) − x(i).
func (win Int16Window) gather(dst []int16, idx []int, off int) []int16 {
	n, k := win.W*win.H, len(idx)
	per := k
	if off > 0 {
		per = 2 * k
	}
	dst = grow(dst, per*win.P)
	for b := range win.P {
		x, d := win.X[b*n:(b+1)*n], dst[b*per:(b+1)*per]
		for t, i := range idx {
			d[t] = x[i]
			if off > 0 {
				d[k+t] = x[i+off]
			}
		}
	}
	return dst
}

// pairsGo is pairsSIMD in Go, through productsGo: the reference of the
// SIMD path.
func pairsGo(v pairView, n int, acc []int64, qb int) {
	p, qq, k0 := v.p, qb*qb, v.firstSlot
	at := func(b, k, d int) int32 { return int32(v.x[b*v.ld+v.pixel(k0+k)+d]) }
	sum := func(b, k int) int32 { return at(b, k, 0) + at(b, k, 1) }
	diff := func(b, k int) int32 { return at(b, k, 1) - at(b, k, 0) }
	next := func(b, k int) int32 { return at(b, k, 2) - at(b, k, 1) }
	fp, fn := v.fp[k0:k0+n], v.fn[k0:k0+n]
	productsGo(n, p, fp, sum, v.centre[:p], acc[:qq], qb)
	productsGo(n, p, fp, diff, v.centre[p:], acc[qq:2*qq], qb)
	productsGo(n, p, fn, next, v.centre[p:], acc[2*qq:], qb)
}

// addPairSums adds the products the paired path left in ks.pr.acc for one
// piece: to mom, whose pixels are the pairs' halves, the count of two a
// slot, the sums of the pair sums and half the sum of the products of the
// sums and of the differences (even: twice the pixels' own); to noise the
// differences and the next differences together.
func addPairSums(mom, noise *Accumulator, ks *intScratch, shift []int32) {
	p, qb, pr := ks.p, ks.qb, ks.pr
	qq := qb * qb
	us, ud := pr.u[:p], pr.u[p:2*p]
	for b := range p {
		// A pair sum of values x + shift is the stored sum plus twice the
		// shift; differences lose the shift.
		us[b] = 2*int64(shiftOf(shift, b)) + int64(pr.centre[b])
		ud[b] = int64(pr.centre[p+b])
	}
	sums, diffs, next := pr.acc[:qq], pr.acc[qq:2*qq], pr.acc[2*qq:]
	uncentre(sums, qb, p, us)
	uncentre(diffs, qb, p, ud)
	uncentre(next, qb, p, ud)
	for i := range p {
		for j := i; j < p; j++ {
			o := i*qb + j
			sums[o] = (sums[o] + diffs[o]) / 2
		}
	}
	sums[p*qb+p] *= 2
	for i := range p + 1 {
		for j := i; j <= p; j++ {
			next[i*qb+j] += diffs[i*qb+j]
		}
	}
	mom.addSums(sums, qb)
	noise.addSums(next, qb)
}
