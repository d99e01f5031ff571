package timeline

import (
	"context"
	"fmt"
	"math"
	"os"
	"strconv"

	"bandfold/cmd/bandfold/internal/figures"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/tiles"
)

// Values of steps.tif.
const (
	stepNone        = 0
	StepUnconfirmed = 1 // flagged, did not last
	StepConfirmed   = 2 // lasting
	StepNoData      = 255
)

// stepClasses are the names and colours of steps.tif's values: those of
// timeline.png's bars.
var stepClasses = []raster.Class{
	{Value: stepNone, Name: "none", Colour: figures.MapBackground},
	{Value: StepUnconfirmed, Name: "flagged", Colour: figures.FlaggedColour},
	{Value: StepConfirmed, Name: "lasting", Colour: figures.LastingColour},
	{Value: StepNoData, Name: "nodata"},
}

// stepTile is a timeline tile's own results: each step's Z as float32,
// the largest Z and its step.
type stepTile struct {
	z            [][]float32 // per step
	zmax, argmax []float32
}

// timelineHook is a worker's share of timeline's map outputs.
type timelineHook struct {
	steps   int
	zmax    []float64
	argmaxi []int
}

func (h *timelineHook) Begin(t tiles.Tile, pt *series.PairTile) {
	if pt.Extra == nil {
		pt.Extra = &stepTile{}
	}
	st, n := pt.Extra.(*stepTile), t.Pixels()
	st.z = series.Grows(st.z, h.steps, n)
	st.zmax, st.argmax = jobkit.Grow(st.zmax, n), jobkit.Grow(st.argmax, n)
	h.zmax, h.argmaxi = jobkit.Grow(h.zmax, n), jobkit.Grow(h.argmaxi, n)
	for i := range n {
		h.zmax[i], h.argmaxi[i] = math.NaN(), 0
	}
}

// Pair keeps a step's Z and the largest Z so far; a skip's flags are all
// the engine's own.
func (h *timelineHook) Pair(q int, _ tiles.Tile, lo, hi int, _ [2][]float64, _ []bool, _ *series.PairScorer, pt *series.PairTile) {
	if q >= h.steps {
		return
	}
	st := pt.Extra.(*stepTile)
	out := st.z[q][lo:hi]
	for i, v := range pt.Z[q][:hi-lo] {
		out[i] = float32(v)
		if v == v && !(v <= h.zmax[lo+i]) {
			h.zmax[lo+i], h.argmaxi[lo+i] = v, q+1
		}
	}
}

func (h *timelineHook) Done(t tiles.Tile, pt *series.PairTile) {
	st := pt.Extra.(*stepTile)
	for i := range t.Pixels() {
		st.zmax[i], st.argmax[i] = float32(h.zmax[i]), float32(math.NaN())
		if h.argmaxi[i] > 0 {
			st.argmax[i] = float32(h.argmaxi[i])
		}
	}
}

// stepMaps are a mapped tile's values that timeline's outputs take: each
// step's Z, the largest Z and its step, every pair's raw flags and each
// step's top component. A single run takes them from the engine's tile,
// the finish of a staged run from the map pieces.
type stepMaps struct {
	z            [][]float32 // per step
	zmax, argmax []float32
	flags, top   [][]uint8 // per pair
}

// mapWriter writes the tiles of the map pass, in tile order: each step's
// mask (with its confirmation marks), the steps' Z scratch raster and
// max-magnitude.tif.
type mapWriter struct {
	r       *timelineRun
	zs, mag *raster.Output
	marks   []uint8
	mbuf    []float64
}

// mapPixels computes every pair's change statistic in one pass over the
// tiles: each step's raw flags and top components into its mask, whose
// marks say which flags the skips confirm, its Z into a scratch raster for
// the patches, and the largest Z into max-magnitude.tif. The masks are
// files: memory grows neither with the region nor with the steps.
func (r *timelineRun) mapPixels(ctx context.Context) error {
	w, err := r.startMap()
	if err != nil {
		return err
	}
	defer w.abort()
	var m stepMaps
	err = r.MapPairs(ctx, series.MapHooks{
		NewWorker: r.newHook,
		Deliver: func(t tiles.Tile, pt *series.PairTile) error {
			st := pt.Extra.(*stepTile)
			m = stepMaps{z: st.z, zmax: st.zmax, argmax: st.argmax, flags: pt.Flags, top: pt.Top}
			return w.deliver(t, &m)
		}})
	if err != nil {
		return err
	}
	return w.commit()
}

// newHook is a map worker's hook.
func (r *timelineRun) newHook() series.TileHook { return &timelineHook{steps: r.steps()} }

// startMap creates the masks and the map pass's rasters.
func (r *timelineRun) startMap() (*mapWriter, error) {
	S, g := r.steps(), r.Scenes[0].Grid
	for q := range S {
		m, err := raster.NewMaskFile(g, r.Dir.Path(fmt.Sprintf("step-%d-map.tif", q+1)))
		if err != nil {
			return nil, err
		}
		r.masks = append(r.masks, m)
	}
	r.valid = make([]int64, S)
	md := r.metadata()
	zdesc := make([]string, S)
	for q := range zdesc {
		zdesc[q] = fmt.Sprintf("change statistic Z, %s to %s", r.label(q), r.label(q+1))
	}
	r.scratch = r.Dir.Path("step-z.tif")
	w := &mapWriter{r: r}
	var err error
	// Scratch, read once for the patches: not worth compressing; one band
	// at a time, as the steps' Z are written and read.
	w.zs, err = raster.Create(r.scratch, raster.Spec{Grid: g, Bands: S, DataType: "Float32", NoData: &series.Nan, Descriptions: zdesc, Metadata: md,
		CreationOptions: []string{"COMPRESS=NONE", "PREDICTOR=1", "INTERLEAVE=BAND"}})
	if err != nil {
		return nil, err
	}
	// Nearest overviews: the second band is a step number.
	w.mag, err = raster.Create(r.Dir.Path("max-magnitude.tif"), r.o.Output.Spec(raster.Spec{Grid: g, Bands: 2, DataType: "Float32", NoData: &series.Nan, Metadata: md,
		Descriptions: []string{fmt.Sprintf("largest change statistic Z over the steps (chi-square, k = %d)", r.Proj.Components()), "step of the largest Z (1 = first pair of dates)"}}, true))
	if err != nil {
		w.zs.Abort()
		return nil, err
	}
	return w, nil
}

// deliver writes a tile: each step's flags, top components and marks into
// its mask and its Z into the scratch raster, and the largest Z.
func (w *mapWriter) deliver(t tiles.Tile, m *stepMaps) error {
	r, n := w.r, t.Pixels()
	w.marks, w.mbuf = jobkit.Grow(w.marks, n), jobkit.Grow(w.mbuf, 2*n)
	for q, mask := range r.masks {
		if err := mask.Write(t.X, t.Y, t.W, t.H, m.flags[q], m.top[q]); err != nil {
			return err
		}
		for i := range n {
			if m.flags[q][i] != 255 {
				r.valid[q]++
			}
			w.marks[i] = 0
			if r.confirmed(m, q, i) {
				w.marks[i] = 1
			}
		}
		if err := mask.WriteMarks(t.X, t.Y, t.W, t.H, w.marks); err != nil {
			return err
		}
		if err := w.zs.WriteBand(q, t, m.z[q]); err != nil {
			return err
		}
	}
	for i := range n {
		w.mbuf[2*i], w.mbuf[2*i+1] = float64(m.zmax[i]), float64(m.argmax[i])
	}
	return w.mag.Write(t, w.mbuf)
}

// commit commits the map pass's rasters.
func (w *mapWriter) commit() error {
	if err := w.zs.Commit(); err != nil {
		return err
	}
	w.r.outputs = append(w.r.outputs, "max-magnitude.tif")
	return w.mag.Commit()
}

// abort removes what commit did not keep.
func (w *mapWriter) abort() {
	w.zs.Abort()
	w.mag.Abort()
}

// confirmed reports whether the skips confirm a flag of step q (dates q and
// q+1) at pixel i: date q+2 still differs from date q (skip q) and, where
// date q-1 exists, date q+1 differs from date q-1 (skip q-1). The last step
// has no date after it and is never confirmed; with --confirm none every
// pixel is.
func (r *timelineRun) confirmed(m *stepMaps, q, i int) bool {
	if r.o.Confirm == ConfirmNone {
		return true
	}
	S := r.steps()
	if q == S-1 || m.flags[S+q][i] != 1 {
		return false
	}
	return q == 0 || m.flags[S+q-1][i] == 1
}

// sieve applies the minimum mapping unit to each step's flags.
func (r *timelineRun) sieve(ctx context.Context) error {
	return r.Run.Sieve(ctx, r.masks, func(q int) string { return fmt.Sprintf(" of %s to %s", r.label(q), r.label(q+1)) })
}

// metadata is what every output of a timeline folder records.
func (r *timelineRun) metadata() map[string]string {
	md := map[string]string{"BANDFOLD_VERSION": r.Env.Version, "BANDFOLD_CAUTION": jobkit.Caution,
		"BANDFOLD_THRESHOLD":       r.o.Threshold.String(),
		"BANDFOLD_MIN_AREA_PIXELS": strconv.Itoa(r.MinPixels),
		"BANDFOLD_NORMALIZATION":   r.o.Normalize,
		"BANDFOLD_CONFIRM":         r.o.Confirm,
	}
	for i := range r.Scenes {
		md[fmt.Sprintf("BANDFOLD_DATE_%d", i+1)] = r.NameIn(i)
		md[fmt.Sprintf("BANDFOLD_NORMALIZATION_%d", i+1)] = r.NormDescription(i)
	}
	if r.Proj != nil {
		md["BANDFOLD_COMPONENTS"] = strconv.Itoa(r.Proj.Components())
	}
	for _, key := range []string{"SCENARIO", "SCENARIO_LOCATION"} {
		if v, ok := r.Scenes[0].Metadata[key]; ok {
			md[key] = v
		}
	}
	return md
}

// removeScratch removes the steps' Z once the patches are written.
func (r *timelineRun) removeScratch() error {
	if err := os.Remove(r.scratch); err != nil {
		return fmt.Errorf("write %s: %w", r.o.Out, err)
	}
	return nil
}
