package bands

import (
	"fmt"
	"math/rand/v2"
	"syscall"
	"testing"
	"time"
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
					cpu := cpuTime()
					for b.Loop() {
						a.Reset()
						a.AddInt16Tile(d.d.x, nil, nil)
					}
					reportPixels(b, n, cpu)
				})
			}
		}
		b.Run(fmt.Sprintf("p=%d/float64", p), func(b *testing.B) {
			x := dn12.pixels()
			a := NewExactAccumulator(p)
			cpu := cpuTime()
			for b.Loop() {
				a.Reset()
				a.AddPixels(x, nil)
			}
			reportPixels(b, n, cpu)
		})
	}
}

// reportPixels reports the pixels a second of n-pixel tiles, and the CPU
// time of the process an operation since cpu (cpuTime at the start): on a
// machine shared with other work the CPU time moves less than the elapsed.
func reportPixels(b *testing.B, n int, cpu time.Duration) {
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "pixels/s")
	b.ReportMetric(float64(cpuTime()-cpu)/float64(b.N), "cpu-ns/op")
}

// cpuTime returns the user and system time of the process so far.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// BenchmarkNoiseWindow times the co-moments and the shift differences of
// one tile of the noise pass of learn --method mnf by band count (p = 3,
// 7, 12, 64, 224 and 425) and pair set (horizontal, learn's default, and
// both): a window 256 pixels wide with a halo row below (the horizontal
// pairs at the tile's right edge are AddInt16Pairs', outside), of 12-bit
// values, on the integer kernel (AddInt16Window: "int16" on its paired
// path, "int16-2pass" with the two passes the pairing replaced) against
// the float64 path (AddWindow, pixel-major; for p ≤ 64). pixels/s counts
// the pixels the window owns.
//
//	go test -tags openblas -run XXX -bench NoiseWindow ./bands
func BenchmarkNoiseWindow(b *testing.B) {
	for _, p := range []int{3, 7, 12, 64, 224, 425} {
		w, h := 256, 1<<16/256
		if p > 64 {
			h = 1 << 14 / 256
		}
		rnd := rand.New(rand.NewPCG(11, uint64(p)))
		d := tileOf(w*(h+1), p, nil, func(k, b int) int32 { return int32(b*7) + rnd.Int32N(4096) })
		valid := randomMask(rnd, w*(h+1), 0.98)
		iw := Int16Window{X: d.x, Valid: valid, P: p, W: w, H: h + 1, OwnW: w, OwnH: h}
		fw := Window{X: d.pixels(), Valid: valid, P: p, W: w, H: h + 1, OwnW: w, OwnH: h, Bound: 1 << 15}
		mom, noise := NewExactAccumulator(p), NewExactAccumulator(p)
		for _, s := range []Shift{Horizontal, Both} {
			for _, path := range []struct {
				name   string
				paired bool
				add    func()
			}{
				{"int16", true, func() { AddInt16Window(mom, noise, iw, s) }},
				{"int16-2pass", false, func() { AddInt16Window(mom, noise, iw, s) }},
				{"float64", true, func() { AddWindow(mom, noise, fw, s) }},
			} {
				if path.name == "float64" && p > 64 {
					continue // seconds a tile
				}
				b.Run(fmt.Sprintf("p=%d/%v/%s", p, s, path.name), func(b *testing.B) {
					defer func(old bool) { pairKernel = old }(pairKernel)
					pairKernel = path.paired
					cpu := cpuTime()
					for b.Loop() {
						mom.Reset()
						noise.Reset()
						path.add()
					}
					reportPixels(b, w*h, cpu)
				})
			}
		}
	}
}
