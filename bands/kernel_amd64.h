//go:build cgo

#include <stddef.h>
#include <stdint.h>

#define BF_AVX2 1
#define BF_AVX512VNNI 2

ptrdiff_t bf_extremes(const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t n, ptrdiff_t off, const uint8_t *valid,
                      int32_t *lo, int32_t *hi);
// bf_pairs is the paired view of the rows of a band-sequential window that
// AddInt16Window's paired path takes (see intpairs.go): slot k is the pair
// of pixels i = (k / m)·w + 2·(k % m) and i + 1, band b's values at
// x[b·ld + i]; fp[k] flags the slots whose pair is valid, fn[k] those whose
// next pair (pixels i + 1, i + 2) is. centre holds the sums' centres (p),
// then the differences' (p); lim the step limits of the sums' blocks of
// band pairs, then the differences'.
typedef struct {
	const int16_t *x;
	ptrdiff_t ld, w, m;
	int p;
	const uint8_t *fp, *fn;
	const int32_t *centre, *lim;
} bf_pairs;

// bf_pairs_products adds to acc (three qb×qb matrices) the centred
// products of slots k0 .. k0+n-1 of v: those of the sums, of the
// differences and of the next differences, through the three chunks at s.
void bf_pairs_products(int isa, bf_pairs v, ptrdiff_t k0, ptrdiff_t n, int16_t *s, int cw, int64_t *acc);
// bf_pairs_extremes sets ext[4b .. 4b+3] to the least and greatest value
// of band b over the n slots' valid pairs of v, and the least and greatest
// of their differences and of the valid next differences (greatest below
// least where there is none).
void bf_pairs_extremes(bf_pairs v, ptrdiff_t n, int32_t *ext);
void bf_products(int isa, const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t n, ptrdiff_t off, const uint8_t *valid,
                 const int32_t *centre, const int32_t *lim, int16_t *s, int cw, int64_t *acc);
