package main

import (
	"context"
	"fmt"
	"strings"
	"sync"

	"github.com/spf13/pflag"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// inputFlags are the flags that say how to read an input image: which
// bands, what is invalid, and how to tile it.
type inputFlags struct {
	bands  string
	nodata string
	mask   string
	tile   int
}

func (f *inputFlags) register(fs *pflag.FlagSet) {
	fs.StringVar(&f.bands, "bands", "", `bands to use, 1-based lists and ranges such as "1-5,7" (default all)`)
	fs.StringVar(&f.nodata, "nodata", "", "nodata value overriding the files': one for all bands, or a comma list with one per band")
	fs.StringVar(&f.mask, "mask", "", "validity mask on the same grid (non-zero = valid)")
	fs.IntVar(&f.tile, "tile", 0, "tile size N for N x N pixel tiles (default: aligned to the file's blocks, about 16 MiB of float64 per tile)")
}

// options turns the flags into raster options; extra options come last.
func (f *inputFlags) options(extra ...raster.Option) ([]raster.Option, error) {
	if f.tile < 0 {
		return nil, usagef("--tile %d: must be positive", f.tile)
	}
	sel, err := raster.ParseBands(f.bands)
	if err != nil {
		return nil, usageError{err}
	}
	nd, err := raster.ParseNoData(f.nodata)
	if err != nil {
		return nil, usageError{err}
	}
	opts := []raster.Option{raster.SelectBands(sel), raster.NoData(nd)}
	if f.mask != "" {
		opts = append(opts, raster.Mask(f.mask))
	}
	return append(opts, extra...), nil
}

// splitStack splits an IMAGE argument: several files joined with commas are
// one stack.
func splitStack(arg string) []string {
	parts := strings.Split(arg, ",")
	out := parts[:0]
	for _, p := range parts {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

// openImage opens one IMAGE argument as a stack.
func openImage(arg string, opts []raster.Option) (*raster.Stack, error) {
	paths := splitStack(arg)
	if len(paths) == 0 {
		return nil, usagef("empty image argument %q", arg)
	}
	return raster.Open(paths, opts...)
}

// grid returns the tile grid over s: N x N tiles when tile > 0, otherwise
// tiles aligned to the file's blocks.
func grid(s *raster.Stack, tile int) tiles.Grid {
	if tile > 0 {
		return tiles.NewGrid(s.Width, s.Height, tile, tile)
	}
	w, h := tiles.SizeFor(s.Width, s.Height, s.BlockW, s.BlockH, s.Len(), tiles.DefaultBudget)
	return tiles.NewGrid(s.Width, s.Height, w, h)
}

// basisBands describes the stack's bands for a basis or partial file.
func basisBands(s *raster.Stack) []transform.Band {
	out := make([]transform.Band, s.Len())
	for i, b := range s.Bands {
		out[i] = transform.Band{Name: b.Name, Source: b.Path, Index: b.Index, DataType: b.DataType,
			NoData: b.NoData, Scale: b.Scale, Offset: b.Offset}
	}
	return out
}

// fingerprints records every file of the stacks (and their masks).
func fingerprints(stacks []*raster.Stack) []transform.Fingerprint {
	var out []transform.Fingerprint
	add := func(p string) {
		fp, err := transform.FileFingerprint(p)
		if err != nil {
			fp = transform.Fingerprint{Path: p, Size: -1} // virtual paths
		}
		out = append(out, fp)
	}
	for _, s := range stacks {
		for _, p := range s.Paths {
			add(p)
		}
		for _, m := range s.Masks {
			add(m)
		}
	}
	return out
}

// scan describes a pass over the tiles of one or more scenes that share a
// band count: tile k of the pass is jobs[k].
type scan struct {
	scenes []*raster.Stack
	jobs   []job
	stride int
}

type job struct {
	scene int
	tile  tiles.Tile // tile within its scene
}

// newScan lays a tile grid over every scene and numbers the tiles of all
// scenes in order. With shard i of n, only tiles whose number mod n is i
// are kept.
func newScan(scenes []*raster.Stack, tile, stride, shardI, shardN int) *scan {
	return newScanOn(scenes, func(s *raster.Stack) tiles.Grid { return grid(s, tile) }, stride, shardI, shardN)
}

// newScanOn is newScan with the tile grid of each scene given by gridOf.
func newScanOn(scenes []*raster.Stack, gridOf func(*raster.Stack) tiles.Grid, stride, shardI, shardN int) *scan {
	sc := &scan{scenes: scenes, stride: max(stride, 1)}
	k := 0
	for si, s := range scenes {
		for t := range gridOf(s).Tiles() {
			if k%shardN == shardI {
				sc.jobs = append(sc.jobs, job{scene: si, tile: t})
			}
			k++
		}
	}
	return sc
}

// pixels returns the number of pixels the scan reads.
func (sc *scan) pixels() int64 {
	var n int64
	for _, j := range sc.jobs {
		n += int64(j.tile.Pixels())
	}
	return n
}

// runTiles numbers the jobs as tiles for the runner.
func (sc *scan) runTiles() []tiles.Tile {
	out := make([]tiles.Tile, len(sc.jobs))
	for i, j := range sc.jobs {
		out[i] = j.tile
		out[i].Index = i
	}
	return out
}

// readWorker reads the scan's tiles through its own readers, one per scene,
// opened on first use.
type readWorker struct {
	sc      *scan
	readers []*raster.Reader
	buf     []float64
	valid   []bool
}

func (sc *scan) newReadWorker() *readWorker {
	return &readWorker{sc: sc, readers: make([]*raster.Reader, len(sc.scenes))}
}

// read reads job k; it returns the pixel values, the validity flags (with
// pixels off the stride grid marked invalid) and the number of valid pixels.
func (w *readWorker) read(k int) ([]float64, []bool, int, error) {
	j := w.sc.jobs[k]
	s := w.sc.scenes[j.scene]
	if w.readers[j.scene] == nil {
		r, err := s.NewReader()
		if err != nil {
			return nil, nil, 0, err
		}
		w.readers[j.scene] = r
	}
	n, p := j.tile.Pixels(), s.Len()
	if cap(w.buf) < n*p {
		w.buf = make([]float64, n*p)
	}
	if cap(w.valid) < n {
		w.valid = make([]bool, n)
	}
	buf, valid := w.buf[:n*p], w.valid[:n]
	count, err := w.readers[j.scene].Read(j.tile, buf, valid)
	if err != nil {
		return nil, nil, 0, err
	}
	if st := w.sc.stride; st > 1 {
		t := j.tile
		count = 0
		for r := range t.H {
			for c := range t.W {
				i := r*t.W + c
				if valid[i] && ((t.Y+r)%st != 0 || (t.X+c)%st != 0) {
					valid[i] = false
				}
				if valid[i] {
					count++
				}
			}
		}
	}
	return buf, valid, count, nil
}

func (w *readWorker) Close() error {
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

// momentWorker accumulates the co-moments of one tile at a time.
type momentWorker struct {
	*readWorker
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
// of workers.
func (sc *scan) moments(ctx context.Context, g *globals) (*bands.Accumulator, error) {
	p := sc.scenes[0].Len()
	pool := &sync.Pool{New: func() any { return bands.NewAccumulator(p) }}
	total := bands.NewAccumulator(p)
	err := tiles.Run(ctx, sc.runTiles(), tiles.Options{Workers: g.workers, Progress: g.progress("co-moments", sc.pixels())},
		func(int) (tiles.Worker[*bands.Accumulator], error) {
			return &momentWorker{readWorker: sc.newReadWorker(), pool: pool}, nil
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

// describeScenes names the scenes for messages.
func describeScenes(scenes []*raster.Stack) string {
	var names []string
	for _, s := range scenes {
		names = append(names, strings.Join(s.Paths, ","))
	}
	return strings.Join(names, ", ")
}

// checkBandCounts requires every scene to have the band count of the first.
func checkBandCounts(scenes []*raster.Stack) error {
	for _, s := range scenes[1:] {
		if s.Len() != scenes[0].Len() {
			return fmt.Errorf("%s has %d bands but %s has %d: pooled scenes need the same bands",
				strings.Join(s.Paths, ","), s.Len(), strings.Join(scenes[0].Paths, ","), scenes[0].Len())
		}
	}
	return nil
}
