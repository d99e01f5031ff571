//go:build openblas

package bands

import "bandfold/bands/openblas"

// With the openblas build tag the package's tests and benchmarks run on
// OpenBLAS, for example to measure the cut-over against it:
//
//	go test -tags openblas -run XXX -bench Cutover ./bands
func init() { openblas.Use() }
