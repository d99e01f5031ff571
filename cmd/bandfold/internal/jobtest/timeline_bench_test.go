package jobtest

import (
	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/cmd/bandfold/internal/timeline"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"testing"
)

// benchSeries writes, once per process, five invented 7-band uint16 cubes
// of side x side (scenario.Synth, seeds 1 to 5, 512 x 512 blocks) as the
// issue's benchmark series does at 4096 x 4096.
func benchSeries(b *testing.B, side int) []string {
	b.Helper()
	name := fmt.Sprintf("series%d", side)
	if p, ok := benchCubes.Load(name); ok {
		return p.([]string)
	}
	dir, err := os.MkdirTemp("", "bandfold-bench-")
	if err != nil {
		b.Fatal(err)
	}
	var paths []string
	for seed := range uint64(5) {
		path := filepath.Join(dir, fmt.Sprintf("s%d.tif", seed+1))
		if _, err := demo.Synth(context.Background(), jobkit.Env{Workers: 2}, demo.SynthOptions{Bands: 7, Width: side, Height: side, Type: "uint16",
			Block: 512, Interleave: "pixel", Out: path, Seed: seed + 1}); err != nil {
			b.Fatal(err)
		}
		paths = append(paths, path)
	}
	benchCubes.Store(name, paths)
	return paths
}

// BenchmarkTimeline maps a five-date series with the defaults; compare
// it with BenchmarkChangePairs, the four change runs it replaces.
func BenchmarkTimeline(b *testing.B) {
	for _, side := range []int{1024, 2048} {
		b.Run(fmt.Sprint(side), func(b *testing.B) {
			scenes := benchSeries(b, side)
			out := filepath.Join(b.TempDir(), "tl")
			b.ResetTimer()
			for range b.N {
				_, err := timeline.Timeline(context.Background(), jobkit.Env{Workers: 2}, timeline.TimelineOptions{Scenes: scenes,
					Dates: []string{"2019", "2020", "2021", "2022", "2023"}, SharedOptions: series.SharedOptions{Out: out, Overwrite: true,
						MinArea: jobkit.MinArea{Px: 4}}})
				if err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkChangePairs runs change on the series' four consecutive pairs.
func BenchmarkChangePairs(b *testing.B) {
	for _, side := range []int{1024, 2048} {
		b.Run(fmt.Sprint(side), func(b *testing.B) {
			scenes := benchSeries(b, side)
			dir := b.TempDir()
			b.ResetTimer()
			for range b.N {
				for i := range 4 {
					_, err := pairchange.Change(context.Background(), jobkit.Env{Workers: 2}, pairchange.ChangeOptions{Before: scenes[i], After: scenes[i+1], SharedOptions: series.SharedOptions{Out: filepath.Join(dir, fmt.Sprint(i)), Overwrite: true, MinArea: jobkit.MinArea{Px: 4}}})
					if err != nil {
						b.Fatal(err)
					}
				}
			}
		})
	}
}
