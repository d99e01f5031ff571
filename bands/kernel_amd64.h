//go:build cgo

#include <stddef.h>
#include <stdint.h>

#define BF_AVX2 1
#define BF_AVX512VNNI 2

ptrdiff_t bf_extremes(const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t n, ptrdiff_t off, const uint8_t *valid,
                      int32_t *lo, int32_t *hi);
void bf_products(int isa, const int16_t *x, ptrdiff_t ld, int p, ptrdiff_t n, ptrdiff_t off, const uint8_t *valid,
                 const int32_t *centre, const int32_t *lim, int16_t *s, int cw, int64_t *acc);
