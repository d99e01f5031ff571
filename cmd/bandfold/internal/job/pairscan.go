package job

import (
	"context"
	"errors"
	"fmt"
	"path/filepath"
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
		accB: bands.NewExactAccumulator(w.p), accA: bands.NewExactAccumulator(w.p)}
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
	total := pairStats{sample: change.NewSampler(size, 2*p, 1), accB: bands.NewExactAccumulator(p), accA: bands.NewExactAccumulator(p)}
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

// mapTile is one tile of the change statistic: Z and the p-values as
// float32, converted by the workers rather than by GDAL in the one
// goroutine that writes.
type mapTile struct {
	z          []float64
	z32, pv32  []float32
	diffs      []float64
	flags, top []uint8
	prev       previewPart
}

type mapWorker struct {
	*pairReader
	*pairScorer
	k     int
	pvals bool
	diffs bool
	pool  *sync.Pool
	grid  *previewGrid // nil: the preview reads the images itself
}

func (w *mapWorker) Do(_ context.Context, t tiles.Tile) (*mapTile, error) {
	xb, xa, valid, _, err := w.read(t.Index)
	if err != nil {
		return nil, err
	}
	n := t.Pixels()
	mt := w.pool.Get().(*mapTile)
	mt.z, mt.z32 = grow(mt.z, n), grow(mt.z32, n)
	mt.flags, mt.top = grow(mt.flags, n), grow(mt.top, n)
	if w.pvals {
		mt.pv32 = grow(mt.pv32, n)
	}
	if w.diffs {
		mt.diffs = grow(mt.diffs, n*w.k)
	}
	if w.grid != nil {
		w.grid.begin(t, &mt.prev)
	}
	// A few rows at a time, so that the pixels are still in the cache for
	// the score after the preview has summed them.
	rows := max(1, mapChunk/t.W)
	for r0 := 0; r0 < t.H; r0 += rows {
		w.rows(t, r0, min(t.H, r0+rows), [2][]float64{xb, xa}, valid, mt)
	}
	return mt, nil
}

// mapChunk is about the number of pixels a map worker scores at a time:
// both dates' values of 2048 pixels of 7 bands take 229 KB.
const mapChunk = 2048

// rows computes rows r0 to r1 of tile t from both dates' pixels x of the
// whole tile.
func (w *mapWorker) rows(t tiles.Tile, r0, r1 int, x [2][]float64, valid []bool, mt *mapTile) {
	lo, hi, p, k := r0*t.W, r1*t.W, w.proj.Bands(), w.k
	xb, xa, ok := x[0][lo*p:hi*p], x[1][lo*p:hi*p], valid[lo:hi]
	if w.grid != nil {
		w.grid.rows(t, r0, r1, [2][]float64{xb, xa}, ok, &mt.prev)
	}
	z := mt.z[lo:hi]
	w.score(xb, xa, ok, z, mt.top[lo:hi], mt.flags[lo:hi])
	z32 := mt.z32[lo:hi]
	for i, v := range z {
		z32[i] = float32(v)
	}
	if w.pvals {
		pv := mt.pv32[lo:hi]
		for i, v := range z {
			switch {
			case !ok[i]:
				pv[i] = float32(nan)
			case w.sc == nil:
				pv[i] = 1
			default:
				pv[i] = float32(change.PValue(v, k))
			}
		}
	}
	if w.diffs {
		w.centred(mt.diffs[lo*k:hi*k], ok)
	}
}

// centred sets dst to the score differences of the pixels last scored
// minus the no-change location (NaN where not valid).
func (w *mapWorker) centred(dst []float64, valid []bool) {
	k := w.k
	d := w.differences()
	for i, ok := range valid {
		out, px := dst[i*k:i*k+k], d[i*k:i*k+k]
		switch {
		case !ok:
			for c := range out {
				out[c] = nan
			}
		case w.sc == nil:
			copy(out, px)
		default:
			w.sc.Centre(out, px)
		}
	}
}

// mapOutputs are the rasters of the map pass.
type mapOutputs struct {
	mag, pv, diffs *raster.Output
}

// create starts magnitude.tif and, when asked, pvalue.tif and
// differences.tif. Z and the p-values are all but incompressible float32
// (on two 7-band 8192 x 8192 scenes, DEFLATE level 1 with the floating-point
// predictor kept 78% of magnitude.tif's bytes): ZSTD level 1, where GDAL
// has it, writes the same size with half the CPU.
func (m *mapOutputs) create(r *changeRun) error {
	k := r.proj.Components()
	spec := func(descs ...string) raster.Spec {
		s := raster.Spec{Grid: r.before.Grid, Bands: len(descs), DataType: "Float32", NoData: &nan,
			Metadata: r.metadata(), Descriptions: descs}
		if c := raster.BestCompression(); c == "ZSTD" {
			s.Compress, s.CreationOptions = c, []string{"ZSTD_LEVEL=1"}
		}
		return s
	}
	dof := fmt.Sprintf("chi-square, k = %d degrees of freedom", k)
	var err error
	if m.mag, err = raster.Create(r.dir.Path("magnitude.tif"), spec("change statistic Z ("+dof+")")); err != nil {
		return err
	}
	if r.o.PValues {
		if m.pv, err = raster.Create(r.dir.Path("pvalue.tif"), spec("no-change p-value of Z ("+dof+")")); err != nil {
			return err
		}
	}
	if r.o.Differences {
		descs := make([]string, k)
		for i := range descs {
			descs[i] = fmt.Sprintf("PC%d score difference minus no-change location", i+1)
		}
		if m.diffs, err = raster.Create(r.dir.Path("differences.tif"), spec(descs...)); err != nil {
			return err
		}
	}
	return nil
}

func (m *mapOutputs) all() []*raster.Output {
	var out []*raster.Output
	for _, o := range []*raster.Output{m.mag, m.pv, m.diffs} {
		if o != nil {
			out = append(out, o)
		}
	}
	return out
}

// write writes one tile of every output.
func (m *mapOutputs) write(t tiles.Tile, mt *mapTile) error {
	if err := m.mag.WriteBand(0, t, mt.z32); err != nil {
		return err
	}
	if m.pv != nil {
		if err := m.pv.WriteBand(0, t, mt.pv32); err != nil {
			return err
		}
	}
	if m.diffs != nil {
		return m.diffs.Write(t, mt.diffs)
	}
	return nil
}

// mapPixels computes Z (and the p-values) and the raw flags of every pixel:
// it writes magnitude.tif (pvalue.tif, differences.tif) and fills the mask.
func (r *changeRun) mapPixels(ctx context.Context) error {
	k := r.proj.Components()
	var err error
	r.grid = newPreviewGrid(r.before.Width, r.before.Height, r.before.Len(), r.rgb)
	if r.mask, err = raster.NewMask(r.before.Grid); err != nil {
		return err
	}
	var outs mapOutputs
	err = outs.create(r)
	for _, o := range outs.all() {
		defer o.Abort()
	}
	if err != nil {
		return err
	}
	pool := &sync.Pool{New: func() any { return &mapTile{} }}
	ps := r.pair
	err = tiles.Run(ctx, ps.before.runTiles(), tiles.Options{Workers: r.env.workers(), Progress: r.env.progress("map", ps.before.pixels())},
		func(int) (tiles.Worker[*mapTile], error) {
			return &mapWorker{pairReader: ps.newReader(), pairScorer: newPairScorer(r.proj, r.fit, r.norm), k: k,
				pvals: r.o.PValues, diffs: r.o.Differences, pool: pool, grid: r.grid}, nil
		},
		func(t tiles.Tile, mt *mapTile) error {
			defer pool.Put(mt)
			if r.grid != nil {
				r.grid.add(&mt.prev)
			}
			if err := outs.write(t, mt); err != nil {
				return err
			}
			return r.mask.Write(t.X, t.Y, t.W, t.H, mt.flags, mt.top)
		})
	if err != nil {
		return err
	}
	r.outputs = append(r.outputs, "change.tif")
	for _, o := range outs.all() {
		if err := o.Commit(); err != nil {
			return err
		}
		r.outputs = append(r.outputs, filepath.Base(o.Path()))
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
