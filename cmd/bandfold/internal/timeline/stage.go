package timeline

import (
	"context"
	"fmt"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/tiles"
)

// pieceTile is one tile of a staged timeline's map piece: stepMaps with
// the float32 values as bytes (series.ValueBytes), so that they come
// back bit for bit.
type pieceTile struct {
	Z            [][]byte // per step
	Zmax, Argmax []byte
	Flags, Top   [][]uint8 // per pair, per step
}

func (p *pieceTile) Reset() { *p = pieceTile{} }

// TimelineStage runs the scan, fit or map stage of a staged timeline;
// the finish stage is Timeline with Stage StageFinish.
func TimelineStage(ctx context.Context, env jobkit.Env, o TimelineOptions) (*series.StageResult, error) {
	r := &timelineRun{Run: &series.Run{Env: env}, o: &o}
	defer r.close()
	return r.RunStage(ctx, "timeline", o.Staging, series.StagePlan{
		Open: jobkit.Step("open", r.open),
		Fit:  r.FitSteps(jobkit.Step("models", r.FitModels)),
		Map:  r.mapShard,
	})
}

// mapShard maps the shard's tiles into its map piece.
func (r *timelineRun) mapShard(ctx context.Context) error {
	S := r.steps()
	var rec pieceTile
	return r.MapPiece(ctx, r.newHook, func(_ tiles.Tile, pt *series.PairTile) any {
		st := pt.Extra.(*stepTile)
		if len(rec.Z) != S {
			rec.Z = make([][]byte, S)
		}
		for q := range S {
			rec.Z[q] = series.ValueBytes(rec.Z[q], st.z[q])
		}
		rec.Zmax, rec.Argmax = series.ValueBytes(rec.Zmax, st.zmax), series.ValueBytes(rec.Argmax, st.argmax)
		rec.Flags, rec.Top = pt.Flags, pt.Top[:S]
		return &rec
	})
}

// joinPieces takes the place of the map pass in the finish stage: every
// tile from the piece of the shard that mapped it into the map pass's
// outputs.
func (r *timelineRun) joinPieces(ctx context.Context) error {
	w, err := r.startMap()
	if err != nil {
		return err
	}
	defer w.abort()
	var rec pieceTile
	var m stepMaps
	S, Q := r.steps(), len(timelinePairs(len(r.Scenes)))
	err = r.JoinPieces(ctx, &rec, func(t tiles.Tile, what string) error {
		px := t.Pixels()
		if !rec.fits(S, Q, px) {
			return fmt.Errorf("%s is not of %d steps of %d pixels: the piece is of another series, grid or tiling", what, S, px)
		}
		m.z = series.Grows(m.z, S, px)
		for q := range S {
			series.Values(m.z[q], rec.Z[q])
		}
		m.zmax, m.argmax = jobkit.Grow(m.zmax, px), jobkit.Grow(m.argmax, px)
		series.Values(m.zmax, rec.Zmax)
		series.Values(m.argmax, rec.Argmax)
		m.flags, m.top = rec.Flags, rec.Top
		return w.deliver(t, &m)
	})
	if err != nil {
		return err
	}
	return w.commit()
}

// fits reports whether the record is of S steps, Q pairs and px pixels.
func (p *pieceTile) fits(S, Q, px int) bool {
	if len(p.Z) != S || len(p.Top) != S || len(p.Flags) != Q || len(p.Zmax) != 4*px || len(p.Argmax) != 4*px {
		return false
	}
	for q := range S {
		if len(p.Z[q]) != 4*px || len(p.Top[q]) != px {
			return false
		}
	}
	for _, f := range p.Flags {
		if len(f) != px {
			return false
		}
	}
	return true
}
