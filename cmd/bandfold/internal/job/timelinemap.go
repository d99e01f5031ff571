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

// seriesTile is one tile of every pair's change statistic, as the outputs
// store it (Float32).
type seriesTile struct {
	z            [][]float32 // per step
	flags, top   [][]uint8   // per step
	exceed       [][]uint8   // per skip: the flags of (t-1, t+1)
	zmax, argmax []float32
}

// seriesChunk is the number of pixels a worker scores at a time: the
// scorers' buffers stay small whatever the tile and the number of pairs.
const seriesChunk = 4096

// seriesRing is the number of dates a worker holds at a time: a date and
// the two before it, all the pairs ending on it need.
const seriesRing = 3

type seriesWorker struct {
	*seriesReader
	scorers []*pairScorer
	pairs   [][2]int
	steps   int
	pool    *sync.Pool
	norms   [][]change.BandFit
	p       int
	both    []bool
	top     []uint8
	z, zmax []float64
	argmax  []int
	ending  []int // the pairs ending on the date read
}

// Do reads the dates of a tile in order, each into the ring of the last
// three, and scores the pairs ending on it: the step (t-1, t) and the skip
// (t-2, t).
func (w *seriesWorker) Do(_ context.Context, t tiles.Tile) (*seriesTile, error) {
	n, p := t.Pixels(), w.p
	st := w.pool.Get().(*seriesTile)
	st.z, st.flags, st.top = grows(st.z, w.steps, n), grows(st.flags, w.steps, n), grows(st.top, w.steps, n)
	st.exceed = grows(st.exceed, len(w.pairs)-w.steps, n)
	st.zmax, st.argmax = grow(st.zmax, n), grow(st.argmax, n)
	w.z, w.top, w.both = grow(w.z, seriesChunk), grow(w.top, seriesChunk), grow(w.both, seriesChunk)
	w.zmax, w.argmax = grow(w.zmax, n), grow(w.argmax, n)
	for i := range n {
		w.zmax[i], w.argmax[i] = math.NaN(), 0
	}
	for d := range w.scenes {
		if err := w.readDate(t.Index, d, d%seriesRing); err != nil {
			return nil, err
		}
		// Normalised in place: the reader reads every tile afresh.
		applyNorm(w.x[d%seriesRing], w.norms[d])
		w.ending = w.ending[:0]
		for q, pr := range w.pairs {
			if pr[1] == d {
				w.ending = append(w.ending, q)
			}
		}
		for lo := 0; lo < n; lo += seriesChunk {
			for _, q := range w.ending {
				w.scorePair(st, q, lo, min(n, lo+seriesChunk), p)
			}
		}
	}
	for i := range n {
		st.zmax[i], st.argmax[i] = float32(w.zmax[i]), float32(math.NaN())
		if w.argmax[i] > 0 {
			st.argmax[i] = float32(w.argmax[i])
		}
	}
	return st, nil
}

// scorePair scores pair q over pixels lo to hi of the tile: a step's Z,
// top component and flags, and the largest Z so far; a skip's flags.
func (w *seriesWorker) scorePair(st *seriesTile, q, lo, hi, p int) {
	a, b := w.pairs[q][0], w.pairs[q][1]
	xa, xb := w.x[a%seriesRing], w.x[b%seriesRing]
	va, vb := w.valid[a%seriesRing], w.valid[b%seriesRing]
	z, top, both := w.z[:hi-lo], w.top[:hi-lo], w.both[:hi-lo]
	for i := range both {
		both[i] = va[lo+i] && vb[lo+i]
	}
	if q >= w.steps {
		w.scorers[q].score(xa[lo*p:hi*p], xb[lo*p:hi*p], both, z, top, st.exceed[q-w.steps][lo:hi])
		return
	}
	w.scorers[q].score(xa[lo*p:hi*p], xb[lo*p:hi*p], both, z, st.top[q][lo:hi], st.flags[q][lo:hi])
	out := st.z[q][lo:hi]
	for i, v := range z {
		out[i] = float32(v)
		if v == v && !(v <= w.zmax[lo+i]) {
			w.zmax[lo+i], w.argmax[lo+i] = v, q+1
		}
	}
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
	for q := range S {
		// On disk: the maps of every step stay out of memory.
		m, err := raster.NewMaskFile(g, r.dir.Path(fmt.Sprintf("step-%d-map.tif", q+1)))
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
	// Scratch, read once for the patches: not worth compressing.
	zs, err := raster.Create(r.scratch, raster.Spec{Grid: g, Bands: S, DataType: "Float32", NoData: &nan, Descriptions: zdesc, Metadata: md,
		CreationOptions: []string{"COMPRESS=NONE", "PREDICTOR=1"}})
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
			w := &seriesWorker{seriesReader: r.newSeriesReader(r.runTiles()), pairs: pairs, steps: S, pool: pool, norms: r.norms, p: r.scenes[0].Len()}
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
					zbuf[i*S+q] = float64(st.z[q][i])
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
				mbuf[2*i], mbuf[2*i+1] = float64(st.zmax[i]), float64(st.argmax[i])
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
