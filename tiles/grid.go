// Package tiles owns the tile grid laid over an image and the parallel runner
// that processes tiles with a fixed number of workers and hands results back
// in tile order.
//
// Concurrency in bandfold lives here and nowhere else: callers describe the
// per-worker state (for example one GDAL dataset handle per worker), the work
// done on one tile, and what to do with each result; Run does the rest. Because
// results are delivered strictly in tile order, anything merged from them is
// the same for any number of workers. Prefetch reads tiles ahead of their
// use on a goroutine of its own, so that a worker's next reads overlap its
// arithmetic on the current tile; Run tells a worker that implements
// Lookahead which tiles it will be given (Options.Ahead). Later runs one
// piece of work beside the tiles, whose result a later step waits for.
package tiles

import (
	"fmt"
	"iter"
)

// Tile is one rectangular window of an image, in pixels. Index is the tile's
// position in row-major grid order.
type Tile struct {
	Index      int
	X, Y, W, H int
}

// Pixels returns the number of pixels in the tile.
func (t Tile) Pixels() int { return t.W * t.H }

func (t Tile) String() string {
	return fmt.Sprintf("tile %d (x %d, y %d, %dx%d)", t.Index, t.X, t.Y, t.W, t.H)
}

// Grid covers a Width x Height image with TileW x TileH tiles in row-major
// order; tiles on the right and bottom edges are clipped to the image.
type Grid struct {
	Width, Height int
	TileW, TileH  int
}

// NewGrid returns the grid of tileW x tileH tiles over a width x height image.
// It panics if any size is not positive.
func NewGrid(width, height, tileW, tileH int) Grid {
	if width <= 0 || height <= 0 || tileW <= 0 || tileH <= 0 {
		panic(fmt.Sprintf("tiles: bad grid %dx%d with %dx%d tiles", width, height, tileW, tileH))
	}
	return Grid{Width: width, Height: height, TileW: tileW, TileH: tileH}
}

// Cols returns the number of tile columns.
func (g Grid) Cols() int { return (g.Width + g.TileW - 1) / g.TileW }

// Rows returns the number of tile rows.
func (g Grid) Rows() int { return (g.Height + g.TileH - 1) / g.TileH }

// Len returns the number of tiles in the grid.
func (g Grid) Len() int { return g.Cols() * g.Rows() }

// Tile returns tile i (0 <= i < Len), clipped to the image.
func (g Grid) Tile(i int) Tile {
	if i < 0 || i >= g.Len() {
		panic(fmt.Sprintf("tiles: tile %d out of range [0,%d)", i, g.Len()))
	}
	c, r := i%g.Cols(), i/g.Cols()
	x, y := c*g.TileW, r*g.TileH
	return Tile{Index: i, X: x, Y: y, W: min(g.TileW, g.Width-x), H: min(g.TileH, g.Height-y)}
}

// Tiles iterates over every tile of the grid in index order.
func (g Grid) Tiles() iter.Seq[Tile] {
	return func(yield func(Tile) bool) {
		for i := range g.Len() {
			if !yield(g.Tile(i)) {
				return
			}
		}
	}
}

// Shard returns the tiles whose index modulo n equals i, in index order: the
// share of the grid that task i of an n-task job array processes. It panics
// unless 0 <= i < n.
func (g Grid) Shard(i, n int) []Tile {
	if n <= 0 || i < 0 || i >= n {
		panic(fmt.Sprintf("tiles: bad shard %d/%d", i, n))
	}
	var out []Tile
	for k := i; k < g.Len(); k += n {
		out = append(out, g.Tile(k))
	}
	return out
}

// All returns every tile of the grid in index order.
func (g Grid) All() []Tile { return g.Shard(0, 1) }

// DefaultBudget is the size, in bytes, that one tile of all selected bands
// should take as float64 values when the tile size is left to SizeFor.
const DefaultBudget = 16 << 20

// SizeFor picks a tile shape aligned to the file's internal blocks so that a
// tile of p bands held as float64 takes about budget bytes: whole blocks
// (several blocks side by side along a row of blocks when they are small), or,
// when one block is already larger than the budget, strips of a block's width
// and fewer rows. The result never exceeds the image size.
//
// For 224 bands in 256 x 256 blocks that is strips of 36 rows; for 7 bands in
// 512 x 512 blocks, whole blocks.
func SizeFor(width, height, blockW, blockH, p, budget int) (tileW, tileH int) {
	if p <= 0 || budget <= 0 {
		panic(fmt.Sprintf("tiles: bad size request for %d bands within %d bytes", p, budget))
	}
	blockW = clamp(blockW, 1, width)
	blockH = clamp(blockH, 1, height)
	pixels := max(budget/(8*p), 1)
	if blockW*blockH > pixels {
		// Part of one block: keep its width, take fewer rows.
		return blockW, clamp(pixels/blockW, 1, blockH)
	}
	// Whole blocks. A block of full image width (strips) grows downwards,
	// other blocks grow sideways along a row of blocks, then downwards.
	n := pixels / (blockW * blockH)
	if blockW >= width {
		return blockW, min(blockH*n, height)
	}
	across := min(n, (width+blockW-1)/blockW)
	down := max(n/across, 1)
	if down > 1 && blockH > 1 {
		return min(blockW*across, width), min(blockH*down, height)
	}
	return min(blockW*across, width), blockH
}

func clamp(v, lo, hi int) int { return max(lo, min(v, hi)) }
