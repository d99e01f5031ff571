package job

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"sync"
	"sync/atomic"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// pairScan reads the same tiles of both dates (AFTER on BEFORE's tile grid).
type pairScan struct {
	before, after *scan
}

func newPairScan(before, after *raster.Stack, tile int) *pairScan {
	g := gridFor(before, tile)
	same := func(*raster.Stack) tiles.Grid { return g }
	return &pairScan{before: newScan([]*raster.Stack{before}, same, 1, Shard{}), after: newScan([]*raster.Stack{after}, same, 1, Shard{})}
}

type pairReader struct {
	b, a  *reader
	valid []bool
}

func (ps *pairScan) newReader() *pairReader {
	return &pairReader{b: ps.before.newReader(), a: ps.after.newReader()}
}

// read returns both dates' pixels of tile k and the pixels valid on both.
func (r *pairReader) read(k int) (xb, xa []float64, valid []bool, count int, err error) {
	xb, vb, _, err := r.b.read(k)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	xa, va, _, err := r.a.read(k)
	if err != nil {
		return nil, nil, nil, 0, err
	}
	r.valid = grow(r.valid, len(vb))
	valid = r.valid
	for i := range valid {
		valid[i] = vb[i] && va[i]
		if valid[i] {
			count++
		}
	}
	return xb, xa, valid, count, nil
}

func (r *pairReader) Close() error {
	return errors.Join(r.b.Close(), r.a.Close())
}

// pairStats is what the statistics pass over both dates gathers.
type pairStats struct {
	// accB and accA are each date's co-moments over the pixels valid on
	// both; pooled they give the basis, and their means and standard
	// deviations compare the dates' radiometry.
	accB, accA *bands.Accumulator
	// sample holds 2p values per pixel: BEFORE's bands, then AFTER's.
	sample *change.Sampler
	valid  int64
}

type gatherWorker struct {
	*pairReader
	p, size int
	width   int64
	bound   *atomic.Uint64
	diff    []float64
}

func (w *gatherWorker) Do(_ context.Context, t tiles.Tile) (pairStats, error) {
	xb, xa, valid, count, err := w.read(t.Index)
	if err != nil {
		return pairStats{}, err
	}
	res := pairStats{sample: change.NewSampler(w.size, 2*w.p, 1), valid: int64(count),
		accB: bands.NewAccumulator(w.p), accA: bands.NewAccumulator(w.p)}
	res.accB.AddPixels(xb, valid)
	res.accA.AddPixels(xa, valid)
	w.diff = grow(w.diff, 2*w.p)
	// Pixels whose key is not below the sample's current bound can never
	// be kept: skipping them keeps the per-tile samples small.
	bound := w.bound.Load()
	for i, ok := range valid {
		if !ok {
			continue
		}
		index := int64(t.Y+i/t.W)*w.width + int64(t.X+i%t.W)
		if res.sample.Key(index) >= bound {
			continue
		}
		copy(w.diff[:w.p], xb[i*w.p:i*w.p+w.p])
		copy(w.diff[w.p:], xa[i*w.p:i*w.p+w.p])
		res.sample.Offer(index, w.diff)
	}
	return res, nil
}

// gather reads both dates once: it accumulates each date's co-moments over
// the pixels valid on both and draws a sample of at most size pixels of both
// dates, the same for any number of workers (the sampler keeps the pixels
// with the smallest hashes of their positions).
func (ps *pairScan) gather(ctx context.Context, env Env, size int) (pairStats, error) {
	p := ps.before.scenes[0].Len()
	total := pairStats{sample: change.NewSampler(size, 2*p, 1), accB: bands.NewAccumulator(p), accA: bands.NewAccumulator(p)}
	var bound atomic.Uint64
	bound.Store(total.sample.Bound())
	err := tiles.Run(ctx, ps.before.runTiles(), tiles.Options{Workers: env.workers(), Progress: env.progress("statistics", ps.before.pixels())},
		func(int) (tiles.Worker[pairStats], error) {
			return &gatherWorker{pairReader: ps.newReader(), p: p, size: size,
				width: int64(ps.before.scenes[0].Width), bound: &bound}, nil
		},
		func(_ tiles.Tile, r pairStats) error {
			total.accB.Merge(r.accB)
			total.accA.Merge(r.accA)
			total.sample.Merge(r.sample)
			bound.Store(total.sample.Bound())
			total.valid += r.valid
			return nil
		})
	return total, err
}

// mapTile is one tile of the change statistic.
type mapTile struct {
	z, pv, diffs []float64
	flags, top   []uint8
	prev         previewPart
}

type mapWorker struct {
	*pairReader
	*pairScorer
	k     int
	diffs bool
	pool  *sync.Pool
	grid  *previewGrid // nil: the preview reads the images itself
}

func (w *mapWorker) Do(_ context.Context, t tiles.Tile) (*mapTile, error) {
	xb, xa, valid, _, err := w.read(t.Index)
	if err != nil {
		return nil, err
	}
	n, k := t.Pixels(), w.k
	mt := w.pool.Get().(*mapTile)
	mt.z, mt.pv = grow(mt.z, n), grow(mt.pv, n)
	mt.flags, mt.top = grow(mt.flags, n), grow(mt.top, n)
	if w.grid != nil { // before scoring, which may normalise xa in place
		w.grid.part(t, [2][]float64{xb, xa}, valid, &mt.prev)
	}
	w.score(xb, xa, valid, mt.z, mt.top, mt.flags)
	if w.diffs {
		mt.diffs = grow(mt.diffs, n*k)
	}
	for i := range n {
		switch {
		case !valid[i]:
			mt.pv[i] = math.NaN()
		case w.sc == nil:
			mt.pv[i] = 1
		default:
			mt.pv[i] = change.PValue(mt.z[i], k)
		}
		if !w.diffs {
			continue
		}
		out, px := mt.diffs[i*k:i*k+k], w.d[i*k:i*k+k]
		switch {
		case !valid[i]:
			for c := range out {
				out[c] = math.NaN()
			}
		case w.sc == nil:
			copy(out, px)
		default:
			w.sc.Centre(out, px)
		}
	}
	return mt, nil
}

// mapPixels computes Z, p-values and raw flags for every pixel: it writes
// magnitude.tif, pvalue.tif (and differences.tif) and fills the mask.
func (r *changeRun) mapPixels(ctx context.Context) error {
	nan := math.NaN()
	k := r.proj.Components()
	spec := func(descs ...string) raster.Spec {
		return raster.Spec{Grid: r.before.Grid, Bands: len(descs), DataType: "Float32", NoData: &nan,
			Metadata: r.metadata(), Descriptions: descs}
	}
	dof := fmt.Sprintf("chi-square, k = %d degrees of freedom", k)
	var err error
	r.grid = newPreviewGrid(r.before.Width, r.before.Height, r.before.Len(), r.rgb)
	if r.mask, err = raster.NewMask(r.before.Grid); err != nil {
		return err
	}
	mag, err := raster.Create(r.dir.Path("magnitude.tif"), spec("change statistic Z ("+dof+")"))
	if err != nil {
		return err
	}
	defer mag.Abort()
	pv, err := raster.Create(r.dir.Path("pvalue.tif"), spec("no-change p-value of Z ("+dof+")"))
	if err != nil {
		return err
	}
	defer pv.Abort()
	var diffs *raster.Output
	if r.o.Differences {
		descs := make([]string, k)
		for i := range descs {
			descs[i] = fmt.Sprintf("PC%d score difference minus no-change location", i+1)
		}
		if diffs, err = raster.Create(r.dir.Path("differences.tif"), spec(descs...)); err != nil {
			return err
		}
		defer diffs.Abort()
	}
	pool := &sync.Pool{New: func() any { return &mapTile{} }}
	ps := r.pair
	err = tiles.Run(ctx, ps.before.runTiles(), tiles.Options{Workers: r.env.workers(), Progress: r.env.progress("map", ps.before.pixels())},
		func(int) (tiles.Worker[*mapTile], error) {
			return &mapWorker{pairReader: ps.newReader(), pairScorer: newPairScorer(r.proj, r.fit, r.norm), k: k, diffs: r.o.Differences, pool: pool, grid: r.grid}, nil
		},
		func(t tiles.Tile, mt *mapTile) error {
			defer pool.Put(mt)
			if r.grid != nil {
				r.grid.add(&mt.prev)
			}
			if err := mag.Write(t, mt.z); err != nil {
				return err
			}
			if err := pv.Write(t, mt.pv); err != nil {
				return err
			}
			if diffs != nil {
				if err := diffs.Write(t, mt.diffs); err != nil {
					return err
				}
			}
			return r.mask.Write(t.X, t.Y, t.W, t.H, mt.flags, mt.top)
		})
	if err != nil {
		return err
	}
	r.outputs = append(r.outputs, "change.tif", "magnitude.tif", "pvalue.tif")
	for _, out := range []*raster.Output{mag, pv, diffs} {
		if out != nil {
			if err := out.Commit(); err != nil {
				return err
			}
		}
	}
	if diffs != nil {
		r.outputs = append(r.outputs, "differences.tif")
	}
	return nil
}

// metadata is what every output of a change folder records: the tool, the
// caution, both dates, k, the threshold, the minimum mapping unit, the
// normalisation and the scenario tag of invented data.
func (r *changeRun) metadata() map[string]string {
	md := map[string]string{"BANDFOLD_VERSION": r.env.Version, "BANDFOLD_CAUTION": Caution,
		"BANDFOLD_BEFORE": r.dateLabel(r.before, r.o.Before), "BANDFOLD_AFTER": r.dateLabel(r.after, r.o.After),
		"BANDFOLD_THRESHOLD":       r.o.Threshold.String(),
		"BANDFOLD_Z_THRESHOLD":     strconv.FormatFloat(r.zcut, 'g', -1, 64),
		"BANDFOLD_MIN_AREA_PIXELS": strconv.Itoa(r.minPixels),
		"BANDFOLD_NORMALIZATION":   r.normDescription(),
	}
	if r.proj != nil {
		md["BANDFOLD_COMPONENTS"] = strconv.Itoa(r.proj.Components())
	}
	for _, s := range []*raster.Stack{r.before, r.after} {
		for _, key := range []string{"SCENARIO", "SCENARIO_LOCATION"} {
			if v, ok := s.Metadata[key]; ok {
				md[key] = v
			}
		}
	}
	return md
}
