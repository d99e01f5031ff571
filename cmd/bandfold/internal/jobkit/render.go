package jobkit

import (
	"context"

	"bandfold/raster"
	"bandfold/tiles"
)

// RenderFunc fills dst (pixel-major, all bands of the output) for tile t.
type RenderFunc func(t tiles.Tile, dst []float64) error

type renderWorker struct {
	bands  int
	render RenderFunc
	pool   chan []float64
}

func (w *renderWorker) Do(_ context.Context, t tiles.Tile) ([]float64, error) {
	var buf []float64
	select {
	case buf = <-w.pool:
	default:
	}
	buf = Grow(buf, t.Pixels()*w.bands)
	return buf, w.render(t, buf)
}

func (w *renderWorker) Close() error { return nil }

// WriteRaster computes an output tile by tile in parallel with render and
// writes the tiles in order through one GDAL handle. The file appears at path
// only when everything succeeded; on error or cancellation nothing is left.
func WriteRaster(ctx context.Context, env Env, path string, spec raster.Spec, grid tiles.Grid, render func(worker int) RenderFunc) error {
	out, err := raster.Create(path, spec)
	if err != nil {
		return err
	}
	defer out.Abort()
	pool := make(chan []float64, 4*env.WorkerCount())
	err = tiles.Run(ctx, grid.All(), tiles.Options{Workers: env.WorkerCount()},
		func(w int) (tiles.Worker[[]float64], error) {
			return &renderWorker{bands: spec.Bands, render: render(w), pool: pool}, nil
		},
		func(t tiles.Tile, buf []float64) error {
			err := out.Write(t, buf)
			select {
			case pool <- buf:
			default:
			}
			return err
		})
	if err != nil {
		return err
	}
	return out.Commit()
}
