package pairchange

import (
	"context"
	"fmt"
	"slices"

	"bandfold/cmd/bandfold/internal/changefolder"
	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/report"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/transform/change"
)

// ChangeOptions are the options of Change.
type ChangeOptions struct {
	Before, After string
	// SharedOptions are the options timeline shares: the inputs' options,
	// the output folder, --align (AFTER onto BEFORE's grid), the basis,
	// the model's and the map's options, the stage.
	series.SharedOptions
	// MaskBefore and MaskAfter are quality masks of one date only, on
	// BEFORE's grid.
	MaskBefore, MaskAfter []raster.MaskRule
	// BandsBefore and BandsAfter select different bands of each date (for
	// a change of sensor); nil takes Input.Bands.
	BandsBefore, BandsAfter []int
	// Differences also writes differences.tif.
	Differences bool
	// PValues also writes pvalue.tif.
	PValues bool
	// Reference is reference change data: a raster on the same grid
	// (non-zero = changed) or a vector file of changed polygons.
	Reference string
	// PreviewBands are three 1-based bands of AFTER for preview.png.
	PreviewBands []int
}

// Change maps land-cover change between two dates: it fits (or reads) a
// basis, the robust no-change model of the score differences, maps every
// pixel's change statistic, applies the minimum mapping unit, polygonizes
// the patches and writes everything into the output folder at once.
func Change(ctx context.Context, env jobkit.Env, o ChangeOptions) (_ *changefolder.ChangeResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	if !o.WritesFolder() {
		return nil, jobkit.Usagef("--stage %s writes no change folder: run it with ChangeStage", o.Stage)
	}
	r := &changeRun{Run: &series.Run{Env: env}, o: &o}
	defer r.close()
	fit := []jobkit.JobStep{jobkit.Step("scan", r.Sample)}
	mapping := jobkit.Step("map", r.mapPixels)
	if o.Stage == series.StageFinish {
		fit, mapping = []jobkit.JobStep{jobkit.Step("read model", r.ReadModel)}, jobkit.Step("join", r.joinPieces)
	}
	steps := append([]jobkit.JobStep{jobkit.Step("open", r.open)}, fit...)
	steps = append(steps, r.FitSteps(jobkit.Step("model", r.fitModel))...)
	steps = append(steps, mapping, jobkit.Step("areas", r.AwaitAreas), jobkit.Step("sieve", r.sieve), jobkit.Step("change map", r.changeMap), jobkit.Step("patches", r.patches),
		jobkit.Step("preview", r.preview), jobkit.Step("diagnostics", r.diagnostics), jobkit.Step("report", r.report), jobkit.Step("item", r.item), jobkit.Step("summary", r.summary))
	if err := jobkit.RunSteps(ctx, env, "change", steps); err != nil {
		return nil, r.Dir.FinalNames(err)
	}
	return r.sum, nil
}

// check refuses option values that cannot be right.
func (o *ChangeOptions) check() error { return o.SharedOptions.Check() }

// dateInput is Input with one date's own band selection, if any.
func (o *ChangeOptions) dateInput(bands []int) jobkit.Input {
	in := o.Input
	if bands != nil {
		in.Bands = bands
	}
	return in
}

// changeRun is one run of Change: the series engine on two dates (BEFORE
// the reference), and the change folder's own outputs.
type changeRun struct {
	*series.Run
	o *ChangeOptions

	before, after *raster.Stack
	ref           *raster.Reference
	rgb           [3]int
	rgbNote       bool // the preview bands are the first three, not known colours

	fit       *series.PairFit
	model     *change.Model
	zs        []float64 // the sample's Z values
	eta       *float64  // Otsu separability, for otsu
	identical bool
	zcut      float64
	mask      *raster.ChangeMask
	grid      *report.PreviewGrid
	// marks are the preview pixels over mapped change, gathered by the
	// change map.
	marks   *previewMarks
	outputs []string
	sum     *changefolder.ChangeResult
}

func (r *changeRun) close() {
	if r.mask != nil {
		r.mask.Close()
	}
	if r.ref != nil {
		r.ref.Close()
	}
	r.Run.Close()
}

// open checks the options and hands BEFORE and AFTER to the engine (which
// opens them, warping AFTER with Align, and matches their bands), then
// opens the reference.
func (r *changeRun) open(ctx context.Context) error {
	o := r.o
	if err := o.check(); err != nil {
		return err
	}
	c := o.Config("change", *o)
	c.Args, c.Roles = []string{o.Before, o.After}, []string{"BEFORE", "AFTER"}
	c.Inputs = []jobkit.Input{o.dateInput(o.BandsBefore).WithMasks(o.MaskBefore), o.dateInput(o.BandsAfter).WithMasks(o.MaskAfter)}
	c.BandsChosen = o.Input.Bands != nil || o.BandsBefore != nil || o.BandsAfter != nil
	c.Pairs = func(int) [][2]int { return [][2]int{{0, 1}} }
	var err error
	for _, extra := range []output.Path{{Role: "basis", Path: o.Basis}, {Role: "reference", Path: o.Reference}} {
		if extra.Path != "" {
			c.Extra = append(c.Extra, extra)
		}
	}
	r.C = c
	if err := r.Run.Open(ctx); err != nil {
		return err
	}
	r.before, r.after = r.Scenes[0], r.Scenes[1]
	if r.rgb, err = report.PreviewBands(o.PreviewBands, r.after.Len()); err != nil {
		return err
	}
	if len(o.PreviewBands) == 0 {
		r.naturalColour()
	}
	if o.Reference != "" {
		if r.ref, err = raster.OpenReference(o.Reference, r.before.Grid); err != nil {
			return err
		}
	}
	return nil
}

// fitModel fits the robust no-change model on the sample's score
// differences d = W_k^T (x_after - x_before) / s and resolves the threshold.
func (r *changeRun) fitModel(ctx context.Context) error {
	if err := r.FitModels(ctx); err != nil {
		return err
	}
	f := r.Fits[0]
	r.fit, r.zs, r.eta, r.identical = f, f.Zs, f.Eta, f.Identical
	if f.Identical {
		r.zcut = 0
		return nil
	}
	r.model, r.zcut = f.Model, f.Zcut
	r.Env.Logger().Debug("no-change model", "iterations", f.Model.Iterations, "sample", f.Model.Sample, "z", f.Zcut)
	return nil
}

// sieve applies the minimum mapping unit to the raw flags. The tile buffers
// are garbage by now: their pages go back before the sieve and the polygons
// take their share.
func (r *changeRun) sieve(ctx context.Context) error {
	if err := r.Run.Sieve(ctx, []*raster.ChangeMask{r.mask}, func(int) string { return "" }); err != nil {
		return err
	}
	o := r.o
	norm := r.NormSums[1]
	r.sum = &changefolder.ChangeResult{Document: changefolder.SummaryDoc, BeforeLabel: r.LabelIn(0), AfterLabel: r.LabelIn(1), Threshold: r.thresholdSummary(),
		Identical: r.identical, Location: []float64{}, Covariance: [][]float64{}, Normalization: norm,
		BeforeDate: r.Dates[0].Label, AfterDate: r.Dates[1].Label, DateSource: []string{r.Dates[0].Source, r.Dates[1].Source},
		FolderSummary: r.FolderSummary("mapped area of change (pixels flagged after the minimum mapping unit), not an estimate of the true area of change")}
	r.sum.Before, r.sum.After = r.sum.Paths.Input(o.Before), r.sum.Paths.Input(o.After)
	if r.identical {
		r.sum.Converged = true
		return nil
	}
	m := r.model
	r.sum.Location, r.sum.Iterations, r.sum.Converged, r.sum.SamplePixels = m.Location, m.Iterations, m.Converged, m.Sample
	k := r.Proj.Components()
	for i := range k {
		row := make([]float64, k)
		for j := range k {
			row[j] = m.Covariance.At(i, j)
		}
		r.sum.Covariance = append(r.sum.Covariance, row)
	}
	return nil
}

// patches polygonizes the change patches into changes.gpkg.
func (r *changeRun) patches(context.Context) error {
	md := r.metadata()
	ps, err := r.mask.Patches(r.Dir.Path("changes.gpkg"), raster.PatchOptions{Magnitude: r.Dir.Path("magnitude.tif"), Metadata: md,
		Before: r.Dates[0], After: r.Dates[1]})
	if err != nil {
		return err
	}
	r.sum.Patches = ps.Count
	r.outputs = append(r.outputs, "changes.gpkg")
	return nil
}

// summary writes summary.json and moves the folder into place.
// item writes item.json, the folder's STAC Item: the two dates, the
// footprint, every output with its bands, and the caution.
func (r *changeRun) item(context.Context) error {
	desc := fmt.Sprintf("bandfold change between %s and %s. %s", r.NameIn(0), r.NameIn(1), jobkit.Caution)
	files := append(slices.Clone(r.outputs), "summary.json")
	if err := jobkit.FolderItem(r.Dir, files, r.before.Grid, r.Dates[0].Time, r.Dates[1].Time, desc); err != nil {
		return err
	}
	r.outputs = append(r.outputs, "item.json")
	return nil
}

func (r *changeRun) summary(context.Context) error {
	r.outputs = append(r.outputs, "summary.json")
	r.sum.Outputs = r.sum.Paths.Entries(r.outputs)
	return jobkit.CommitSummary(r.Env, r.Dir, "summary.json", r.sum, r.Warnings)
}
