// Command bandfold fits principal component bases of multiband and
// hyperspectral rasters in bounded memory, writes component images,
// reconstructs bands from a few components with a measured loss, and maps
// land-cover change between two dates from differences in component scores.
//
// Run "bandfold --help" for the commands.
package main

import (
	"os"

	"bandfold/bands/openblas"
)

func main() {
	openblas.Restart() // the fast BLAS kernel where OpenBLAS did not know the CPU
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}
