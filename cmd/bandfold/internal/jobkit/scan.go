package jobkit

import (
	"context"
	"errors"
	"fmt"
	"runtime"
	"strings"
	"sync"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
)

// Scan is a pass over the tiles of one or more scenes that share a band
// count: item k of the pass is items[k].
type Scan struct {
	Scenes []*raster.Stack
	Items  []scanItem
	stride int
}

type scanItem struct {
	Scene int
	Tile  tiles.Tile // within its scene
}

// NewScan lays a tile grid over every scene (gridOf) and numbers the tiles of
// all scenes in order. With shard i of n, only tiles whose number mod n is i
// are kept; with stride > 1 only every stride-th row and column is valid.
func NewScan(scenes []*raster.Stack, gridOf func(*raster.Stack) tiles.Grid, stride int, sh Shard) *Scan {
	sh = sh.OrWhole()
	sc := &Scan{Scenes: scenes, stride: max(stride, 1)}
	k := 0
	for si, s := range scenes {
		for t := range gridOf(s).Tiles() {
			if k%sh.N == sh.I {
				sc.Items = append(sc.Items, scanItem{Scene: si, Tile: t})
			}
			k++
		}
	}
	return sc
}

// TileGrid returns gridOf for NewScan with square tiles of side tile, or
// block-aligned tiles.
func TileGrid(tile int) func(*raster.Stack) tiles.Grid {
	return func(s *raster.Stack) tiles.Grid { return GridFor(s, tile) }
}

// Pixels returns the number of pixels the scan reads.
func (sc *Scan) Pixels() int64 {
	var n int64
	for _, it := range sc.Items {
		n += int64(it.Tile.Pixels())
	}
	return n
}

// RunTiles numbers the items as tiles for tiles.Run.
func (sc *Scan) RunTiles() []tiles.Tile {
	out := make([]tiles.Tile, len(sc.Items))
	for i, it := range sc.Items {
		out[i] = it.Tile
		out[i].Index = i
	}
	return out
}

// Reader reads the scan's tiles through its own raster readers, one per
// scene, opened on first use: one GDAL handle per worker.
type Reader struct {
	Sc      *Scan
	readers []*raster.Reader
	buf     []float64
	valid   []bool
}

func (sc *Scan) NewReader() *Reader {
	return &Reader{Sc: sc, readers: make([]*raster.Reader, len(sc.Scenes))}
}

// Read reads item k; it returns the pixel values, the validity flags (pixels
// off the stride grid are invalid) and the number of valid pixels.
func (w *Reader) Read(k int) ([]float64, []bool, int, error) {
	it := w.Sc.Items[k]
	s := w.Sc.Scenes[it.Scene]
	if w.readers[it.Scene] == nil {
		r, err := s.NewReader()
		if err != nil {
			return nil, nil, 0, err
		}
		w.readers[it.Scene] = r
	}
	n, p := it.Tile.Pixels(), s.Len()
	w.buf = Grow(w.buf, n*p)
	w.valid = Grow(w.valid, n)
	buf, valid := w.buf, w.valid
	count, err := w.readers[it.Scene].Read(it.Tile, buf, valid)
	if err != nil {
		return nil, nil, 0, err
	}
	if w.Sc.stride > 1 {
		count = w.Sc.onGrid(it.Tile, valid)
	}
	return buf, valid, count, nil
}

// onGrid clears in valid, the flags of tile t, the pixels off the stride
// grid, and returns the number of valid pixels left.
func (sc *Scan) onGrid(t tiles.Tile, valid []bool) int {
	st, count := sc.stride, 0
	for r := range t.H {
		for c := range t.W {
			i := r*t.W + c
			valid[i] = valid[i] && (t.Y+r)%st == 0 && (t.X+c)%st == 0
			if valid[i] {
				count++
			}
		}
	}
	return count
}

func (w *Reader) Close() error {
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

// Grow returns s resized to n, reallocated only when too small.
func Grow[T any](s []T, n int) []T {
	if cap(s) < n {
		return make([]T, n)
	}
	return s[:n]
}

// IntegerKernel sends the scenes whose bands are 8- or 16-bit integers
// read unscaled (raster.Stack.Int16Shifts) through the integer co-moment
// kernel: read band-sequentially as int16 (raster.Int16Reader), ahead of
// their use, and summed by bands.AddInt16Tile and its kin. Their exact
// sums are the same integers as those of the float64 path, so every result
// is the same bit for bit; tests turn it off to compare the two paths.
var IntegerKernel = true

// ReadAhead returns how many tiles a worker of the integer path reads
// ahead of the one it sums (tiles.Options.Ahead, raster.NewInt16Reader):
// one while there are fewer workers than CPUs, so that a spare core reads
// while the worker sums, and none otherwise, where every core already
// reads or sums and the reads ahead only take memory (BenchmarkInt16Read
// in package raster: with 1 worker on 2 cores the kernel hides behind the
// reads; with 2 workers reading ahead gains nothing).
func ReadAhead(workers int) int {
	if workers < runtime.NumCPU() {
		return 1
	}
	return 0
}

// Int16Readers are one worker's readers of the integer path: a
// raster.Int16Reader for each scene that takes it (IntegerKernel, and
// bands that fit int16), opened on first use.
type Int16Readers struct {
	scenes []*raster.Stack
	depth  int
	fits   []bool
	rs     []*raster.Int16Reader
	errs   []error
}

// NewInt16Readers returns the integer readers of one worker over scenes,
// each reading depth tiles ahead (ReadAhead).
func NewInt16Readers(scenes []*raster.Stack, depth int) *Int16Readers {
	ir := &Int16Readers{scenes: scenes, depth: depth, fits: make([]bool, len(scenes)),
		rs: make([]*raster.Int16Reader, len(scenes)), errs: make([]error, len(scenes))}
	for k, s := range scenes {
		_, ir.fits[k] = s.Int16Shifts()
		ir.fits[k] = ir.fits[k] && IntegerKernel
	}
	return ir
}

// Get returns the reader of scene k, opening it on first use, or nil when
// the scene takes the float64 path. A failed open is remembered: Ahead,
// which cannot return it, leaves it to the next Get in Do to report.
func (ir *Int16Readers) Get(k int) (*raster.Int16Reader, error) {
	if !ir.fits[k] || ir.errs[k] != nil || ir.rs[k] != nil {
		return ir.rs[k], ir.errs[k]
	}
	ir.rs[k], ir.errs[k] = ir.scenes[k].NewInt16Reader(ir.depth)
	return ir.rs[k], ir.errs[k]
}

// Ahead asks scene k's reader, if it has one, to read window t ahead.
func (ir *Int16Readers) Ahead(k int, t tiles.Tile) {
	if r, _ := ir.Get(k); r != nil {
		r.Ahead(t)
	}
}

// Close closes the readers opened.
func (ir *Int16Readers) Close() error {
	var errs []error
	for _, r := range ir.rs {
		if r != nil {
			errs = append(errs, r.Close())
		}
	}
	return errors.Join(errs...)
}

// momentWorker accumulates the co-moments of one tile at a time, through
// the integer kernel where the tile's scene takes it.
type momentWorker struct {
	*Reader
	ints *Int16Readers
	pool *sync.Pool
}

func (w *momentWorker) Ahead(t tiles.Tile) {
	it := w.Sc.Items[t.Index]
	w.ints.Ahead(it.Scene, it.Tile)
}

func (w *momentWorker) Do(ctx context.Context, t tiles.Tile) (*bands.Accumulator, error) {
	it := w.Sc.Items[t.Index]
	r, err := w.ints.Get(it.Scene)
	if err != nil {
		return nil, err
	}
	if r == nil {
		buf, valid, _, err := w.Read(t.Index)
		if err != nil {
			return nil, err
		}
		acc := w.get()
		acc.AddPixels(buf, valid)
		return acc, nil
	}
	x, err := r.Read(ctx, it.Tile)
	if err != nil {
		return nil, err
	}
	defer r.Release(x)
	if w.Sc.stride > 1 {
		w.Sc.onGrid(it.Tile, x.Valid)
	}
	acc := w.get()
	acc.AddInt16Tile(x.X, x.Valid, x.Shift)
	return acc, nil
}

func (w *momentWorker) get() *bands.Accumulator {
	acc := w.pool.Get().(*bands.Accumulator)
	acc.Reset()
	return acc
}

func (w *momentWorker) Close() error { return errors.Join(w.ints.Close(), w.Reader.Close()) }

// Moments accumulates band co-moments over the scan, tile by tile in
// parallel, merged in tile order so the result is the same for any number
// of workers. The accumulators are exact (bands.NewExactAccumulator): for
// integer pixels, as digital numbers are, the result is also the same for
// any tile size and shard split, and the same whether the integer kernel
// (IntegerKernel) or the float64 path summed them.
func (sc *Scan) Moments(ctx context.Context, env Env) (*bands.Accumulator, error) {
	p := sc.Scenes[0].Len()
	pool := &sync.Pool{New: func() any { return bands.NewExactAccumulator(p) }}
	total := bands.NewExactAccumulator(p)
	workers := env.WorkerCount()
	ahead := ReadAhead(workers)
	err := tiles.Run(ctx, sc.RunTiles(), tiles.Options{Workers: workers, Ahead: ahead, Progress: env.ProgressFor("co-moments", sc.Pixels())},
		func(int) (tiles.Worker[*bands.Accumulator], error) {
			return &momentWorker{Reader: sc.NewReader(), ints: NewInt16Readers(sc.Scenes, ahead), pool: pool}, nil
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

// CountValid counts the valid pixels of a stack in one pass.
func CountValid(ctx context.Context, env Env, s *raster.Stack, tile int) (int64, error) {
	sc := NewScan([]*raster.Stack{s}, TileGrid(tile), 1, Shard{})
	var total int64
	err := tiles.Run(ctx, sc.RunTiles(), tiles.Options{Workers: env.WorkerCount()},
		func(int) (tiles.Worker[int], error) { return &countWorker{sc.NewReader()}, nil },
		func(_ tiles.Tile, n int) error { total += int64(n); return nil })
	return total, err
}

type countWorker struct{ *Reader }

func (w *countWorker) Do(_ context.Context, t tiles.Tile) (int, error) {
	_, _, n, err := w.Read(t.Index)
	return n, err
}

// NoValidPixels explains why a stack has no valid pixel: it names the mask
// that leaves no pixel valid, or the bands that are invalid everywhere (all
// nodata or NaN), or says that no pixel is valid in all bands at once. It
// reads the stack again for each mask and each band, so it runs only on
// this error path.
func NoValidPixels(ctx context.Context, env Env, s *raster.Stack, tile int) error {
	if len(s.MaskRules) > 0 {
		bare, err := s.WithMasks(nil)
		if err != nil {
			return err
		}
		n, err := CountValid(ctx, env, bare, tile)
		if err != nil {
			return err
		}
		if n > 0 {
			return maskCulprit(ctx, env, s, tile)
		}
		s = bare
	}
	var empty []string
	for j, b := range s.Bands {
		sub, err := s.Subset([]int{j})
		if err != nil {
			return err
		}
		n, err := CountValid(ctx, env, sub, tile)
		if err != nil {
			return err
		}
		if n == 0 {
			empty = append(empty, fmt.Sprintf("%d (%s)", j+1, b.Name))
		}
	}
	switch {
	case len(empty) == 1:
		return fmt.Errorf("no valid pixels in %s: band %s is nodata or NaN everywhere (leave it out with --bands)", Describe(s), empty[0])
	case len(empty) > 1:
		return fmt.Errorf("no valid pixels in %s: bands %s are nodata or NaN everywhere (leave them out with --bands)", Describe(s), strings.Join(empty, ", "))
	}
	return fmt.Errorf("no valid pixels in %s after nodata: no pixel is valid in every selected band at once", Describe(s))
}

// maskCulprit names the mask that alone leaves no pixel of s valid, or says
// that the masks do so together; the bands have valid pixels.
func maskCulprit(ctx context.Context, env Env, s *raster.Stack, tile int) error {
	for m, rule := range s.MaskRules {
		one, err := s.WithMasks([]int{m})
		if err != nil {
			return err
		}
		n, err := CountValid(ctx, env, one, tile)
		if err != nil {
			return err
		}
		if n == 0 {
			return fmt.Errorf("no valid pixels in %s: mask %s marks every pixel invalid", Describe(s), rule)
		}
	}
	return fmt.Errorf("no valid pixels in %s: the masks %s together leave no pixel valid", Describe(s), strings.Join(s.Masks, ", "))
}
