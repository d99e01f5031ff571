package pairchange

import (
	"context"
	"fmt"
	"path/filepath"
	"strconv"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// mapTile is one tile of the change statistic: Z and the p-values as
// float32, converted by the workers rather than by GDAL in the one
// goroutine that writes.
type mapTile struct {
	z32, pv32 []float32
	diffs     []float64
	prev      report.PreviewPart
}

// changeHook is a worker's share of change's map outputs: Z and the
// p-values as float32 (converted by the workers rather than by GDAL in
// the one goroutine that writes), the score differences and the preview
// sums.
type changeHook struct {
	k     int
	pvals bool
	diffs bool
	grid  *report.PreviewGrid // nil: the preview reads the images itself
}

func (h *changeHook) Begin(t tiles.Tile, pt *series.PairTile) {
	if pt.Extra == nil {
		pt.Extra = &mapTile{}
	}
	mt := pt.Extra.(*mapTile)
	n := t.Pixels()
	mt.z32 = jobkit.Grow(mt.z32, n)
	if h.pvals {
		mt.pv32 = jobkit.Grow(mt.pv32, n)
	}
	if h.diffs {
		mt.diffs = jobkit.Grow(mt.diffs, n*h.k)
	}
	if h.grid != nil {
		h.grid.Begin(t, &mt.prev)
	}
}

// Pair adds pixels lo to hi, scored, to the outputs of the tile.
func (h *changeHook) Pair(_ int, t tiles.Tile, lo, hi int, x [2][]float64, ok []bool, s *series.PairScorer, pt *series.PairTile) {
	mt, k := pt.Extra.(*mapTile), h.k
	if h.grid != nil {
		h.grid.Pixels(t, lo, hi, x, ok, &mt.prev)
	}
	z := pt.Z[0][:hi-lo]
	z32 := mt.z32[lo:hi]
	for i, v := range z {
		z32[i] = float32(v)
	}
	if h.pvals {
		pv := mt.pv32[lo:hi]
		for i, v := range z {
			switch {
			case !ok[i]:
				pv[i] = float32(series.Nan)
			case s.Sc == nil:
				pv[i] = 1
			default:
				pv[i] = float32(change.PValue(v, k))
			}
		}
	}
	if h.diffs {
		centred(mt.diffs[lo*k:hi*k], ok, s, k)
	}
}

func (h *changeHook) Done(tiles.Tile, *series.PairTile) {}

// centred sets dst to the score differences of the pixels last scored
// minus the no-change location (NaN where not valid).
func centred(dst []float64, valid []bool, w *series.PairScorer, k int) {
	d := w.Differences()
	for i, ok := range valid {
		out, px := dst[i*k:i*k+k], d[i*k:i*k+k]
		switch {
		case !ok:
			for c := range out {
				out[c] = series.Nan
			}
		case w.Sc == nil:
			copy(out, px)
		default:
			w.Sc.Centre(out, px)
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
	k := r.Proj.Components()
	spec := func(descs ...string) raster.Spec {
		s := raster.Spec{Grid: r.before.Grid, Bands: len(descs), DataType: "Float32", NoData: &series.Nan,
			Metadata: r.metadata(), Descriptions: descs}
		if c := raster.BestCompression(); c == "ZSTD" {
			s.Compress, s.CreationOptions = c, []string{"ZSTD_LEVEL=1"}
		}
		return r.o.Output.Spec(s, false)
	}
	dof := fmt.Sprintf("chi-square, k = %d degrees of freedom", k)
	var err error
	if m.mag, err = raster.Create(r.Dir.Path("magnitude.tif"), spec("change statistic Z ("+dof+")")); err != nil {
		return err
	}
	if r.o.PValues {
		if m.pv, err = raster.Create(r.Dir.Path("pvalue.tif"), spec("no-change p-value of Z ("+dof+")")); err != nil {
			return err
		}
	}
	if r.o.Differences {
		descs := make([]string, k)
		for i := range descs {
			descs[i] = fmt.Sprintf("PC%d score difference minus no-change location", i+1)
		}
		if m.diffs, err = raster.Create(r.Dir.Path("differences.tif"), spec(descs...)); err != nil {
			return err
		}
	}
	return nil
}

// memoryMapPixels is the largest change map held in memory (3 bytes a
// pixel): 8192 x 8192 pixels, 192 MiB. Up to it a single change stays
// within its 512 MiB target with the map in memory, and the steps that
// handle the map run faster than through GDAL's block cache (two 4-band
// 8192 x 8192 scenes: 6.3 s and 436-447 MiB peak in memory, 9.0 s and
// 335-346 MiB on file). Above it the map is a scratch file that GDAL's
// sieve and polygonize read row by row, so memory stops growing with the
// region: 326 and 347 MiB peak at 16384 and 21960 pixels a side, against
// 1049 and 1650 MiB in memory. A variable so that tests can run both paths.
var memoryMapPixels int64 = 8192 * 8192

// newChangeMap returns an empty change map of grid g: in memory up to
// memoryMapPixels, else in a scratch file at path (removed by Close).
func newChangeMap(g raster.Grid, path string) (*raster.ChangeMask, error) {
	if int64(g.Width)*int64(g.Height) <= memoryMapPixels {
		return raster.NewMask(g)
	}
	return raster.NewMaskFile(g, path)
}

// startMap starts the mask and the rasters of the map pass.
func (r *changeRun) startMap(outs *mapOutputs) error {
	var err error
	if r.mask, err = newChangeMap(r.before.Grid, r.Dir.Path("change-map.tif")); err != nil {
		return err
	}
	return outs.create(r)
}

// abort removes the rasters not committed.
func (m *mapOutputs) abort() {
	for _, o := range m.all() {
		o.Abort()
	}
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

// mapPixels computes Z (and the p-values) and the raw flags of every pixel
// through the engine's map pass: it writes magnitude.tif (pvalue.tif,
// differences.tif) and fills the mask.
func (r *changeRun) mapPixels(ctx context.Context) error {
	k := r.Proj.Components()
	r.grid = report.NewPreviewGrid(r.before.Width, r.before.Height, r.before.Len(), r.rgb)
	var outs mapOutputs
	defer outs.abort()
	if err := r.startMap(&outs); err != nil {
		return err
	}
	err := r.MapPairs(ctx, series.MapHooks{
		NewWorker: func() series.TileHook {
			return &changeHook{k: k, pvals: r.o.PValues, diffs: r.o.Differences, grid: r.grid}
		},
		Deliver: func(t tiles.Tile, pt *series.PairTile) error {
			mt := pt.Extra.(*mapTile)
			if r.grid != nil {
				r.grid.Add(&mt.prev)
			}
			if err := outs.write(t, mt); err != nil {
				return err
			}
			return r.mask.Write(t.X, t.Y, t.W, t.H, pt.Flags[0], pt.Top[0])
		}})
	if err != nil {
		return err
	}
	return r.commitMap(&outs)
}

// commitMap commits the map pass's rasters and lists them with change.tif,
// which changeMap writes.
func (r *changeRun) commitMap(outs *mapOutputs) error {
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
	md := map[string]string{"BANDFOLD_VERSION": r.Env.Version, "BANDFOLD_CAUTION": jobkit.Caution,
		"BANDFOLD_BEFORE": r.NameIn(0), "BANDFOLD_AFTER": r.NameIn(1),
		"BANDFOLD_THRESHOLD":       r.o.Threshold.String(),
		"BANDFOLD_Z_THRESHOLD":     strconv.FormatFloat(r.zcut, 'g', -1, 64),
		"BANDFOLD_MIN_AREA_PIXELS": strconv.Itoa(r.MinPixels),
		"BANDFOLD_NORMALIZATION":   r.NormDescription(1),
	}
	if r.Proj != nil {
		md["BANDFOLD_COMPONENTS"] = strconv.Itoa(r.Proj.Components())
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
