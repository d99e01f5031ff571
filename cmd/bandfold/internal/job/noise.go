package job

import (
	"context"
	"errors"
	"fmt"
	"sync"

	"bandfold/bands"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// tileStats are the co-moments and the shift differences of one tile.
type tileStats struct{ mom, noise *bands.Accumulator }

// noiseWorker reads each tile with a halo of one column (and one row for
// vertical pairs) from its right and bottom neighbours, accumulates the
// co-moments of the pixels the tile owns and the shift differences of the
// pairs whose first pixel it owns (bands.ShiftDifferences), so every pixel
// and every pair is counted once for any tiling or shard split.
type noiseWorker struct {
	sc      *scan
	shift   bands.Shift
	readers []*raster.Reader
	buf     []float64
	valid   []bool
	own     []bool // valid with the halo column off
	pool    *sync.Pool
}

func (w *noiseWorker) Do(_ context.Context, t tiles.Tile) (tileStats, error) {
	it := w.sc.items[t.Index]
	s := w.sc.scenes[it.scene]
	if w.readers[it.scene] == nil {
		r, err := s.NewReader()
		if err != nil {
			return tileStats{}, err
		}
		w.readers[it.scene] = r
	}
	hc, hr := w.shift.Halo()
	own := it.tile
	ext := own
	ext.W, ext.H = min(own.W+hc, s.Width-own.X), min(own.H+hr, s.Height-own.Y)
	p := s.Len()
	w.buf, w.valid = grow(w.buf, ext.Pixels()*p), grow(w.valid, ext.Pixels())
	if _, err := w.readers[it.scene].Read(ext, w.buf, w.valid); err != nil {
		return tileStats{}, err
	}
	st := tileStats{mom: w.pool.Get().(*bands.Accumulator), noise: w.pool.Get().(*bands.Accumulator)}
	st.mom.Reset()
	st.noise.Reset()
	// The co-moments take the owned rows in one call, the halo column
	// masked off; the differences come straight from the window.
	n := own.H * ext.W
	w.own = grow(w.own, n)
	copy(w.own, w.valid[:n])
	for i := own.W; i < n; i += ext.W {
		clear(w.own[i : i+ext.W-own.W])
	}
	st.mom.AddPixels(w.buf[:n*p], w.own)
	st.noise.AddShiftDifferences(bands.Window{X: w.buf[:ext.Pixels()*p], Valid: w.valid[:ext.Pixels()],
		P: p, W: ext.W, H: ext.H, OwnW: own.W, OwnH: own.H}, w.shift)
	return st, nil
}

func (w *noiseWorker) Close() error {
	var errs []error
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
// split too when the pixels are integers). The scan's stride must be 1: the noise estimate needs
// adjacent pixels.
func (sc *scan) momentsAndNoise(ctx context.Context, env Env, shift bands.Shift) (mom, noise *bands.Accumulator, err error) {
	p := sc.scenes[0].Len()
	pool := &sync.Pool{New: func() any { return bands.NewExactAccumulator(p) }}
	mom, noise = bands.NewExactAccumulator(p), bands.NewExactAccumulator(p)
	err = tiles.Run(ctx, sc.runTiles(), tiles.Options{Workers: env.workers(), Progress: env.progress("co-moments and noise", sc.pixels())},
		func(int) (tiles.Worker[tileStats], error) {
			return &noiseWorker{sc: sc, shift: shift, readers: make([]*raster.Reader, len(sc.scenes)), pool: pool}, nil
		},
		func(_ tiles.Tile, st tileStats) error {
			mom.Merge(st.mom)
			noise.Merge(st.noise)
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
func fitMNF(env Env, acc, noise *bands.Accumulator, info []transform.Band, what string, shift bands.Shift) (*transform.Basis, error) {
	if noise.Count() < 2 {
		return nil, fmt.Errorf("%s has %.0f %s pairs of adjacent valid pixels: the noise estimate of --method mnf needs at least 2 (an image one pixel wide has none; try --noise both or vertical)", what, noise.Count(), shift)
	}
	if _, err := fitBasis(env, acc, transform.Covariance, info, what); err != nil {
		return nil, err
	}
	mins, maxs := acc.Min(nil), acc.Max(nil)
	for i := range info {
		info[i].Min, info[i].Max = mins[i], maxs[i]
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
