//go:build cgo && amd64

package bands

/*
#cgo CFLAGS: -O3
#include "kernel_amd64.h"
*/
import "C"

import (
	"unsafe"

	"golang.org/x/sys/cpu"
)

// simdISAs are the kernel's SIMD paths this CPU runs, best last; cpu reads
// the CPU's features with cpuid and checks that the operating system saves
// the registers they use.
func simdISAs() []ISA {
	var isas []ISA
	if cpu.X86.HasAVX2 {
		isas = append(isas, AVX2)
	}
	if cpu.X86.HasAVX512F && cpu.X86.HasAVX512BW && cpu.X86.HasAVX512VNNI {
		isas = append(isas, AVX512VNNI)
	}
	return isas
}

// extremesSIMD is extremesGo in C (auto-vectorised for AVX2).
func extremesSIMD(t intTile, lo, hi []int32) int {
	return int(C.bf_extremes((*C.int16_t)(unsafe.Pointer(&t.x[0])), C.ptrdiff_t(t.ld), C.int(t.p), C.ptrdiff_t(t.n),
		C.ptrdiff_t(t.off), (*C.uint8_t)(unsafe.Pointer(&t.valid[0])), (*C.int32_t)(&lo[0]), (*C.int32_t)(&hi[0])))
}

// productsSIMD is productsGo on the AVX2 or AVX-512 VNNI path, through the
// chunk s of rows of cw values.
func productsSIMD(isa ISA, t intTile, centre, lim []int32, s []int16, cw int, acc []int64) {
	C.bf_products(C.int(isa), (*C.int16_t)(unsafe.Pointer(&t.x[0])), C.ptrdiff_t(t.ld), C.int(t.p), C.ptrdiff_t(t.n),
		C.ptrdiff_t(t.off), (*C.uint8_t)(unsafe.Pointer(&t.valid[0])), (*C.int32_t)(&centre[0]), (*C.int32_t)(&lim[0]),
		(*C.int16_t)(unsafe.Pointer(&s[0])), C.int(cw), (*C.int64_t)(&acc[0]))
}

// pairsSIMD adds to acc the products of n slots of v from v.firstSlot on
// (bf_pairs_products) on the AVX2 or AVX-512 VNNI path, through the three
// chunks s of rows of cw values.
func pairsSIMD(isa ISA, v pairView, n int, s []int16, cw int, acc []int64) {
	C.bf_pairs_products(C.int(isa), v.c(), C.ptrdiff_t(v.firstSlot), C.ptrdiff_t(n), (*C.int16_t)(unsafe.Pointer(&s[0])), C.int(cw),
		(*C.int64_t)(&acc[0]))
}

// pairExtremesSIMD is pairExtremesGo in C (AVX2).
func pairExtremesSIMD(v pairView, ext []int32) {
	C.bf_pairs_extremes(v.c(), C.ptrdiff_t(len(v.fp)), (*C.int32_t)(&ext[0]))
}

// c returns v for C. It goes by value: cgo refuses a pointer to memory
// holding pointers into Go's heap. centre and lim may be nil.
func (v pairView) c() C.bf_pairs {
	c := C.bf_pairs{x: (*C.int16_t)(unsafe.Pointer(&v.x[0])), ld: C.ptrdiff_t(v.ld), w: C.ptrdiff_t(v.w), m: C.ptrdiff_t(v.m),
		p: C.int(v.p), fp: (*C.uint8_t)(unsafe.Pointer(&v.fp[0])), fn: (*C.uint8_t)(unsafe.Pointer(&v.fn[0]))}
	if v.centre != nil {
		c.centre, c.lim = (*C.int32_t)(&v.centre[0]), (*C.int32_t)(&v.lim[0])
	}
	return c
}
