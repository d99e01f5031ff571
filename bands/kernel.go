package bands

import (
	"fmt"
	"math"
)

// ISA is an instruction set the integer co-moment kernel (AddInt16Tile)
// runs on.
type ISA int

const (
	// Scalar is the portable path, in Go: one int64 product at a time.
	Scalar ISA = iota
	// AVX2 forms 16 products of int16 pairs an instruction (vpmaddwd).
	AVX2
	// AVX512VNNI forms 32 products of int16 pairs and adds them an
	// instruction (vpdpwssd).
	AVX512VNNI
)

func (i ISA) String() string {
	switch i {
	case Scalar:
		return "scalar"
	case AVX2:
		return "avx2"
	case AVX512VNNI:
		return "avx512vnni"
	}
	return fmt.Sprintf("ISA(%d)", int(i))
}

// KernelISAs returns the paths of the integer kernel that this build runs
// on this CPU, Scalar first, the one AddInt16Tile uses last.
func KernelISAs() []ISA { return append([]ISA{Scalar}, simdISAs()...) }

// kernelISA is the path AddInt16Tile and AddInt16Window take: the best the
// CPU has. Tests set it to try each.
var kernelISA = bestISA()

// scalarKernel makes the Scalar path form the products in Go. Otherwise a
// CPU without AVX2 sends integer tiles to AddPixels, which with any BLAS
// is faster than scalar integer arithmetic (BenchmarkKernel, p = 64: 132
// ms a tile against 27 ms with OpenBLAS, 4.5 with AVX-512 VNNI). Tests set
// it: the Go products are the reference of the SIMD ones.
var scalarKernel = false

func bestISA() ISA {
	isas := KernelISAs()
	return isas[len(isas)-1]
}

const (
	// int16Max is the largest magnitude a centred value may have in the
	// kernel: vpmaddwd of two pairs of −32768 overflows int32, of ±32767
	// does not.
	int16Max = 1<<15 - 1

	// maxKernelRange is the widest range of a band's values in a tile that
	// the kernel takes: centred on the middle of the range, its values lie
	// within ±int16Max.
	maxKernelRange = 2 * int16Max

	// kernelChunkBytes bounds the chunk of centred int16 rows (one a band
	// and one of validity flags) that the SIMD paths form their products
	// from, so that it stays in a core's L2 cache while every block of
	// band pairs reads it; but a chunk has at least 1024 pixels, since each
	// block adds its 16 lanes into int64 once a chunk (BenchmarkKernel,
	// p = 425: 1024 pixels, 0.9 MiB, about 20% faster than 608).
	kernelChunkBytes = 512 << 10
)

// kernelPiece is the most pixels whose centred products the kernel sums
// in int64 before they go into the 128-bit sums: at most 2²⁴, so that the
// products (below 2³⁰ each) and the corrections of the centring (see
// addKernel) stay below 2⁶¹. A variable so that tests can cut it down.
var kernelPiece = 1 << 24

// stepLimit returns the most steps an int32 lane of the SIMD paths may
// take before it is added into int64, for a block of band pairs whose
// centred values have magnitudes at most mi and mj: each step adds two
// products, so the lane stays within 2·s·mi·mj, and s is the largest with
// 2·s·mi·mj ≤ 2³¹ − 1 (at least 1, since mi, mj ≤ int16Max).
func stepLimit(mi, mj int32) int32 {
	m := 2 * int64(mi) * int64(mj)
	if m == 0 {
		return math.MaxInt32
	}
	return int32(min((1<<31-1)/m, math.MaxInt32))
}

// intTile is the integer data given to the kernel: p bands of n values,
// band b's value at pixel k being x[b·ld+k], or with off > 0 the
// difference x[b·ld+k+off] − x[b·ld+k]; only pixels with valid[k] count.
type intTile struct {
	x             []int16
	ld, p, n, off int
	valid         []bool
}

func (t intTile) value(b, k int) int32 {
	i := b*t.ld + k
	if t.off == 0 {
		return int32(t.x[i])
	}
	return int32(t.x[i+t.off]) - int32(t.x[i])
}

// piece returns the pixels from k on, at most kernelPiece.
func (t intTile) piece(k int) intTile {
	t.x, t.valid = t.x[k:], t.valid[k:]
	t.n = min(t.n-k, kernelPiece)
	return t
}

// extremes sets lo and hi to each band's least and greatest valid value
// and returns the number of valid pixels.
func (t intTile) extremes(isa ISA, lo, hi []int32) int {
	if t.n <= 0 {
		return 0
	}
	if isa != Scalar {
		return extremesSIMD(t, lo, hi)
	}
	return extremesGo(t, lo, hi)
}

func extremesGo(t intTile, lo, hi []int32) int {
	count := 0
	for k := range t.n {
		if t.valid[k] {
			count++
		}
	}
	for b := range t.p {
		l, h := int32(math.MaxInt32), int32(math.MinInt32)
		for k := range t.n {
			if t.valid[k] {
				v := t.value(b, k)
				l, h = min(l, v), max(h, v)
			}
		}
		lo[b], hi[b] = l, h
	}
	return count
}

// productsGo adds to acc (qb×qb, row-major, qb ≥ p+1) the upper triangle
// of Σ z·zᵀ over the n pixels k with valid[k], z = [x − centre, 1], the
// value of band b at pixel k being value(b, k): the scalar path, and the
// reference of the SIMD ones.
func productsGo(n, p int, valid []bool, value func(b, k int) int32, centre []int32, acc []int64, qb int) {
	z := make([]int64, p+1)
	z[p] = 1
	for k := range n {
		if !valid[k] {
			continue
		}
		for b := range p {
			z[b] = int64(value(b, k) - centre[b])
		}
		for i, zi := range z {
			row := acc[i*qb+i : i*qb+len(z)]
			for j, zj := range z[i:] {
				row[j] += zi * zj
			}
		}
	}
}

// intScratch is the scratch of the kernel for p bands.
type intScratch struct {
	p, qb, cw           int
	chunk               []int16 // qb rows of cw: bands, the validity row, zero rows
	acc                 []int64 // qb×qb
	lo, hi, centre, mag []int32
	lim                 []int32 // (qb/4)² step limits of blocks of band pairs
	u                   []int64 // the centre plus the shift of each band
	ones, own, pairs    []bool
	wide                []float64
	edge                []int16 // two columns a band (AddInt16Pairs)
	pr                  *pairScratch16
}

func newIntScratch(p int) *intScratch {
	qb := (p + 4) &^ 3
	cw := min(max(kernelChunkBytes/(2*qb)&^31, 1024), 8192)
	nb := qb / 4
	return &intScratch{p: p, qb: qb, cw: cw,
		chunk: make([]int16, qb*cw), acc: make([]int64, qb*qb),
		lo: make([]int32, p), hi: make([]int32, p), centre: make([]int32, p), mag: make([]int32, qb),
		lim: make([]int32, nb*nb), u: make([]int64, p)}
}

func (ks *intScratch) bands() int { return ks.p }

var intSpare = scratchList[*intScratch]{make: newIntScratch}

// AddInt16Tile adds to a the n = len(x)/p pixels of a band-sequential tile
// of integers: the value of band b at pixel k is x[b·n+k] + shift[b]
// (shift nil meaning zeros; a shift of 32768 holds unsigned 16-bit data in
// int16), and valid, nil or of length n, selects the pixels used. The
// statistics are those AddPixels gives for the same pixels, pixel-major,
// as float64; on an exact accumulator they are the same bit for bit.
//
// On an exact accumulator, where every band's valid values span at most
// 65534 and lie within ±MaxExact, the count, sums and sums of products are
// formed in integer arithmetic by the kernel (see the package
// documentation) and added to the exact sums. Otherwise, and on an
// ordinary accumulator, the pixels go to AddPixels, converted a chunk at a
// time.
//
// It panics if len(x) is not a multiple of p or valid or shift has the
// wrong length.
func (a *Accumulator) AddInt16Tile(x []int16, valid []bool, shift []int32) {
	p := a.p
	if len(x)%p != 0 {
		panic("bands: tile length not a multiple of the band count")
	}
	n := len(x) / p
	if (valid != nil && len(valid) != n) || (shift != nil && len(shift) != p) {
		panic(fmt.Sprintf("bands: tile of %d pixels of %d bands with %d flags and %d shifts", n, p, len(valid), len(shift)))
	}
	ks := intSpare.get(p)
	defer intSpare.put(ks)
	if valid == nil {
		ks.ones = grow(ks.ones, n)
		for i := range ks.ones {
			ks.ones[i] = true
		}
		valid = ks.ones
	}
	a.addInt(ks, intTile{x: x, ld: n, p: p, n: n, valid: valid}, shift)
}

// addInt adds the values of t plus shift to a (see AddInt16Tile).
func (a *Accumulator) addInt(ks *intScratch, t intTile, shift []int32) {
	k := t.extremes(kernelISA, ks.lo, ks.hi)
	if k == 0 {
		return
	}
	if a.exact == nil || (kernelISA == Scalar && !scalarKernel) || !ks.plan(shift) {
		a.addWide(ks, t, shift)
		return
	}
	for start := 0; start < t.n; start += kernelPiece {
		clear(ks.acc)
		pc := t.piece(start)
		if kernelISA == Scalar {
			productsGo(pc.n, pc.p, pc.valid, pc.value, ks.centre, ks.acc, ks.qb)
		} else {
			productsSIMD(kernelISA, pc, ks.centre, ks.lim, ks.chunk, ks.cw, ks.acc)
		}
		a.addKernel(ks, shift)
	}
	a.widen(ks.lo, ks.hi, shift)
}

// widen widens a's extremes to those in lo and hi plus shift.
func (a *Accumulator) widen(lo, hi, shift []int32) {
	for b := range a.p {
		s := float64(shiftOf(shift, b))
		a.min[b] = min(a.min[b], float64(lo[b])+s)
		a.max[b] = max(a.max[b], float64(hi[b])+s)
	}
}

func shiftOf(shift []int32, b int) int32 {
	if shift == nil {
		return 0
	}
	return shift[b]
}

// plan reports whether the kernel takes the tile whose extremes are in
// ks.lo and ks.hi: every band's range within maxKernelRange and its values
// plus shift within ±MaxExact (where an exact accumulator stays exact). It
// then sets each band's centre, the middle of its range, the magnitude
// bound of its centred values, and the step limit of each block of band
// pairs.
func (ks *intScratch) plan(shift []int32) bool {
	for b := range ks.p {
		lo, hi, s := int64(ks.lo[b]), int64(ks.hi[b]), int64(shiftOf(shift, b))
		if hi-lo > maxKernelRange || lo+s < -MaxExact || hi+s > MaxExact {
			return false
		}
		c := (lo + hi) >> 1 // floor: the centred values lie in [−⌊r/2⌋, ⌈r/2⌉]
		ks.centre[b], ks.mag[b] = int32(c), int32(hi-c)
	}
	limits(ks.mag, ks.p, ks.lim)
	return true
}

// limits sets lim to the step limits of the blocks of band pairs for the
// magnitude bounds mag of the p bands' centred values (qb of them, the
// rows after the bands zero), and mag[p] to 1, the validity row's.
func limits(mag []int32, p int, lim []int32) {
	mag[p] = 1
	nb := len(mag) / 4
	for bi := range nb {
		mi := blockMag(mag[4*bi : 4*bi+4])
		for bj := range nb {
			lim[bi*nb+bj] = stepLimit(mi, blockMag(mag[4*bj:4*bj+4]))
		}
	}
}

func blockMag(m []int32) int32 { return max(m[0], m[1], m[2], m[3]) }

// addKernel adds to a's exact sums the products the kernel left in ks.acc
// for one piece, the values centred on the shift plus the centre.
func (a *Accumulator) addKernel(ks *intScratch, shift []int32) {
	for i := range a.p {
		ks.u[i] = int64(shiftOf(shift, i)) + int64(ks.centre[i])
	}
	uncentre(ks.acc, ks.qb, a.p, ks.u)
	a.addSums(ks.acc, ks.qb)
}

// uncentre turns the upper triangle of products of [x − u, 1] that the
// kernel left in acc (qb×qb, row-major) into those of [x, 1], in place:
// with z = x − u the centred values, T = Σz the sums and k the count that
// the validity row gives,
//
//	Σx = T + k·u,  Σxᵢxⱼ = Σzᵢzⱼ + uᵢTⱼ + uⱼTᵢ + k·uᵢuⱼ,
//
// all in int64: with |z| < 2¹⁵, |u| ≤ 2¹⁸ and k ≤ 2²⁴ every term is at
// most 2⁶⁰.
func uncentre(acc []int64, qb, p int, u []int64) {
	k := acc[p*qb+p]
	for i := range p {
		ui, ti := u[i], acc[i*qb+p]
		row := acc[i*qb : i*qb+p]
		for j := i; j < p; j++ {
			row[j] += ui*acc[j*qb+p] + u[j]*ti + k*ui*u[j]
		}
	}
	for i := range p {
		acc[i*qb+p] += k * u[i]
	}
}

// addSums adds to a's exact sums the count, sums and products of [x, 1]
// in acc (qb×qb, upper triangle).
func (a *Accumulator) addSums(acc []int64, qb int) {
	p, e := a.p, a.exact
	for i := range p {
		e.sum[i].add(acc[i*qb+p])
		row := e.prod[i*p : i*p+p]
		for j := i; j < p; j++ {
			row[j].add(acc[i*qb+j])
		}
	}
	e.n += acc[p*qb+p]
	a.n = float64(e.n)
	a.stale = true
}

// addWide adds the values of t plus shift to a through AddPixels, a chunk
// of blasChunk pixels at a time, widened to float64 pixel-major.
func (a *Accumulator) addWide(ks *intScratch, t intTile, shift []int32) {
	p := a.p
	chunk := blasChunk(p)
	ks.wide = grow(ks.wide, min(chunk, t.n)*p)
	for start := 0; start < t.n; start += chunk {
		end := min(start+chunk, t.n)
		buf := ks.wide[:(end-start)*p]
		for b := range p {
			s := shiftOf(shift, b)
			for k := start; k < end; k++ {
				buf[(k-start)*p+b] = float64(t.value(b, k) + s)
			}
		}
		a.AddPixels(buf, t.valid[start:end])
	}
}

// grow returns s resized to n, reallocated only when too small.
func grow[T any](s []T, n int) []T {
	if cap(s) < n {
		return make([]T, n)
	}
	return s[:n]
}
