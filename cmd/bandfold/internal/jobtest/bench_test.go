package jobtest

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"bandfold/cmd/bandfold/internal/demo"
	"bandfold/cmd/bandfold/internal/fold"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/pairchange"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
)

// The benchmarks below are the profile-led view of the hot paths: run
// them with -cpuprofile (go test -run XXX -bench . -cpuprofile cpu.out
// ./cmd/bandfold/internal/job) and read the profile with go tool pprof.
// Their cubes are invented (scenario.Synth), written once per process.

var benchCubes sync.Map // path by name

// benchCube writes a synthetic cube of bands x side x side once and returns
// its path.
func benchCube(b *testing.B, name string, bands, side int, dtype string) string {
	b.Helper()
	if p, ok := benchCubes.Load(name); ok {
		return p.(string)
	}
	dir, err := os.MkdirTemp("", "bandfold-bench-")
	if err != nil {
		b.Fatal(err)
	}
	path := filepath.Join(dir, name+".tif")
	if _, err := demo.Synth(context.Background(), jobkit.Env{Workers: 2}, demo.SynthOptions{Bands: bands, Width: side, Height: side, Type: dtype,
		Block: 256, Interleave: "pixel", Out: path, Seed: 1}); err != nil {
		b.Fatal(err)
	}
	benchCubes.Store(name, path)
	return path
}

// benchLearn fits a basis on the cube once per iteration and reports
// pixels per second.
func benchLearn(b *testing.B, cube string, o learn.LearnOptions) {
	b.Helper()
	out := filepath.Join(b.TempDir(), "b.json")
	s, err := raster.Open([]string{cube})
	if err != nil {
		b.Fatal(err)
	}
	px := float64(s.Width * s.Height)
	s.Close()
	o.Scenes, o.Out, o.Overwrite = []string{cube}, out, true
	if o.Variance == 0 {
		o.Variance = 0.99
	}
	b.ResetTimer()
	for range b.N {
		if _, err := learn.Learn(context.Background(), jobkit.Env{Workers: 2}, o); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(px*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mpx/s")
}

func BenchmarkLearn224Bands(b *testing.B) {
	benchLearn(b, benchCube(b, "cube224", 224, 512, "int16"), learn.LearnOptions{})
}

func BenchmarkLearn7Bands(b *testing.B) {
	benchLearn(b, benchCube(b, "scene7", 7, 2048, "uint16"), learn.LearnOptions{})
}

// benchFold learns a basis with k components on the cube once, then folds
// the cube with o once per iteration.
func benchFold(b *testing.B, cube string, k int, o fold.FoldOptions) {
	b.Helper()
	dir := b.TempDir()
	basis := filepath.Join(dir, "b.json")
	if _, err := learn.Learn(context.Background(), jobkit.Env{Workers: 2}, learn.LearnOptions{Scenes: []string{cube}, Out: basis, Components: k}); err != nil {
		b.Fatal(err)
	}
	o.Scenes, o.Basis, o.Out, o.Overwrite = []string{cube}, basis, filepath.Join(dir, "c.tif"), true
	b.ResetTimer()
	for range b.N {
		if _, err := fold.Fold(context.Background(), jobkit.Env{Workers: 2}, o); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkFold224Bands(b *testing.B) {
	benchFold(b, benchCube(b, "cube224", 224, 512, "int16"), 10, fold.FoldOptions{})
}

func BenchmarkFold7Bands(b *testing.B) {
	benchFold(b, benchCube(b, "scene7", 7, 2048, "uint16"), 3, fold.FoldOptions{})
}

// BenchmarkFoldInt16224Bands is today's compact fold (--type int16) at the
// basis's k, the reference of BenchmarkFoldBudget224Bands.
func BenchmarkFoldInt16224Bands(b *testing.B) {
	benchFold(b, benchCube(b, "cube224", 224, 512, "int16"), 4, fold.FoldOptions{Type: "int16"})
}

// BenchmarkFoldBudget224Bands folds to the RMSE that today's compact fold
// (--type int16 at the basis's k, BenchmarkFoldInt16224Bands) achieves, as
// make bench does: the allocation, the proof in the same pass and the
// lossless reference of the compression ratio.
func BenchmarkFoldBudget224Bands(b *testing.B) {
	cube := benchCube(b, "cube224", 224, 512, "int16")
	dir := b.TempDir()
	basis, fixed := filepath.Join(dir, "b.json"), filepath.Join(dir, "int16.tif")
	env := jobkit.Env{Workers: 2}
	if _, err := learn.Learn(context.Background(), env, learn.LearnOptions{Scenes: []string{cube}, Out: basis, Components: 4}); err != nil {
		b.Fatal(err)
	}
	if _, err := fold.Fold(context.Background(), env, fold.FoldOptions{Scenes: []string{cube}, Basis: basis, Out: fixed, Type: "int16"}); err != nil {
		b.Fatal(err)
	}
	u, err := fold.Unfold(context.Background(), env, fold.UnfoldOptions{Components: fixed, Basis: basis, Out: filepath.Join(dir, "r.tif"), Compare: cube})
	if err != nil {
		b.Fatal(err)
	}
	o := fold.FoldOptions{Scenes: []string{cube}, Basis: basis, Out: filepath.Join(dir, "c.tif"), Overwrite: true, Budget: fold.Budget{Kind: fold.BudgetRMSE, Value: u.RMSE}}
	b.ResetTimer()
	for range b.N {
		if _, err := fold.Fold(context.Background(), env, o); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkChangePair maps change between the two scenes named by
// BANDFOLD_BENCH_PAIR ("a.tif,b.tif"), for profiles on real-size inputs
// (skipped without it).
func BenchmarkChangePair(b *testing.B) {
	pair := os.Getenv("BANDFOLD_BENCH_PAIR")
	if pair == "" {
		b.Skip("set BANDFOLD_BENCH_PAIR=before.tif,after.tif")
	}
	a, after, _ := strings.Cut(pair, ",")
	dir := b.TempDir()
	for range b.N {
		if _, err := pairchange.Change(context.Background(), jobkit.Env{Workers: 2}, pairchange.ChangeOptions{Before: a, After: after, SharedOptions: series.SharedOptions{Out: filepath.Join(dir, "chg"), Overwrite: true}}); err != nil {
			b.Fatal(err)
		}
	}
}
