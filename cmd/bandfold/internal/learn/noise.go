package learn

import (
	"context"
	"errors"
	"fmt"
	"sync"

	"bandfold/bands"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// tileStats are the co-moments and the shift differences of one tile, and
// the columns at its edges that the merge pairs with its neighbours'.
type tileStats struct {
	mom, noise  *bands.Accumulator
	left, right column
}

// column is one column of a tile's own pixels, nil when the merge does not
// need it: pixel-major float64 values with validity, or, from a tile of
// the integer path, its band-sequential int16 values (ints). The two
// tiles of a joined edge are of one scene, so of one path.
type column struct {
	x     []float64
	valid []bool
	ints  *bands.Int16Column
}

func (c column) empty() bool { return c.x == nil && c.ints == nil }

// noiseWorker accumulates the co-moments of the pixels each tile owns and
// the shift differences of the pairs whose first pixel it owns
// (bands.AddWindow, or bands.AddInt16Window for a scene of the integer
// path, jobkit.IntegerKernel), so every pixel and every pair is counted
// once for any tiling or shard split. A pair across the right edge of a
// tile is taken by the merge from the two tiles' edge columns when the
// right neighbour is in the same pass (joined); otherwise, as across the
// bottom edge, the tile is read with a halo of one column (or row) of its
// neighbour. Reading that column costs GDAL another read of 36 rows of the
// whole neighbouring block, doubling what learn --method mnf read on the
// 224-band cube.
type noiseWorker struct {
	sc      *jobkit.Scan
	shift   bands.Shift
	joined  []bool // joined[k]: item k+1 is item k's right neighbour
	readers []*raster.Reader
	ints    *jobkit.Int16Readers
	buf     []float64
	valid   []bool
	pool    *sync.Pool
}

// window returns the scene of item k, the tile it owns and the window read
// for it: the tile with its halo.
func (w *noiseWorker) window(k int) (scene int, own, ext tiles.Tile) {
	it := w.sc.Items[k]
	s := w.sc.Scenes[it.Scene]
	hc, hr := w.shift.Halo()
	if w.joined[k] {
		hc = 0
	}
	own, ext = it.Tile, it.Tile
	ext.W, ext.H = min(own.W+hc, s.Width-own.X), min(own.H+hr, s.Height-own.Y)
	return it.Scene, own, ext
}

func (w *noiseWorker) Ahead(t tiles.Tile) {
	scene, _, ext := w.window(t.Index)
	w.ints.Ahead(scene, ext)
}

func (w *noiseWorker) Do(ctx context.Context, t tiles.Tile) (tileStats, error) {
	scene, own, ext := w.window(t.Index)
	r, err := w.ints.Get(scene)
	if err != nil {
		return tileStats{}, err
	}
	if r != nil {
		return w.doInt16(ctx, r, t.Index, own, ext)
	}
	s := w.sc.Scenes[scene]
	if w.readers[scene] == nil {
		r, err := s.NewReader()
		if err != nil {
			return tileStats{}, err
		}
		w.readers[scene] = r
	}
	p := s.Len()
	w.buf, w.valid = jobkit.Grow(w.buf, ext.Pixels()*p), jobkit.Grow(w.valid, ext.Pixels())
	if _, err := w.readers[scene].Read(ext, w.buf, w.valid); err != nil {
		return tileStats{}, err
	}
	st := w.stats()
	win := bands.Window{X: w.buf[:ext.Pixels()*p], Valid: w.valid[:ext.Pixels()],
		P: p, W: ext.W, H: ext.H, OwnW: own.W, OwnH: own.H, Bound: s.IntegerBound()}
	bands.AddWindow(st.mom, st.noise, win, w.shift)
	if w.leftJoined(t.Index) {
		st.left = edge(win, 0)
	}
	if w.joined[t.Index] {
		st.right = edge(win, own.W-1)
	}
	return st, nil
}

// doInt16 is Do on the integer path: window ext of item k read as int16.
func (w *noiseWorker) doInt16(ctx context.Context, r *raster.Int16Reader, k int, own, ext tiles.Tile) (tileStats, error) {
	x, err := r.Read(ctx, ext)
	if err != nil {
		return tileStats{}, err
	}
	defer r.Release(x)
	st := w.stats()
	win := bands.Int16Window{X: x.X, Shift: x.Shift, Valid: x.Valid, P: len(x.Shift), W: ext.W, H: ext.H, OwnW: own.W, OwnH: own.H}
	bands.AddInt16Window(st.mom, st.noise, win, w.shift)
	// The columns are copied into storage of their own: x goes back to
	// the reader before the merge pairs them.
	if w.leftJoined(k) {
		c := win.Column(0, bands.Int16Column{})
		st.left.ints = &c
	}
	if w.joined[k] {
		c := win.Column(own.W-1, bands.Int16Column{})
		st.right.ints = &c
	}
	return st, nil
}

func (w *noiseWorker) leftJoined(k int) bool { return k > 0 && w.joined[k-1] }

// stats returns empty accumulators for a tile.
func (w *noiseWorker) stats() tileStats {
	st := tileStats{mom: w.pool.Get().(*bands.Accumulator), noise: w.pool.Get().(*bands.Accumulator)}
	st.mom.Reset()
	st.noise.Reset()
	return st
}

// edge copies column c of the window's own rows.
func edge(win bands.Window, c int) column {
	col := column{x: make([]float64, 0, win.OwnH*win.P), valid: make([]bool, win.OwnH)}
	for r := range win.OwnH {
		i := r*win.W + c
		col.x = append(col.x, win.X[i*win.P:(i+1)*win.P]...)
		col.valid[r] = win.Valid[i]
	}
	return col
}

// pairEdges adds to noise the horizontal pairs between the right edge a of
// one tile and the left edge b of its right neighbour.
func pairEdges(noise *bands.Accumulator, a, b column) {
	if a.ints != nil {
		bands.AddInt16Pairs(noise, *a.ints, *b.ints)
		return
	}
	h := len(a.valid)
	p := len(a.x) / h
	win := bands.Window{X: make([]float64, 0, 2*h*p), Valid: make([]bool, 0, 2*h), P: p, W: 2, H: h, OwnW: 1, OwnH: h}
	for r := range h {
		win.X = append(append(win.X, a.x[r*p:(r+1)*p]...), b.x[r*p:(r+1)*p]...)
		win.Valid = append(win.Valid, a.valid[r], b.valid[r])
	}
	noise.AddShiftDifferences(win, bands.Horizontal)
}

func (w *noiseWorker) Close() error {
	errs := []error{w.ints.Close()}
	for _, r := range w.readers {
		if r != nil {
			errs = append(errs, r.Close())
		}
	}
	return errors.Join(errs...)
}

// momentsAndNoise accumulates the band co-moments and the shift differences
// over the scan in one pass, merged in tile order (identical for any number
// of workers) in exact accumulators (identical for any tiling and shard
// split too when the pixels are integers, and whether the integer kernel
// or the float64 path summed them). The scan's stride must be 1: the noise
// estimate needs adjacent pixels.
func momentsAndNoise(ctx context.Context, sc *jobkit.Scan, env jobkit.Env, shift bands.Shift) (mom, noise *bands.Accumulator, err error) {
	p := sc.Scenes[0].Len()
	pool := &sync.Pool{New: func() any { return bands.NewExactAccumulator(p) }}
	mom, noise = bands.NewExactAccumulator(p), bands.NewExactAccumulator(p)
	joined := make([]bool, len(sc.Items))
	if shift&bands.Horizontal != 0 {
		for k := range len(sc.Items) - 1 {
			a, b := sc.Items[k], sc.Items[k+1]
			joined[k] = a.Scene == b.Scene && b.Tile.Y == a.Tile.Y && b.Tile.X == a.Tile.X+a.Tile.W
		}
	}
	workers := env.WorkerCount()
	ahead := jobkit.ReadAhead(workers)
	var right column // the right edge of the last tile merged, when joined
	err = tiles.Run(ctx, sc.RunTiles(), tiles.Options{Workers: workers, Ahead: ahead, Progress: env.ProgressFor("co-moments and noise", sc.Pixels())},
		func(int) (tiles.Worker[tileStats], error) {
			return &noiseWorker{sc: sc, shift: shift, joined: joined, readers: make([]*raster.Reader, len(sc.Scenes)),
				ints: jobkit.NewInt16Readers(sc.Scenes, ahead), pool: pool}, nil
		},
		func(_ tiles.Tile, st tileStats) error {
			mom.Merge(st.mom)
			noise.Merge(st.noise)
			if !st.left.empty() {
				pairEdges(noise, right, st.left)
			}
			right = st.right
			pool.Put(st.mom)
			pool.Put(st.noise)
			return nil
		})
	if err != nil {
		return nil, nil, err
	}
	return mom, noise, nil
}

// fitMNF fits a minimum noise fraction basis to the co-moments acc and the
// shift differences noise; what names the inputs, shift the pairs used.
func fitMNF(env jobkit.Env, acc, noise *bands.Accumulator, info []transform.Band, what string, shift bands.Shift) (*transform.Basis, error) {
	if noise.Count() < 2 {
		return nil, fmt.Errorf("%s has %.0f %s pairs of adjacent valid pixels: the noise estimate of --method mnf needs at least 2%s", what, noise.Count(), shift, otherPairs(shift))
	}
	// The checks of a principal component fit, without its decomposition:
	// NewMNFBasis makes its own.
	if err := jobkit.CheckFit(acc, transform.Covariance, info, what); err != nil {
		return nil, err
	}
	b, err := transform.NewMNFBasis(info, int64(acc.Count()), acc.Mean(nil), acc.Covariance(nil), bands.NoiseCovariance(noise, nil), int64(noise.Count()))
	var nd *transform.NotDefiniteError
	if errors.As(err, &nd) {
		return nil, fmt.Errorf("the noise covariance of %s is not positive definite at band %d (%s): a constant or noise-free band; leave it out with --exclude %d", what, nd.Band+1, info[nd.Band].Name, nd.Band+1)
	}
	if err != nil {
		return nil, fmt.Errorf("fit MNF basis on %s: %w", what, err)
	}
	b.Tool = env.Version
	return b, nil
}

// otherPairs suggests the pixel pairs not yet tried when those of shift
// were too few: none when both directions were used.
func otherPairs(shift bands.Shift) string {
	switch shift {
	case bands.Horizontal:
		return " (an image one pixel wide has none; try --noise vertical or both)"
	case bands.Vertical:
		return " (an image one pixel high has none; try --noise horizontal or both)"
	}
	return " (valid pixels must have a valid neighbour in their row or column)"
}

// sumsFinite refuses statistics whose sums overflowed (bands.ErrTooLarge:
// values of about 1e154 or more), naming the images they came from; noise
// may be nil.
func sumsFinite(what string, mom, noise *bands.Accumulator) error {
	for _, acc := range []*bands.Accumulator{mom, noise} {
		if acc == nil {
			continue
		}
		if err := acc.Err(); err != nil {
			return fmt.Errorf("%s: %w; rescale them first (for example with a scale in the file's metadata)", what, err)
		}
	}
	return nil
}

// BandSNR is a band's estimated signal-to-noise ratio,
// Σ_jj / Σ_N,jj − 1 (total over shift-difference noise variance, less one).
type BandSNR struct {
	Band         int     `json:"band"`
	Name         string  `json:"name"`
	WavelengthNM float64 `json:"wavelength_nm,omitempty"`
	SNR          float64 `json:"snr"`
}

// SuggestSNR is the threshold of learn --suggest-exclude: a band whose
// signal variance is below its noise variance (SNR < 1) carries less signal
// than noise.
const SuggestSNR = 1.0

// bandSNR estimates each band's SNR from the co-moments and the shift
// differences; positions are the bands' 1-based numbers in the input.
func bandSNR(acc, noise *bands.Accumulator, s *raster.Stack, numbers []int) []BandSNR {
	cov := acc.Covariance(nil)
	nc := bands.NoiseCovariance(noise, nil)
	out := make([]BandSNR, s.Len())
	for j, b := range s.Bands {
		out[j] = BandSNR{Band: numbers[j], Name: b.Name, WavelengthNM: b.WavelengthNM, SNR: cov.At(j, j)/nc.At(j, j) - 1}
	}
	return out
}
