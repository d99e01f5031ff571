package job

import (
	"context"
	"fmt"
	"strings"
	"sync"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
)

// scan is a pass over the tiles of one or more scenes that share a band
// count: item k of the pass is items[k].
type scan struct {
	scenes []*raster.Stack
	items  []scanItem
	stride int
}

type scanItem struct {
	scene int
	tile  tiles.Tile // within its scene
}

// newScan lays a tile grid over every scene (gridOf) and numbers the tiles of
// all scenes in order. With shard i of n, only tiles whose number mod n is i
// are kept; with stride > 1 only every stride-th row and column is valid.
func newScan(scenes []*raster.Stack, gridOf func(*raster.Stack) tiles.Grid, stride int, sh Shard) *scan {
	sh = sh.orWhole()
	sc := &scan{scenes: scenes, stride: max(stride, 1)}
	k := 0
	for si, s := range scenes {
		for t := range gridOf(s).Tiles() {
			if k%sh.N == sh.I {
				sc.items = append(sc.items, scanItem{scene: si, tile: t})
			}
			k++
		}
	}
	return sc
}

// tileGrid returns gridOf for newScan with square tiles of side tile, or
// block-aligned tiles.
func tileGrid(tile int) func(*raster.Stack) tiles.Grid {
	return func(s *raster.Stack) tiles.Grid { return gridFor(s, tile) }
}

// pixels returns the number of pixels the scan reads.
func (sc *scan) pixels() int64 {
	var n int64
	for _, it := range sc.items {
		n += int64(it.tile.Pixels())
	}
	return n
}

// runTiles numbers the items as tiles for tiles.Run.
func (sc *scan) runTiles() []tiles.Tile {
	out := make([]tiles.Tile, len(sc.items))
	for i, it := range sc.items {
		out[i] = it.tile
		out[i].Index = i
	}
	return out
}

// reader reads the scan's tiles through its own raster readers, one per
// scene, opened on first use: one GDAL handle per worker.
type reader struct {
	sc      *scan
	readers []*raster.Reader
	buf     []float64
	valid   []bool
}

func (sc *scan) newReader() *reader {
	return &reader{sc: sc, readers: make([]*raster.Reader, len(sc.scenes))}
}

// read reads item k; it returns the pixel values, the validity flags (pixels
// off the stride grid are invalid) and the number of valid pixels.
func (w *reader) read(k int) ([]float64, []bool, int, error) {
	it := w.sc.items[k]
	s := w.sc.scenes[it.scene]
	if w.readers[it.scene] == nil {
		r, err := s.NewReader()
		if err != nil {
			return nil, nil, 0, err
		}
		w.readers[it.scene] = r
	}
	n, p := it.tile.Pixels(), s.Len()
	w.buf = grow(w.buf, n*p)
	w.valid = grow(w.valid, n)
	buf, valid := w.buf, w.valid
	count, err := w.readers[it.scene].Read(it.tile, buf, valid)
	if err != nil {
		return nil, nil, 0, err
	}
	if st := w.sc.stride; st > 1 {
		t := it.tile
		count = 0
		for r := range t.H {
			for c := range t.W {
				i := r*t.W + c
				valid[i] = valid[i] && (t.Y+r)%st == 0 && (t.X+c)%st == 0
				if valid[i] {
					count++
				}
			}
		}
	}
	return buf, valid, count, nil
}

func (w *reader) Close() error {
	var first error
	for _, r := range w.readers {
		if r != nil {
			if err := r.Close(); err != nil && first == nil {
				first = err
			}
		}
	}
	return first
}

// grow returns s resized to n, reallocated only when too small.
func grow[T any](s []T, n int) []T {
	if cap(s) < n {
		return make([]T, n)
	}
	return s[:n]
}

// momentWorker accumulates the co-moments of one tile at a time.
type momentWorker struct {
	*reader
	pool *sync.Pool
}

func (w *momentWorker) Do(_ context.Context, t tiles.Tile) (*bands.Accumulator, error) {
	buf, valid, _, err := w.read(t.Index)
	if err != nil {
		return nil, err
	}
	acc := w.pool.Get().(*bands.Accumulator)
	acc.Reset()
	acc.AddPixels(buf, valid)
	return acc, nil
}

// moments accumulates band co-moments over the scan, tile by tile in
// parallel, merged in tile order so the result is the same for any number
// of workers. The accumulators are exact (bands.NewExactAccumulator): for
// integer pixels, as digital numbers are, the result is also the same for
// any tile size and shard split.
func (sc *scan) moments(ctx context.Context, env Env) (*bands.Accumulator, error) {
	p := sc.scenes[0].Len()
	pool := &sync.Pool{New: func() any { return bands.NewExactAccumulator(p) }}
	total := bands.NewExactAccumulator(p)
	err := tiles.Run(ctx, sc.runTiles(), tiles.Options{Workers: env.workerCount(), Progress: env.progressFor("co-moments", sc.pixels())},
		func(int) (tiles.Worker[*bands.Accumulator], error) {
			return &momentWorker{reader: sc.newReader(), pool: pool}, nil
		},
		func(_ tiles.Tile, acc *bands.Accumulator) error {
			total.Merge(acc)
			pool.Put(acc)
			return nil
		})
	if err != nil {
		return nil, err
	}
	return total, nil
}

// countValid counts the valid pixels of a stack in one pass.
func countValid(ctx context.Context, env Env, s *raster.Stack, tile int) (int64, error) {
	sc := newScan([]*raster.Stack{s}, tileGrid(tile), 1, Shard{})
	var total int64
	err := tiles.Run(ctx, sc.runTiles(), tiles.Options{Workers: env.workerCount()},
		func(int) (tiles.Worker[int], error) { return &countWorker{sc.newReader()}, nil },
		func(_ tiles.Tile, n int) error { total += int64(n); return nil })
	return total, err
}

type countWorker struct{ *reader }

func (w *countWorker) Do(_ context.Context, t tiles.Tile) (int, error) {
	_, _, n, err := w.read(t.Index)
	return n, err
}

// noValidPixels explains why a stack has no valid pixel: it names the bands
// that are invalid everywhere (all nodata or NaN), or says that no pixel is
// valid in all bands at once. It reads each band once, so it runs only on
// this error path.
func noValidPixels(ctx context.Context, env Env, s *raster.Stack, tile int) error {
	var empty []string
	for j, b := range s.Bands {
		sub, err := s.Subset([]int{j})
		if err != nil {
			return err
		}
		n, err := countValid(ctx, env, sub, tile)
		if err != nil {
			return err
		}
		if n == 0 {
			empty = append(empty, fmt.Sprintf("%d (%s)", j+1, b.Name))
		}
	}
	switch {
	case len(empty) == 1:
		return fmt.Errorf("no valid pixels in %s: band %s is nodata or NaN everywhere (leave it out with --bands)", describe(s), empty[0])
	case len(empty) > 1:
		return fmt.Errorf("no valid pixels in %s: bands %s are nodata or NaN everywhere (leave them out with --bands)", describe(s), strings.Join(empty, ", "))
	}
	return fmt.Errorf("no valid pixels in %s after nodata and mask: no pixel is valid in every selected band at once", describe(s))
}
