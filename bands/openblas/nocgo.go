//go:build !cgo

package openblas

// Use does nothing when the package is built without cgo: gonum's native BLAS
// stays in use.
func Use() {}

// Config returns the empty string when the package is built without cgo.
func Config() string { return "" }

// CoreName returns the empty string when the package is built without cgo.
func CoreName() string { return "" }
