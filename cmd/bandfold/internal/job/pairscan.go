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
	"bandfold/transform"
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
	acc    *bands.Accumulator // pooled co-moments, when fitting
	sample *change.Sampler    // band differences x_after - x_before
	valid  int64
}

type gatherWorker struct {
	*pairReader
	p, size int
	fit     bool
	width   int64
	bound   *atomic.Uint64
	diff    []float64
}

func (w *gatherWorker) Do(_ context.Context, t tiles.Tile) (pairStats, error) {
	xb, xa, valid, count, err := w.read(t.Index)
	if err != nil {
		return pairStats{}, err
	}
	res := pairStats{sample: change.NewSampler(w.size, w.p, 1), valid: int64(count)}
	if w.fit {
		res.acc = bands.NewAccumulator(w.p)
		res.acc.AddPixels(xb, valid)
		res.acc.AddPixels(xa, valid)
	}
	w.diff = grow(w.diff, w.p)
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
		for j := range w.p {
			w.diff[j] = xa[i*w.p+j] - xb[i*w.p+j]
		}
		res.sample.Offer(index, w.diff)
	}
	return res, nil
}

// gather reads both dates once: it accumulates the pooled co-moments of the
// pixels valid on both (when fit is set) and draws a sample of at most size
// band differences, the same for any number of workers (the sampler keeps
// the pixels with the smallest hashes of their positions).
func (ps *pairScan) gather(ctx context.Context, env Env, fit bool, size int) (pairStats, error) {
	p := ps.before.scenes[0].Len()
	total := pairStats{sample: change.NewSampler(size, p, 1)}
	if fit {
		total.acc = bands.NewAccumulator(p)
	}
	var bound atomic.Uint64
	bound.Store(total.sample.Bound())
	err := tiles.Run(ctx, ps.before.runTiles(), tiles.Options{Workers: env.workers(), Progress: env.progress("statistics", ps.before.pixels())},
		func(int) (tiles.Worker[pairStats], error) {
			return &gatherWorker{pairReader: ps.newReader(), p: p, size: size, fit: fit,
				width: int64(ps.before.scenes[0].Width), bound: &bound}, nil
		},
		func(_ tiles.Tile, r pairStats) error {
			if fit {
				total.acc.Merge(r.acc)
			}
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
}

type mapWorker struct {
	*pairReader
	proj  *transform.Projector
	sc    *change.Scorer // nil when the dates are identical
	zcut  float64
	diffs bool
	pool  *sync.Pool
	dx, d []float64
}

func (w *mapWorker) Do(_ context.Context, t tiles.Tile) (*mapTile, error) {
	xb, xa, valid, _, err := w.read(t.Index)
	if err != nil {
		return nil, err
	}
	n, k := t.Pixels(), w.proj.Components()
	w.dx, w.d = grow(w.dx, len(xa)), grow(w.d, n*k)
	for i := range xa {
		w.dx[i] = xa[i] - xb[i]
	}
	w.proj.Difference(w.d, w.dx)
	d := w.d
	mt := w.pool.Get().(*mapTile)
	mt.z, mt.pv = grow(mt.z, n), grow(mt.pv, n)
	mt.flags, mt.top = grow(mt.flags, n), grow(mt.top, n)
	if w.diffs {
		mt.diffs = grow(mt.diffs, n*k)
	}
	for i := range n {
		px := d[i*k : i*k+k]
		if !valid[i] {
			mt.z[i], mt.pv[i], mt.flags[i], mt.top[i] = math.NaN(), math.NaN(), 255, 0
			if w.diffs {
				for c := range k {
					mt.diffs[i*k+c] = math.NaN()
				}
			}
			continue
		}
		if w.sc == nil {
			mt.z[i], mt.pv[i], mt.top[i], mt.flags[i] = 0, 1, 0, 0
			if w.diffs {
				copy(mt.diffs[i*k:i*k+k], px)
			}
			continue
		}
		z, top := w.sc.ZTop(px)
		mt.z[i], mt.pv[i], mt.top[i] = z, change.PValue(z, k), uint8(top+1)
		mt.flags[i] = 0
		if z > w.zcut {
			mt.flags[i] = 1
		}
		if w.diffs {
			w.sc.Centre(mt.diffs[i*k:i*k+k], px)
		}
	}
	return mt, nil
}

// mapPixels computes Z, p-values and raw flags for every pixel: it writes
// magnitude.tif, pvalue.tif (and differences.tif) and fills the mask.
func (r *changeRun) mapPixels(ctx context.Context) error {
	nan := math.NaN()
	k := r.proj.Components()
	spec := func(desc string, bands int) raster.Spec {
		s := raster.Spec{Grid: r.before.Grid, Bands: bands, DataType: "Float32", NoData: &nan,
			Metadata: r.metadata()}
		for i := range bands {
			s.Descriptions = append(s.Descriptions, fmt.Sprintf(desc, i+1))
		}
		return s
	}
	var err error
	if r.mask, err = raster.NewMask(r.before.Grid); err != nil {
		return err
	}
	mag, err := raster.Create(r.dir.Path("magnitude.tif"), spec("change statistic Z (chi-square, %d)", 1))
	if err != nil {
		return err
	}
	defer mag.Abort()
	if err := mag.SetMetadata("BANDFOLD_Z_THRESHOLD", strconv.FormatFloat(r.zcut, 'g', -1, 64)); err != nil {
		return err
	}
	pv, err := raster.Create(r.dir.Path("pvalue.tif"), spec("no-change p-value (%d)", 1))
	if err != nil {
		return err
	}
	defer pv.Abort()
	var diffs *raster.Output
	if r.o.Differences {
		if diffs, err = raster.Create(r.dir.Path("differences.tif"), spec("PC%d score difference minus no-change location", k)); err != nil {
			return err
		}
		defer diffs.Abort()
	}
	var sc *change.Scorer
	if r.model != nil {
		sc = r.model.Scorer()
	}
	pool := &sync.Pool{New: func() any { return &mapTile{} }}
	ps := r.pair
	err = tiles.Run(ctx, ps.before.runTiles(), tiles.Options{Workers: r.env.workers(), Progress: r.env.progress("map", ps.before.pixels())},
		func(int) (tiles.Worker[*mapTile], error) {
			w := &mapWorker{pairReader: ps.newReader(), proj: r.proj.Clone(), zcut: r.zcut, diffs: r.o.Differences, pool: pool}
			if sc != nil {
				w.sc = r.model.Scorer()
			}
			return w, nil
		},
		func(t tiles.Tile, mt *mapTile) error {
			defer pool.Put(mt)
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

// metadata is what every raster of a change folder records.
func (r *changeRun) metadata() map[string]string {
	md := map[string]string{"BANDFOLD_VERSION": r.env.Version, "BANDFOLD_CAUTION": Caution}
	if v, ok := r.before.Metadata["SCENARIO"]; ok {
		md["SCENARIO"] = v
	}
	return md
}
