//go:build openblas

package raster

import "bandfold/bands/openblas"

// With the openblas build tag the benchmarks' float64 path (AddPixels)
// runs on OpenBLAS, as the jobs do:
//
//	go test -tags openblas -run XXX -bench Int16Read ./raster
func init() { openblas.Use() }
