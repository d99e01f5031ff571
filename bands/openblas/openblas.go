//go:build cgo

package openblas

/*
#cgo pkg-config: openblas
#include <cblas.h>
*/
import "C"

import (
	"math"
	"unsafe"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/blas/gonum"
)

// Use limits OpenBLAS to one thread with openblas_set_num_threads(1) and
// registers with blas64.Use an implementation that runs Dsyrk and Dgemm on
// OpenBLAS and everything else on gonum's native implementation.
func Use() {
	C.openblas_set_num_threads(1)
	blas64.Use(implementation{})
}

// Config returns OpenBLAS's description of its build and CPU kernel, as given
// by openblas_get_config.
func Config() string {
	return C.GoString(C.openblas_get_config())
}

// threads returns OpenBLAS's current thread count.
func threads() int {
	return int(C.openblas_get_num_threads())
}

// implementation is gonum's native BLAS with Dsyrk and Dgemm replaced by
// OpenBLAS's row-major CBLAS routines.
//
// Arguments are checked in Go before C is called. Any call that is not an
// ordinary, valid one (a bad enum, leading dimension or slice length, an empty
// matrix, or a size beyond OpenBLAS's 32-bit integers) is handed to the
// native implementation instead, which panics with gonum's messages or
// handles the quick return exactly as gonum does.
type implementation struct {
	gonum.Implementation
}

var native gonum.Implementation

// Dsyrk performs the symmetric rank-k update
//
//	C = alpha * A * Aᵀ + beta * C  if tA == blas.NoTrans,
//	C = alpha * Aᵀ * A + beta * C  if tA == blas.Trans or blas.ConjTrans,
//
// where C is an n×n symmetric matrix of which only the ul triangle is used.
func (implementation) Dsyrk(ul blas.Uplo, tA blas.Transpose, n, k int, alpha float64, a []float64, lda int, beta float64, c []float64, ldc int) {
	row, col := k, n
	if tA == blas.NoTrans {
		row, col = n, k
	}
	cu, okU := cUplo(ul)
	ct, okT := cTrans(tA)
	if !okU || !okT || !matrixOK(row, col, lda, len(a)) || !matrixOK(n, n, ldc, len(c)) {
		native.Dsyrk(ul, tA, n, k, alpha, a, lda, beta, c, ldc)
		return
	}
	C.cblas_dsyrk(C.CblasRowMajor, cu, ct, C.blasint(n), C.blasint(k),
		C.double(alpha), ptr(a), C.blasint(lda),
		C.double(beta), ptr(c), C.blasint(ldc))
}

// Dgemm performs the matrix product
//
//	C = alpha * op(A) * op(B) + beta * C,
//
// where op(X) is X or Xᵀ as given by tA and tB, op(A) is m×k, op(B) is k×n
// and C is m×n.
func (implementation) Dgemm(tA, tB blas.Transpose, m, n, k int, alpha float64, a []float64, lda int, b []float64, ldb int, beta float64, c []float64, ldc int) {
	ra, ca := m, k
	if tA != blas.NoTrans {
		ra, ca = k, m
	}
	rb, cb := k, n
	if tB != blas.NoTrans {
		rb, cb = n, k
	}
	cta, okA := cTrans(tA)
	ctb, okB := cTrans(tB)
	if !okA || !okB || !matrixOK(ra, ca, lda, len(a)) || !matrixOK(rb, cb, ldb, len(b)) || !matrixOK(m, n, ldc, len(c)) {
		native.Dgemm(tA, tB, m, n, k, alpha, a, lda, b, ldb, beta, c, ldc)
		return
	}
	C.cblas_dgemm(C.CblasRowMajor, cta, ctb, C.blasint(m), C.blasint(n), C.blasint(k),
		C.double(alpha), ptr(a), C.blasint(lda), ptr(b), C.blasint(ldb),
		C.double(beta), ptr(c), C.blasint(ldc))
}

// matrixOK reports whether a rows×cols row-major matrix with leading
// dimension ld is non-empty, fits in a slice of length n, and has sizes that
// OpenBLAS's 32-bit integers can hold.
func matrixOK(rows, cols, ld, n int) bool {
	return rows > 0 && cols > 0 && ld >= cols &&
		rows <= math.MaxInt32 && ld <= math.MaxInt32 &&
		ld*(rows-1)+cols <= n
}

func cUplo(ul blas.Uplo) (C.enum_CBLAS_UPLO, bool) {
	switch ul {
	case blas.Upper:
		return C.CblasUpper, true
	case blas.Lower:
		return C.CblasLower, true
	}
	return 0, false
}

// cTrans maps a gonum transpose flag to CBLAS's; for real matrices ConjTrans
// is the same as Trans.
func cTrans(t blas.Transpose) (C.enum_CBLAS_TRANSPOSE, bool) {
	switch t {
	case blas.NoTrans:
		return C.CblasNoTrans, true
	case blas.Trans, blas.ConjTrans:
		return C.CblasTrans, true
	}
	return 0, false
}

func ptr(s []float64) *C.double {
	return (*C.double)(unsafe.Pointer(&s[0]))
}
