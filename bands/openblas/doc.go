// Package openblas makes gonum's blas64 routines that dominate bandfold's
// cost, the symmetric rank-k update Dsyrk and the matrix product Dgemm, run on
// OpenBLAS through cgo, and leaves every other routine to gonum's native Go
// implementation.
//
// Call Use once, before any worker starts. It limits OpenBLAS to one thread
// per call, so that its rounding does not depend on the machine's core count
// and so that callers can run one worker per core without oversubscription,
// then registers the implementation with blas64.Use.
//
// Building the package needs cgo, pkg-config and OpenBLAS's development files
// (Debian's libopenblas-dev). Without cgo the package still builds, but Use
// does nothing and Config returns the empty string.
package openblas
