package bands

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// BenchmarkKernel times the exact co-moments of one tile of integer pixels
// by band count (p = 3, 7, 12, 64, 224 and 425, an imaging spectrometer's):
// the integer kernel on each path of this CPU (AddInt16Tile, int16
// band-sequential) against today's exact float64 path (AddPixels on the
// same pixels as float64, pixel-major, whose products come from the
// registered BLAS's Dsyrk). Values are 12-bit ("dn12": 0..4095 on a
// per-band offset, as most sensors' digital numbers) or span ±32767
// ("full", where an int32 lane is flushed every step). Run with OpenBLAS,
// on its own CPU kernel, for the dsyrk figures the jobs see:
//
//	OPENBLAS_CORETYPE=SkylakeX go test -tags openblas -run XXX -bench Kernel ./bands
func BenchmarkKernel(b *testing.B) {
	for _, p := range []int{3, 7, 12, 64, 224, 425} {
		n := 1 << 16
		if p > 64 {
			n = 1 << 14
		}
		rnd := rand.New(rand.NewPCG(9, uint64(p)))
		dn12 := tileOf(n, p, nil, func(k, b int) int32 { return int32(b*7) + rnd.Int32N(4096) })
		full := tileOf(n, p, nil, func(k, b int) int32 { return rnd.Int32N(65535) - 32767 })
		for _, isa := range KernelISAs() {
			if isa == Scalar && p > 64 {
				continue // minutes a tile
			}
			for _, d := range []struct {
				name string
				d    intData
			}{{"dn12", dn12}, {"full", full}} {
				b.Run(fmt.Sprintf("p=%d/%v/%s", p, isa, d.name), func(b *testing.B) {
					old, oldScalar := kernelISA, scalarKernel
					defer func() { kernelISA, scalarKernel = old, oldScalar }()
					kernelISA, scalarKernel = isa, true
					a := NewExactAccumulator(p)
					for b.Loop() {
						a.Reset()
						a.AddInt16Tile(d.d.x, nil, nil)
					}
					reportPixels(b, n)
				})
			}
		}
		b.Run(fmt.Sprintf("p=%d/float64", p), func(b *testing.B) {
			x := dn12.pixels()
			a := NewExactAccumulator(p)
			for b.Loop() {
				a.Reset()
				a.AddPixels(x, nil)
			}
			reportPixels(b, n)
		})
	}
}

func reportPixels(b *testing.B, n int) {
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "pixels/s")
}
