package pairchange

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"slices"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/tiles"
)

// The stages of a staged change: a scan array, one fit, a map array and
// one finish (see series.StageHeader for the files between them).
const (
	StageScan   = "scan"
	StageFit    = "fit"
	StageMap    = "map"
	StageFinish = "finish"
)

// Stages are the stages in the order they run.
var Stages = []string{StageScan, StageFit, StageMap, StageFinish}

// StageResult is what a scan, fit or map stage wrote.
type StageResult struct {
	Stage string `json:"stage"`
	Shard string `json:"shard,omitempty"`
	File  string `json:"file"`
}

// changeModel is the body of the model file: the merged statistics every
// later stage fits the same normalisation, basis and model from (the fit
// is deterministic, so each gets them bit for bit), and the threshold the
// fit stage found, which they check.
type changeModel struct {
	State      series.ScanState
	Zcut       float64
	Components int
}

// pieceTile is one tile of a map piece: Z (and the p-values, with
// --pvalues) as float32 bits, the raw flags and the top component.
type pieceTile struct {
	Z, PV      []uint32
	Flags, Top []uint8
}

// checkStage refuses a stage or shard that cannot be right.
func (o *ChangeOptions) checkStage() error {
	if o.Stage != "" && !slices.Contains(Stages, o.Stage) {
		return jobkit.Usagef("--stage %q: want scan, fit, map or finish", o.Stage)
	}
	if o.Shard.OrWhole().N > 1 && o.Stage != StageScan && o.Stage != StageMap {
		return jobkit.Usagef("--shard %s applies to --stage scan and map only", o.Shard)
	}
	if o.Stage != "" && o.Differences {
		return jobkit.Usagef("--differences is not written by a staged run: run change in one process for differences.tif")
	}
	return nil
}

// record is the options as the stage files record them: without the
// stage, the shard and --overwrite, which may differ between stages.
func (o *ChangeOptions) record() (string, error) {
	c := *o
	c.Stage, c.Shard, c.Overwrite = "", jobkit.Shard{}, false
	data, err := json.Marshal(c)
	return string(data), err
}

// openStage sets the header of a staged run's files and the shard's tiles.
func (r *changeRun) openStage() error {
	o := r.o
	if o.Stage == "" {
		return nil
	}
	opts, err := o.record()
	if err != nil {
		return err
	}
	inputs, err := jobkit.Fingerprints(r.Scenes)
	if err != nil {
		return err
	}
	r.stage = series.StageHeader{Tool: r.Env.Version, Command: "change", Shard: o.Shard.OrWhole(), Options: opts, Inputs: inputs}
	if o.Stage == StageScan || o.Stage == StageMap {
		r.UseShard(o.Shard)
	}
	return nil
}

// ChangeStage runs the scan, fit or map stage of a staged change; the
// finish stage is Change with Stage StageFinish.
func ChangeStage(ctx context.Context, env jobkit.Env, o ChangeOptions) (_ *StageResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	r := &changeRun{Run: &series.Run{Env: env}, o: &o}
	defer r.close()
	open := jobkit.Step("open", r.open)
	fit := []jobkit.JobStep{jobkit.Step("normalize", r.Normalize), jobkit.Step("basis", r.FitBasis), jobkit.Step("model", r.fitModel)}
	var steps []jobkit.JobStep
	switch o.Stage {
	case StageScan:
		steps = []jobkit.JobStep{open, jobkit.Step("scan", r.Sample), jobkit.Step("write", r.writeScan)}
	case StageFit:
		steps = append([]jobkit.JobStep{open, jobkit.Step("merge", r.mergeScans)}, fit...)
		steps = append(steps, jobkit.Step("write", r.writeModel))
	case StageMap:
		steps = append([]jobkit.JobStep{open, jobkit.Step("read model", r.readModel)}, fit...)
		steps = append(steps, jobkit.Step("map", r.mapShard))
	default:
		return nil, jobkit.Usagef("--stage %q: want scan, fit or map (finish writes the change folder)", o.Stage)
	}
	if err := jobkit.RunSteps(ctx, env, "change "+o.Stage, steps); err != nil {
		return nil, err
	}
	res := &StageResult{Stage: o.Stage, File: r.written}
	if o.Stage != StageFit {
		res.Shard = o.Shard.OrWhole().String()
	}
	return res, nil
}

// header is this run's header for a stage file of kind.
func (r *changeRun) header(kind string) series.StageHeader {
	h := r.stage
	h.Kind, h.Model = kind, r.modelID
	if kind == series.KindModel {
		h.Shard = jobkit.Shard{I: 0, N: 1}
	}
	return h
}

// writeScan writes the shard's scan partial.
func (r *changeRun) writeScan(context.Context) error {
	r.written = series.StagePath(r.o.Out, series.KindScan, r.o.Shard)
	return series.WriteStage(r.written, r.header(series.KindScan), r.ScanState(), r.o.Overwrite)
}

// mergeScans reads every shard's scan partial (a whole set of this run's
// options and inputs) and merges them into the sample pass's statistics.
func (r *changeRun) mergeScans(ctx context.Context) error {
	rs, err := series.StageSet(r.o.Out, series.KindScan, r.header(series.KindScan))
	if err != nil {
		return err
	}
	parts, paths := make([]series.ScanState, len(rs)), make([]string, len(rs))
	for i, sr := range rs {
		err = errors.Join(err, sr.Next(&parts[i]), sr.Close())
		paths[i] = sr.Path
	}
	if err != nil {
		return err
	}
	if err := r.MergeScans(ctx, parts, paths); err != nil {
		return err
	}
	r.merged = r.ScanState()
	return nil
}

// writeModel writes the model file.
func (r *changeRun) writeModel(context.Context) error {
	r.written = series.StagePath(r.o.Out, series.KindModel, jobkit.Shard{})
	m := changeModel{State: r.merged, Zcut: r.zcut, Components: r.Proj.Components()}
	return series.WriteStage(r.written, r.header(series.KindModel), m, r.o.Overwrite)
}

// readModel reads the model file of this run's options and inputs and
// takes its statistics as the sample pass's; the fit that follows checks
// that it finds the model file's threshold.
func (r *changeRun) readModel(ctx context.Context) error {
	path := series.StagePath(r.o.Out, series.KindModel, jobkit.Shard{})
	var m changeModel
	h, err := series.ReadStage(path, series.KindModel, &m)
	if errors.Is(err, fs.ErrNotExist) {
		return jobkit.Usagef("%s: no model: run --stage fit before --stage %s", path, r.o.Stage)
	}
	if err != nil {
		return err
	}
	if err := h.Check(path, r.header(series.KindModel)); err != nil {
		return err
	}
	if r.modelID, err = series.ModelID(path); err != nil {
		return err
	}
	r.zModel = m.Zcut
	return r.MergeScans(ctx, []series.ScanState{m.State}, []string{path})
}

// checkModel refuses a fit that differs from the model file's.
func (r *changeRun) checkModel() error {
	if r.zcut != r.zModel && !(math.IsNaN(r.zcut) && math.IsNaN(r.zModel)) {
		return fmt.Errorf("%s: its threshold Z = %v, but this run fits Z = %v from its statistics", series.StagePath(r.o.Out, series.KindModel, jobkit.Shard{}), r.zModel, r.zcut)
	}
	return nil
}

// mapShard maps the shard's tiles and writes them as the shard's map
// piece, in tile order.
func (r *changeRun) mapShard(ctx context.Context) error {
	if err := r.checkModel(); err != nil {
		return err
	}
	r.written = series.StagePath(r.o.Out, series.KindMap, r.o.Shard)
	w, err := series.CreateStage(r.written, r.header(series.KindMap), r.o.Overwrite)
	if err != nil {
		return err
	}
	defer w.Abort()
	k := r.Proj.Components()
	var rec pieceTile
	err = r.MapPairs(ctx, series.MapHooks{
		NewWorker: func() series.TileHook { return &changeHook{k: k, pvals: r.o.PValues} },
		Deliver: func(_ tiles.Tile, pt *series.PairTile) error {
			mt := pt.Extra.(*mapTile)
			rec.Z = jobkit.Grow(rec.Z, len(mt.z32))
			for i, v := range mt.z32 {
				rec.Z[i] = math.Float32bits(v)
			}
			rec.PV = rec.PV[:0]
			for _, v := range mt.pv32 {
				rec.PV = append(rec.PV, math.Float32bits(v))
			}
			rec.Flags, rec.Top = pt.Flags[0], pt.Top[0]
			return w.Add(&rec)
		}})
	if err != nil {
		return err
	}
	return w.Commit()
}

// joinPieces takes the place of the map pass in the finish stage: it
// reads the map pieces (a whole set of this run's options, inputs and
// model) tile by tile in the map's order, writes magnitude.tif (and
// pvalue.tif) and fills the mask.
// The preview reads the dates itself.
func (r *changeRun) joinPieces(ctx context.Context) error {
	if err := r.checkModel(); err != nil {
		return err
	}
	rs, err := series.StageSet(r.o.Out, series.KindMap, r.header(series.KindMap))
	if err != nil {
		return err
	}
	defer func() {
		for _, sr := range rs {
			sr.Close()
		}
	}()
	for _, sr := range rs {
		if sr.Header.Model != r.modelID {
			return fmt.Errorf("%s was mapped with another model than %s: run its map stage again", sr.Path, series.StagePath(r.o.Out, series.KindModel, jobkit.Shard{}))
		}
	}
	var outs mapOutputs
	defer outs.abort()
	if err := r.startMap(&outs); err != nil {
		return err
	}
	if err := r.joinTiles(ctx, rs, &outs); err != nil {
		return err
	}
	return r.commitMap(&outs)
}

// joinTiles copies every tile from the piece of the shard that mapped it.
func (r *changeRun) joinTiles(ctx context.Context, rs []*series.StageReader, outs *mapOutputs) error {
	n := len(rs)
	var rec pieceTile
	var mt mapTile
	for i, t := range r.MapTiles() {
		if err := ctx.Err(); err != nil {
			return err
		}
		s, _ := series.ShardOf(i, n)
		rec = pieceTile{}
		if err := rs[s].Next(&rec); err != nil {
			return err
		}
		px := t.Pixels()
		if len(rec.Z) != px || len(rec.Flags) != px || len(rec.Top) != px {
			return fmt.Errorf("%s: tile %d has %d pixels, want %d: the piece is of another grid or tiling", rs[s].Path, i, len(rec.Z), px)
		}
		mt.z32 = jobkit.Grow(mt.z32, px)
		for j, b := range rec.Z {
			mt.z32[j] = math.Float32frombits(b)
		}
		if outs.pv != nil {
			if len(rec.PV) != px {
				return fmt.Errorf("%s: tile %d has no p-values: its map stage ran without --pvalues", rs[s].Path, i)
			}
			mt.pv32 = jobkit.Grow(mt.pv32, px)
			for j, b := range rec.PV {
				mt.pv32[j] = math.Float32frombits(b)
			}
		}
		if err := outs.write(t, &mt); err != nil {
			return err
		}
		if err := r.mask.Write(t.X, t.Y, t.W, t.H, rec.Flags, rec.Top); err != nil {
			return err
		}
	}
	return nil
}
