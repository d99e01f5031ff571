package job

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sync/atomic"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
	"bandfold/transform/change"
)

// seriesReader reads the same tile of every date (each on the first date's
// tile grid), each date into its own buffer or all into one: O(dates x
// tile) values at most. It opens one reader per date, for one worker.
type seriesReader struct {
	scenes []*raster.Stack
	tiles  []tiles.Tile
	rs     []*raster.Reader
	x      [][]float64
	valid  [][]bool
}

func (r *timelineRun) newSeriesReader(ts []tiles.Tile) *seriesReader {
	D := len(r.scenes)
	return &seriesReader{scenes: r.scenes, tiles: ts, rs: make([]*raster.Reader, D), x: make([][]float64, D), valid: make([][]bool, D)}
}

// readDate reads tile k of date d into buffer b.
func (sr *seriesReader) readDate(k, d, b int) error {
	if sr.rs[d] == nil {
		rd, err := sr.scenes[d].NewReader()
		if err != nil {
			return err
		}
		sr.rs[d] = rd
	}
	t := sr.tiles[k]
	sr.x[b], sr.valid[b] = grow(sr.x[b], t.Pixels()*sr.scenes[d].Len()), grow(sr.valid[b], t.Pixels())
	_, err := sr.rs[d].Read(t, sr.x[b], sr.valid[b])
	return err
}

// read reads tile k of every date, each into its own buffer.
func (sr *seriesReader) read(k int) error {
	for d := range sr.scenes {
		if err := sr.readDate(k, d, d); err != nil {
			return err
		}
	}
	return nil
}

func (sr *seriesReader) Close() error {
	var errs []error
	for _, rd := range sr.rs {
		if rd != nil {
			errs = append(errs, rd.Close())
		}
	}
	return errors.Join(errs...)
}

// runTiles is the tiles every pass reads, numbered (set by open).
func (r *timelineRun) runTiles() []tiles.Tile { return r.tiles }

// tileGrid numbers the tiles of the first date's grid.
func (r *timelineRun) tileGrid() { r.tiles = numbered(gridFor(r.scenes[0], r.o.Input.Tile)) }

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
// co-moments merge in another order.
func (r *timelineRun) sampleTiles(hint uint64) []tiles.Tile {
	share := math.Ldexp(float64(hint), -64)
	first := r.scenes[0]
	if share <= 0.25 || r.o.Input.Tile > 0 {
		return r.tiles
	}
	values := int(math.Ceil(4 * share * float64(len(r.scenes)*first.Len())))
	w, h := tiles.SizeFor(first.Width, first.Height, first.BlockW, first.BlockH, values, tiles.DefaultBudget)
	return numbered(tiles.NewGrid(first.Width, first.Height, w, h))
}

// seriesStats is what the sample pass gathers: each date's co-moments over
// its valid pixels and every pair's sample, drawn as Change draws it (the
// same pixels, for the same pair).
type seriesStats struct {
	acc    []*bands.Accumulator
	sample *seriesSample
}

type sampleWorker struct {
	*seriesReader
	pairs  [][2]int
	p      int
	width  int64
	keyer  *change.Sampler // its Key only
	bound  *atomic.Uint64
	pos    []int    // the tile's pixels below the bound
	dvalid [][]bool // per date
}

// sampled is one tile's share of the sample pass.
type sampled struct {
	acc []*bands.Accumulator
	ts  *tileSample
}

func (w *sampleWorker) Do(_ context.Context, t tiles.Tile) (sampled, error) {
	n, D, p := t.Pixels(), len(w.scenes), w.p
	// The pixels whose key can enter some pair's sample; add drops those
	// valid on no pair.
	bound := w.bound.Load()
	ts := &tileSample{both: make([]int64, len(w.pairs))}
	w.pos = w.pos[:0]
	for i := range n {
		index := int64(t.Y+i/t.W)*w.width + int64(t.X+i%t.W)
		if key := w.keyer.Key(index); key < bound {
			w.pos, ts.cands = append(w.pos, i), append(ts.cands, candidate{key: key, index: index})
		}
	}
	ts.vals, ts.valid = make([]float64, len(w.pos)*D*p), make([]bool, len(w.pos)*D)
	w.dvalid = grows(w.dvalid, D, n)
	var res sampled
	// One date at a time, into one buffer.
	for d := range D {
		if err := w.readDate(t.Index, d, 0); err != nil {
			return sampled{}, err
		}
		x, valid := w.x[0], w.valid[0]
		acc := bands.NewExactAccumulator(p)
		acc.AddPixels(x, valid)
		res.acc = append(res.acc, acc)
		copy(w.dvalid[d], valid)
		for c, i := range w.pos {
			copy(ts.vals[(c*D+d)*p:(c*D+d+1)*p], x[i*p:i*p+p])
			ts.valid[c*D+d] = valid[i]
		}
	}
	for i := range n {
		for q, pr := range w.pairs {
			if w.dvalid[pr[0]][i] && w.dvalid[pr[1]][i] {
				ts.both[q]++
			}
		}
	}
	res.ts = ts
	return res, nil
}

// sample reads every date once: the co-moments of each date and the
// sample of each pair, the same for any number of workers. Should the
// hint have cut a pair's sample short (most of its pixels nodata), the
// pass runs again with a hint for the pixels valid, then without.
func (r *timelineRun) sample(ctx context.Context) error {
	p, pairs := r.scenes[0].Len(), r.pairs()
	g := r.scenes[0].Grid
	hint := sampleHint(r.o.Sample, int64(g.Width)*int64(g.Height))
	for {
		total := seriesStats{sample: newSeriesSample(r.o.Sample, p, len(r.scenes), pairs, hint, int64(g.Width)*int64(g.Height))}
		for range r.scenes {
			total.acc = append(total.acc, bands.NewExactAccumulator(p))
		}
		var bound atomic.Uint64
		bound.Store(total.sample.bound())
		keys := change.NewSampler(r.o.Sample, 1, 1)
		ts := r.sampleTiles(hint)
		err := tiles.Run(ctx, ts, tiles.Options{Workers: r.env.workers(), Progress: r.env.progress("statistics", int64(g.Width)*int64(g.Height))},
			func(int) (tiles.Worker[sampled], error) {
				return &sampleWorker{seriesReader: r.newSeriesReader(ts), pairs: pairs, p: p, width: int64(g.Width), keyer: keys, bound: &bound}, nil
			},
			func(_ tiles.Tile, res sampled) error {
				for i, a := range res.acc {
					total.acc[i].Merge(a)
				}
				total.sample.add(res.ts)
				bound.Store(total.sample.bound())
				return nil
			})
		if err != nil {
			return err
		}
		if !total.sample.complete() {
			hint = total.sample.retryHint()
			continue
		}
		for q, pr := range pairs[:r.steps()] {
			if total.sample.both[q] == 0 {
				return fmt.Errorf("no pixel is valid on both %s and %s after nodata and masks", r.args[pr[0]], r.args[pr[1]])
			}
		}
		total.sample.finish()
		r.stats = total
		return nil
	}
}

// normalize brings every date onto the first date's radiometric scale:
// date t is fitted onto date t-1 as already normalised, over the stable
// pixels of their sample, as Change fits AFTER onto BEFORE (firstFit). A
// fit that fails or cannot be trusted leaves date t on date t-1's
// normalisation, with a warning. It leaves each pair's sample of band
// differences in r.dxs.
func (r *timelineRun) normalize(context.Context) error {
	p, pairs := r.scenes[0].Len(), r.pairs()
	r.norms = make([][]change.BandFit, len(r.scenes))
	r.normSums = make([]NormalizationSummary, len(r.scenes))
	r.normSums[0] = NormalizationSummary{Method: r.o.Normalize, Bands: []BandNormalized{}}
	split := r.stats.sample.pair
	for t := 1; t < len(r.scenes); t++ {
		sum := NormalizationSummary{Method: r.o.Normalize, Bands: []BandNormalized{}}
		r.norms[t] = r.norms[t-1]
		if r.o.Normalize == NormalizeStable {
			xb, xa := split(t - 1)
			applyNorm(xb, r.norms[t-1])
			fits, stable, err := firstFit(xb, xa, p)
			switch {
			case err != nil:
				r.warnf("radiometric normalisation of %s onto %s failed (%v): it keeps the normalisation of %s", r.args[t], r.args[t-1], err, r.args[t-1])
			default:
				sum.Rule, sum.StablePixels = change.StableRule, stable
				for j, f := range fits {
					sum.Bands = append(sum.Bands, BandNormalized{Band: j + 1, BandFit: f})
				}
				if j, ok := trustworthy(fits); ok {
					r.norms[t], sum.Applied = fits, true
				} else {
					r.warnf("radiometric normalisation of %s onto %s not applied: in band %d the stable pixels give gain %.3g with correlation %.2f (need a positive gain and at least %.1f); it keeps the normalisation of %s",
						r.args[t], r.args[t-1], j+1, fits[j].Gain, fits[j].Correlation, minCorrelation, r.args[t-1])
				}
			}
		}
		r.normSums[t] = sum
	}
	for q, pr := range pairs {
		xb, xa := split(q)
		applyNorm(xb, r.norms[pr[0]])
		applyNorm(xa, r.norms[pr[1]])
		dx := make([]float64, len(xa))
		diffInto(dx, xb, xa, nil)
		r.dxs = append(r.dxs, dx)
	}
	r.stats.sample = nil // the differences are all later steps need
	return nil
}

// applyNorm applies a normalisation (nil: none) to pixel-major values in
// place.
func applyNorm(x []float64, norm []change.BandFit) {
	if norm == nil {
		return
	}
	p := len(norm)
	for i, v := range x {
		x[i] = norm[i%p].Apply(v)
	}
}

// fitBasis fits the basis on all dates pooled, each normalised, keeping
// the components as Change does; or takes the given one.
func (r *timelineRun) fitBasis(context.Context) error {
	b, name := r.given, r.o.Basis
	p := r.scenes[0].Len()
	if b == nil {
		var pooled *bands.Accumulator
		for t, acc := range r.stats.acc {
			a, err := normalized(acc, r.norms[t])
			if err != nil {
				return err
			}
			if pooled == nil {
				pooled = a
			} else {
				pooled.Merge(a)
			}
		}
		var err error
		if b, err = fitBasis(r.env, pooled, transform.Covariance, basisBands(r.scenes[0]), describeAll(r.scenes)+" (every date, pooled)"); err != nil {
			return err
		}
		if b.Inputs, err = fingerprints(r.scenes); err != nil {
			return err
		}
		b.Components = defaultComponents(b, p)
		name = "fitted on all dates"
	}
	proj, err := projectorFor(b, r.o.Components, p)
	if err != nil {
		return err
	}
	r.basis, r.basisName, r.proj = b, name, proj
	return nil
}

// fitModels fits every pair's own no-change model and threshold, the
// pairs in parallel (each fit is Change's, alone on its pair's sample).
func (r *timelineRun) fitModels(ctx context.Context) error {
	pairs := r.pairs()
	jobs := make([]tiles.Tile, len(pairs))
	for q := range jobs {
		jobs[q].Index = q
	}
	p := r.scenes[0].Len()
	err := tiles.Run(ctx, jobs, tiles.Options{Workers: r.env.workers()},
		func(int) (tiles.Worker[*pairFit], error) { return &fitWorker{r: r, p: p, proj: r.proj.Clone()}, nil },
		func(t tiles.Tile, f *pairFit) error {
			r.fits = append(r.fits, f)
			r.dxs[t.Index] = nil
			return nil
		})
	if err != nil {
		return err
	}
	k := r.proj.Components()
	for q, pr := range pairs {
		if r.fits[q].identical {
			r.warnf("%s and %s are identical over the sampled pixels: no change is mapped between them", r.args[pr[0]], r.args[pr[1]])
		}
		for _, w := range r.fits[q].warnings(r.o.Threshold, k) {
			r.warnf("%s to %s: %s", r.label(pr[0]), r.label(pr[1]), w)
		}
	}
	return nil
}

// fitWorker fits pairs' models, with its own projector.
type fitWorker struct {
	r    *timelineRun
	p    int
	proj *transform.Projector
}

func (w *fitWorker) Do(_ context.Context, t tiles.Tile) (*pairFit, error) {
	pr := w.r.pairs()[t.Index]
	return fitPair(w.r.dxs[t.Index], w.p, w.proj, w.r.o.Threshold, w.r.args[pr[0]]+" and "+w.r.args[pr[1]])
}

func (w *fitWorker) Close() error { return nil }

// warnf keeps a warning for timeline.json; summary prints them.
func (r *timelineRun) warnf(format string, args ...any) {
	r.warnings = append(r.warnings, fmt.Sprintf(format, args...))
}
