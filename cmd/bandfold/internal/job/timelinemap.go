package job

import (
	"context"
	"fmt"
	"math"
	"os"
	"runtime/debug"
	"strconv"
	"sync"

	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform/change"
)

// Values of steps.tif.
const (
	stepNone        = 0
	stepUnconfirmed = 1
	stepConfirmed   = 2
	stepNoData      = 255
)

// stepColors is steps.tif's colour table: none, flagged but not confirmed,
// confirmed, nodata.
var stepColors = func() [][4]int16 {
	ct := make([][4]int16, 256)
	ct[stepNone] = [4]int16{236, 236, 228, 255}
	ct[stepUnconfirmed] = [4]int16{244, 180, 120, 255}
	ct[stepConfirmed] = [4]int16{180, 30, 60, 255}
	ct[stepNoData] = [4]int16{0, 0, 0, 0}
	return ct
}()

// seriesTile is one tile of every pair's change statistic.
type seriesTile struct {
	z            [][]float64 // per step
	flags, top   [][]uint8   // per step
	exceed       [][]uint8   // per skip: the flags of (t-1, t+1)
	zmax, argmax []float64
}

type seriesWorker struct {
	*seriesReader
	scorers []*pairScorer
	pairs   [][2]int
	steps   int
	pool    *sync.Pool
	norms   [][]change.BandFit
	xn, buf [][]float64 // each date normalised
	both    []bool
	top     []uint8
	z       []float64
}

func (w *seriesWorker) Do(_ context.Context, t tiles.Tile) (*seriesTile, error) {
	if err := w.read(t.Index); err != nil {
		return nil, err
	}
	n := t.Pixels()
	st := w.pool.Get().(*seriesTile)
	st.z, st.flags, st.top = grows(st.z, w.steps, n), grows(st.flags, w.steps, n), grows(st.top, w.steps, n)
	st.exceed = grows(st.exceed, len(w.pairs)-w.steps, n)
	st.zmax, st.argmax = grow(st.zmax, n), grow(st.argmax, n)
	for i, x := range w.x {
		w.xn[i] = x
		if w.norms[i] != nil {
			w.buf[i] = grow(w.buf[i], len(x))
			copy(w.buf[i], x)
			applyNorm(w.buf[i], w.norms[i])
			w.xn[i] = w.buf[i]
		}
	}
	w.z, w.top = grow(w.z, n), grow(w.top, n)
	for q, pr := range w.pairs {
		w.both = w.seriesReader.both(w.both, pr[0], pr[1])
		if q < w.steps {
			w.scorers[q].score(w.xn[pr[0]], w.xn[pr[1]], w.both, st.z[q], st.top[q], st.flags[q])
			continue
		}
		w.scorers[q].score(w.xn[pr[0]], w.xn[pr[1]], w.both, w.z, w.top, st.exceed[q-w.steps])
	}
	for i := range n {
		st.zmax[i], st.argmax[i] = math.NaN(), math.NaN()
		for q := range w.steps {
			if z := st.z[q][i]; z == z && !(z <= st.zmax[i]) {
				st.zmax[i], st.argmax[i] = z, float64(q+1)
			}
		}
	}
	return st, nil
}

// grows returns m rows of n values, reusing buf.
func grows[T any](buf [][]T, m, n int) [][]T {
	if len(buf) < m {
		buf = append(buf, make([][]T, m-len(buf))...)
	}
	buf = buf[:m]
	for i := range buf {
		buf[i] = grow(buf[i], n)
	}
	return buf
}

// mapPixels computes every pair's change statistic in one pass over the
// tiles: each step's raw flags and top components into its mask, its Z
// into a scratch raster for the patches, the largest Z into
// max-magnitude.tif, and the skips' verdicts into the confirmation bits.
func (r *timelineRun) mapPixels(ctx context.Context) error {
	S, g := r.steps(), r.scenes[0].Grid
	for range S {
		m, err := raster.NewMask(g)
		if err != nil {
			return err
		}
		r.masks = append(r.masks, m)
		r.confirm = append(r.confirm, make([]uint64, (g.Width*g.Height+63)/64))
	}
	r.valid = make([]int64, S)
	md := r.metadata()
	zdesc := make([]string, S)
	for q := range zdesc {
		zdesc[q] = fmt.Sprintf("change statistic Z, %s to %s", r.label(q), r.label(q+1))
	}
	r.scratch = r.dir.Path("step-z.tif")
	zs, err := raster.Create(r.scratch, raster.Spec{Grid: g, Bands: S, DataType: "Float32", NoData: &nan, Descriptions: zdesc, Metadata: md})
	if err != nil {
		return err
	}
	defer zs.Abort()
	mag, err := raster.Create(r.dir.Path("max-magnitude.tif"), raster.Spec{Grid: g, Bands: 2, DataType: "Float32", NoData: &nan, Metadata: md,
		Descriptions: []string{fmt.Sprintf("largest change statistic Z over the steps (chi-square, k = %d)", r.proj.Components()), "step of the largest Z (1 = first pair of dates)"}})
	if err != nil {
		return err
	}
	defer mag.Abort()
	pairs := r.pairs()
	pool := &sync.Pool{New: func() any { return &seriesTile{} }}
	var zbuf, mbuf []float64
	err = tiles.Run(ctx, r.runTiles(), tiles.Options{Workers: r.env.workers(), Progress: r.env.progress("map", int64(g.Width)*int64(g.Height))},
		func(int) (tiles.Worker[*seriesTile], error) {
			w := &seriesWorker{seriesReader: r.newSeriesReader(), pairs: pairs, steps: S, pool: pool, norms: r.norms,
				xn: make([][]float64, len(r.scenes)), buf: make([][]float64, len(r.scenes))}
			for q := range pairs {
				w.scorers = append(w.scorers, newPairScorer(r.proj, r.fits[q], nil))
			}
			return w, nil
		},
		func(t tiles.Tile, st *seriesTile) error {
			defer pool.Put(st)
			n := t.Pixels()
			zbuf, mbuf = grow(zbuf, n*S), grow(mbuf, 2*n)
			for q := range S {
				if err := r.masks[q].Write(t.X, t.Y, t.W, t.H, st.flags[q], st.top[q]); err != nil {
					return err
				}
				for i := range n {
					zbuf[i*S+q] = st.z[q][i]
					if st.flags[q][i] != 255 {
						r.valid[q]++
					}
					if r.confirmed(st, q, i) {
						bit := (t.Y+i/t.W)*g.Width + t.X + i%t.W
						r.confirm[q][bit/64] |= 1 << (bit % 64)
					}
				}
			}
			for i := range n {
				mbuf[2*i], mbuf[2*i+1] = st.zmax[i], st.argmax[i]
			}
			if err := zs.Write(t, zbuf); err != nil {
				return err
			}
			return mag.Write(t, mbuf)
		})
	if err != nil {
		return err
	}
	if err := zs.Commit(); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "max-magnitude.tif")
	return mag.Commit()
}

// confirmed reports whether the skips confirm a flag of step q (dates q and
// q+1) at pixel i: date q+2 still differs from date q (skip q) and, where
// date q-1 exists, date q+1 differs from date q-1 (skip q-1). The last step
// has no date after it and is never confirmed; with --confirm none every
// pixel is.
func (r *timelineRun) confirmed(st *seriesTile, q, i int) bool {
	if r.o.Confirm == ConfirmNone {
		return true
	}
	if q == r.steps()-1 || st.exceed[q][i] != 1 {
		return false
	}
	return q == 0 || st.exceed[q-1][i] == 1
}

// sieve applies the minimum mapping unit to each step's flags.
func (r *timelineRun) sieve(ctx context.Context) error {
	debug.FreeOSMemory()
	for q, m := range r.masks {
		if err := m.SieveContext(ctx, r.minPixels); err != nil {
			return fmt.Errorf("sieve of %s to %s: %w", r.label(q), r.label(q+1), err)
		}
	}
	return nil
}

// metadata is what every output of a timeline folder records.
func (r *timelineRun) metadata() map[string]string {
	md := map[string]string{"BANDFOLD_VERSION": r.env.Version, "BANDFOLD_CAUTION": Caution,
		"BANDFOLD_THRESHOLD":       r.o.Threshold.String(),
		"BANDFOLD_MIN_AREA_PIXELS": strconv.Itoa(r.minPixels),
		"BANDFOLD_NORMALIZATION":   r.o.Normalize,
		"BANDFOLD_CONFIRM":         r.o.Confirm,
	}
	for i := range r.scenes {
		md[fmt.Sprintf("BANDFOLD_DATE_%d", i+1)] = r.label(i) + " (" + r.args[i] + ")"
	}
	if r.proj != nil {
		md["BANDFOLD_COMPONENTS"] = strconv.Itoa(r.proj.Components())
	}
	for _, key := range []string{"SCENARIO", "SCENARIO_LOCATION"} {
		if v, ok := r.scenes[0].Metadata[key]; ok {
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
