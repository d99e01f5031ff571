package series

import (
	"context"
	"fmt"
	"runtime/debug"
	"sync"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/tiles"
)

// PairTile is one tile of every scored pair's change statistic: Z of the
// chunk of pixels last scored (pixels lo to hi of the tile at [0, hi-lo):
// a hook takes what it keeps of it in Pair, so that a worker holds one
// chunk of Z per pair, not a tile, however many dates), and the whole
// tile's flags and top components.
type PairTile struct {
	Z          [][]float64 // per pair, one chunk
	Flags, Top [][]uint8   // per pair
	// Extra is the command's own per-tile results (MapHooks).
	Extra any
}

// MapHooks are what a command adds to the engine's map pass: per worker,
// pair is called after each chunk of a pair is scored (pixels lo to hi of
// the tile, whose Z are at PairTile.Z[q][:hi-lo]), with the dates' raw
// values of the chunk at hand; done once a tile is scored. deliver runs
// in tile order in the one goroutine that merges.
type MapHooks struct {
	NewWorker func() TileHook
	Deliver   func(t tiles.Tile, pt *PairTile) error
}

// TileHook is a worker's share of a command's map outputs.
type TileHook interface {
	Begin(t tiles.Tile, pt *PairTile)
	Pair(q int, t tiles.Tile, lo, hi int, x [2][]float64, both []bool, s *PairScorer, pt *PairTile)
	Done(t tiles.Tile, pt *PairTile)
}

// seriesChunk is the number of pixels a worker scores at a time: the
// scorers' buffers stay small whatever the tile and the number of pairs.
const seriesChunk = 2048

// pairWorker reads the dates of a tile in order into a ring holding the
// last ring dates and scores the pairs ending on each date, a chunk at a
// time (the values of the integer path converted a chunk at a time).
type pairWorker struct {
	*seriesReader
	scorers []*PairScorer
	pairs   [][2]int
	ring    int
	pool    *sync.Pool
	hook    TileHook
	p       int
	both    []bool
	ending  []int
	xa, xb  []float64 // a chunk of the pair's dates, on the integer path
}

func (w *pairWorker) Do(ctx context.Context, t tiles.Tile) (*PairTile, error) {
	defer w.releaseAll()
	n, p := t.Pixels(), w.p
	pt := w.pool.Get().(*PairTile)
	Q := len(w.pairs)
	pt.Z, pt.Flags, pt.Top = Grows(pt.Z, Q, min(n, seriesChunk)), Grows(pt.Flags, Q, n), Grows(pt.Top, Q, n)
	w.hook.Begin(t, pt)
	w.both = jobkit.Grow(w.both, seriesChunk)
	w.xa, w.xb = jobkit.Grow(w.xa, seriesChunk*p), jobkit.Grow(w.xb, seriesChunk*p)
	for d := range w.scenes {
		if err := w.readDate(ctx, t.Index, d, d%w.ring); err != nil {
			return nil, err
		}
		w.ending = w.ending[:0]
		for q, pr := range w.pairs {
			if pr[1] == d {
				w.ending = append(w.ending, q)
			}
		}
		for lo := 0; lo < n; lo += seriesChunk {
			hi := min(n, lo+seriesChunk)
			for _, q := range w.ending {
				a, b := w.pairs[q][0]%w.ring, w.pairs[q][1]%w.ring
				both := w.both[:hi-lo]
				for i := range both {
					both[i] = w.valid[a][lo+i] && w.valid[b][lo+i]
				}
				x := [2][]float64{w.values(a, lo, hi, w.xa), w.values(b, lo, hi, w.xb)}
				w.scorers[q].score(x[0], x[1], both, pt.Z[q][:hi-lo], pt.Top[q][lo:hi], pt.Flags[q][lo:hi])
				w.hook.Pair(q, t, lo, hi, x, both, w.scorers[q], pt)
			}
		}
	}
	w.hook.Done(t, pt)
	return pt, nil
}

// Grows returns m rows of n values, reusing buf.
func Grows[T any](buf [][]T, m, n int) [][]T {
	if len(buf) < m {
		buf = append(buf, make([][]T, m-len(buf))...)
	}
	buf = buf[:m]
	for i := range buf {
		buf[i] = jobkit.Grow(buf[i], n)
	}
	return buf
}

// MapPairs scores every pair in one pass over the tiles, handing each
// tile to the command's hooks.
func (r *Run) MapPairs(ctx context.Context, h MapHooks) error {
	g := r.Scenes[0].Grid
	ring := 1
	for _, pr := range r.pairs {
		ring = max(ring, pr[1]-pr[0]+1)
	}
	pool := &sync.Pool{New: func() any { return &PairTile{} }}
	ts := r.tiles
	if r.only != nil {
		ts = r.only
	}
	workers := r.Env.WorkerCount()
	ahead := jobkit.ReadAhead(workers)
	return tiles.Run(ctx, ts, tiles.Options{Workers: workers, Ahead: ahead, Progress: r.Env.ProgressFor("map", int64(g.Width)*int64(g.Height))},
		func(int) (tiles.Worker[*PairTile], error) {
			w := &pairWorker{seriesReader: newSeriesReader(r.Scenes, ts, ring, ahead), pairs: r.pairs, ring: ring, pool: pool,
				hook: h.NewWorker(), p: r.Scenes[0].Len()}
			for q, pr := range r.pairs {
				w.scorers = append(w.scorers, newPairScorer(r.Proj, r.Fits[q], r.norms[pr[0]], r.norms[pr[1]]))
			}
			return w, nil
		},
		func(t tiles.Tile, pt *PairTile) error {
			defer pool.Put(pt)
			return h.Deliver(t, pt)
		})
}

// Sieve applies the minimum mapping unit to each mask; the tile buffers
// are garbage by now: their pages go back before the sieve.
func (r *Run) Sieve(ctx context.Context, masks []*raster.ChangeMask, what func(q int) string) error {
	debug.FreeOSMemory()
	for q, m := range masks {
		if err := m.SieveContext(ctx, r.MinPixels); err != nil {
			return fmt.Errorf("sieve%s: %w", what(q), err)
		}
	}
	return nil
}
