package bands

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// BenchmarkAddPixels times AddPixels on one tile, grouped by size: a
// multispectral tile (p = 7, 512×512 pixels, as Landsat ETM+) and a
// hyperspectral one (p = 224, 36×256 pixels, as AVIRIS). It uses whatever BLAS
// is registered; with the openblas build tag that is OpenBLAS:
//
//	go test -run XXX -bench AddPixels ./bands
//	go test -tags openblas -run XXX -bench AddPixels ./bands
func BenchmarkAddPixels(b *testing.B) {
	for _, c := range []struct{ p, w, h int }{{7, 512, 512}, {224, 36, 256}} {
		n := c.w * c.h
		rnd := rand.New(rand.NewPCG(11, uint64(c.p)))
		x := randomPixels(rnd, n, c.p)
		for _, masked := range []bool{false, true} {
			var valid []bool
			name := fmt.Sprintf("p=%d,%dx%d", c.p, c.w, c.h)
			if masked {
				valid = randomMask(rnd, n, 0.9)
				name += ",mask"
			}
			b.Run(name, func(b *testing.B) {
				a := NewAccumulator(c.p)
				b.SetBytes(int64(8 * len(x)))
				for b.Loop() {
					a.AddPixels(x, valid)
				}
				reportGFLOPS(b, n, c.p)
			})
		}
	}
}

// BenchmarkMomentsAddPixels times the per-band moments that fold keeps of
// its input and its scores, on one 512 x 512 tile of 7 bands and of 3
// scores, with every pixel valid and with a tenth masked.
func BenchmarkMomentsAddPixels(b *testing.B) {
	for _, p := range []int{3, 7} {
		n := 512 * 512
		rnd := rand.New(rand.NewPCG(12, uint64(p)))
		x := randomPixels(rnd, n, p)
		for _, masked := range []bool{false, true} {
			var valid []bool
			name := fmt.Sprintf("p=%d", p)
			if masked {
				valid = randomMask(rnd, n, 0.9)
				name += ",mask"
			}
			b.Run(name, func(b *testing.B) {
				m := NewMoments(p)
				b.SetBytes(int64(8 * len(x)))
				for b.Loop() {
					m.AddPixels(x, valid)
				}
			})
		}
	}
}
