package demo

import (
	"context"
	"fmt"
	"math"
	"path/filepath"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/learn"
	"bandfold/cmd/bandfold/internal/scenario"
	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// demoWindows are the water-vapour windows the demo excludes, the common
// practice of --exclude-nm 1340-1450,1790-1970.
var demoWindows = []transform.NMRange{{Lo: 1340, Hi: 1450}, {Lo: 1790, Hi: 1970}}

// demoHyperK is the number of components both denoising fits keep: the
// cube's ground is a mixture of a handful of endmembers under a varying
// illumination, so a few components hold its signal.
const demoHyperK = 8

// DemoHyper compares principal components with minimum noise fraction
// components as denoisers of the hyperspectral cube: both fitted without
// the absorption windows and reconstructed from the same k components,
// scored against the noise-free cube the scenario renders.
type DemoHyper struct {
	PCA, MNF *learn.LearnResult
	// Components is k, Bands the bands kept after the exclusion.
	Components, Bands int
	// RMSE against the noise-free cube over the kept bands and valid
	// pixels (reflectance x 10000): of the noisy cube itself and of its
	// reconstructions from k principal and k MNF components.
	RMSENoisy, RMSEPCA, RMSEMNF float64
	Pixels                      int64
}

// RunHyperDemo fits PCA and MNF bases to the cube without the absorption
// windows and measures how close each k-component reconstruction comes to
// the noise-free cube.
func RunHyperDemo(ctx context.Context, env jobkit.Env, o *DemoOptions, c *scenario.Catchment) (*DemoHyper, error) {
	hy := o.Files().Hyper
	res := &DemoHyper{Components: demoHyperK}
	for _, m := range []transform.Method{transform.PCA, transform.MNF} {
		lr, err := learn.Learn(ctx, env, learn.LearnOptions{Scenes: []string{hy}, Method: m, Components: demoHyperK,
			Spectral: jobkit.Spectral{ExcludeNM: demoWindows}, Out: filepath.Join(o.Dir, "hyper-"+string(m)+".basis.json"), Overwrite: o.Overwrite})
		if err != nil {
			return nil, fmt.Errorf("demo learn --method %s: %w", m, err)
		}
		if m == transform.PCA {
			res.PCA = lr
		} else {
			res.MNF = lr
		}
	}
	var keep []int // 0-based
	for _, n := range jobkit.KeptBands(res.PCA.Basis) {
		keep = append(keep, n-1)
	}
	res.Bands = len(keep)
	s, err := jobkit.OpenImage(hy, nil)
	if err != nil {
		return nil, err
	}
	defer s.Close()
	sub, err := s.Subset(keep)
	if err != nil {
		return nil, err
	}
	var projs [2]*transform.Projector
	for i, lr := range []*learn.LearnResult{res.PCA, res.MNF} {
		if projs[i], err = transform.NewProjector(lr.Basis, demoHyperK); err != nil {
			return nil, err
		}
	}
	sc := jobkit.NewScan([]*raster.Stack{sub}, jobkit.TileGrid(0), 1, jobkit.Shard{})
	var sum [3]float64 // squared errors: noisy, PCA, MNF
	var n int64
	err = tiles.Run(ctx, sc.RunTiles(), tiles.Options{Workers: env.WorkerCount(), Progress: env.ProgressFor("denoising error", sc.Pixels())},
		func(int) (tiles.Worker[demoErr], error) {
			return &demoErrWorker{Reader: sc.NewReader(), c: c, keep: keep, projs: [2]*transform.Projector{projs[0].Clone(), projs[1].Clone()}}, nil
		},
		func(_ tiles.Tile, e demoErr) error {
			for i := range sum {
				sum[i] += e.sum[i]
			}
			n += e.n
			return nil
		})
	if err != nil {
		return nil, err
	}
	if n == 0 {
		return nil, fmt.Errorf("demo: no valid pixel in %s", hy)
	}
	m := float64(n) * float64(len(keep))
	res.RMSENoisy, res.RMSEPCA, res.RMSEMNF = math.Sqrt(sum[0]/m), math.Sqrt(sum[1]/m), math.Sqrt(sum[2]/m)
	res.Pixels = n
	return res, nil
}

// demoErr are one tile's squared errors against the noise-free cube (noisy,
// PCA, MNF) and its valid pixels.
type demoErr struct {
	sum [3]float64
	n   int64
}

type demoErrWorker struct {
	*jobkit.Reader
	c            *scenario.Catchment
	keep         []int
	projs        [2]*transform.Projector
	clean, y, xr []float64
}

func (w *demoErrWorker) Do(_ context.Context, t tiles.Tile) (demoErr, error) {
	x, valid, _, err := w.Read(t.Index)
	if err != nil {
		return demoErr{}, err
	}
	it := w.Sc.Items[t.Index].Tile
	n, p := it.Pixels(), len(w.keep)
	w.clean = jobkit.Grow(w.clean, n*scenario.HyperBands)
	w.c.HyperspectralClean(it.X, it.Y, it.W, it.H, w.clean)
	var e demoErr
	for i := range n {
		if !valid[i] {
			continue
		}
		e.n++
		for j, b := range w.keep {
			d := x[i*p+j] - w.clean[i*scenario.HyperBands+b]
			e.sum[0] += d * d
		}
	}
	for m, pr := range w.projs {
		w.y, w.xr = jobkit.Grow(w.y, n*pr.Components()), jobkit.Grow(w.xr, n*p)
		pr.Fold(w.y, x)
		pr.Unfold(w.xr, w.y)
		for i := range n {
			if !valid[i] {
				continue
			}
			for j, b := range w.keep {
				d := w.xr[i*p+j] - w.clean[i*scenario.HyperBands+b]
				e.sum[m+1] += d * d
			}
		}
	}
	return e, nil
}

// hyperWavelengths are the cube's band centres and widths, written in
// GDAL's convention (raster.Wavelength) and read back by
// raster.Stack.Wavelengths.
func hyperWavelengths(c *scenario.Catchment) []raster.Wavelength {
	var out []raster.Wavelength
	for _, nm := range c.HyperWavelengths() {
		out = append(out, raster.Wavelength{CentreNM: nm, FWHMNM: c.HyperFWHM()})
	}
	return out
}
