package raster

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"sync"
	"testing"

	"github.com/airbusgeo/godal"

	"bandfold/bands"
	"bandfold/tiles"
)

// benchCube is a generated GeoTIFF laid out as make bench's synthetic
// cubes (bandfold demo synth): uncompressed, pixel-interleaved, in square
// blocks, with 12-bit digital numbers on a per-band offset.
type benchCube struct {
	name              string
	p, w, h, block    int
	dtype             godal.DataType
	offset, bandShift int
}

var benchCubes = []benchCube{
	{"p=224 int16 512x512", 224, 512, 512, 256, godal.Int16, -2048, 3},
	{"p=7 uint16 2048x2048", 7, 2048, 2048, 512, godal.UInt16, 7000, 301},
}

// value returns the digital number of band b at pixel (x, y): a hash of
// the pixel in 0..4095, on the band's offset.
func (c benchCube) value(x, y, b int) int {
	h := uint32(x)*73856093 ^ uint32(y)*19349663 ^ uint32(b)*83492791
	h ^= h >> 13
	return c.offset + b*c.bandShift + int(h*0x5bd1e995>>20)
}

// write writes the cube in dir, a strip of blocks at a time.
func (c benchCube) write(b *testing.B, dir string) string {
	path := filepath.Join(dir, fmt.Sprintf("cube%d.tif", c.p))
	ds, err := godal.Create(godal.GTiff, path, c.p, c.dtype, c.w, c.h, godal.CreationOption("TILED=YES",
		fmt.Sprintf("BLOCKXSIZE=%d", c.block), fmt.Sprintf("BLOCKYSIZE=%d", c.block), "INTERLEAVE=PIXEL"))
	if err != nil {
		b.Fatal(err)
	}
	buf := make([]int32, c.w*c.block*c.p)
	for y0 := 0; y0 < c.h; y0 += c.block {
		rows := min(c.block, c.h-y0)
		for i := range rows * c.w {
			for band := range c.p {
				buf[i*c.p+band] = int32(c.value(i%c.w, y0+i/c.w, band))
			}
		}
		if err := ds.Write(0, y0, buf[:rows*c.w*c.p], c.w, rows, godal.PixelStride(c.p), godal.LineStride(c.p*c.w), godal.BandStride(1)); err != nil {
			b.Fatal(err)
		}
	}
	if err := ds.Close(); err != nil {
		b.Fatal(err)
	}
	return path
}

// BenchmarkInt16Read times one pass over a generated cube (benchCubes) in
// the tiles a job lays over it (tiles.SizeFor with the default budget):
// reading band-sequential int16 tiles alone ("read", ReadInt16), the
// integer kernel alone on the same tiles in memory ("kernel",
// AddInt16Tile), one after the other ("read+kernel"), and with the reads
// of the next tiles overlapping the kernel ("readahead+kernel", an
// Int16Reader of depth 2); the same through tiles.Run as a job would
// run it, with 1 or 2 workers, without and with tiles read ahead ("run");
// against today's float64 path ("float64", Read and AddPixels). The file is in the page cache (just written), so
// "read" is GDAL's copy out of it. Per tile figures are ms/tile:
//
//	go test -tags openblas -run XXX -bench Int16Read -benchtime 5x ./raster
func BenchmarkInt16Read(b *testing.B) {
	dir := b.TempDir()
	for _, c := range benchCubes {
		s, err := Open([]string{c.write(b, dir)})
		if err != nil {
			b.Fatal(err)
		}
		br := newBenchRun(b, s, c.name)
		for _, v := range br.passes() {
			b.Run(br.name+v.name, func(b *testing.B) { benchPass(b, s.Len(), len(br.grid), v.pass) })
		}
		br.ir.Close()
		br.r.Close()
		s.Close()
	}
}

// benchRun holds what the passes of BenchmarkInt16Read over one cube use:
// its tiles, readers, buffers, and the tiles read beforehand.
type benchRun struct {
	b      *testing.B
	s      *Stack
	name   string
	grid   []tiles.Tile
	r      *Reader
	ir     *Int16Reader
	x      []int16
	valid  []bool
	wide   []float64
	shift  []int32
	memory []*Int16Tile
}

func newBenchRun(b *testing.B, s *Stack, name string) *benchRun {
	tw, th := tiles.SizeFor(s.Width, s.Height, s.BlockW, s.BlockH, s.Len(), tiles.DefaultBudget)
	br := &benchRun{b: b, s: s, grid: tiles.NewGrid(s.Width, s.Height, tw, th).All()}
	br.name = fmt.Sprintf("%s/tiles %dx%d/", name, tw, th)
	var err1, err2 error
	br.r, err1 = s.NewReader()
	br.ir, err2 = s.NewInt16Reader(2)
	if err := errors.Join(err1, err2); err != nil {
		b.Fatal(err)
	}
	n, p := br.grid[0].Pixels(), s.Len()
	br.x, br.valid, br.wide = make([]int16, n*p), make([]bool, n), make([]float64, n*p)
	br.shift, _ = s.Int16Shifts()
	br.memory = readAhead(b, br.ir, br.grid)
	return br
}

// read reads tile t with ReadInt16.
func (br *benchRun) read(t tiles.Tile) ([]int16, []bool) {
	if _, err := br.r.ReadInt16(t, br.x, br.valid); err != nil {
		br.b.Fatal(err)
	}
	n := t.Pixels()
	return br.x[:n*len(br.shift)], br.valid[:n]
}

// passes are the passes over every tile that BenchmarkInt16Read times.
func (br *benchRun) passes() []struct {
	name string
	pass func(acc *bands.Accumulator)
} {
	each := func(tile func(t tiles.Tile, acc *bands.Accumulator)) func(acc *bands.Accumulator) {
		return func(acc *bands.Accumulator) {
			for _, t := range br.grid {
				tile(t, acc)
			}
		}
	}
	return []struct {
		name string
		pass func(acc *bands.Accumulator)
	}{
		{"read", each(func(t tiles.Tile, _ *bands.Accumulator) { br.read(t) })},
		{"kernel", each(func(t tiles.Tile, acc *bands.Accumulator) {
			it := br.memory[t.Index]
			acc.AddInt16Tile(it.X, it.Valid, it.Shift)
		})},
		{"read+kernel", each(func(t tiles.Tile, acc *bands.Accumulator) {
			x, valid := br.read(t)
			acc.AddInt16Tile(x, valid, br.shift)
		})},
		{"readahead+kernel", func(acc *bands.Accumulator) {
			for it, err := range br.ir.Tiles(context.Background(), br.grid) {
				if err != nil {
					br.b.Fatal(err)
				}
				acc.AddInt16Tile(it.X, it.Valid, it.Shift)
			}
		}},
		{"run 1 worker", br.run(1, 0)},
		{"run 1 worker ahead 2", br.run(1, 2)},
		{"run 2 workers", br.run(2, 0)},
		{"run 2 workers ahead 1", br.run(2, 1)},
		{"run 2 workers ahead 2", br.run(2, 2)},
		{"float64", each(func(t tiles.Tile, acc *bands.Accumulator) {
			if _, err := br.r.Read(t, br.wide, br.valid); err != nil {
				br.b.Fatal(err)
			}
			n := t.Pixels()
			acc.AddPixels(br.wide[:n*len(br.shift)], br.valid[:n])
		})},
	}
}

// run returns a pass through tiles.Run as a job makes it: workers
// (kernelWorker) that each read through their own Int16Reader, told of
// their next tiles ahead (0: none, each read when Do asks for it), their
// tiles' sums merged in tile order.
func (br *benchRun) run(workers, ahead int) func(acc *bands.Accumulator) {
	return func(acc *bands.Accumulator) {
		p := len(br.shift)
		pool := sync.Pool{New: func() any { return bands.NewExactAccumulator(p) }}
		err := tiles.Run(context.Background(), br.grid, tiles.Options{Workers: workers, Ahead: ahead},
			func(int) (tiles.Worker[*bands.Accumulator], error) {
				ir, err := br.s.NewInt16Reader(ahead)
				return &kernelWorker{ir: ir, pool: &pool}, err
			},
			func(_ tiles.Tile, a *bands.Accumulator) error {
				acc.Merge(a)
				pool.Put(a)
				return nil
			})
		if err != nil {
			br.b.Fatal(err)
		}
	}
}

// kernelWorker is a worker of tiles.Run that reads its tiles through an
// Int16Reader, told of them ahead (tiles.Lookahead), and sums each with
// the integer kernel.
type kernelWorker struct {
	ir   *Int16Reader
	pool *sync.Pool
}

func (w *kernelWorker) Ahead(t tiles.Tile) { w.ir.Ahead(t) }

func (w *kernelWorker) Do(ctx context.Context, t tiles.Tile) (*bands.Accumulator, error) {
	it, err := w.ir.Read(ctx, t)
	if err != nil {
		return nil, err
	}
	defer w.ir.Release(it)
	acc := w.pool.Get().(*bands.Accumulator)
	acc.Reset()
	acc.AddInt16Tile(it.X, it.Valid, it.Shift)
	return acc, nil
}

func (w *kernelWorker) Close() error { return w.ir.Close() }

// readAhead returns copies of the tiles of grid read through ir.
func readAhead(b *testing.B, ir *Int16Reader, grid []tiles.Tile) []*Int16Tile {
	var read []*Int16Tile
	for it, err := range ir.Tiles(context.Background(), grid) {
		if err != nil {
			b.Fatal(err)
		}
		read = append(read, &Int16Tile{Tile: it.Tile, X: append([]int16(nil), it.X...),
			Valid: append([]bool(nil), it.Valid...), Count: it.Count, Shift: it.Shift})
	}
	return read
}

// benchPass times pass, given an exact accumulator of p bands reset
// before each, and reports the time per tile of its n tiles.
func benchPass(b *testing.B, p, n int, pass func(acc *bands.Accumulator)) {
	acc := bands.NewExactAccumulator(p)
	for b.Loop() {
		acc.Reset()
		pass(acc)
	}
	b.ReportMetric(b.Elapsed().Seconds()*1e3/float64(b.N*n), "ms/tile")
}
