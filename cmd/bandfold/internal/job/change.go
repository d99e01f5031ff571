package job

import (
	"context"
	"path/filepath"

	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/transform/change"
)

// ChangeOptions are the options of Change.
type ChangeOptions struct {
	Before, After string
	Input         Input
	// MaskBefore and MaskAfter are quality masks of one date only, on
	// BEFORE's grid.
	MaskBefore, MaskAfter []raster.MaskRule
	// BandsBefore and BandsAfter select different bands of each date (for
	// a change of sensor); nil takes Input.Bands.
	BandsBefore, BandsAfter []int
	// Out is the output folder.
	Out string
	// Align warps AFTER onto BEFORE's grid with Resampling when the grids
	// differ.
	Align      bool
	Resampling string
	// Basis, when set, is used instead of fitting one on both dates.
	Basis      string
	Components int
	Threshold  change.Threshold
	MinArea    MinArea
	// Differences also writes differences.tif.
	Differences bool
	// PValues also writes pvalue.tif.
	PValues bool
	// Reference is reference change data: a raster on the same grid
	// (non-zero = changed) or a vector file of changed polygons.
	Reference string
	// PreviewBands are three 1-based bands of AFTER for preview.png.
	PreviewBands []int
	Sample       int
	Overwrite    bool
	// Normalize is NormalizeStable (the default) or NormalizeNone.
	Normalize string
	// IgnoreBandNames compares the dates band for band even where their
	// wavelengths differ.
	IgnoreBandNames bool
}

// Change maps land-cover change between two dates: it fits (or reads) a
// basis, the robust no-change model of the score differences, maps every
// pixel's change statistic, applies the minimum mapping unit, polygonizes
// the patches and writes everything into the output folder at once.
func Change(ctx context.Context, env Env, o ChangeOptions) (_ *ChangeResult, err error) {
	defer func() { err = classify(err) }()
	r := &changeRun{seriesRun: &seriesRun{env: env}, o: &o}
	defer r.close()
	steps := []jobStep{
		{"open", r.open}, {"scan", r.sample}, {"normalize", r.normalize}, {"basis", r.fitBasis}, {"model", r.fitModel},
		{"map", r.mapPixels}, {"sieve", r.sieve}, {"change map", r.changeMap}, {"patches", r.patches},
		{"preview", r.preview}, {"diagnostics", r.diagnostics}, {"report", r.report}, {"summary", r.summary},
	}
	if err := runSteps(ctx, env, "change", steps); err != nil {
		return nil, r.dir.FinalNames(err)
	}
	return r.sum, nil
}

// check refuses option values that cannot be right.
func (o *ChangeOptions) check() error {
	sh := sharedOptions{Input: o.Input, Out: o.Out, Align: o.Align, Resampling: o.Resampling, Sample: o.Sample,
		Components: o.Components, Threshold: o.Threshold, Normalize: o.Normalize}
	if err := sh.check(); err != nil {
		return err
	}
	o.Input, o.Resampling, o.Sample, o.Threshold, o.Normalize = sh.Input, sh.Resampling, sh.Sample, sh.Threshold, sh.Normalize
	return nil
}

// dateInput is Input with one date's own band selection, if any.
func (o *ChangeOptions) dateInput(bands []int) Input {
	in := o.Input
	if bands != nil {
		in.Bands = bands
	}
	return in
}

// changeRun is one run of Change: the series engine on two dates (BEFORE
// the reference), and the change folder's own outputs.
type changeRun struct {
	*seriesRun
	o *ChangeOptions

	before, after *raster.Stack
	ref           *raster.Reference
	rgb           [3]int
	rgbNote       bool // the preview bands are the first three, not known colours

	fit       *pairFit
	model     *change.Model
	zs        []float64 // the sample's Z values
	eta       *float64  // Otsu separability, for otsu
	identical bool
	zcut      float64
	mask      *raster.ChangeMask
	grid      *previewGrid
	outputs   []string
	sum       *ChangeResult
}

func (r *changeRun) close() {
	if r.mask != nil {
		r.mask.Close()
	}
	if r.ref != nil {
		r.ref.Close()
	}
	r.seriesRun.close()
}

// open checks the options and hands BEFORE and AFTER to the engine (which
// opens them, warping AFTER with Align, and matches their bands), then
// opens the reference.
func (r *changeRun) open(ctx context.Context) error {
	o := r.o
	if err := o.check(); err != nil {
		return err
	}
	c := &seriesConfig{Args: []string{o.Before, o.After}, Roles: []string{"BEFORE", "AFTER"},
		Inputs:          []Input{o.dateInput(o.BandsBefore).withMasks(o.MaskBefore), o.dateInput(o.BandsAfter).withMasks(o.MaskAfter)},
		BandsChosen:     o.Input.Bands != nil || o.BandsBefore != nil || o.BandsAfter != nil,
		IgnoreBandNames: o.IgnoreBandNames, Align: o.Align, Resampling: o.Resampling, Basis: o.Basis, Components: o.Components,
		Threshold: o.Threshold, MinArea: o.MinArea, Normalize: o.Normalize, Sample: o.Sample, Tile: o.Input.Tile,
		Pairs: func(int) [][2]int { return [][2]int{{0, 1}} }, Out: o.Out, Overwrite: o.Overwrite}
	for _, extra := range []output.Path{{Role: "basis", Path: o.Basis}, {Role: "reference", Path: o.Reference}} {
		if extra.Path != "" {
			c.Extra = append(c.Extra, extra)
		}
	}
	r.c = c
	if err := r.seriesRun.open(ctx); err != nil {
		return err
	}
	r.before, r.after = r.scenes[0], r.scenes[1]
	var err error
	if r.rgb, err = previewBands(o.PreviewBands, r.after.Len()); err != nil {
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
	if err := r.fitModels(ctx); err != nil {
		return err
	}
	f := r.fits[0]
	r.fit, r.zs, r.eta, r.identical = f, f.zs, f.eta, f.identical
	if f.identical {
		r.zcut = 0
		return nil
	}
	r.model, r.zcut = f.model, f.zcut
	r.env.logger().Debug("no-change model", "iterations", f.model.Iterations, "sample", f.model.Sample, "z", f.zcut)
	return nil
}

// sieve applies the minimum mapping unit to the raw flags. The tile buffers
// are garbage by now: their pages go back before the sieve and the polygons
// take their share.
func (r *changeRun) sieve(ctx context.Context) error {
	if err := r.seriesRun.sieve(ctx, []*raster.ChangeMask{r.mask}, func(int) string { return "" }); err != nil {
		return err
	}
	o := r.o
	norm := r.normSums[1]
	r.sum = &ChangeResult{Before: o.Before, After: o.After, BeforeLabel: describe(r.before), AfterLabel: describe(r.after), Threshold: r.thresholdSummary(),
		Components: r.proj.Components(), MinAreaPixels: r.minPixels, Basis: r.basisName, Aligned: r.aligned,
		Identical: r.identical, Caution: Caution, Location: []float64{}, Covariance: [][]float64{},
		Normalization: norm, Warnings: r.warnings, Scenario: r.before.Metadata["SCENARIO"],
		BeforeDate: r.dates[0].Label, AfterDate: r.dates[1].Label, DateSource: []string{r.dates[0].Source, r.dates[1].Source}, BandMatch: r.matched,
		AreaNote: "mapped area of change (pixels flagged after the minimum mapping unit), not an estimate of the true area of change"}
	if r.identical {
		r.sum.Converged = true
		return nil
	}
	m := r.model
	r.sum.Location, r.sum.Iterations, r.sum.Converged, r.sum.SamplePixels = m.Location, m.Iterations, m.Converged, m.Sample
	k := r.proj.Components()
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
	ps, err := r.mask.Patches(r.dir.Path("changes.gpkg"), raster.PatchOptions{Magnitude: r.dir.Path("magnitude.tif"), Metadata: md,
		Dates: r.name(0) + " to " + r.name(1)})
	if err != nil {
		return err
	}
	r.sum.Patches = ps.Count
	r.outputs = append(r.outputs, "changes.gpkg")
	return nil
}

// summary writes summary.json and moves the folder into place.
func (r *changeRun) summary(context.Context) error {
	r.outputs = append(r.outputs, "summary.json")
	for _, name := range r.outputs {
		r.sum.Outputs = append(r.sum.Outputs, filepath.Join(r.dir.Final(), name))
	}
	return commitSummary(r.env, r.dir, "summary.json", r.sum, r.warnings)
}
