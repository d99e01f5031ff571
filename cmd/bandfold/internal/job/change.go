package job

import (
	"context"
	"encoding/json"
	"fmt"
	"path/filepath"
	"strings"

	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/transform/change"
)

// Caution is repeated wherever a change map is reported.
const Caution = "A change map is a screening result: verify mapped changes against imagery or field checks before acting on them; local regulations and licensed practice govern any action taken on it."

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

// ChangeResult is summary.json.
type ChangeResult struct {
	Before string `json:"before"`
	After  string `json:"after"`
	// BeforeLabel and AfterLabel name the dates' stacks for people.
	BeforeLabel   string   `json:"before_label"`
	AfterLabel    string   `json:"after_label"`
	ValidPixels   int64    `json:"valid_pixels"`
	ChangedPixels int64    `json:"changed_pixels"`
	ChangedAreaM2 *float64 `json:"changed_area_m2"`
	ChangedAreaHa *float64 `json:"changed_area_ha"`
	ChangedFrac   float64  `json:"changed_fraction"`
	// ValidAreaM2 and ValidAreaHa are the ground area of the pixels valid
	// on both dates; null without a CRS.
	ValidAreaM2 *float64         `json:"valid_area_m2"`
	ValidAreaHa *float64         `json:"valid_area_ha"`
	Threshold   ThresholdSummary `json:"threshold"`
	Components  int              `json:"components"`
	Location    []float64        `json:"location"`
	Covariance  [][]float64      `json:"covariance"`
	Iterations  int              `json:"iterations"`
	Converged   bool             `json:"converged"`
	// Identical is set when the dates do not differ at all over the valid
	// pixels: no change is mapped and no model is fitted.
	Identical     bool   `json:"identical"`
	SamplePixels  int    `json:"sample_pixels"`
	MinAreaPixels int    `json:"min_area_pixels"`
	Patches       int    `json:"patches"`
	Basis         string `json:"basis"`
	Aligned       bool   `json:"aligned"`
	// BeforeDate and AfterDate are the dates' dates and where each came
	// from; BandMatch says how the bands were matched when the dates'
	// bands differed ("" when compared as given).
	BeforeDate    string               `json:"before_date"`
	AfterDate     string               `json:"after_date"`
	DateSource    []string             `json:"date_sources"`
	BandMatch     string               `json:"band_match,omitempty"`
	Reference     *ChangeAccuracy      `json:"reference,omitempty"`
	Normalization NormalizationSummary `json:"normalization"`
	// Scenario is the SCENARIO tag of invented input data.
	Scenario string `json:"scenario,omitempty"`
	// Warnings repeats the warnings printed on stderr about the map.
	Warnings []string `json:"warnings"`
	Outputs  []string `json:"outputs"`
	AreaNote string   `json:"area_note"`
	Caution  string   `json:"caution"`
}

// ThresholdSummary is the threshold rule and the Z it resolved to.
type ThresholdSummary struct {
	Rule string  `json:"rule"`
	Z    float64 `json:"z"`
	// Median is the chi-square median of the no-change model with k
	// degrees of freedom: a cut below it flags more than half of the
	// unchanged pixels.
	Median float64 `json:"chisq_median"`
	// Separability is Otsu's eta of the split (otsu only).
	Separability *float64 `json:"otsu_separability,omitempty"`
}

// ChangeAccuracy compares the map with reference data over the pixels valid
// in both; undefined rates are null.
type ChangeAccuracy struct {
	File string `json:"file"`
	change.Confusion
	change.Rates
}

var resamplings = []string{"nearest", "bilinear", "cubic", "cubicspline", "lanczos", "average", "mode"}

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
	if o.Resampling == "" {
		o.Resampling = "bilinear"
	}
	if !contains(resamplings, o.Resampling) {
		return Usagef("--resampling %q: want %s", o.Resampling, strings.Join(resamplings, ", "))
	}
	if o.Sample == 0 {
		o.Sample = change.DefaultSampleSize
	}
	if o.Sample < 100 {
		return Usagef("--sample %d: need at least 100 pixels", o.Sample)
	}
	if o.Components < 0 {
		return Usagef("--components %d: must be positive", o.Components)
	}
	if o.Threshold == (change.Threshold{}) {
		t, err := change.ParseThreshold(change.DefaultThreshold)
		if err != nil {
			return err
		}
		o.Threshold = t
	}
	if o.Out == "" {
		return Usagef("no output folder (--out)")
	}
	if err := checkNormalize(o); err != nil {
		return err
	}
	if o.Align {
		o.Input.Align, o.Input.Resampling = true, o.Resampling
	}
	return o.Input.check()
}

func contains(list []string, s string) bool {
	for _, v := range list {
		if v == s {
			return true
		}
	}
	return false
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

// onGrid opens stacks on a reference stack's grid.
type onGrid struct {
	ref        *raster.Stack
	align      bool
	resampling string
}

// open opens arg with opts, warped onto the reference grid when align is
// set and the grids differ (reporting whether it was); the warped files'
// cleanups are added to cleanups.
func (g onGrid) open(env Env, arg string, opts []raster.Option, cleanups *[]func()) (*raster.Stack, bool, error) {
	paths := SplitStack(arg)
	if len(paths) == 0 {
		return nil, false, Usagef("empty image argument %q", arg)
	}
	// Masks are on the reference grid, so open the files alone first.
	probe, err := raster.Open(paths)
	if err != nil {
		return nil, false, err
	}
	defer probe.Close()
	gridErr := g.ref.Grid.Compare(probe.Grid)
	if gridErr == nil {
		s, err := openStack(paths, opts)
		return s, false, err
	}
	if !g.align {
		return nil, false, fmt.Errorf("%s is not on the grid of %s (%v); pass --align to warp it onto that grid", arg, describe(g.ref), gridErr)
	}
	var vrts []string
	for _, p := range paths {
		vrt, cleanup, err := raster.AlignTo(p, g.ref.Grid, g.resampling)
		if err != nil {
			return nil, false, err
		}
		vrts = append(vrts, vrt)
		*cleanups = append(*cleanups, cleanup)
	}
	env.warn("%s was warped onto the grid of %s (%s resampling): any misregistration between the dates shows up as change along edges", arg, describe(g.ref), g.resampling)
	s, err := openStack(vrts, opts)
	return s, err == nil, err
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
	r.env.log().Debug("no-change model", "iterations", f.model.Iterations, "sample", f.model.Sample, "z", f.zcut)
	return nil
}

func allZero(x []float64) bool {
	for _, v := range x {
		if v != 0 {
			return false
		}
	}
	return true
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

// commitSummary prints the warnings kept for the end, writes v as the JSON
// file name in the folder and moves the folder into place.
func commitSummary(env Env, dir *output.Folder, name string, v any, warnings []string) error {
	for _, w := range warnings {
		env.warn("%s", w)
	}
	js, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return fmt.Errorf("summary of %s: %w", dir.Final(), err)
	}
	if err := output.WriteFile(dir.Path(name), append(js, '\n'), false); err != nil {
		return err
	}
	return dir.Commit()
}
