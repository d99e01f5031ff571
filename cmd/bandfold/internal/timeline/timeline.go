package timeline

import (
	"context"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/cmd/bandfold/internal/series"
	"bandfold/raster"
	"bandfold/raster/output"
)

// The values of --confirm.
const (
	ConfirmLasting = "lasting"
	ConfirmNone    = "none"
)

// TimelineOptions are the options of Timeline.
type TimelineOptions struct {
	// Scenes are the dates' stacks, at least 2, in any order.
	Scenes []string
	// SharedOptions are the options change shares: the inputs' options,
	// the output folder, --align (every scene onto the first's grid), the
	// basis, the model's and the map's options, the stage.
	series.SharedOptions
	// Dates, when set, date the scenes in the order given (YYYY-MM-DD,
	// YYYYMMDD or YYYY); otherwise metadata or the file names do.
	Dates []string
	// Confirm is ConfirmLasting (the default) or ConfirmNone.
	Confirm string
	// SceneBands select each scene's own bands, in the order of Scenes
	// (nil: Input.Bands for all).
	SceneBands [][]int
	// ReferenceDate is the date every date is normalised onto ("": the
	// first).
	ReferenceDate string
}

// TimelineResult is timeline.json.
type TimelineResult struct {
	jobkit.Document
	// FolderSummary is what the summary says of the run as a whole
	// (paths relative to the timeline folder; valid pixels are those
	// valid on at least one step, changed pixels those with at least one
	// lasting change).
	series.FolderSummary
	Scenes    []TimelineScene `json:"scenes"`
	Threshold string          `json:"threshold"`
	Normalize string          `json:"normalize"`
	Confirm   string          `json:"confirm"`
	// ReferenceDate is the date every date was normalised onto.
	ReferenceDate string         `json:"reference_date"`
	Steps         []TimelineStep `json:"steps"`
}

// TimelineScene is one date of the series.
type TimelineScene struct {
	Path  string `json:"path"`
	Label string `json:"label"`
	Date  string `json:"date"`
	// DateSource says where the date came from: --dates, a metadata key or
	// the file name.
	DateSource string `json:"date_source"`
	// Normalization is this date's normalisation onto the reference
	// date's radiometric scale.
	Normalization series.NormalizationSummary `json:"normalization"`
}

// TimelineStep is one consecutive pair of dates.
type TimelineStep struct {
	Step       int                     `json:"step"`
	From       string                  `json:"from"`
	To         string                  `json:"to"`
	Components int                     `json:"k"`
	Threshold  series.ThresholdSummary `json:"threshold"`
	Location   []float64               `json:"location"`
	Covariance [][]float64             `json:"covariance"`
	Iterations int                     `json:"iterations"`
	Converged  bool                    `json:"converged"`
	Identical  bool                    `json:"identical"`
	// SamplePixels are the sampled pixels the model was fitted on.
	SamplePixels int `json:"sample_pixels"`
	// Confirmable is false for the last step: no later date can show that
	// its changes last.
	Confirmable bool  `json:"confirmable"`
	ValidPixels int64 `json:"valid_pixels"`
	// FlaggedPixels are the step's flags after the minimum mapping unit,
	// LastingPixels those of them that last (--confirm lasting; all of
	// them with --confirm none), steps.tif's classes 1 and 2 together and
	// 2; their ground areas are null without a CRS.
	FlaggedPixels int64    `json:"flagged_pixels"`
	LastingPixels int64    `json:"lasting_pixels"`
	FlaggedAreaM2 *float64 `json:"flagged_area_m2"`
	FlaggedAreaHa *float64 `json:"flagged_area_ha"`
	LastingAreaM2 *float64 `json:"lasting_area_m2"`
	LastingAreaHa *float64 `json:"lasting_area_ha"`
	Patches       int      `json:"patches"`
}

// Timeline maps, over a series of at least three dates, when each pixel
// changed: the change statistic of every consecutive pair exactly as
// Change computes it (one basis for the series, each pair's own no-change
// model and threshold, the minimum mapping unit), each flag confirmed when
// the new state lasts and is not a return, and the dates of the first and
// last confirmed change, the number of changes, the largest Z and the
// confirmed patches, in one streaming pass over the tiles per stage.
func Timeline(ctx context.Context, env jobkit.Env, o TimelineOptions) (_ *TimelineResult, err error) {
	defer func() { err = jobkit.Classify(err) }()
	if !o.WritesFolder() {
		return nil, jobkit.Usagef("--stage %s writes no timeline folder: run it with TimelineStage", o.Stage)
	}
	r := &timelineRun{Run: &series.Run{Env: env}, o: &o}
	defer r.close()
	sample, mapping := jobkit.Step("sample", r.Sample), jobkit.Step("map", r.mapPixels)
	if o.Stage == series.StageFinish {
		sample, mapping = jobkit.Step("read model", r.ReadModel), jobkit.Step("join", r.joinPieces)
	}
	steps := append([]jobkit.JobStep{jobkit.Step("open", r.open), sample}, r.FitSteps(jobkit.Step("models", r.FitModels))...)
	steps = append(steps, mapping, jobkit.Step("areas", r.AwaitAreas), jobkit.Step("sieve", r.sieve), jobkit.Step("classify", r.classify), jobkit.Step("patches", r.patches), jobkit.Step("figures", r.figures),
		jobkit.Step("report", r.report), jobkit.Step("item", r.item), jobkit.Step("summary", r.summary))
	if err := jobkit.RunSteps(ctx, env, "timeline", steps); err != nil {
		return nil, r.Dir.FinalNames(err)
	}
	return r.sum, nil
}

// check refuses option values that cannot be right.
func (o *TimelineOptions) check() error {
	if len(o.Scenes) < 2 {
		return jobkit.Usagef("timeline needs at least 2 scenes, got %d", len(o.Scenes))
	}
	if o.SceneBands != nil && len(o.SceneBands) != len(o.Scenes) {
		return jobkit.Usagef("--scene-bands is given %d times for %d scenes: give it once per scene, in the order of the scenes", len(o.SceneBands), len(o.Scenes))
	}
	if o.Dates != nil && len(o.Dates) != len(o.Scenes) {
		return jobkit.Usagef("--dates lists %d dates for %d scenes", len(o.Dates), len(o.Scenes))
	}
	switch o.Confirm {
	case "":
		o.Confirm = ConfirmLasting
	case ConfirmLasting, ConfirmNone:
	default:
		return jobkit.Usagef("--confirm %q: want lasting or none", o.Confirm)
	}
	// The options Change shares are checked as Change checks them.
	if err := o.SharedOptions.Check(); err != nil {
		return err
	}
	return nil
}

// timelineRun is one run of Timeline: the series engine on every date
// (sorted by date), and the timeline folder's own outputs.
type timelineRun struct {
	*series.Run
	o *TimelineOptions

	masks   []*raster.ChangeMask
	valid   []int64 // per step
	scratch string  // the steps' Z, for the patches
	counts  []stepCount
	// totalValid and totalChanged count the pixels valid on some step and
	// those with a confirmed change; changedArea is the latter's area.
	totalValid, totalChanged int64
	changedArea              float64
	firstPrev                []uint8 // first-change.png's step per preview pixel
	pw, ph                   int
	outputs                  []string
	sum                      *TimelineResult
}

func (r *timelineRun) close() {
	for _, m := range r.masks {
		if m != nil {
			m.Close()
		}
	}
	r.Run.Close()
}

// steps is the number of consecutive pairs.
func (r *timelineRun) steps() int { return len(r.Scenes) - 1 }

// timelinePairs are the pairs of dates scored: the steps (t-1, t), then
// the skips (t-1, t+1) that confirm them.
func timelinePairs(dates int) [][2]int {
	var out [][2]int
	for t := 1; t < dates; t++ {
		out = append(out, [2]int{t - 1, t})
	}
	for t := 2; t < dates; t++ {
		out = append(out, [2]int{t - 2, t})
	}
	return out
}

// open checks the options and hands the scenes to the engine, which dates
// them, sorts them and opens them (all on the first's grid, or aligned
// onto it) with their bands matched, and the output folder.
func (r *timelineRun) open(ctx context.Context) error {
	o := r.o
	var err error
	if o.Scenes, err = jobkit.ExpandImages(o.Scenes); err != nil {
		return err
	}
	if err := o.check(); err != nil {
		return err
	}
	c := o.Config("timeline", *o)
	c.Args, c.Dates, c.RefDate, c.Chronological, c.Pairs = o.Scenes, o.Dates, o.ReferenceDate, true, timelinePairs
	c.BandsChosen = o.Input.Bands != nil || o.SceneBands != nil
	for i := range o.Scenes {
		in := o.Input
		if o.SceneBands != nil {
			in.Bands = o.SceneBands[i]
		}
		c.Inputs, c.Roles = append(c.Inputs, in), append(c.Roles, "SCENE")
	}
	if o.Basis != "" {
		c.Extra = append(c.Extra, output.Path{Role: "basis", Path: o.Basis})
	}
	r.C = c
	return r.Run.Open(ctx)
}

// label names a date for people.
func (r *timelineRun) label(i int) string { return r.Dates[i].Label }
