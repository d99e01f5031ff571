//go:build !cgo || !amd64

package bands

// simdISAs is empty without cgo or off x86-64: only the scalar path exists.
func simdISAs() []ISA { return nil }

func extremesSIMD(t intTile, lo, hi []int32) int { panic("bands: no SIMD kernel in this build") }

func productsSIMD(isa ISA, t intTile, centre, lim []int32, s []int16, cw int, acc []int64) {
	panic("bands: no SIMD kernel in this build")
}

func pairsSIMD(isa ISA, v pairView, n int, s []int16, cw int, acc []int64) {
	panic("bands: no SIMD kernel in this build")
}

func pairExtremesSIMD(v pairView, ext []int32) { panic("bands: no SIMD kernel in this build") }
