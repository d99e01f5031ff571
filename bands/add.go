package bands

import (
	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/blas/gonum"
)

const (
	// fusedMaxBands is the largest band count for which AddPixels uses the
	// fused Go loop, and then only while gonum's native BLAS is registered.
	// BenchmarkCutover (bench_internal_test.go, 65536 pixels) on a shared
	// 2-core Xeon with AVX-512 gave, in GFLOP/s, fused loop vs Syrk:
	//
	//	p              2     4     8    16    24    32    48    64
	//	native BLAS  0.65  1.25  2.0   3.5   3.9   3.0   2.4   2.3   fused
	//	             0.42  0.64  1.5   2.6   2.5   3.1   3.0   4.0   Syrk
	//	OpenBLAS     0.70  1.26  1.7   2.7   2.8   3.8   2.4   3.6   fused
	//	             0.62  1.50  2.3   4.2   5.9   9.8   5.8  13.2   Syrk
	//
	// so the loop wins up to p = 24 on the native BLAS and only at p = 2,
	// within noise, on OpenBLAS.
	fusedMaxBands = 24

	// fusedChunk is the number of pixels per chunk on the fused path. A chunk
	// is read twice (mean, then centred cross-products), so it should stay in
	// L2 cache: 4096 pixels of 24 bands are 768 KiB.
	fusedChunk = 4096

	// blasChunkBytes bounds the shifted copy of a chunk that the BLAS path
	// hands to Syrk, and so the scratch memory of an Accumulator.
	blasChunkBytes = 2 << 20

	// cancelBits is the most bits the BLAS path lets the shift correction
	// of a band's co-moment cancel before it centres the chunk on its mean
	// and takes the product again (see comomentBLAS).
	cancelBits = 8
)

// useFused reports whether AddPixels computes the co-moment of a chunk of
// p-band pixels with the fused Go loop rather than with blas64.Syrk: only for
// few bands, and only while gonum's native BLAS is registered, since an
// optimised BLAS such as OpenBLAS beats the loop for any band count.
func useFused(p int) bool {
	_, native := blas64.Implementation().(gonum.Implementation)
	return native && p <= fusedMaxBands
}

// block is the scratch an Accumulator uses to reduce one chunk of pixels
// before folding it into the running state.
type block struct {
	n        float64
	mean     []float64 // p
	min, max []float64 // p
	com      []float64 // p×p, upper triangle used.
	buf      []float64 // fused path: two centred pixels; BLAS path: a shifted chunk, p+1 values a pixel.
	aug      []float64 // BLAS path: (p+1)×(p+1), the product of the shifted chunk.
	inexact  bool      // exact path: the chunk holds a value that is not an integer.
}

func newBlock(p int) *block {
	return &block{
		mean: make([]float64, p),
		min:  make([]float64, p),
		max:  make([]float64, p),
		com:  make([]float64, p*p),
	}
}

// AddPixels adds the n = len(x)/p pixels in x, given pixel-major: the values
// of pixel i are x[i*p : (i+1)*p]. valid may be nil, meaning every pixel is
// valid, or have length n, in which case only pixels with valid[i] are used.
// Valid pixels must not hold NaN; exclude nodata through valid.
//
// The pixels are processed in chunks of a few thousand, and each chunk's
// mean and co-moment are folded into the running state as in Merge. For a
// handful of bands under gonum's native BLAS, a fused Go loop takes the
// chunk's mean, then its centred cross-products. Otherwise (more bands, or
// any other BLAS registered with blas64.Use) the chunk is copied once,
// shifted by its first valid pixel, and one blas64.Syrk gives both its sums
// and its cross-products (see comomentBLAS).
// AddPixels reuses the accumulator's scratch memory and does not allocate
// after its first call.
//
// AddPixels panics if len(x) is not a multiple of p or valid has the wrong
// length.
func (a *Accumulator) AddPixels(x []float64, valid []bool) {
	p := a.p
	if len(x)%p != 0 {
		panic("bands: pixel data length not a multiple of the band count")
	}
	if valid != nil && len(valid) != len(x)/p {
		panic("bands: validity mask length does not match pixel count")
	}
	a.add(x, valid, useFused(p))
}

// add is AddPixels with the co-moment kernel chosen by fused.
func (a *Accumulator) add(x []float64, valid []bool, fused bool) {
	p := a.p
	n := len(x) / p
	if a.exact != nil {
		fused = false
	}
	chunk := a.prepare(fused, n)
	b := a.blk
	for start := 0; start < n; start += chunk {
		end := min(start+chunk, n)
		xs := x[start*p : end*p]
		var vs []bool
		if valid != nil {
			vs = valid[start:end]
		}
		if a.exact != nil {
			b.inexact = false
			if k := b.raw(xs, vs, false); k > 0 {
				a.addRaw(k)
			}
			continue
		}
		if fused {
			if !b.stats(xs, vs) {
				continue
			}
			b.comomentFused(xs, vs)
		} else {
			k := b.raw(xs, vs, true)
			if k == 0 {
				continue
			}
			b.comomentBLAS(k)
		}
		a.fold(b.n, b.mean, b.com, b.min, b.max)
	}
}

// prepare readies a's scratch for chunks of up to n pixels on the path
// chosen by fused and returns the chunk length: fusedChunk pixels on the
// fused path, blasChunkBytes of shifted pixels (p+1 values each) on the
// BLAS path.
func (a *Accumulator) prepare(fused bool, n int) int {
	p := a.p
	if a.blk == nil {
		a.blk = newBlock(p)
	}
	b := a.blk
	chunk, width := fusedChunk, p
	if !fused {
		chunk, width = blasChunk(p), p+1
		if b.aug == nil {
			b.aug = make([]float64, width*width)
		}
	}
	if size := max(min(chunk, n)*width, 2*p); len(b.buf) < size {
		b.buf = make([]float64, size)
	}
	return chunk
}

// blasChunk is the number of pixels of a chunk on the BLAS path: its copy
// (p+1 values a pixel) within blasChunkBytes, and few enough pixels for an
// exact accumulator's product to be exact (maxExactChunk).
func blasChunk(p int) int {
	return min(max(blasChunkBytes/(8*(p+1)), 64), maxExactChunk)
}

// stats sets the count, mean, minimum and maximum of the valid pixels in x
// and reports whether there were any.
//
// The mean is clamped to [min, max], which it can leave only through
// rounding; this makes the mean of a constant band exact and so its centred
// values and co-moment exactly zero.
func (b *block) stats(x []float64, valid []bool) bool {
	p := len(b.mean)
	sum, lo, hi := b.mean, b.min, b.max
	clear(sum)
	k := 0
	for i := range len(x) / p {
		if valid != nil && !valid[i] {
			continue
		}
		px := x[i*p : i*p+p]
		if k == 0 {
			copy(lo, px)
			copy(hi, px)
		}
		lo, hi := lo[:len(px)], hi[:len(px)]
		for j, v := range px {
			sum[j] += v
			if v < lo[j] {
				lo[j] = v
			}
			if v > hi[j] {
				hi[j] = v
			}
		}
		k++
	}
	b.n = float64(k)
	if k == 0 {
		return false
	}
	for j := range sum {
		sum[j] = min(max(sum[j]/b.n, lo[j]), hi[j])
	}
	return true
}

// comomentFused sets the upper triangle of b.com to Σ cᵢcᵢᵀ over the valid
// pixels of x centred on b.mean, cᵢ = xᵢ − mean. Pixels are taken in pairs so
// that each pass over the triangle adds two rank-1 terms, halving the loads
// and stores of the accumulated triangle.
func (b *block) comomentFused(x []float64, valid []bool) {
	p := len(b.mean)
	mean := b.mean
	c0, c1 := b.buf[:p], b.buf[p:2*p]
	com := b.com
	for i := 0; i < p; i++ {
		clear(com[i*p+i : i*p+p])
	}
	pending := false
	for i := range len(x) / p {
		if valid != nil && !valid[i] {
			continue
		}
		px := x[i*p : i*p+p]
		if !pending {
			for j, v := range px {
				c0[j] = v - mean[j]
			}
			pending = true
			continue
		}
		for j, v := range px {
			c1[j] = v - mean[j]
		}
		for j := range p {
			a0, a1 := c0[j], c1[j]
			row := com[j*p+j : j*p+p]
			r0 := c0[j:]
			r0 = r0[:len(row)]
			r1 := c1[j:]
			r1 = r1[:len(row)]
			for l := range row {
				row[l] += a0*r0[l] + a1*r1[l]
			}
		}
		pending = false
	}
	if pending {
		for j, a0 := range c0 {
			row := com[j*p+j : j*p+p]
			r0 := c0[j:]
			r0 = r0[:len(row)]
			for l := range row {
				row[l] += a0 * r0[l]
			}
		}
	}
}

// raw copies the valid pixels of x to the start of b.buf, p+1 values a
// pixel: the pixel and a 1, so that x is read from memory once and its sums
// come out of the same product as its co-moments (comomentBLAS). With
// shifted, each pixel is stored less the first valid one, r, and b.mean is
// set to r; without, b.inexact is set if any value is not an integer. It
// sets the extremes and returns the number k of pixels copied.
func (b *block) raw(x []float64, valid []bool, shifted bool) int {
	p := len(b.mean)
	ref, lo, hi := b.mean, b.min, b.max
	k := 0
	for i := range len(x) / p {
		if valid != nil && !valid[i] {
			continue
		}
		px := x[i*p : i*p+p]
		if k == 0 {
			copy(ref, px)
			copy(lo, px)
			copy(hi, px)
		}
		c := b.buf[k*(p+1) : k*(p+1)+p+1]
		c[p] = 1
		c, r, lo, hi := c[:len(px)], ref[:len(px)], lo[:len(px)], hi[:len(px)]
		if shifted {
			for j, v := range px {
				c[j] = v - r[j]
				if v < lo[j] {
					lo[j] = v
				} else if v > hi[j] {
					hi[j] = v
				}
			}
		} else {
			for j, v := range px {
				c[j] = v
				if float64(int64(v)) != v {
					b.inexact = true
				}
				if v < lo[j] {
					lo[j] = v
				} else if v > hi[j] {
					hi[j] = v
				}
			}
		}
		k++
	}
	b.n = float64(k)
	return k
}

// putRaw stores the difference d = x − y as pixel k of the chunk in b.buf,
// as raw does for a pixel: with shifted, less the chunk's first difference
// (which k = 0 sets in b.mean); without, setting b.inexact if d is not an
// integer. The first one, k = 0, also sets the extremes. It returns k + 1.
func (b *block) putRaw(k int, x, y []float64, shifted bool) int {
	p := len(b.mean)
	ref, lo, hi := b.mean[:len(x)], b.min[:len(x)], b.max[:len(x)]
	y = y[:len(x)]
	c := b.buf[k*(p+1) : k*(p+1)+p+1]
	c[p] = 1
	c = c[:len(x)]
	if k == 0 {
		for j, v := range x {
			d := v - y[j]
			ref[j], lo[j], hi[j] = d, d, d
		}
	}
	if shifted {
		for j, v := range x {
			d := v - y[j]
			c[j] = d - ref[j]
			if d < lo[j] {
				lo[j] = d
			} else if d > hi[j] {
				hi[j] = d
			}
		}
		return k + 1
	}
	for j, v := range x {
		d := v - y[j]
		c[j] = d
		if float64(int64(d)) != d {
			b.inexact = true
		}
		if d < lo[j] {
			lo[j] = d
		} else if d > hi[j] {
			hi[j] = d
		}
	}
	return k + 1
}

// addRaw adds the k unshifted pixels that raw or putRaw left in a.blk: to
// the exact sums when every value is an integer within ±MaxExact, which
// makes the product exact; otherwise a becomes an ordinary accumulator and
// the chunk, shifted by its first pixel, takes the ordinary path.
func (a *Accumulator) addRaw(k int) {
	b := a.blk
	b.n = float64(k)
	ok := !b.inexact
	for j := range a.p {
		ok = ok && b.min[j] >= -MaxExact && b.max[j] <= MaxExact
	}
	if ok {
		b.product(k)
		a.addExact(k)
		return
	}
	a.dropExact()
	b.shift(k)
	b.comomentBLAS(k)
	a.fold(b.n, b.mean, b.com, b.min, b.max)
}

// shift subtracts the first of the k unshifted pixels in b.buf, r, from
// each of them and sets b.mean to r, ready for comomentBLAS.
func (b *block) shift(k int) {
	p, q := len(b.mean), len(b.mean)+1
	ref := b.mean
	copy(ref, b.buf[:p])
	for i := 0; i < k*q; i += q {
		px := b.buf[i : i+p]
		px = px[:len(ref)]
		for j, r := range ref {
			px[j] -= r
		}
	}
}

// comomentBLAS sets b.mean and the upper triangle of b.com to the mean and
// co-moment of the k pixels that raw or putRaw (shifted) or shift left in b.buf,
// less r = b.mean. One blas64.Syrk of the k×(p+1) matrix [C 1], C the shifted pixels,
// gives CᵀC, the sums s = Cᵀ1 and k, and
//
//	mean = r + s/k,  M = CᵀC − s·sᵀ/k.
//
// Where the correction would cancel more than cancelBits bits of a band's
// CᵀC (the first pixel far from the mean, in units of the band's spread),
// the chunk is shifted again by s/k, now centred to rounding, and the
// product taken once more. The mean is clamped to [min, max], which it can
// leave only through rounding; a constant band's shifted values are exactly
// zero, so its mean is exact and its co-moment exactly zero.
func (b *block) comomentBLAS(k int) {
	p := len(b.mean)
	q := p + 1
	c, aug, s := b.buf[:k*q], b.aug, b.aug[p:]
	for pass := 0; ; pass++ {
		b.product(k)
		if pass > 0 || !b.cancels(k) {
			break
		}
		for i := 0; i < len(c); i += q {
			px := c[i : i+p]
			for j := range px {
				px[j] -= s[j*q] / b.n
			}
		}
		for j := range p {
			b.mean[j] += s[j*q] / b.n
		}
	}
	for i := range p {
		si := s[i*q] / b.n
		row, arow, sr := b.com[i*p+i:i*p+p], aug[i*q+i:i*q+p], s[i*q:]
		for j := range row {
			row[j] = arow[j] - si*sr[j*q]
		}
		b.mean[i] = min(max(b.mean[i]+si, b.min[i]), b.max[i])
	}
}

// product sets the upper triangle of b.aug to [C 1]ᵀ[C 1] for the k
// pixels of p+1 values in b.buf, with one blas64.Syrk.
func (b *block) product(k int) {
	q := len(b.mean) + 1
	blas64.Syrk(blas.Trans, 1, blas64.General{Rows: k, Cols: q, Stride: q, Data: b.buf[:k*q]}, 0,
		blas64.Symmetric{N: q, Stride: q, Uplo: blas.Upper, Data: b.aug})
}

// cancels reports whether the shift correction s_j²/k of some band j would
// cancel more than cancelBits bits of its CᵀC in b.aug.
func (b *block) cancels(k int) bool {
	p := len(b.mean)
	q := p + 1
	for j := range p {
		sj := b.aug[j*q+p]
		if sj*sj/float64(k) > b.aug[j*q+j]*(1-1.0/(1<<cancelBits)) && sj != 0 {
			return true
		}
	}
	return false
}
