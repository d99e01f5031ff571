//go:build cgo

// The integer co-moment kernel of kernel.go on x86-64: AVX2 and AVX-512
// VNNI paths, each compiled for its instruction set with a function-level
// target attribute, so that the package builds and runs on any x86-64 CPU;
// Go chooses the path at run time from the CPU's features.

#include <immintrin.h>
#include <stddef.h>
#include <stdint.h>

#include "kernel_amd64.h"

// HREDUCE applies op (a minimum or maximum of int16 or int32 lanes) across
// the lanes of the 256-bit v: its two halves against each other, then the
// halves of the result, down to lane 0 (for int16 lanes, narrow, one step
// more); it is the value of lane 0's 32 bits.
#define HREDUCE(v, op, narrow)                                                                                      \
	({                                                                                                              \
		__m128i m_ = op(_mm256_castsi256_si128(v), _mm256_extracti128_si256(v, 1));                                 \
		m_ = op(m_, _mm_shuffle_epi32(m_, 0x4E));                                                                   \
		m_ = op(m_, _mm_shuffle_epi32(m_, 0xB1));                                                                   \
		if (narrow) {                                                                                               \
			m_ = op(m_, _mm_srli_epi32(m_, 16));                                                                    \
		}                                                                                                           \
		_mm_cvtsi128_si32(m_);                                                                                      \
	})

// hmin16 and hmax16 return the least and greatest of the sixteen int16
// lanes of v; hmin32 and hmax32 of the eight int32 lanes.
__attribute__((target("avx2"))) static inline int32_t hmin16(__m256i v) { return (int16_t)HREDUCE(v, _mm_min_epi16, 1); }
__attribute__((target("avx2"))) static inline int32_t hmax16(__m256i v) { return (int16_t)HREDUCE(v, _mm_max_epi16, 1); }
__attribute__((target("avx2"))) static inline int32_t hmin32(__m256i v) { return HREDUCE(v, _mm_min_epi32, 0); }
__attribute__((target("avx2"))) static inline int32_t hmax32(__m256i v) { return HREDUCE(v, _mm_max_epi32, 0); }

// extremes16 sets *lo and *hi to the least and greatest of the n values
// x[k] with valid[k], or with off > 0 of the differences x[k+off] − x[k],
// and lo > hi when there is none: sixteen int16 lanes a step, invalid
// values replaced by the identity of min and max, differences formed with
// saturating subtraction, which gives every difference within int16's
// range exactly. Where an extreme difference is at one of int16's limits,
// one may have been saturated, and the int32 loop forms them all again.
__attribute__((target("avx2"))) static void extremes16(const int16_t *x, ptrdiff_t off, ptrdiff_t n,
                                                       const uint8_t *valid, int32_t *lo, int32_t *hi) {
	const __m256i top = _mm256_set1_epi16(INT16_MAX), bottom = _mm256_set1_epi16(INT16_MIN);
	__m256i vl = top, vh = bottom;
	ptrdiff_t k = 0;
	for (; k + 16 <= n; k += 16) {
		__m256i v = _mm256_loadu_si256((const __m256i *)(x + k));
		if (off > 0) {
			v = _mm256_subs_epi16(_mm256_loadu_si256((const __m256i *)(x + k + off)), v);
		}
		__m256i ok = _mm256_cvtepu8_epi16(_mm_loadu_si128((const __m128i *)(valid + k)));
		ok = _mm256_sub_epi16(_mm256_setzero_si256(), ok); // 0 or all ones
		vl = _mm256_min_epi16(vl, _mm256_blendv_epi8(top, v, ok));
		vh = _mm256_max_epi16(vh, _mm256_blendv_epi8(bottom, v, ok));
	}
	int32_t a = hmin16(vl), b = hmax16(vh);
	ptrdiff_t from = k;
	if (a > b || (off > 0 && (a <= INT16_MIN || b >= INT16_MAX))) {
		from = a > b ? k : 0; // no valid value yet, or one perhaps saturated
		a = INT32_MAX, b = INT32_MIN;
	}
	for (k = from; k < n; k++) {
		if (valid[k]) {
			int32_t v = off > 0 ? (int32_t)x[k + off] - x[k] : x[k];
			a = v < a ? v : a;
			b = v > b ? v : b;
		}
	}
	*lo = a;
	*hi = b;
}

// bf_extremes sets lo[b] and hi[b] to the least and greatest value of band
// b over the pixels k < n with valid[k]: x[b*ld+k], or with off > 0 the
// difference x[b*ld+k+off] - x[b*ld+k]. lo > hi for a band when no pixel is
// valid. It returns the number of valid pixels.
__attribute__((target("avx2"))) ptrdiff_t bf_extremes(const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t n,
                                                      ptrdiff_t off, const uint8_t *valid, int32_t *lo,
                                                      int32_t *hi) {
	ptrdiff_t count = 0;
	for (ptrdiff_t k = 0; k < n; k++) {
		count += valid[k];
	}
	for (int b = 0; b < p; b++) {
		const int16_t *xb = x + b * ld;
		extremes16(xb, off, n, valid, lo + b, hi + b);
	}
	return count;
}

// pack writes pixels k0 .. k0+cn-1 into the chunk s of row length cw: row b
// (b < p) holds the values of band b less centre[b], row p a 1, both zero
// where the pixel is not valid and beyond cn. Rows from p+1 on are not
// touched (they stay zero). Every valid value less its centre fits int16
// (the caller checked); invalid ones are masked after the subtraction.
__attribute__((target("avx2"))) static void pack(const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t k0, int cn,
                                                 ptrdiff_t off, const uint8_t *valid, const int32_t *centre,
                                                 int16_t *s, int cw) {
	const uint8_t *v = valid + k0;
	int cols = (cn + 31) & ~31;
	for (int b = 0; b < p; b++) {
		const int16_t *xb = x + b * ld + k0;
		int16_t *d = s + (ptrdiff_t)b * cw;
		int32_t c = centre[b];
		if (off == 0) {
			for (int k = 0; k < cn; k++) {
				int16_t t = (int16_t)(xb[k] - c);
				d[k] = t & (int16_t)-(int16_t)v[k];
			}
		} else {
			for (int k = 0; k < cn; k++) {
				int16_t t = (int16_t)((int32_t)xb[k + off] - xb[k] - c);
				d[k] = t & (int16_t)-(int16_t)v[k];
			}
		}
		for (int k = cn; k < cols; k++) {
			d[k] = 0;
		}
	}
	int16_t *d = s + (ptrdiff_t)p * cw;
	for (int k = 0; k < cn; k++) {
		d[k] = v[k];
	}
	for (int k = cn; k < cols; k++) {
		d[k] = 0;
	}
}

// hsum256 returns the sum of the eight int32 lanes of v, in int64.
__attribute__((target("avx2"))) static inline int64_t hsum256(__m256i v) {
	__m256i w = _mm256_add_epi64(_mm256_cvtepi32_epi64(_mm256_castsi256_si128(v)),
	                             _mm256_cvtepi32_epi64(_mm256_extracti128_si256(v, 1)));
	__m128i t = _mm_add_epi64(_mm256_castsi256_si128(w), _mm256_extracti128_si256(w, 1));
	return _mm_cvtsi128_si64(t) + _mm_extract_epi64(t, 1);
}

// half256 adds to t[0..7] the products of rows a0, a1 with rows b0..b3 of
// one chunk over steps of 16 pixels: vpmaddwd into int32 lanes, each lane
// taking two products a step, flushed into int64 every lim steps.
__attribute__((target("avx2"))) static void half256(const int16_t *a0, const int16_t *a1, const int16_t *b,
                                                    ptrdiff_t cw, int steps, int lim, int64_t *t) {
	const int16_t *b0 = b, *b1 = b + cw, *b2 = b + 2 * cw, *b3 = b + 3 * cw;
	for (int k = 0; k < steps;) {
		int e = steps - k <= lim ? steps : k + lim;
		__m256i c0 = _mm256_setzero_si256(), c1 = c0, c2 = c0, c3 = c0, c4 = c0, c5 = c0, c6 = c0, c7 = c0;
		for (; k < e; k++) {
			ptrdiff_t o = 16 * (ptrdiff_t)k;
			__m256i x0 = _mm256_loadu_si256((const __m256i *)(a0 + o));
			__m256i x1 = _mm256_loadu_si256((const __m256i *)(a1 + o));
			__m256i y = _mm256_loadu_si256((const __m256i *)(b0 + o));
			c0 = _mm256_add_epi32(c0, _mm256_madd_epi16(x0, y));
			c4 = _mm256_add_epi32(c4, _mm256_madd_epi16(x1, y));
			y = _mm256_loadu_si256((const __m256i *)(b1 + o));
			c1 = _mm256_add_epi32(c1, _mm256_madd_epi16(x0, y));
			c5 = _mm256_add_epi32(c5, _mm256_madd_epi16(x1, y));
			y = _mm256_loadu_si256((const __m256i *)(b2 + o));
			c2 = _mm256_add_epi32(c2, _mm256_madd_epi16(x0, y));
			c6 = _mm256_add_epi32(c6, _mm256_madd_epi16(x1, y));
			y = _mm256_loadu_si256((const __m256i *)(b3 + o));
			c3 = _mm256_add_epi32(c3, _mm256_madd_epi16(x0, y));
			c7 = _mm256_add_epi32(c7, _mm256_madd_epi16(x1, y));
		}
		t[0] += hsum256(c0), t[1] += hsum256(c1), t[2] += hsum256(c2), t[3] += hsum256(c3);
		t[4] += hsum256(c4), t[5] += hsum256(c5), t[6] += hsum256(c6), t[7] += hsum256(c7);
	}
}

// block256 adds to t (4×4, row-major) the products of rows a..a+3 with rows
// b..b+3 (of stride cw) over their first cols values, in two halves of 2×4
// so that the 8 accumulators and 6 loaded vectors fit AVX2's 16 registers.
__attribute__((target("avx2"))) static void block256(const int16_t *a, const int16_t *b, ptrdiff_t cw, int cols,
                                                     int lim, int64_t *t) {
	int steps = cols / 16;
	half256(a, a + cw, b, cw, steps, lim, t);
	half256(a + 2 * cw, a + 3 * cw, b, cw, steps, lim, t + 8);
}

#define AVX512 __attribute__((target("avx512f,avx512bw,avx512vnni")))

// widen512 returns the sums of the int32 lanes 2i and 2i+1 of v in the
// eight int64 lanes: shifts, which leave the shuffle port to sum512.
AVX512 static inline __m512i widen512(__m512i v) {
	return _mm512_add_epi64(_mm512_srai_epi64(_mm512_slli_epi64(v, 32), 32), _mm512_srai_epi64(v, 32));
}

// pairs512 returns, in each 128-bit block k, the sums of lanes 2k and 2k+1
// of a and of b (int64).
AVX512 static inline __m512i pairs512(__m512i a, __m512i b) {
	return _mm512_add_epi64(_mm512_unpacklo_epi64(a, b), _mm512_unpackhi_epi64(a, b));
}

// halves512 returns the sums of the 128-bit blocks 0 and 1, and 2 and 3,
// of a, then of b: vshufi64x2 0x88 picks blocks 0 and 2 of each, 0xDD
// blocks 1 and 3.
AVX512 static inline __m512i halves512(__m512i a, __m512i b) {
	return _mm512_add_epi64(_mm512_shuffle_i64x2(a, b, 0x88), _mm512_shuffle_i64x2(a, b, 0xDD));
}

// sum512 adds to t[i] the sum of the sixteen int32 lanes of c[i], for i <
// 16, in int64: the sixteen vectors are reduced together, a transposition
// of sums, rather than each on its own.
AVX512 static inline void sum512(const __m512i c[16], int64_t *t) {
	__m512i v[8], u[4];
	// Block k of v[i]: c[2i] and c[2i+1] over lanes 4k .. 4k+3.
	for (int i = 0; i < 8; i++) {
		v[i] = pairs512(widen512(c[2 * i]), widen512(c[2 * i + 1]));
	}
	// Blocks of u[i]: c[4i] and c[4i+1] over lanes 0-7, then 8-15; c[4i+2]
	// and c[4i+3] likewise.
	for (int i = 0; i < 4; i++) {
		u[i] = halves512(v[2 * i], v[2 * i + 1]);
	}
	// Lanes of r0: the sums of c[0] .. c[7]; of r1: c[8] .. c[15].
	__m512i r0 = halves512(u[0], u[1]), r1 = halves512(u[2], u[3]);
	_mm512_storeu_si512(t, _mm512_add_epi64(_mm512_loadu_si512(t), r0));
	_mm512_storeu_si512(t + 8, _mm512_add_epi64(_mm512_loadu_si512(t + 8), r1));
}

// DP adds the products of x and y into c in place. Written with
// _mm512_dpwssd_epi32, GCC 12 copied the accumulators around every
// vpdpwssd (62 register moves in the loop of block512); in place the loop
// is its 8 loads and 16 vpdpwssd (BenchmarkKernel, p = 224: 5.6 ms a tile
// of 16,384 pixels before, 4.65 after).
#define DP(c, x, y) ({ __asm__("vpdpwssd %2, %1, %0" : "+v"(c) : "v"(x), "v"(y)); })

// block512 adds to t (4×4, row-major) the products of rows a..a+3 with rows
// b..b+3 (of stride cw) over their first cols values in steps of 32: vpdpwssd into 16 int32 accumulators (24
// of AVX-512's 32 registers with the 8 loaded rows), each lane taking two
// products a step, flushed into int64 every lim steps.
__attribute__((target("avx512f,avx512bw,avx512vnni"))) static void block512(const int16_t *a, const int16_t *b,
                                                                            ptrdiff_t cw, int cols, int lim,
                                                                            int64_t *t) {
	int steps = cols / 32;
	for (int k = 0; k < steps;) {
		int e = steps - k <= lim ? steps : k + lim;
		__m512i c00 = _mm512_setzero_si512(), c01 = c00, c02 = c00, c03 = c00, c10 = c00, c11 = c00, c12 = c00,
		        c13 = c00, c20 = c00, c21 = c00, c22 = c00, c23 = c00, c30 = c00, c31 = c00, c32 = c00, c33 = c00;
		for (; k < e; k++) {
			ptrdiff_t o = 32 * (ptrdiff_t)k;
			__m512i x0 = _mm512_loadu_si512(a + o), x1 = _mm512_loadu_si512(a + cw + o);
			__m512i x2 = _mm512_loadu_si512(a + 2 * cw + o), x3 = _mm512_loadu_si512(a + 3 * cw + o);
			__m512i y0 = _mm512_loadu_si512(b + o), y1 = _mm512_loadu_si512(b + cw + o);
			__m512i y2 = _mm512_loadu_si512(b + 2 * cw + o), y3 = _mm512_loadu_si512(b + 3 * cw + o);
			DP(c00, x0, y0), DP(c01, x0, y1), DP(c02, x0, y2), DP(c03, x0, y3);
			DP(c10, x1, y0), DP(c11, x1, y1), DP(c12, x1, y2), DP(c13, x1, y3);
			DP(c20, x2, y0), DP(c21, x2, y1), DP(c22, x2, y2), DP(c23, x2, y3);
			DP(c30, x3, y0), DP(c31, x3, y1), DP(c32, x3, y2), DP(c33, x3, y3);
		}
		const __m512i c[16] = {c00, c01, c02, c03, c10, c11, c12, c13, c20, c21, c22, c23, c30, c31, c32, c33};
		sum512(c, t);
	}
}

// squares256 returns the largest sum of squares that one int32 lane of
// the AVX2 path takes over the first cols values of row z (cols a multiple
// of 32): vpmaddwd's lane l of a step of 16 values multiplies values 2l
// and 2l+1. Each vpmaddwd of z with itself is below 2³¹ (|z| ≤ 32767) and
// is summed in int64.
__attribute__((target("avx2"))) static int64_t squares256(const int16_t *z, int cols) {
	__m256i q0 = _mm256_setzero_si256(), q1 = q0;
	for (int k = 0; k < cols; k += 16) {
		__m256i v = _mm256_loadu_si256((const __m256i *)(z + k));
		__m256i m = _mm256_madd_epi16(v, v);
		q0 = _mm256_add_epi64(q0, _mm256_cvtepi32_epi64(_mm256_castsi256_si128(m)));
		q1 = _mm256_add_epi64(q1, _mm256_cvtepi32_epi64(_mm256_extracti128_si256(m, 1)));
	}
	int64_t q[8], most = 0;
	_mm256_storeu_si256((__m256i *)q, q0);
	_mm256_storeu_si256((__m256i *)(q + 4), q1);
	for (int l = 0; l < 8; l++) {
		most = q[l] > most ? q[l] : most;
	}
	return most;
}

// squares512 is squares256 for the AVX-512 path, whose lane l of a step of
// 32 values multiplies values 2l and 2l+1: the even lanes' sums widened by
// shifts, the odd ones' on their own.
AVX512 static int64_t squares512(const int16_t *z, int cols) {
	__m512i even = _mm512_setzero_si512(), odd = even;
	for (int k = 0; k < cols; k += 32) {
		__m512i v = _mm512_loadu_si512(z + k);
		__m512i m = _mm512_madd_epi16(v, v);
		even = _mm512_add_epi64(even, _mm512_srai_epi64(_mm512_slli_epi64(m, 32), 32));
		odd = _mm512_add_epi64(odd, _mm512_srai_epi64(m, 32));
	}
	int64_t q[16], most = 0;
	_mm512_storeu_si512(q, even);
	_mm512_storeu_si512(q + 8, odd);
	for (int l = 0; l < 16; l++) {
		most = q[l] > most ? q[l] : most;
	}
	return most;
}

// block_squares returns the largest sum of squares of an int32 lane of the
// path isa over the first cols values of the four rows from z.
static int64_t block_squares(int isa, const int16_t *z, int cw, int cols) {
	int64_t most = 0;
	for (int r = 0; r < 4; r++) {
		const int16_t *row = z + (ptrdiff_t)r * cw;
		int64_t q = isa == BF_AVX512VNNI ? squares512(row, cols) : squares256(row, cols);
		most = q > most ? q : most;
	}
	return most;
}

// worth_squares reports whether the lane bound of chunk_products is worth
// forming for a block whose lanes the magnitudes' bound lets take lim of
// the chunk's steps: whether the additions into int64 it may save, each
// about 110 instructions, outweigh the sums of squares of the block's rows
// (about 7 instructions a step for each of 4 rows, once a block row of nb
// blocks, for both blocks of a pair). For few bands they rarely do.
static inline int worth_squares(int lim, int steps, int nb) {
	int saved = (steps - 1) / lim; // the additions beyond the chunk's last
	return saved > 0 && 110 * saved * nb > 56 * steps;
}

// chunk_products adds to acc (qb×qb, row-major) the products of the rows
// of one chunk s (qb rows of cw values) over their first cn values (the
// rest up to a multiple of 32 zero) in 4×4 blocks of band pairs, the upper
// triangle of blocks only. A block's int32 lanes are added into int64
// every lim[bi*nb+bj] steps, the bound of the values' magnitudes, or where
// that is fewer than the chunk's steps, once at its end if they cannot
// overflow before: if, with Qᵢ the largest sum of squares of a lane of a
// row of block bi and Qⱼ of block bj, Qᵢ·Qⱼ ≤ (2³¹ − 1)², since by the
// Cauchy–Schwarz inequality no partial sum of a lane's products exceeds
// √(Qᵢ·Qⱼ). Typical data sit far inside their range, where the second
// bound holds for a whole chunk and the first would add the lanes several
// times (the sums of pairs of values of AddInt16Window's paired path
// above all, whose magnitudes are twice those of the values).
static void chunk_products(int isa, const int16_t *s, int qb, int cw, int cn, const int32_t *lim, int64_t *acc) {
	int nb = qb / 4, cols = (cn + 31) & ~31, steps = cols / (isa == BF_AVX512VNNI ? 32 : 16);
	int64_t bq[nb]; // a block's largest lane sum of squares, −1 until needed
	for (int bi = 0; bi < nb; bi++) {
		bq[bi] = -1;
	}
	const unsigned __int128 most = (unsigned __int128)INT32_MAX * INT32_MAX;
	for (int bi = 0; bi < nb; bi++) {
		for (int bj = bi; bj < nb; bj++) {
			int64_t t[16] = {0};
			const int16_t *a = s + (ptrdiff_t)(4 * bi) * cw, *b = s + (ptrdiff_t)(4 * bj) * cw;
			int l = lim[bi * nb + bj];
			if (worth_squares(l, steps, nb)) {
				bq[bi] = bq[bi] < 0 ? block_squares(isa, a, cw, cols) : bq[bi];
				bq[bj] = bq[bj] < 0 ? block_squares(isa, b, cw, cols) : bq[bj];
				l = (unsigned __int128)bq[bi] * (uint64_t)bq[bj] <= most ? steps : l;
			}
			if (isa == BF_AVX512VNNI) {
				block512(a, b, cw, cols, l, t);
			} else {
				block256(a, b, cw, cols, l, t);
			}
			for (int r = 0; r < 4; r++) {
				int64_t *row = acc + (ptrdiff_t)(4 * bi + r) * qb + 4 * bj;
				row[0] += t[4 * r], row[1] += t[4 * r + 1], row[2] += t[4 * r + 2], row[3] += t[4 * r + 3];
			}
		}
	}
}

// chunk_width returns the width of the chunks n values are cut into: as
// few chunks as rows of cw values allow, of equal width rounded up to 32
// (the last one narrower), so that no chunk is a small remainder whose
// blocks pay the adding of their lanes into int64 for a few steps.
static int chunk_width(ptrdiff_t n, int cw) {
	ptrdiff_t chunks = (n + cw - 1) / cw;
	ptrdiff_t w = chunks > 0 ? ((n + chunks - 1) / chunks + 31) & ~31 : cw;
	return w < cw ? (int)w : cw;
}

void bf_products(int isa, const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t n, ptrdiff_t off, const uint8_t *valid,
                 const int32_t *centre, const int32_t *lim, int16_t *s, int cw, int64_t *acc) {
	int qb = (p + 4) & ~3, width = chunk_width(n, cw);
	for (ptrdiff_t k0 = 0; k0 < n; k0 += width) {
		int cn = n - k0 < width ? (int)(n - k0) : width;
		pack(x, ld, p, k0, cn, off, valid, centre, s, cw);
		chunk_products(isa, s, qb, cw, cn, lim, acc);
	}
}

// pair_row writes the len slots of one row of the paired view from xr, the
// row's pixel of the first slot: for slot t, with a = xr[2t], b =
// xr[2t+1] and c = xr[2t+2], the sum a + b less cs into ds[t] and the
// difference b − a less cd into dd[t], both zero unless fp[t], and the
// next difference c − b less cd into dn[t], zero unless fn[t]. Every
// centred value that is kept fits int16 (the caller planned the centres),
// so it is formed in int32 and narrowed without saturating. end bounds the
// values that may be read: c is read for a slot only below it or where
// fn[t] says it is in the row.
__attribute__((target("avx2"))) static void pair_row(const int16_t *xr, const int16_t *end, int len, const uint8_t *fp,
                                                     const uint8_t *fn, int32_t cs, int32_t cd, int16_t *ds,
                                                     int16_t *dd, int16_t *dn) {
	// vpmaddwd against (1, 1) gives a + b in each int32 lane, against
	// (−1, 1) gives b − a: the pairs are the lanes' two int16 halves.
	const __m256i ones = _mm256_set1_epi16(1), step = _mm256_set1_epi32(0x0001FFFF);
	const __m256i vcs = _mm256_set1_epi32(cs), vcd = _mm256_set1_epi32(cd), zero = _mm256_setzero_si256();
	int t = 0;
	// Narrow two vectors of eight int32 lanes into sixteen int16 in order
	// (vpackssdw interleaves the 128-bit halves; vpermq restores them) and
	// mask them with the flags f.
#define NARROW(lo, hi, f) _mm256_and_si256(_mm256_permute4x64_epi64(_mm256_packs_epi32(lo, hi), 0xD8), f)
	for (; t + 16 <= len && xr + 2 * t + 32 < end; t += 16) {
		const int16_t *q = xr + 2 * t;
		__m256i v0 = _mm256_loadu_si256((const __m256i *)q), v1 = _mm256_loadu_si256((const __m256i *)(q + 16));
		__m256i u0 = _mm256_loadu_si256((const __m256i *)(q + 1)), u1 = _mm256_loadu_si256((const __m256i *)(q + 17));
		__m256i mp = _mm256_sub_epi16(zero, _mm256_cvtepu8_epi16(_mm_loadu_si128((const __m128i *)(fp + t))));
		__m256i mn = _mm256_sub_epi16(zero, _mm256_cvtepu8_epi16(_mm_loadu_si128((const __m128i *)(fn + t))));
		__m256i s0 = _mm256_sub_epi32(_mm256_madd_epi16(v0, ones), vcs);
		__m256i s1 = _mm256_sub_epi32(_mm256_madd_epi16(v1, ones), vcs);
		__m256i d0 = _mm256_sub_epi32(_mm256_madd_epi16(v0, step), vcd);
		__m256i d1 = _mm256_sub_epi32(_mm256_madd_epi16(v1, step), vcd);
		__m256i n0 = _mm256_sub_epi32(_mm256_madd_epi16(u0, step), vcd);
		__m256i n1 = _mm256_sub_epi32(_mm256_madd_epi16(u1, step), vcd);
		_mm256_storeu_si256((__m256i *)(ds + t), NARROW(s0, s1, mp));
		_mm256_storeu_si256((__m256i *)(dd + t), NARROW(d0, d1, mp));
		_mm256_storeu_si256((__m256i *)(dn + t), NARROW(n0, n1, mn));
	}
#undef NARROW
	for (; t < len; t++) {
		int32_t a = xr[2 * t], b = xr[2 * t + 1];
		int16_t m = (int16_t)-(int16_t)fp[t];
		ds[t] = (int16_t)(a + b - cs) & m;
		dd[t] = (int16_t)(b - a - cd) & m;
		dn[t] = fn[t] ? (int16_t)((int32_t)xr[2 * t + 2] - b - cd) : 0;
	}
}

// span returns the slots from k0 + t on that lie in one row of the paired
// view v, at most cn − t of them, and sets *xr to band b's pixel of the
// first of them.
static inline int span(const bf_pairs *v, int b, ptrdiff_t k0, ptrdiff_t t, ptrdiff_t cn, const int16_t **xr) {
	ptrdiff_t k = k0 + t, r = k / v->m, j = k % v->m;
	*xr = v->x + b * v->ld + r * v->w + 2 * j;
	return (int)(v->m - j < cn - t ? v->m - j : cn - t);
}

// pack_pairs writes slots k0 .. k0+cn-1 of the paired view (bf_pairs) into
// the three chunks of row length cw at s: the sums, the differences and
// the next differences, each band less its centre, with the flags in row p
// of each and zeros beyond cn.
static void pack_pairs(const bf_pairs *v, ptrdiff_t k0, int cn, int16_t *s, int cw) {
	int p = v->p;
	ptrdiff_t chunk = (ptrdiff_t)((p + 4) & ~3) * cw;
	int16_t *ss = s, *sd = s + chunk, *sn = s + 2 * chunk;
	const int16_t *end = v->x + p * v->ld;
	int cols = (cn + 31) & ~31;
	for (int b = 0; b < p; b++) {
		ptrdiff_t o = (ptrdiff_t)b * cw;
		for (ptrdiff_t t = 0, len; t < cn; t += len) {
			const int16_t *xr;
			len = span(v, b, k0, t, cn, &xr);
			pair_row(xr, end, len, v->fp + k0 + t, v->fn + k0 + t, v->centre[b], v->centre[p + b], ss + o + t,
			         sd + o + t, sn + o + t);
		}
		for (int t = cn; t < cols; t++) {
			ss[o + t] = sd[o + t] = sn[o + t] = 0;
		}
	}
	ptrdiff_t o = (ptrdiff_t)p * cw;
	for (int t = 0; t < cols; t++) {
		ss[o + t] = sd[o + t] = t < cn ? v->fp[k0 + t] : 0;
		sn[o + t] = t < cn ? v->fn[k0 + t] : 0;
	}
}

void bf_pairs_products(int isa, bf_pairs v, ptrdiff_t k0, ptrdiff_t n, int16_t *s, int cw, int64_t *acc) {
	int qb = (v.p + 4) & ~3, nb = qb / 4;
	ptrdiff_t chunk = (ptrdiff_t)qb * cw, qq = (ptrdiff_t)qb * qb;
	int width = chunk_width(n, cw);
	for (ptrdiff_t t0 = 0; t0 < n; t0 += width) {
		int cn = n - t0 < width ? (int)(n - t0) : width;
		pack_pairs(&v, k0 + t0, cn, s, cw);
		chunk_products(isa, s, qb, cw, cn, v.lim, acc);
		chunk_products(isa, s + chunk, qb, cw, cn, v.lim + nb * nb, acc + qq);
		chunk_products(isa, s + 2 * chunk, qb, cw, cn, v.lim + nb * nb, acc + 2 * qq);
	}
}

// band_extremes sets e[0], e[1] to the least and greatest value of band b
// over the valid pairs of the n slots of v (greatest below least where
// there is none), and e[2], e[3] to those of their differences and of the
// valid next differences: the values in int16 lanes, the differences in
// int32 lanes from vpmaddwd (as in pair_row), each pair's flag widened to
// its 32-bit lane; the lanes are reduced once a band, the slots of a row
// that no whole step covers taken one by one.
__attribute__((target("avx2"))) static void band_extremes(const bf_pairs *v, int b, ptrdiff_t n, int32_t *e) {
	const __m256i step = _mm256_set1_epi32(0x0001FFFF), zero = _mm256_setzero_si256();
	const __m256i top16 = _mm256_set1_epi16(INT16_MAX), bot16 = _mm256_set1_epi16(INT16_MIN);
	const __m256i top32 = _mm256_set1_epi32(INT32_MAX), bot32 = _mm256_set1_epi32(INT32_MIN);
	const int16_t *end = v->x + v->p * v->ld;
	__m256i vl = top16, vh = bot16, dl = top32, dh = bot32;
	int32_t lo = INT32_MAX, hi = INT32_MIN, dlo = INT32_MAX, dhi = INT32_MIN;
#define FLAGS(f) _mm256_sub_epi32(zero, _mm256_cvtepu8_epi32(_mm_loadl_epi64((const __m128i *)(f))))
#define WIDEN(l, h, x, m, top, bot, mn, mx) (l = mn(l, _mm256_blendv_epi8(top, x, m)), h = mx(h, _mm256_blendv_epi8(bot, x, m)))
	for (ptrdiff_t k = 0, len; k < n; k += len) {
		const int16_t *xr;
		len = span(v, b, 0, k, n, &xr);
		const uint8_t *fp = v->fp + k, *fn = v->fn + k;
		int t = 0;
		for (; t + 16 <= len && xr + 2 * t + 32 < end; t += 16) {
			const int16_t *q = xr + 2 * t;
			__m256i v0 = _mm256_loadu_si256((const __m256i *)q), v1 = _mm256_loadu_si256((const __m256i *)(q + 16));
			__m256i u0 = _mm256_loadu_si256((const __m256i *)(q + 1)), u1 = _mm256_loadu_si256((const __m256i *)(q + 17));
			__m256i p0 = FLAGS(fp + t), p1 = FLAGS(fp + t + 8), n0 = FLAGS(fn + t), n1 = FLAGS(fn + t + 8);
			WIDEN(vl, vh, v0, p0, top16, bot16, _mm256_min_epi16, _mm256_max_epi16);
			WIDEN(vl, vh, v1, p1, top16, bot16, _mm256_min_epi16, _mm256_max_epi16);
			WIDEN(dl, dh, _mm256_madd_epi16(v0, step), p0, top32, bot32, _mm256_min_epi32, _mm256_max_epi32);
			WIDEN(dl, dh, _mm256_madd_epi16(v1, step), p1, top32, bot32, _mm256_min_epi32, _mm256_max_epi32);
			WIDEN(dl, dh, _mm256_madd_epi16(u0, step), n0, top32, bot32, _mm256_min_epi32, _mm256_max_epi32);
			WIDEN(dl, dh, _mm256_madd_epi16(u1, step), n1, top32, bot32, _mm256_min_epi32, _mm256_max_epi32);
		}
		for (; t < len; t++) {
			int32_t a = xr[2 * t], c = xr[2 * t + 1];
			if (fp[t]) {
				int32_t l = a < c ? a : c, h = a < c ? c : a;
				lo = l < lo ? l : lo;
				hi = h > hi ? h : hi;
				dlo = c - a < dlo ? c - a : dlo;
				dhi = c - a > dhi ? c - a : dhi;
			}
			if (fn[t]) {
				int32_t d = (int32_t)xr[2 * t + 2] - c;
				dlo = d < dlo ? d : dlo;
				dhi = d > dhi ? d : dhi;
			}
		}
	}
#undef FLAGS
#undef WIDEN
	int32_t l = hmin16(vl), h = hmax16(vh);
	if (l <= h) { // else no valid pair in the lanes: int16's identities
		lo = l < lo ? l : lo;
		hi = h > hi ? h : hi;
	}
	l = hmin32(dl), h = hmax32(dh);
	e[0] = lo, e[1] = hi;
	e[2] = l < dlo ? l : dlo;
	e[3] = h > dhi ? h : dhi;
}

void bf_pairs_extremes(bf_pairs v, ptrdiff_t n, int32_t *ext) {
	for (int b = 0; b < v.p; b++) {
		band_extremes(&v, b, n, ext + 4 * b);
	}
}
