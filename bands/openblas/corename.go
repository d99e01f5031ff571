//go:build cgo

package openblas

/*
#cgo pkg-config: openblas
#include <cblas.h>
*/
import "C"

// CoreName returns the CPU kernel OpenBLAS runs, as openblas_get_corename
// gives it (for example "Haswell" or "SkylakeX").
func CoreName() string {
	return C.GoString(C.openblas_get_corename())
}
