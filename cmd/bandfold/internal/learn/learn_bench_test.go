package learn_test

import (
	"context"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/transform"
)

// BenchmarkLearnMethod fits PCA and MNF bases to the cube named by
// BANDFOLD_BENCH_CUBE (e.g. the 224-band cube of make bench); skipped
// without it. One worker, so profiles show the per-tile work alone, unless
// BANDFOLD_BENCH_WORKERS says otherwise.
func BenchmarkLearnMethod(b *testing.B) {
	cube := os.Getenv("BANDFOLD_BENCH_CUBE")
	if cube == "" {
		b.Skip("set BANDFOLD_BENCH_CUBE to a cube, e.g. bench-out/cube224.tif")
	}
	workers, _ := strconv.Atoi(os.Getenv("BANDFOLD_BENCH_WORKERS"))
	for _, m := range []transform.Method{transform.PCA, transform.MNF} {
		b.Run(string(m), func(b *testing.B) {
			out := filepath.Join(b.TempDir(), "basis.json")
			for range b.N {
				if _, err := learn.Learn(context.Background(), jobkit.Env{Workers: max(workers, 1), Version: "bench"},
					learn.LearnOptions{Scenes: []string{cube}, Method: m, Out: out, Overwrite: true, Components: 3}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
