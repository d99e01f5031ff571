package series

import (
	"context"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"slices"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/tiles"
)

// A staged run of change or timeline: a scan array, one fit, a map array
// and one finish, each a plain command a scheduler runs (see StageHeader
// for the files between them). The stages are the engine's, whatever the
// command: the command adds only what its map pass records per tile and
// what its finish writes from it.

// The stages, in the order they run.
const (
	StageScan   = "scan"
	StageFit    = "fit"
	StageMap    = "map"
	StageFinish = "finish"
)

// Stages are the stages in the order they run.
var Stages = []string{StageScan, StageFit, StageMap, StageFinish}

// Staging are the options of a staged run: Stage is one stage ("" runs
// them all in one process), Shard the shard of a scan or map stage.
type Staging struct {
	Stage string
	Shard jobkit.Shard
}

// Check refuses a stage or shard that cannot be right.
func (s Staging) Check() error {
	if s.Stage != "" && !slices.Contains(Stages, s.Stage) {
		return jobkit.Usagef("--stage %q: want scan, fit, map or finish", s.Stage)
	}
	if s.Shard.OrWhole().N > 1 && s.Stage != StageScan && s.Stage != StageMap {
		return jobkit.Usagef("--shard %s applies to --stage scan and map only", s.Shard)
	}
	return nil
}

// WritesFolder reports whether the stage writes the output folder (the
// finish, or a run of every stage at once).
func (s Staging) WritesFolder() bool { return s.Stage == "" || s.Stage == StageFinish }

// RecordOptions is a command's options as the stage files record them:
// JSON of opts, whose stage, shard and --overwrite are left out by their
// json:"-" tags (those may differ between stages); Go's own notation of
// them where JSON has none for a value (a NaN nodata value).
func RecordOptions(opts any) string {
	data, err := json.Marshal(opts)
	if err != nil {
		return fmt.Sprintf("%+v", opts)
	}
	return string(data)
}

// StageResult is what a scan, fit or map stage wrote.
type StageResult struct {
	jobkit.Document
	Stage string `json:"stage"`
	Shard string `json:"shard,omitempty"`
	File  string `json:"file"`
}

// stageModel is the body of the model file: the merged statistics every
// later stage fits the same basis and models from (the fits are
// deterministic, so each gets them bit for bit), the dates' normalisation
// fits, which they take as they are, and the thresholds the fit stage
// found, which they check.
type stageModel struct {
	State      ScanState
	Zcuts      []float64
	Components int
	// Norms are the dates' normalisation fits (nil without): the one
	// slow fit, taken as it is by the map and finish stages.
	Norms []NormFit
}

// staged is a Run's staged-run state.
type staged struct {
	header  StageHeader // this run's, for the stage files
	modelID string      // the model file's (map and finish)
	merged  ScanState   // the merged statistics (fit)
	model   stageModel  // the model file's (map and finish)
	written string      // the stage file written
	// normFits are this run's normalisation fits, for the model file.
	normFits []NormFit
}

// openStage sets the header of a staged run's files and the shard's tiles.
func (r *Run) openStage() error {
	c := r.C
	if c.Staging.Stage == "" {
		return nil
	}
	inputs, err := jobkit.Fingerprints(r.Scenes)
	if err != nil {
		return err
	}
	r.st.header = StageHeader{Tool: r.Env.Version, Command: c.Command, Shard: c.Staging.Shard.OrWhole(), Options: RecordOptions(c.Options), Inputs: inputs}
	if c.Staging.Stage == StageScan || c.Staging.Stage == StageMap {
		r.UseShard(c.Staging.Shard)
	}
	return nil
}

// StagePlan is what a command hands RunStage: its own open step, the fit
// steps (normalisation, basis, models) and the map pass that records a
// map piece (MapPiece with the command's per-tile record).
type StagePlan struct {
	Open jobkit.JobStep
	Fit  []jobkit.JobStep
	Map  func(context.Context) error
}

// FitSteps are the steps that fit the model from the sample pass's
// statistics: each date's normalisation, the basis, and the command's
// step that fits the pairs' models (FitModels, and what the command keeps
// of them).
func (r *Run) FitSteps(models jobkit.JobStep) []jobkit.JobStep {
	return []jobkit.JobStep{jobkit.Step("normalize", r.Normalize), jobkit.Step("basis", r.FitBasis), models}
}

// RunStage runs the scan, fit or map stage of a staged run, its errors
// classified as a job's; the finish is the command's own run with
// ReadModel and JoinPieces in place of the sample and map passes.
func (r *Run) RunStage(ctx context.Context, command string, stage Staging, p StagePlan) (_ *StageResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	var steps []jobkit.JobStep
	switch stage.Stage {
	case StageScan:
		steps = []jobkit.JobStep{p.Open, jobkit.Step("scan", r.Sample), jobkit.Step("write", r.writeScan)}
	case StageFit:
		steps = append([]jobkit.JobStep{p.Open, jobkit.Step("merge", r.mergeScans)}, p.Fit...)
		steps = append(steps, jobkit.Step("write", r.writeModel))
	case StageMap:
		steps = append([]jobkit.JobStep{p.Open, jobkit.Step("read model", r.ReadModel)}, p.Fit...)
		steps = append(steps, jobkit.Step("map", func(ctx context.Context) error {
			if err := r.checkModel(); err != nil {
				return err
			}
			return p.Map(ctx)
		}))
	default:
		return nil, jobkit.Usagef("--stage %q: want scan, fit or map (finish writes the %s folder)", stage.Stage, command)
	}
	if err := jobkit.RunSteps(ctx, r.Env, command+" "+stage.Stage, steps); err != nil {
		return nil, err
	}
	res := &StageResult{Document: jobkit.Doc("bandfold-stage-result"), Stage: stage.Stage, File: r.st.written}
	if stage.Stage != StageFit {
		res.Shard = stage.Shard.OrWhole().String()
	}
	return res, nil
}

// stageHeader is this run's header for a stage file of kind.
func (r *Run) stageHeader(kind string) StageHeader {
	h := r.st.header
	h.Kind, h.Model = kind, r.st.modelID
	if kind == KindModel {
		h.Shard = jobkit.Shard{I: 0, N: 1}
	}
	return h
}

// stagePath is this run's stage file of kind.
func (r *Run) stagePath(kind string) string {
	return StagePath(r.C.Out, kind, r.C.Staging.Shard)
}

// writeScan writes the shard's scan partial.
func (r *Run) writeScan(context.Context) error {
	r.st.written = r.stagePath(KindScan)
	return WriteStage(r.st.written, r.stageHeader(KindScan), r.ScanState(), r.C.Overwrite)
}

// mergeScans reads every shard's scan partial (a whole set of this run's
// options and inputs) and merges them into the sample pass's statistics.
func (r *Run) mergeScans(ctx context.Context) error {
	rs, err := StageSet(r.C.Out, KindScan, r.stageHeader(KindScan))
	if err != nil {
		return err
	}
	parts, paths := make([]ScanState, len(rs)), make([]string, len(rs))
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
	r.st.merged = r.ScanState()
	return nil
}

// writeModel writes the model file.
func (r *Run) writeModel(context.Context) error {
	r.st.written = r.stagePath(KindModel)
	m := stageModel{State: r.st.merged, Components: r.Proj.Components(), Norms: r.st.normFits}
	for _, f := range r.Fits {
		m.Zcuts = append(m.Zcuts, f.Zcut)
	}
	return WriteStage(r.st.written, r.stageHeader(KindModel), m, r.C.Overwrite)
}

// ReadModel reads the model file of this run's options and inputs and
// takes its statistics as the sample pass's (map and finish); the fit that
// follows checks that it finds the model file's thresholds.
func (r *Run) ReadModel(ctx context.Context) error {
	r.StartAreas() // in the finish, while the model is read and the pieces joined
	path := r.stagePath(KindModel)
	h, err := ReadStage(path, KindModel, &r.st.model)
	if errors.Is(err, fs.ErrNotExist) {
		return jobkit.Usagef("%s: no model: run --stage fit before --stage %s", path, r.C.Staging.Stage)
	}
	if err != nil {
		return err
	}
	if err := h.Check(path, r.stageHeader(KindModel)); err != nil {
		return err
	}
	if r.st.modelID, err = ModelID(path); err != nil {
		return err
	}
	return r.MergeScans(ctx, []ScanState{r.st.model.State}, []string{path})
}

// checkModel refuses a fit that differs from the model file's.
func (r *Run) checkModel() error {
	path, m := r.stagePath(KindModel), r.st.model
	if len(m.Zcuts) != len(r.Fits) || m.Components != r.Proj.Components() {
		return fmt.Errorf("%s: a model of %d pairs and %d components, but this run fits %d pairs and %d components", path, len(m.Zcuts), m.Components, len(r.Fits), r.Proj.Components())
	}
	for q, f := range r.Fits {
		if f.Zcut != m.Zcuts[q] && !(math.IsNaN(f.Zcut) && math.IsNaN(m.Zcuts[q])) {
			return fmt.Errorf("%s: its threshold Z = %v for pair %d, but this run fits Z = %v from its statistics", path, m.Zcuts[q], q+1, f.Zcut)
		}
	}
	return nil
}

// MapPiece runs the map pass over the shard's tiles and writes each
// tile's record (what the command's finish needs of it) into the shard's
// map piece, in tile order.
func (r *Run) MapPiece(ctx context.Context, newWorker func() TileHook, record func(tiles.Tile, *PairTile) any) error {
	r.st.written = r.stagePath(KindMap)
	w, err := CreateStage(r.st.written, r.stageHeader(KindMap), r.C.Overwrite)
	if err != nil {
		return err
	}
	defer w.Abort()
	err = r.MapPairs(ctx, MapHooks{NewWorker: newWorker, Deliver: func(t tiles.Tile, pt *PairTile) error {
		return w.Add(record(t, pt))
	}})
	if err != nil {
		return err
	}
	return w.Commit()
}

// PieceRecord is a command's record of one tile in a map piece, read
// into again for every tile: Reset empties it first (a record's empty
// fields are not in the file, so they would keep the last tile's values).
type PieceRecord interface{ Reset() }

// JoinPieces takes the place of the map pass in the finish stage: it reads
// the map pieces (a whole set of this run's options, inputs and model)
// tile by tile in the map's order, each from the shard that mapped it,
// into rec, and hands it to deliver; what names the piece in errors.
func (r *Run) JoinPieces(ctx context.Context, rec PieceRecord, deliver func(t tiles.Tile, what string) error) error {
	if err := r.checkModel(); err != nil {
		return err
	}
	rs, err := StageSet(r.C.Out, KindMap, r.stageHeader(KindMap))
	if err != nil {
		return err
	}
	defer func() {
		for _, sr := range rs {
			sr.Close()
		}
	}()
	for _, sr := range rs {
		if sr.Header.Model != r.st.modelID {
			return fmt.Errorf("%s was mapped with another model than %s: run its map stage again", sr.Path, r.stagePath(KindModel))
		}
	}
	for i, t := range r.MapTiles() {
		if err := ctx.Err(); err != nil {
			return err
		}
		s, _ := ShardOf(i, len(rs))
		rec.Reset()
		if err := rs[s].Next(rec); err != nil {
			return err
		}
		if err := deliver(t, fmt.Sprintf("%s: tile %d", rs[s].Path, i)); err != nil {
			return err
		}
	}
	return nil
}

// ValueBytes appends the bits of the values v to dst[:0], little endian
// (encoding/binary): map pieces keep values as bytes, so that every value
// (NaN too) comes back bit for bit and a tile reads as one block.
func ValueBytes[T float32 | float64](dst []byte, v []T) []byte {
	out, err := binary.Append(dst[:0], binary.LittleEndian, v)
	if err != nil {
		panic(fmt.Sprintf("series: encode %d values: %v", len(v), err)) // fixed-size values always encode
	}
	return out
}

// Values writes the values of ValueBytes's b into dst. It panics if b
// holds fewer (the callers check a piece's lengths first).
func Values[T float32 | float64](dst []T, b []byte) {
	if _, err := binary.Decode(b, binary.LittleEndian, dst); err != nil {
		panic(fmt.Sprintf("series: %d bytes for %d values: %v", len(b), len(dst), err))
	}
}
