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

	// blasChunkBytes bounds the centred copy of a chunk that the BLAS path
	// hands to Syrk, and so the scratch memory of an Accumulator.
	blasChunkBytes = 2 << 20
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
	buf      []float64 // fused path: two centred pixels; BLAS path: a centred chunk.
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
// The pixels are processed in chunks of a few thousand. Each chunk's mean is
// computed first, then the co-moment of the chunk centred on that mean, and the
// chunk is folded into the running state as in Merge. For more than a handful
// of bands, or whenever a BLAS other than gonum's native one is registered
// with blas64.Use, the co-moment of a chunk is computed with blas64.Syrk.
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
	if a.blk == nil {
		a.blk = newBlock(p)
	}
	b := a.blk
	chunk := fusedChunk
	if !fused {
		chunk = max(blasChunkBytes/(8*p), 64)
	}
	n := len(x) / p
	if size := max(min(chunk, n)*p, 2*p); len(b.buf) < size {
		b.buf = make([]float64, size)
	}
	for start := 0; start < n; start += chunk {
		end := min(start+chunk, n)
		xs := x[start*p : end*p]
		var vs []bool
		if valid != nil {
			vs = valid[start:end]
		}
		var gather []float64
		if !fused {
			gather = b.buf
		}
		if !b.stats(xs, vs, gather) {
			continue
		}
		if fused {
			b.comomentFused(xs, vs)
		} else {
			b.comomentBLAS()
		}
		a.fold(b.n, b.mean, b.com, b.min, b.max)
	}
}

// stats sets the count, mean, minimum and maximum of the valid pixels in x
// and reports whether there were any. If gather is not nil the valid pixels
// are also copied to its start, so that x is read from memory only once.
//
// The mean is clamped to [min, max], which it can leave only through
// rounding; this makes the mean of a constant band exact and so its centred
// values and co-moment exactly zero.
func (b *block) stats(x []float64, valid []bool, gather []float64) bool {
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
		if gather != nil {
			copy(gather[k*p:k*p+p], px)
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

// comomentBLAS centres the b.n pixels gathered at the start of b.buf on
// b.mean, in place, and sets the upper triangle of b.com to CᵀC for the
// resulting k×p matrix C with blas64.Syrk.
func (b *block) comomentBLAS() {
	p := len(b.mean)
	k := int(b.n)
	c := b.buf[:k*p]
	for i := 0; i < len(c); i += p {
		px := c[i : i+p]
		for j, m := range b.mean {
			px[j] -= m
		}
	}
	blas64.Syrk(blas.Trans, 1,
		blas64.General{Rows: k, Cols: p, Stride: p, Data: c}, 0,
		blas64.Symmetric{N: p, Stride: p, Uplo: blas.Upper, Data: b.com})
}
