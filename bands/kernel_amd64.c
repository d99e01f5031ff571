//go:build cgo

// The integer co-moment kernel of kernel.go on x86-64: AVX2 and AVX-512
// VNNI paths, each compiled for its instruction set with a function-level
// target attribute, so that the package builds and runs on any x86-64 CPU;
// Go chooses the path at run time from the CPU's features.

#include <immintrin.h>
#include <stddef.h>
#include <stdint.h>

#include "kernel_amd64.h"

// extremes16 sets *lo and *hi to the least and greatest of the n values x[k]
// with valid[k], or to INT16_MAX and INT16_MIN when there is none: sixteen
// int16 lanes a step, invalid values replaced by the identity of min and
// max. Plain values need no wider lanes, unlike differences.
__attribute__((target("avx2"))) static void extremes16(const int16_t *x, ptrdiff_t n, const uint8_t *valid,
                                                       int32_t *lo, int32_t *hi) {
	const __m256i top = _mm256_set1_epi16(INT16_MAX), bottom = _mm256_set1_epi16(INT16_MIN);
	__m256i vl = top, vh = bottom;
	ptrdiff_t k = 0;
	for (; k + 16 <= n; k += 16) {
		__m256i v = _mm256_loadu_si256((const __m256i *)(x + k));
		__m256i ok = _mm256_cvtepu8_epi16(_mm_loadu_si128((const __m128i *)(valid + k)));
		ok = _mm256_sub_epi16(_mm256_setzero_si256(), ok); // 0 or all ones
		vl = _mm256_min_epi16(vl, _mm256_blendv_epi8(top, v, ok));
		vh = _mm256_max_epi16(vh, _mm256_blendv_epi8(bottom, v, ok));
	}
	__m128i l = _mm_min_epi16(_mm256_castsi256_si128(vl), _mm256_extracti128_si256(vl, 1));
	__m128i h = _mm_max_epi16(_mm256_castsi256_si128(vh), _mm256_extracti128_si256(vh, 1));
	int16_t ls[8], hs[8];
	_mm_storeu_si128((__m128i *)ls, l);
	_mm_storeu_si128((__m128i *)hs, h);
	int32_t a = INT16_MAX, b = INT16_MIN;
	for (int i = 0; i < 8; i++) {
		a = ls[i] < a ? ls[i] : a;
		b = hs[i] > b ? hs[i] : b;
	}
	for (; k < n; k++) {
		if (valid[k]) {
			a = x[k] < a ? x[k] : a;
			b = x[k] > b ? x[k] : b;
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
		if (off == 0) {
			extremes16(xb, n, valid, lo + b, hi + b);
			continue;
		}
		int32_t l = INT32_MAX, h = INT32_MIN;
		for (ptrdiff_t k = 0; k < n; k++) {
			int32_t m = -(int32_t)valid[k], v = (int32_t)xb[k + off] - xb[k];
			int32_t vl = (v & m) | (INT32_MAX & ~m), vh = (v & m) | (INT32_MIN & ~m);
			l = vl < l ? vl : l;
			h = vh > h ? vh : h;
		}
		lo[b] = l;
		hi[b] = h;
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
		for (int k = cn; k < cw; k++) {
			d[k] = 0;
		}
	}
	int16_t *d = s + (ptrdiff_t)p * cw;
	for (int k = 0; k < cn; k++) {
		d[k] = v[k];
	}
	for (int k = cn; k < cw; k++) {
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
// b..b+3, in two halves of 2×4 so that the 8 accumulators and 6 loaded
// vectors fit AVX2's 16 registers.
__attribute__((target("avx2"))) static void block256(const int16_t *a, const int16_t *b, ptrdiff_t cw, int lim,
                                                     int64_t *t) {
	int steps = (int)(cw / 16);
	half256(a, a + cw, b, cw, steps, lim, t);
	half256(a + 2 * cw, a + 3 * cw, b, cw, steps, lim, t + 8);
}

// hsum512 returns the sum of the sixteen int32 lanes of v, in int64.
__attribute__((target("avx512f,avx512bw,avx512vnni"))) static inline int64_t hsum512(__m512i v) {
	__m512i lo = _mm512_cvtepi32_epi64(_mm512_castsi512_si256(v));
	__m512i hi = _mm512_cvtepi32_epi64(_mm512_extracti64x4_epi64(v, 1));
	return _mm512_reduce_add_epi64(_mm512_add_epi64(lo, hi));
}

// DP adds the products of x and y into c in place. Written with
// _mm512_dpwssd_epi32, GCC 12 copied the accumulators around every
// vpdpwssd (62 register moves in the loop of block512); in place the loop
// is its 8 loads and 16 vpdpwssd (BenchmarkKernel, p = 224: 5.6 ms a tile
// of 16,384 pixels before, 4.65 after).
#define DP(c, x, y) ({ __asm__("vpdpwssd %2, %1, %0" : "+v"(c) : "v"(x), "v"(y)); })

// block512 adds to t (4×4, row-major) the products of rows a..a+3 with rows
// b..b+3 over steps of 32 pixels: vpdpwssd into 16 int32 accumulators (24
// of AVX-512's 32 registers with the 8 loaded rows), each lane taking two
// products a step, flushed into int64 every lim steps.
__attribute__((target("avx512f,avx512bw,avx512vnni"))) static void block512(const int16_t *a, const int16_t *b,
                                                                            ptrdiff_t cw, int lim, int64_t *t) {
	int steps = (int)(cw / 32);
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
		t[0] += hsum512(c00), t[1] += hsum512(c01), t[2] += hsum512(c02), t[3] += hsum512(c03);
		t[4] += hsum512(c10), t[5] += hsum512(c11), t[6] += hsum512(c12), t[7] += hsum512(c13);
		t[8] += hsum512(c20), t[9] += hsum512(c21), t[10] += hsum512(c22), t[11] += hsum512(c23);
		t[12] += hsum512(c30), t[13] += hsum512(c31), t[14] += hsum512(c32), t[15] += hsum512(c33);
	}
}

void bf_products(int isa, const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t n, ptrdiff_t off, const uint8_t *valid,
                 const int32_t *centre, const int32_t *lim, int16_t *s, int cw, int64_t *acc) {
	int qb = (p + 4) & ~3, nb = qb / 4;
	for (ptrdiff_t k0 = 0; k0 < n; k0 += cw) {
		int cn = n - k0 < cw ? (int)(n - k0) : cw;
		pack(x, ld, p, k0, cn, off, valid, centre, s, cw);
		for (int bi = 0; bi < nb; bi++) {
			for (int bj = bi; bj < nb; bj++) {
				int64_t t[16] = {0};
				const int16_t *a = s + (ptrdiff_t)(4 * bi) * cw, *b = s + (ptrdiff_t)(4 * bj) * cw;
				if (isa == BF_AVX512VNNI) {
					block512(a, b, cw, lim[bi * nb + bj], t);
				} else {
					block256(a, b, cw, lim[bi * nb + bj], t);
				}
				for (int r = 0; r < 4; r++) {
					int64_t *row = acc + (ptrdiff_t)(4 * bi + r) * qb + 4 * bj;
					row[0] += t[4 * r], row[1] += t[4 * r + 1], row[2] += t[4 * r + 2], row[3] += t[4 * r + 3];
				}
			}
		}
	}
}
