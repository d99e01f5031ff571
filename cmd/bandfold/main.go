// Command bandfold fits principal component bases of multiband and
// hyperspectral rasters in bounded memory, writes component images,
// reconstructs bands from a few components with a measured loss, and maps
// land-cover change between two dates from differences in component scores.
//
// Run "bandfold --help" for the commands.
package main

import (
	"os"
	"syscall"

	"bandfold/bands/openblas"
)

func main() {
	if core := openblas.ReplacementCore(); core != "" {
		restart(core)
	}
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

// restart starts bandfold again, in the same process, with OpenBLAS told
// which kernel to use (see openblas.ReplacementCore). It returns only if the
// restart cannot happen; bandfold then runs with OpenBLAS's own, slower,
// choice, which gives correct results.
func restart(core string) {
	exe, err := os.Executable()
	if err != nil {
		return
	}
	env := append(os.Environ(), openblas.CoreEnv+"="+core)
	_ = syscall.Exec(exe, os.Args, env) // on success it does not return
}
