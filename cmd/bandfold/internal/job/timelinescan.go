package job

import (
	"context"
	"errors"
	"fmt"
	"sync/atomic"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
	"bandfold/transform/change"
)

// seriesReader reads the same tile of every date (each on the first date's
// tile grid): O(dates x tile) values.
type seriesReader struct {
	rs    []*reader
	x     [][]float64
	valid [][]bool
}

func (r *timelineRun) newSeriesReader() *seriesReader {
	g := gridFor(r.scenes[0], r.o.Input.Tile)
	same := func(*raster.Stack) tiles.Grid { return g }
	sr := &seriesReader{}
	for _, s := range r.scenes {
		sr.rs = append(sr.rs, newScan([]*raster.Stack{s}, same, 1, Shard{}).newReader())
	}
	sr.x, sr.valid = make([][]float64, len(sr.rs)), make([][]bool, len(sr.rs))
	return sr
}

// read reads tile k of every date.
func (sr *seriesReader) read(k int) error {
	for i, rd := range sr.rs {
		x, v, _, err := rd.read(k)
		if err != nil {
			return err
		}
		sr.x[i], sr.valid[i] = x, v
	}
	return nil
}

// both sets dst to the pixels valid on dates a and b.
func (sr *seriesReader) both(dst []bool, a, b int) []bool {
	dst = grow(dst, len(sr.valid[a]))
	for i := range dst {
		dst[i] = sr.valid[a][i] && sr.valid[b][i]
	}
	return dst
}

func (sr *seriesReader) Close() error {
	var errs []error
	for _, rd := range sr.rs {
		errs = append(errs, rd.Close())
	}
	return errors.Join(errs...)
}

// tileGrid is the tiles every pass reads.
func (r *timelineRun) runTiles() []tiles.Tile {
	g := gridFor(r.scenes[0], r.o.Input.Tile)
	var out []tiles.Tile
	for t := range g.Tiles() {
		t.Index = len(out)
		out = append(out, t)
	}
	return out
}

// seriesStats is what the sample pass gathers: each date's co-moments over
// its valid pixels and, per pair, a sample of both dates drawn as Change
// draws it (the same pixels, for the same pair).
type seriesStats struct {
	acc     []*bands.Accumulator
	samples []*change.Sampler
}

type sampleWorker struct {
	*seriesReader
	pairs  [][2]int
	p      int
	size   int
	width  int64
	bounds []atomic.Uint64
	both   []bool
	px     []float64
}

func (w *sampleWorker) Do(_ context.Context, t tiles.Tile) (seriesStats, error) {
	if err := w.read(t.Index); err != nil {
		return seriesStats{}, err
	}
	res := seriesStats{}
	for i := range w.x {
		acc := bands.NewAccumulator(w.p)
		acc.AddPixels(w.x[i], w.valid[i])
		res.acc = append(res.acc, acc)
	}
	w.px = grow(w.px, 2*w.p)
	p := w.p
	for q, pr := range w.pairs {
		s := change.NewSampler(w.size, 2*p, 1)
		w.both = w.seriesReader.both(w.both, pr[0], pr[1])
		xb, xa := w.x[pr[0]], w.x[pr[1]]
		bound := w.bounds[q].Load()
		for i, ok := range w.both {
			if !ok {
				continue
			}
			index := int64(t.Y+i/t.W)*w.width + int64(t.X+i%t.W)
			if s.Key(index) >= bound {
				continue
			}
			copy(w.px[:p], xb[i*p:i*p+p])
			copy(w.px[p:], xa[i*p:i*p+p])
			s.Offer(index, w.px)
		}
		res.samples = append(res.samples, s)
	}
	return res, nil
}

// sample reads every date once: the co-moments of each date and a sample
// of each pair, the same for any number of workers.
func (r *timelineRun) sample(ctx context.Context) error {
	p, pairs := r.scenes[0].Len(), r.pairs()
	total := seriesStats{}
	for range r.scenes {
		total.acc = append(total.acc, bands.NewAccumulator(p))
	}
	bounds := make([]atomic.Uint64, len(pairs))
	for q := range pairs {
		total.samples = append(total.samples, change.NewSampler(r.o.Sample, 2*p, 1))
		bounds[q].Store(total.samples[q].Bound())
	}
	ts := r.runTiles()
	err := tiles.Run(ctx, ts, tiles.Options{Workers: r.env.workers(), Progress: r.env.progress("statistics", int64(r.scenes[0].Width)*int64(r.scenes[0].Height))},
		func(int) (tiles.Worker[seriesStats], error) {
			return &sampleWorker{seriesReader: r.newSeriesReader(), pairs: pairs, p: p, size: r.o.Sample,
				width: int64(r.scenes[0].Width), bounds: bounds}, nil
		},
		func(_ tiles.Tile, res seriesStats) error {
			for i, a := range res.acc {
				total.acc[i].Merge(a)
			}
			for q, s := range res.samples {
				total.samples[q].Merge(s)
				bounds[q].Store(total.samples[q].Bound())
			}
			return nil
		})
	if err != nil {
		return err
	}
	for q, pr := range pairs[:r.steps()] {
		if total.samples[q].Len() == 0 {
			return fmt.Errorf("no pixel is valid on both %s and %s after nodata and masks", r.args[pr[0]], r.args[pr[1]])
		}
	}
	r.stats = total
	return nil
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
	split := func(q int) (xb, xa []float64) {
		_, both := r.stats.samples[q].Pixels()
		n := len(both) / (2 * p)
		xb, xa = make([]float64, n*p), make([]float64, n*p)
		for i := range n {
			copy(xb[i*p:i*p+p], both[i*2*p:i*2*p+p])
			copy(xa[i*p:i*p+p], both[i*2*p+p:i*2*p+2*p])
		}
		return xb, xa
	}
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
		r.stats.samples[q] = nil // the differences are all later steps need
	}
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

// fitModels fits every pair's own no-change model and threshold.
func (r *timelineRun) fitModels(context.Context) error {
	p, k := r.scenes[0].Len(), r.proj.Components()
	for q, pr := range r.pairs() {
		f, err := fitPair(r.dxs[q], p, r.proj, r.o.Threshold, r.args[pr[0]]+" and "+r.args[pr[1]])
		if err != nil {
			return err
		}
		if f.identical {
			r.warnf("%s and %s are identical over the sampled pixels: no change is mapped between them", r.args[pr[0]], r.args[pr[1]])
		}
		for _, w := range f.warnings(r.o.Threshold, k) {
			r.warnf("%s to %s: %s", r.label(pr[0]), r.label(pr[1]), w)
		}
		r.fits = append(r.fits, f)
		r.dxs[q] = nil
	}
	return nil
}

// warnf keeps a warning for timeline.json; summary prints them.
func (r *timelineRun) warnf(format string, args ...any) {
	r.warnings = append(r.warnings, fmt.Sprintf(format, args...))
}
