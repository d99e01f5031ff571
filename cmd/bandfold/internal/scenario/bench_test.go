package scenario

import (
	"sync"
	"testing"
)

// The benchmarks render 512 x 512 windows from the middle of a full-size
// (2048 x 2048) scene.

func benchCatchment(b *testing.B) *Catchment {
	b.Helper()
	c, err := NewCatchment(2048, 2048, 1)
	if err != nil {
		b.Fatal(err)
	}
	return c
}

func BenchmarkMultispectral512(b *testing.B) {
	c := benchCatchment(b)
	dst := make([]float64, 512*512*MSBands)
	b.ResetTimer()
	for b.Loop() {
		c.Multispectral(1, 768, 768, 512, 512, dst)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/(512*512), "ns/pixel")
}

func BenchmarkTruth512(b *testing.B) {
	c := benchCatchment(b)
	dst := make([]uint8, 512*512)
	b.ResetTimer()
	for b.Loop() {
		c.Truth(768, 768, 512, 512, dst)
	}
}

func BenchmarkHyperspectral512(b *testing.B) {
	c := benchCatchment(b)
	dst := make([]float64, 512*512*HyperBands)
	b.ResetTimer()
	for b.Loop() {
		c.Hyperspectral(85, 85, 512, 512, dst)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/(512*512), "ns/pixel")
}

func BenchmarkSynth512x64Int16(b *testing.B) {
	s := Synth{Bands: 64, Width: 2048, Height: 2048, Type: "int16", Seed: 1}
	dst := make([]float64, 512*512*64)
	for b.Loop() {
		s.Render(768, 768, 512, 512, dst)
	}
}

// BenchmarkPair2048 renders both dates of the full 2048 x 2048 x 8 scene as
// 512 x 512 tiles on two goroutines: the figure to compare with the
// "a few seconds on 2 cores" budget.
func BenchmarkPair2048(b *testing.B) {
	c := benchCatchment(b)
	const tile, n = 512, 2048
	b.ResetTimer()
	for b.Loop() {
		jobs := make(chan [3]int)
		var wg sync.WaitGroup
		for range 2 {
			wg.Add(1)
			go func() {
				defer wg.Done()
				dst := make([]float64, tile*tile*MSBands)
				for j := range jobs {
					c.Multispectral(j[0], j[1], j[2], tile, tile, dst)
				}
			}()
		}
		for d := range 2 {
			for y := 0; y < n; y += tile {
				for x := 0; x < n; x += tile {
					jobs <- [3]int{d, x, y}
				}
			}
		}
		close(jobs)
		wg.Wait()
	}
}
