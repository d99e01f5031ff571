package raster

import (
	"context"
	"fmt"
	"iter"
	"sync"

	"bandfold/tiles"
)

// Int16Tile is a window of a stack read by an Int16Reader, as ReadInt16
// reads it: the value of band b at pixel i (pixels row by row, n =
// Tile.Pixels()) is X[b·n+i] + Shift[b], Valid[i] says whether the pixel
// is valid and Count is the number of valid pixels. Its buffers belong to
// the reader: the caller may change them until it hands the tile back
// with Release. Shift is shared by every tile of the reader and must not
// be changed.
type Int16Tile struct {
	Tile  tiles.Tile
	X     []int16
	Valid []bool
	Count int
	Shift []int32
}

// Int16Reader reads windows of a stack band-sequentially into int16 (see
// ReadInt16) on a goroutine of its own (tiles.Prefetch), up to a depth of
// windows ahead of their use, so that the reads of the next windows
// overlap the arithmetic on the current one. Like a Reader it owns one
// GDAL dataset handle per file and is used by one goroutine (its reads
// happen on another, one at a time); make one per worker.
type Int16Reader struct {
	r     *Reader
	pf    *tiles.Prefetch[*Int16Tile]
	shift []int32
	depth int
}

// NewInt16Reader opens the stack's files for an Int16Reader that reads up
// to depth windows (1 or 2 are enough to hide the arithmetic behind the
// reads) ahead of those taken. It panics if the stack's bands do not fit
// int16 (Int16Shifts reports whether they do) or depth is negative.
func (s *Stack) NewInt16Reader(depth int) (*Int16Reader, error) {
	shift, ok := s.Int16Shifts()
	if !ok || depth < 0 {
		panic(fmt.Sprintf("raster: int16 reader of depth %d (bands fit: %v)", depth, ok))
	}
	r, err := s.NewReader()
	if err != nil {
		return nil, err
	}
	ir := &Int16Reader{r: r, shift: shift, depth: depth}
	ir.pf = tiles.NewPrefetch(depth, ir.fetch)
	return ir, nil
}

// int16Buffers holds the buffers of the tiles handed back to any
// Int16Reader, for the next read of any: a worker that reads many dates in
// turn, one reader each, holds the buffers of the tiles it uses rather than
// one per reader (on ten 7-band dates in 512 x 512 tiles, 35 MiB less for
// each worker).
var int16Buffers sync.Pool // of *int16Buffer

type int16Buffer struct {
	x     []int16
	valid []bool
}

// fetch reads window t into it (a new tile when nil), on the prefetch
// goroutine, in buffers handed back by any reader where there are some.
func (ir *Int16Reader) fetch(t tiles.Tile, it *Int16Tile) (*Int16Tile, error) {
	if it == nil {
		it = &Int16Tile{Shift: ir.shift}
	}
	if it.X == nil {
		if b, ok := int16Buffers.Get().(*int16Buffer); ok {
			it.X, it.Valid = b.x, b.valid
		}
	}
	n := t.Pixels()
	it.Tile, it.X, it.Valid = t, grow(it.X, n*len(ir.shift)), grow(it.Valid, n)
	var err error
	it.Count, err = ir.r.ReadInt16(t, it.X, it.Valid)
	return it, err
}

// Ahead asks for window t to be read, after the windows asked for before
// it; Read takes them in that order. A worker of tiles.Run that
// implements tiles.Lookahead forwards its Ahead calls here (mapping a
// scan's tile to its window of a stack, with a halo, as needed).
func (ir *Int16Reader) Ahead(t tiles.Tile) { ir.pf.Ahead(t) }

// Read returns window t: the first one asked for by Ahead and not yet
// read, once its read is done, or, when none waits, t read now. Errors
// name the file and the window (ReadInt16's); ctx ending first returns
// ctx.Err(). Hand the tile back with Release. It panics if another
// window was asked for first.
func (ir *Int16Reader) Read(ctx context.Context, t tiles.Tile) (*Int16Tile, error) {
	it, err := ir.pf.Get(ctx, t)
	if err != nil {
		ir.Release(it)
		return nil, err
	}
	return it, nil
}

// Release hands a tile back to the reader for a later read to reuse, its
// buffers to any reader's; nil is ignored.
func (ir *Int16Reader) Release(it *Int16Tile) {
	if it == nil {
		return
	}
	if it.X != nil {
		int16Buffers.Put(&int16Buffer{it.X, it.Valid})
		it.X, it.Valid = nil, nil
	}
	ir.pf.Release(it)
}

// Tiles reads the windows ts in order, each asked for depth windows before
// it is yielded, and yields each with a nil error; a tile is released when
// the loop body returns (copy what must outlive it). After a failed read
// it yields the error and stops. Breaking off early takes the windows
// already asked for, so the reader stays usable.
func (ir *Int16Reader) Tiles(ctx context.Context, ts []tiles.Tile) iter.Seq2[*Int16Tile, error] {
	return func(yield func(*Int16Tile, error) bool) {
		asked, taken := 0, 0
		defer func() {
			for _, t := range ts[taken:asked] {
				it, _ := ir.pf.Get(context.Background(), t)
				ir.Release(it)
			}
		}()
		for i, t := range ts {
			for ; asked < min(len(ts), i+1+ir.depth); asked++ {
				ir.pf.Ahead(ts[asked])
			}
			it, err := ir.Read(ctx, t)
			taken = i + 1
			if err != nil {
				yield(nil, err)
				return
			}
			more := yield(it, nil)
			ir.Release(it)
			if !more {
				return
			}
		}
	}
}

// Close stops reading ahead, waiting for a read under way, and closes the
// stack's files.
func (ir *Int16Reader) Close() error {
	ir.pf.Close()
	return ir.r.Close()
}
