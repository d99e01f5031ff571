package bands

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// BenchmarkCutover times the two co-moment kernels of AddPixels, the fused Go
// loop and blas64.Syrk on a centred copy, for band counts around the cut-over
// fusedMaxBands, on 65536 pixels, with the BLAS registered when it runs:
// gonum's native one by default, OpenBLAS with the openblas build tag. Its
// figures are quoted at fusedMaxBands.
//
//	go test -run XXX -bench Cutover ./bands
//	go test -tags openblas -run XXX -bench Cutover ./bands
func BenchmarkCutover(b *testing.B) {
	const n = 1 << 16
	for _, p := range []int{2, 4, 8, 16, 24, 32, 48, 64} {
		x := randomPixels(rand.New(rand.NewPCG(1, uint64(p))), n, p)
		for _, k := range kernels {
			b.Run(fmt.Sprintf("p=%d/%s", p, k.name), func(b *testing.B) {
				a := NewAccumulator(p)
				b.SetBytes(int64(8 * len(x)))
				for b.Loop() {
					a.add(x, nil, k.fused)
				}
				reportGFLOPS(b, n, p)
			})
		}
	}
}

// reportGFLOPS reports the effective rate of the co-moment update, counted as
// n·p·(p+1) floating-point operations per call (a multiply and an add for each
// of the p(p+1)/2 upper-triangle entries for each of n pixels).
func reportGFLOPS(b *testing.B, n, p int) {
	flops := float64(n) * float64(p) * float64(p+1)
	b.ReportMetric(flops*float64(b.N)/float64(b.Elapsed().Nanoseconds()), "GFLOP/s")
}

// randomPixels returns n pixels of p bands, pixel-major, drawn uniformly from
// [0, 1) with a band-dependent offset.
func randomPixels(rnd *rand.Rand, n, p int) []float64 {
	x := make([]float64, n*p)
	for i := range x {
		x[i] = rnd.Float64() + float64(i%p)
	}
	return x
}
