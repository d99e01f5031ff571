// Command bandfold fits principal component bases of multiband and
// hyperspectral rasters in bounded memory, writes component images,
// reconstructs bands from a few components with a measured loss, and maps
// land-cover change between two dates from differences in component scores.
//
// Run "bandfold --help" for the commands.
package main

import (
	"fmt"
	"io"
	"os"
	"runtime/pprof"

	"bandfold/bands/openblas"
)

// profileEnv names a file for a CPU profile of the whole run (Go's pprof
// format, read with "go tool pprof"): a developer's switch that make bench
// uses to profile the same runs it times. It is not a flag, so that it
// stays out of the commands' help.
const profileEnv = "BANDFOLD_CPUPROFILE"

func main() {
	openblas.Restart() // the fast BLAS kernel where OpenBLAS did not know the CPU
	stopProfile := startProfile(os.Getenv(profileEnv), os.Stderr)
	code := run(os.Args[1:], os.Stdout, os.Stderr)
	stopProfile()
	os.Exit(code)
}

// startProfile starts a CPU profile into path (nothing when path is empty)
// and returns the function that ends it; a profile that cannot start is
// said on stderr, and the run goes on without it.
func startProfile(path string, stderr io.Writer) func() {
	if path == "" {
		return func() {}
	}
	f, err := os.Create(path)
	if err == nil {
		err = pprof.StartCPUProfile(f)
	}
	if err != nil {
		if f != nil {
			f.Close()
		}
		fmt.Fprintf(stderr, "bandfold: %s=%s: cannot profile: %v\n", profileEnv, path, err)
		return func() {}
	}
	return func() {
		pprof.StopCPUProfile()
		f.Close()
	}
}
