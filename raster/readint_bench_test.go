package raster

import (
	"os"
	"strconv"
	"sync"
	"testing"
	"time"

	"bandfold/bands"
	"bandfold/tiles"
)

// BenchmarkCubeKernel is the integer kernel's figure of make bench: the
// time the kernel alone (bands.AddInt16Tile) takes to form the exact
// co-moments of every pixel of the cube named by BANDFOLD_BENCH_CUBE, in
// learn's tiles, by BANDFOLD_BENCH_WORKERS goroutines (default 2) each
// summing its share of the tiles into an exact accumulator of its own.
// The tiles are read as int16 beforehand, a batch of at most 256 MiB at a
// time (so the 7.5 GB cube of make bench-large fits too), and only the
// kernel's work on each batch is timed: kernel-s is the seconds of one
// pass, reads excluded. Skipped without BANDFOLD_BENCH_CUBE.
//
//	BANDFOLD_BENCH_CUBE=bench-out/cube224.tif go test -run XXX -bench CubeKernel -benchtime 3x ./raster
func BenchmarkCubeKernel(b *testing.B) {
	path := os.Getenv("BANDFOLD_BENCH_CUBE")
	if path == "" {
		b.Skip("set BANDFOLD_BENCH_CUBE to a cube of integer bands, e.g. bench-out/cube224.tif")
	}
	workers, _ := strconv.Atoi(os.Getenv("BANDFOLD_BENCH_WORKERS"))
	workers = max(workers, 1)
	if os.Getenv("BANDFOLD_BENCH_WORKERS") == "" {
		workers = 2
	}
	s, err := Open([]string{path})
	if err != nil {
		b.Fatal(err)
	}
	defer s.Close()
	ir, err := s.NewInt16Reader(1)
	if err != nil {
		b.Fatal(err)
	}
	defer ir.Close()
	tw, th := tiles.SizeFor(s.Width, s.Height, s.BlockW, s.BlockH, s.Len(), tiles.DefaultBudget)
	grid := tiles.NewGrid(s.Width, s.Height, tw, th).All()
	p := s.Len()
	batch := max(1, (256<<20)/(2*p*tw*th))
	accs := make([]*bands.Accumulator, workers)
	for i := range accs {
		accs[i] = bands.NewExactAccumulator(p)
	}
	var kernel time.Duration
	var held []*Int16Tile
	for b.Loop() {
		for start := 0; start < len(grid); start += batch {
			held = held[:0]
			for it, err := range ir.Tiles(b.Context(), grid[start:min(start+batch, len(grid))]) {
				if err != nil {
					b.Fatal(err)
				}
				held = append(held, &Int16Tile{Tile: it.Tile, X: append([]int16(nil), it.X...), Valid: append([]bool(nil), it.Valid...), Shift: it.Shift})
			}
			t0 := time.Now()
			var wg sync.WaitGroup
			for w := range workers {
				wg.Go(func() {
					for k := w; k < len(held); k += workers {
						accs[w].AddInt16Tile(held[k].X, held[k].Valid, held[k].Shift)
					}
				})
			}
			wg.Wait()
			kernel += time.Since(t0)
		}
	}
	b.ReportMetric(kernel.Seconds()/float64(b.N), "kernel-s")
	b.ReportMetric(float64(s.Width*s.Height)*float64(b.N)/kernel.Seconds()/1e6, "Mpx/s")
}

// BenchmarkInt16TileFloat64: a 7-band 512 x 512 tile turned into float64
// pixel-major values in the map pass's chunks of 2,048 pixels.
func BenchmarkInt16TileFloat64(b *testing.B) {
	const p, side, chunk = 7, 512, 2048
	it := &Int16Tile{X: make([]int16, p*side*side), Shift: make([]int32, p)}
	it.Tile.W, it.Tile.H = side, side
	for i := range it.X {
		it.X[i] = int16(i * 7)
	}
	dst := make([]float64, p*chunk)
	b.SetBytes(int64(len(it.X)) * 2)
	for b.Loop() {
		for lo := 0; lo < side*side; lo += chunk {
			it.Float64(dst, lo, lo+chunk)
		}
	}
}
