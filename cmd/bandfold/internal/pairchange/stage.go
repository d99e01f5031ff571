package pairchange

import (
	"context"
	"fmt"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/tiles"
)

// pieceTile is one tile of a map piece: Z (and the p-values, with
// --pvalues) as float32 bytes, the score differences (with --differences)
// as float64 bytes (series.ValueBytes), the raw flags and the top component, and the tile's
// part of the preview (nil where the preview reads the images itself).
type pieceTile struct {
	Z, PV, D   []byte
	Flags, Top []uint8
	Prev       *report.PreviewPart
}

func (p *pieceTile) Reset() {
	*p = pieceTile{Z: p.Z[:0], PV: p.PV[:0], D: p.D[:0], Flags: p.Flags[:0], Top: p.Top[:0], Prev: nil}
}

// ChangeStage runs the scan, fit or map stage of a staged change; the
// finish stage is Change with Stage StageFinish.
func ChangeStage(ctx context.Context, env jobkit.Env, o ChangeOptions) (*series.StageResult, error) {
	r := &changeRun{Run: &series.Run{Env: env}, o: &o}
	defer r.close()
	return r.RunStage(ctx, "change", o.Staging, series.StagePlan{
		Open: jobkit.Step("open", r.open),
		Fit:  r.FitSteps(jobkit.Step("model", r.fitModel)),
		Map:  r.mapShard,
	})
}

// mapShard maps the shard's tiles into its map piece.
func (r *changeRun) mapShard(ctx context.Context) error {
	k := r.Proj.Components()
	r.grid = report.NewPreviewGrid(r.before.Width, r.before.Height, r.before.Len(), r.rgb)
	var rec pieceTile
	return r.MapPiece(ctx, func() series.TileHook {
		return &changeHook{k: k, pvals: r.o.PValues, diffs: r.o.Differences, grid: r.grid}
	},
		func(_ tiles.Tile, pt *series.PairTile) any {
			mt := pt.Extra.(*mapTile)
			rec.Z, rec.PV = series.ValueBytes(rec.Z, mt.z32), series.ValueBytes(rec.PV, mt.pv32)
			rec.D = series.ValueBytes(rec.D, mt.diffs)
			rec.Flags, rec.Top, rec.Prev = pt.Flags[0], pt.Top[0], nil
			if r.grid != nil {
				rec.Prev = &mt.prev
			}
			return &rec
		})
}

// joinPieces takes the place of the map pass in the finish stage: every
// tile from the piece of the shard that mapped it into magnitude.tif (and
// pvalue.tif, differences.tif), the mask and the preview, in tile order
// as a single run adds them.
func (r *changeRun) joinPieces(ctx context.Context) error {
	var outs mapOutputs
	defer outs.abort()
	if err := r.startMap(&outs); err != nil {
		return err
	}
	r.grid = report.NewPreviewGrid(r.before.Width, r.before.Height, r.before.Len(), r.rgb)
	var rec pieceTile
	var mt mapTile
	err := r.JoinPieces(ctx, &rec, func(t tiles.Tile, what string) error {
		px := t.Pixels()
		if (rec.Prev != nil) != (r.grid != nil) {
			return fmt.Errorf("%s has no part of the preview, or one where there should be none: the piece is of another grid or tiling", what)
		}
		if r.grid != nil {
			r.grid.Add(rec.Prev)
		}
		if len(rec.Z) != 4*px || len(rec.Flags) != px || len(rec.Top) != px {
			return fmt.Errorf("%s has %d pixels, want %d: the piece is of another grid or tiling", what, len(rec.Flags), px)
		}
		mt.z32 = jobkit.Grow(mt.z32, px)
		series.Values(mt.z32, rec.Z)
		if outs.pv != nil {
			if len(rec.PV) != 4*px {
				return fmt.Errorf("%s has no p-values: its map stage ran without --pvalues", what)
			}
			mt.pv32 = jobkit.Grow(mt.pv32, px)
			series.Values(mt.pv32, rec.PV)
		}
		if outs.diffs != nil {
			k := r.Proj.Components()
			if len(rec.D) != 8*px*k {
				return fmt.Errorf("%s has no score differences: its map stage ran without --differences", what)
			}
			mt.diffs = jobkit.Grow(mt.diffs, px*k)
			series.Values(mt.diffs, rec.D)
		}
		if err := outs.write(t, &mt); err != nil {
			return err
		}
		return r.mask.Write(t.X, t.Y, t.W, t.H, rec.Flags, rec.Top)
	})
	if err != nil {
		return err
	}
	return r.commitMap(&outs)
}
