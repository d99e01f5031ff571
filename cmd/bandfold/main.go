// Command bandfold fits principal component bases of multiband and
// hyperspectral rasters in bounded memory, writes component images,
// reconstructs bands from a few components with a measured loss, and maps
// land-cover change between two dates from differences in component scores.
//
// Run "bandfold --help" for the commands.
package main

import "os"

func main() { os.Exit(run(os.Args[1:], os.Stdout, os.Stderr)) }
