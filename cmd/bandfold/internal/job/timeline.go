package job

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"

	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/transform"
	"bandfold/transform/change"
)

// The values of --confirm.
const (
	ConfirmLasting = "lasting"
	ConfirmNone    = "none"
)

// TimelineOptions are the options of Timeline.
type TimelineOptions struct {
	// Scenes are the dates' stacks, at least 3, in any order.
	Scenes []string
	Input  Input
	// Dates, when set, date the scenes in the order given (YYYY-MM-DD,
	// YYYYMMDD or YYYY); otherwise metadata or the file names do.
	Dates []string
	// Out is the output folder.
	Out string
	// Align warps every scene onto the first's grid with Resampling when
	// the grids differ.
	Align      bool
	Resampling string
	// Basis, when set, is used instead of fitting one on all dates.
	Basis      string
	Components int
	Threshold  change.Threshold
	MinArea    MinArea
	// Normalize is NormalizeStable (the default) or NormalizeNone.
	Normalize string
	// Confirm is ConfirmLasting (the default) or ConfirmNone.
	Confirm   string
	Sample    int
	Overwrite bool
}

// TimelineResult is timeline.json.
type TimelineResult struct {
	Scenes []TimelineScene `json:"scenes"`
	// ValidPixels are the pixels valid on at least one step.
	ValidPixels int64 `json:"valid_pixels"`
	// ChangedPixels have at least one confirmed change.
	ChangedPixels int64          `json:"changed_pixels"`
	ChangedAreaM2 *float64       `json:"changed_area_m2"`
	ChangedAreaHa *float64       `json:"changed_area_ha"`
	Components    int            `json:"components"`
	Basis         string         `json:"basis"`
	Threshold     string         `json:"threshold"`
	MinAreaPixels int            `json:"min_area_pixels"`
	Normalize     string         `json:"normalize"`
	Confirm       string         `json:"confirm"`
	Aligned       bool           `json:"aligned"`
	Steps         []TimelineStep `json:"steps"`
	Patches       int            `json:"patches"`
	Scenario      string         `json:"scenario,omitempty"`
	Warnings      []string       `json:"warnings"`
	Outputs       []string       `json:"outputs"`
	AreaNote      string         `json:"area_note"`
	Caution       string         `json:"caution"`
}

// TimelineScene is one date of the series.
type TimelineScene struct {
	Path  string `json:"path"`
	Label string `json:"label"`
	Date  string `json:"date"`
	// DateSource says where the date came from: --dates, a metadata key or
	// the file name.
	DateSource string `json:"date_source"`
	// Normalization is this date's normalisation onto the first date's
	// radiometric scale.
	Normalization NormalizationSummary `json:"normalization"`
}

// TimelineStep is one consecutive pair of dates.
type TimelineStep struct {
	Step       int              `json:"step"`
	From       string           `json:"from"`
	To         string           `json:"to"`
	Components int              `json:"k"`
	Threshold  ThresholdSummary `json:"threshold"`
	Location   []float64        `json:"location"`
	Covariance [][]float64      `json:"covariance"`
	Iterations int              `json:"iterations"`
	Converged  bool             `json:"converged"`
	Identical  bool             `json:"identical"`
	// SamplePixels are the sampled pixels the model was fitted on.
	SamplePixels int `json:"sample_pixels"`
	// Confirmable is false for the last step: no later date can show that
	// its changes last.
	Confirmable     bool     `json:"confirmable"`
	ValidPixels     int64    `json:"valid_pixels"`
	FlaggedPixels   int64    `json:"flagged_pixels"`
	ConfirmedPixels int64    `json:"confirmed_pixels"`
	FlaggedAreaM2   *float64 `json:"flagged_area_m2"`
	FlaggedAreaHa   *float64 `json:"flagged_area_ha"`
	ConfirmedAreaM2 *float64 `json:"confirmed_area_m2"`
	ConfirmedAreaHa *float64 `json:"confirmed_area_ha"`
	Patches         int      `json:"patches"`
}

// Timeline maps, over a series of at least three dates, when each pixel
// changed: the change statistic of every consecutive pair exactly as
// Change computes it (one basis for the series, each pair's own no-change
// model and threshold, the minimum mapping unit), each flag confirmed when
// the new state lasts and is not a return, and the dates of the first and
// last confirmed change, the number of changes, the largest Z and the
// confirmed patches, in one streaming pass over the tiles per stage.
func Timeline(ctx context.Context, env Env, o TimelineOptions) (_ *TimelineResult, err error) {
	defer func() { err = classify(err) }()
	r := &timelineRun{env: env, o: &o}
	defer r.close()
	steps := []jobStep{
		{"open", r.open}, {"sample", r.sample}, {"normalize", r.normalize}, {"basis", r.fitBasis}, {"models", r.fitModels},
		{"map", r.mapPixels}, {"sieve", r.sieve}, {"classify", r.classify}, {"patches", r.patches}, {"figures", r.figures},
		{"report", r.report}, {"summary", r.summary},
	}
	if err := runSteps(ctx, env, "timeline", steps); err != nil {
		return nil, r.dir.FinalNames(err)
	}
	return r.sum, nil
}

// check refuses option values that cannot be right.
func (o *TimelineOptions) check() error {
	if len(o.Scenes) < 3 {
		return Usagef("timeline needs at least 3 scenes, got %d", len(o.Scenes))
	}
	if o.Dates != nil && len(o.Dates) != len(o.Scenes) {
		return Usagef("--dates lists %d dates for %d scenes", len(o.Dates), len(o.Scenes))
	}
	switch o.Confirm {
	case "":
		o.Confirm = ConfirmLasting
	case ConfirmLasting, ConfirmNone:
	default:
		return Usagef("--confirm %q: want lasting or none", o.Confirm)
	}
	// The options Change shares are checked as Change checks them.
	co := ChangeOptions{Input: o.Input, Out: o.Out, Resampling: o.Resampling, Sample: o.Sample, Components: o.Components,
		Threshold: o.Threshold, Normalize: o.Normalize, Align: o.Align}
	if err := co.check(); err != nil {
		return err
	}
	o.Input, o.Resampling, o.Sample, o.Threshold, o.Normalize = co.Input, co.Resampling, co.Sample, co.Threshold, co.Normalize
	return nil
}

// timelineRun is one run of Timeline, a step per method.
type timelineRun struct {
	env Env
	o   *TimelineOptions

	scenes    []*raster.Stack // sorted by date
	tiles     []tiles.Tile    // of every pass
	args      []string        // their arguments
	dates     []sceneDate
	aligned   bool
	cleanups  []func()
	areas     *raster.CellAreas
	minPixels int
	dir       *output.Folder
	given     *transform.Basis

	stats     seriesStats
	norms     [][]change.BandFit // each date onto the first's scale; nil for none
	normSums  []NormalizationSummary
	dxs       [][]float64 // each pair's sample of band differences
	basis     *transform.Basis
	basisName string
	proj      *transform.Projector
	fits      []*pairFit // per pair: the steps, then the skips
	masks     []*raster.ChangeMask
	confirm   [][]uint64 // per step: the pixels whose flags the skips confirm
	valid     []int64    // per step
	scratch   string     // the steps' Z, for the patches
	counts    []stepCount
	// totalValid and totalChanged count the pixels valid on some step and
	// those with a confirmed change; changedArea is the latter's area.
	totalValid, totalChanged int64
	changedArea              float64
	firstPrev                []uint8 // first-change.png's step per preview pixel
	pw, ph                   int
	warnings                 []string
	outputs                  []string
	sum                      *TimelineResult
}

func (r *timelineRun) close() {
	if r.dir != nil {
		r.dir.Abort()
	}
	for _, m := range r.masks {
		if m != nil {
			m.Close()
		}
	}
	for _, s := range r.scenes {
		if s != nil {
			s.Close()
		}
	}
	for _, c := range r.cleanups {
		c()
	}
}

// steps is the number of consecutive pairs.
func (r *timelineRun) steps() int { return len(r.scenes) - 1 }

// pairs are the pairs of dates scored: the steps (t-1, t), then the skips
// (t-1, t+1) that confirm them.
func (r *timelineRun) pairs() [][2]int {
	var out [][2]int
	for t := 1; t < len(r.scenes); t++ {
		out = append(out, [2]int{t - 1, t})
	}
	for t := 2; t < len(r.scenes); t++ {
		out = append(out, [2]int{t - 2, t})
	}
	return out
}

// open checks the options, dates and opens the scenes in date order (all
// on the first's grid, or aligned onto it) and the output folder.
func (r *timelineRun) open(context.Context) error {
	o := r.o
	if err := o.check(); err != nil {
		return err
	}
	ins := argPaths("SCENE", o.Scenes, o.Input.Masks)
	if o.Basis != "" {
		ins = append(ins, output.Path{Role: "basis", Path: o.Basis})
	}
	if err := output.Distinct(ins, []output.Path{{Role: "output folder", Path: o.Out, Folder: true}}); err != nil {
		return err
	}
	if err := output.CheckFolder(o.Out, o.Overwrite); err != nil {
		return err
	}
	if err := r.date(); err != nil {
		return err
	}
	var err error
	if o.Basis != "" {
		if r.given, err = transform.ReadBasis(o.Basis); err != nil {
			return err
		}
		if o.Input, err = o.Input.withBasis(r.given, o.Basis); err != nil {
			return err
		}
	}
	if err := r.openScenes(); err != nil {
		return err
	}
	first := r.scenes[0]
	if err := needTwoBands(first, o.Input.Bands); err != nil {
		return err
	}
	r.tileGrid()
	r.areas, err = raster.NewCellAreas(first.Grid)
	if errors.Is(err, raster.ErrNoCRS) {
		if o.MinArea.M2 > 0 {
			return Usagef("--min-area as a ground area needs a CRS, and %s has none: give it in px", describe(first))
		}
		r.env.warn("%s has no CRS: areas are given in pixels only", r.args[0])
		r.areas = nil
	} else if err != nil {
		return fmt.Errorf("%s: %w", r.args[0], err)
	}
	if r.minPixels, err = o.MinArea.pixels(r.areas); err != nil {
		return err
	}
	if r.given != nil {
		if err := checkBands(r.given, o.Basis, first, bandCheck{selected: o.Input.Bands != nil}); err != nil {
			return err
		}
	}
	r.dir, err = output.CreateFolder(o.Out, o.Overwrite)
	return err
}

// date dates every scene and sorts them; a duplicate date is an error
// naming both scenes.
func (r *timelineRun) date() error {
	o := r.o
	type dated struct {
		arg string
		d   sceneDate
	}
	var all []dated
	for i, arg := range o.Scenes {
		given := ""
		if o.Dates != nil {
			given = strings.TrimSpace(o.Dates[i])
		}
		d, err := dateOf(arg, given)
		if err != nil {
			return err
		}
		all = append(all, dated{arg, d})
	}
	slices.SortStableFunc(all, func(a, b dated) int { return a.d.t.Compare(b.d.t) })
	for i := 1; i < len(all); i++ {
		if all[i].d.t.Equal(all[i-1].d.t) {
			return Usagef("%s and %s have the same date %s (from %s and %s): each date needs one scene", all[i-1].arg, all[i].arg, all[i].d.label, all[i-1].d.source, all[i].d.source)
		}
	}
	for _, a := range all {
		r.args, r.dates = append(r.args, a.arg), append(r.dates, a.d)
	}
	return nil
}

// openScenes opens the scenes in date order, each on the first's grid.
func (r *timelineRun) openScenes() error {
	o := r.o
	first, err := openImage(r.args[0], o.Input.options())
	if err != nil {
		return err
	}
	r.scenes = append(r.scenes, first)
	g := onGrid{ref: first, align: o.Align, resampling: o.Resampling}
	for _, arg := range r.args[1:] {
		s, aligned, err := g.open(r.env, arg, o.Input.options(), &r.cleanups)
		if err != nil {
			return err
		}
		r.scenes = append(r.scenes, s)
		r.aligned = r.aligned || aligned
		if s.Len() != first.Len() {
			return fmt.Errorf("%s has %d bands but %s has %d: every date needs the same bands (select them with --bands)", describe(s), s.Len(), describe(first), first.Len())
		}
		for j, b := range s.Bands {
			if a := first.Bands[j]; described(a) && described(b) && a.Name != b.Name {
				return fmt.Errorf("band %d of %s is %q but of %s %q: every date needs the same bands in the same order", j+1, describe(s), b.Name, describe(first), a.Name)
			}
		}
	}
	return nil
}

// label names a date for people.
func (r *timelineRun) label(i int) string { return r.dates[i].label }

// described reports whether a band's name is its description, not made up
// from its file's name (which differs between dates).
func described(b raster.Band) bool { return b.Name != "" && !strings.Contains(b.Name, ":") }
