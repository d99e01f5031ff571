package series

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"sync/atomic"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// seriesReader reads the same tile of every date (each on the first date's
// tile grid) into a ring of buffers: O(ring x tile) values at most. It
// opens one reader per date, for one worker. A date of 8- or 16-bit
// integer bands read unscaled takes the integer path (jobkit.IntegerKernel):
// its tiles are read as int16, ahead of their use, and held in the ring
// until their buffer is read into again (or release); values(b, …) gives
// them as float64 a chunk at a time, addTo sums them with the integer
// kernel. Both paths give the same values.
type seriesReader struct {
	scenes []*raster.Stack
	tiles  []tiles.Tile
	rs     []*raster.Reader
	ints   *jobkit.Int16Readers
	x      [][]float64
	i16    []*raster.Int16Tile // the integer path's tile in buffer b, or nil
	from   []int               // the date of the tile in buffer b
	valid  [][]bool            // buffer b's flags: fvalid[b] or its integer tile's
	fvalid [][]bool
}

func newSeriesReader(scenes []*raster.Stack, ts []tiles.Tile, ring, ahead int) *seriesReader {
	return &seriesReader{scenes: scenes, tiles: ts, rs: make([]*raster.Reader, len(scenes)), ints: jobkit.NewInt16Readers(scenes, ahead),
		x: make([][]float64, ring), i16: make([]*raster.Int16Tile, ring), from: make([]int, ring), valid: make([][]bool, ring), fvalid: make([][]bool, ring)}
}

// Ahead asks the integer readers for tile t of every date (tiles.Lookahead).
func (sr *seriesReader) Ahead(t tiles.Tile) {
	for d := range sr.scenes {
		sr.ints.Ahead(d, sr.tiles[t.Index])
	}
}

// readDate reads tile k of date d into buffer b.
func (sr *seriesReader) readDate(ctx context.Context, k, d, b int) error {
	sr.release(b)
	ir, err := sr.ints.Get(d)
	if err != nil {
		return err
	}
	t := sr.tiles[k]
	if ir != nil {
		it, err := ir.Read(ctx, t)
		if err != nil {
			return err
		}
		sr.i16[b], sr.from[b], sr.valid[b] = it, d, it.Valid
		return nil
	}
	if sr.rs[d] == nil {
		rd, err := sr.scenes[d].NewReader()
		if err != nil {
			return err
		}
		sr.rs[d] = rd
	}
	sr.x[b], sr.fvalid[b] = jobkit.Grow(sr.x[b], t.Pixels()*sr.scenes[d].Len()), jobkit.Grow(sr.fvalid[b], t.Pixels())
	sr.valid[b] = sr.fvalid[b]
	_, err = sr.rs[d].Read(t, sr.x[b], sr.valid[b])
	return err
}

// values returns the values of pixels lo to hi − 1 of buffer b,
// pixel-major: a part of the buffer, or on the integer path converted
// into dst (of room enough).
func (sr *seriesReader) values(b, lo, hi int, dst []float64) []float64 {
	if it := sr.i16[b]; it != nil {
		return it.Float64(dst, lo, hi)
	}
	p := len(sr.x[b]) / len(sr.valid[b])
	return sr.x[b][lo*p : hi*p]
}

// addTo adds the pixels of buffer b selected by mask to acc, an exact
// accumulator: the same sums on either path.
func (sr *seriesReader) addTo(acc *bands.Accumulator, b int, mask []bool) {
	if it := sr.i16[b]; it != nil {
		acc.AddInt16Tile(it.X, mask, it.Shift)
		return
	}
	acc.AddPixels(sr.x[b], mask)
}

// release hands the integer tile in buffer b back to its reader.
func (sr *seriesReader) release(b int) {
	if it := sr.i16[b]; it != nil {
		r, _ := sr.ints.Get(sr.from[b])
		r.Release(it)
		sr.i16[b], sr.valid[b] = nil, nil
	}
}

// releaseAll releases every buffer's integer tile: at the end of a tile.
func (sr *seriesReader) releaseAll() {
	for b := range sr.i16 {
		sr.release(b)
	}
}

func (sr *seriesReader) Close() error {
	errs := []error{sr.ints.Close()}
	for _, rd := range sr.rs {
		if rd != nil {
			errs = append(errs, rd.Close())
		}
	}
	return errors.Join(errs...)
}

func numbered(g tiles.Grid) []tiles.Tile {
	var out []tiles.Tile
	for t := range g.Tiles() {
		t.Index = len(out)
		out = append(out, t)
	}
	return out
}

// sampleTiles are the tiles of the sample pass: those of the map pass, or
// smaller ones where a share of the pixels above a quarter can be sampled
// (an image of a few times --sample pixels), so that a tile's candidates,
// each held with its values on every date, take about a quarter of
// tiles.DefaultBudget. Smaller tiles change nothing sampled; the dates'
// co-moments merge in another order (exactly the same sums for integer
// pixels).
func (r *Run) sampleTiles(hint uint64) []tiles.Tile {
	share := math.Ldexp(float64(hint), -64)
	first := r.Scenes[0]
	if share <= 0.25 || r.C.Tile > 0 {
		return r.tiles
	}
	values := int(math.Ceil(4 * share * float64(len(r.Scenes)*first.Len())))
	w, h := tiles.SizeFor(first.Width, first.Height, first.BlockW, first.BlockH, values, tiles.DefaultBudget)
	return numbered(tiles.NewGrid(first.Width, first.Height, w, h))
}

// seriesStats is what the sample pass gathers: each date's co-moments and
// every sampled pair's sample.
type seriesStats struct {
	// acc holds, per date, the co-moments of its pixels valid on it and on
	// the reference date (the reference's: valid on it and on some other
	// date). For two dates: each date over the pixels valid on both.
	acc    []*bands.Accumulator
	sample *change.PairSample
}

type sampleWorker struct {
	*seriesReader
	ref    int
	pairs  [][2]int
	p      int
	width  int64
	keyer  *change.Sampler // its Key only
	bound  *atomic.Uint64
	pos    []int    // the tile's pixels below the bound
	dvalid [][]bool // per date
	mask   []bool
	other  []bool // valid on some date other than the reference
}

// sampled is one tile's share of the sample pass.
type sampled struct {
	acc []*bands.Accumulator
	ts  *change.TileSample
}

func (w *sampleWorker) Do(ctx context.Context, t tiles.Tile) (sampled, error) {
	defer w.releaseAll()
	n, D, p := t.Pixels(), len(w.scenes), w.p
	// The pixels whose key can enter some pair's sample; Add drops those
	// valid on no pair.
	bound := w.bound.Load()
	ts := &change.TileSample{Both: make([]int64, len(w.pairs))}
	w.pos = w.pos[:0]
	for i := range n {
		index := int64(t.Y+i/t.W)*w.width + int64(t.X+i%t.W)
		if key := w.keyer.Key(index); key < bound {
			w.pos, ts.Cands = append(w.pos, i), append(ts.Cands, change.Candidate{Key: key, Index: index})
		}
	}
	ts.Vals, ts.Valid = make([]float64, len(w.pos)*D*p), make([]bool, len(w.pos)*D)
	w.dvalid = Grows(w.dvalid, D, n)
	w.mask, w.other = jobkit.Grow(w.mask, n), jobkit.Grow(w.other, n)
	clear(w.other)
	res := sampled{acc: make([]*bands.Accumulator, D)}
	// The reference first, into buffer 0, kept while the others pass
	// through buffer 1.
	for k := range D {
		d, b := k, 1
		switch {
		case k == 0:
			d, b = w.ref, 0
		case k <= w.ref:
			d = k - 1
		}
		if err := w.readDate(ctx, t.Index, d, b); err != nil {
			return sampled{}, err
		}
		valid := w.valid[b]
		copy(w.dvalid[d], valid)
		for c, i := range w.pos {
			dst := ts.Vals[(c*D+d)*p : (c*D+d+1)*p]
			copy(dst, w.values(b, i, i+1, dst))
			ts.Valid[c*D+d] = valid[i]
		}
		if d == w.ref {
			continue
		}
		ref := w.dvalid[w.ref]
		for i := range n {
			w.mask[i] = valid[i] && ref[i]
			w.other[i] = w.other[i] || valid[i]
		}
		res.acc[d] = bands.NewExactAccumulator(p)
		w.addTo(res.acc[d], b, w.mask)
	}
	ref := w.dvalid[w.ref]
	for i := range n {
		w.mask[i] = ref[i] && w.other[i]
	}
	res.acc[w.ref] = bands.NewExactAccumulator(p)
	w.addTo(res.acc[w.ref], 0, w.mask)
	for i := range n {
		for q, pr := range w.pairs {
			if w.dvalid[pr[0]][i] && w.dvalid[pr[1]][i] {
				ts.Both[q]++
			}
		}
	}
	res.ts = ts
	return res, nil
}

// samplePairs are the pairs sampled: the scored pairs, then each date with
// the reference date where that pair is not scored (for the
// normalisation).
func (r *Run) samplePairs() [][2]int {
	out := slices.Clone(r.pairs)
	for d := range r.Scenes {
		if d == r.Ref {
			continue
		}
		pr := [2]int{min(r.Ref, d), max(r.Ref, d)}
		if !slices.Contains(out, pr) {
			out = append(out, pr)
		}
	}
	return out
}

// Sample reads every date once: the co-moments of each date and the
// sample of each pair, the same for any number of workers. Should the
// hint have cut a pair's sample short (most of its pixels nodata), the
// pass runs again with a hint for the pixels valid, then without.
func (r *Run) Sample(ctx context.Context) error {
	p := r.Scenes[0].Len()
	r.sampled = r.samplePairs()
	g := r.Scenes[0].Grid
	pixels := int64(g.Width) * int64(g.Height)
	hint := change.SampleHint(r.C.Sample, pixels)
	shardTiles := r.scanShard(r.sampleTiles(hint)) // nil in a single run
	for {
		r.tileAcc = r.tileAcc[:0]
		total := seriesStats{sample: change.NewPairSample(r.C.Sample, p, len(r.Scenes), r.sampled, hint, pixels)}
		for range r.Scenes {
			total.acc = append(total.acc, bands.NewExactAccumulator(p))
		}
		var bound atomic.Uint64
		bound.Store(total.sample.Bound())
		keys := change.NewSampler(r.C.Sample, 1, 1)
		ts := r.sampleTiles(hint)
		if shardTiles != nil {
			ts = shardTiles
		}
		workers := r.Env.WorkerCount()
		ahead := jobkit.ReadAhead(workers)
		err := tiles.Run(ctx, ts, tiles.Options{Workers: workers, Ahead: ahead, Progress: r.Env.ProgressFor("statistics", pixels)},
			func(int) (tiles.Worker[sampled], error) {
				return &sampleWorker{seriesReader: newSeriesReader(r.Scenes, ts, 2, ahead), ref: r.Ref, pairs: r.sampled, p: p, width: int64(g.Width), keyer: keys, bound: &bound}, nil
			},
			func(t tiles.Tile, res sampled) error {
				for i, a := range res.acc {
					total.acc[i].Merge(a)
				}
				r.keepTile(t, res.acc)
				total.sample.Add(res.ts)
				bound.Store(total.sample.Bound())
				return nil
			})
		if err != nil {
			return err
		}
		if !total.sample.Complete() {
			hint = total.sample.RetryHint()
			continue
		}
		if shardTiles != nil {
			r.stats = total // a shard's share: MergeScans checks and finishes the whole
			return nil
		}
		return r.finishStats(ctx, total)
	}
}

// finishStats keeps the whole image's statistics once every pair has
// pixels valid on both its dates, and explains why not otherwise.
func (r *Run) finishStats(ctx context.Context, total seriesStats) error {
	for q, pr := range r.sampled {
		if total.sample.Both(q) == 0 {
			return r.noOverlap(ctx, pr)
		}
	}
	total.sample.Finish()
	r.stats = total
	return nil
}

// noOverlap explains why a pair of dates shares no valid pixel: a date with
// no valid pixel of its own is named with its culprit (a mask, or bands
// that are nodata everywhere); otherwise the dates' valid pixels do not
// meet.
func (r *Run) noOverlap(ctx context.Context, pr [2]int) error {
	for _, d := range pr {
		n, err := jobkit.CountValid(ctx, r.Env, r.Scenes[d], r.C.Tile)
		if err != nil {
			return err
		}
		if n == 0 {
			return jobkit.NoValidPixels(ctx, r.Env, r.Scenes[d], r.C.Tile)
		}
	}
	return fmt.Errorf("no pixel is valid on both dates in %s and %s after nodata and masks", r.Args[pr[0]], r.Args[pr[1]])
}
