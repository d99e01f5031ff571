package series

import (
	"context"
	"errors"
	"fmt"
	"path"
	"slices"
	"strings"

	"bandfold/cmd/bandfold/internal/jobkit"
	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/transform"
	"bandfold/transform/change"
)

// The series engine: change (a series of two dates) and timeline (of many)
// run through it. It opens and aligns the dates, dates them, matches their
// bands by wavelength, draws one sample for every pair it scores, fits
// every date's normalisation onto the reference date, the pooled basis and
// each pair's no-change model, scores every pair tile by tile (the outputs
// being the command's, through MapHooks) and applies the minimum mapping
// unit. What differs between the commands is a field of Config.

// Config is what a command asks of the engine.
type Config struct {
	// Args are the dates' stacks as given, Inputs the input options of
	// each (its bands and masks), Roles how errors name them ("BEFORE").
	Args   []string
	Inputs []jobkit.Input
	Roles  []string
	// Dates are the --dates items (nil: metadata or file names), RefDate
	// the --reference-date ("" for the first date).
	Dates   []string
	RefDate string
	// Chronological sorts the dates by date and needs every scene dated
	// (timeline); otherwise the order given stands, a scene may be
	// undated, and a later first date is warned about (change).
	Chronological bool
	// BandsChosen is set when the user selected bands of some date: a
	// mismatch of wavelengths is then refused, not resolved.
	BandsChosen     bool
	IgnoreBandNames bool
	Align           bool
	Resampling      string
	Basis           string
	Components      int
	Threshold       change.Threshold
	MinArea         jobkit.MinArea
	Normalize       string
	Sample          int
	Tile            int
	// Pairs lists the pairs of dates (indices in date order) to score.
	Pairs func(dates int) [][2]int
	// Extra are more files the run reads (basis, reference), for the
	// same-file refusal; Out is the output folder.
	Extra     []output.Path
	Out       string
	Overwrite bool
	// Command names the command in stage files ("change"), Options are
	// its options (recorded there by RecordOptions), Staging the stage run
	// ("": every stage at once). The stages but the finish leave the
	// output folder alone (checked, never created).
	Command string
	Options any
	Staging Staging
}

// SharedOptions are the options of change and timeline that the engine
// reads, checked and defaulted in one place.
type SharedOptions struct {
	Input jobkit.Input
	// Out is the output folder.
	Out string
	// Align warps every other date onto the first's grid with Resampling
	// when the grids differ.
	Align      bool
	Resampling string
	// Basis, when set, is used instead of fitting one on the dates.
	Basis      string
	Components int
	Threshold  change.Threshold
	MinArea    jobkit.MinArea
	// Normalize is NormalizeStable (the default) or NormalizeNone.
	Normalize string
	Sample    int
	// IgnoreBandNames compares the dates band for band even where their
	// wavelengths differ.
	IgnoreBandNames bool
	// Output is the format and creation options of the rasters written.
	Output jobkit.OutputFormat
	// Overwrite replaces an earlier output; not recorded in stage files
	// (stages may differ in it).
	Overwrite bool `json:"-"`
	// Staging is one stage of a staged run ("" runs them all in one
	// process); not recorded in stage files.
	Staging `json:"-"`
}

// Check refuses option values that cannot be right and fills defaults.
func (o *SharedOptions) Check() error {
	given := o.Resampling != ""
	if !given {
		o.Resampling = "bilinear"
	}
	if !jobkit.Contains(jobkit.Resamplings, o.Resampling) {
		return jobkit.Usagef("--resampling %q: want %s", o.Resampling, strings.Join(jobkit.Resamplings, ", "))
	}
	if given && !o.Align {
		return jobkit.Usagef("--resampling %s applies only with --align: add --align, or leave --resampling out", o.Resampling)
	}
	if o.Sample == 0 {
		o.Sample = change.DefaultSampleSize
	}
	if o.Sample < 100 {
		return jobkit.Usagef("--sample %d: need at least 100 pixels", o.Sample)
	}
	if o.Components < 0 {
		return jobkit.Usagef("--components %d: must be positive", o.Components)
	}
	if o.Threshold == (change.Threshold{}) {
		t, err := change.ParseThreshold(change.DefaultThreshold)
		if err != nil {
			return err
		}
		o.Threshold = t
	}
	if o.Out == "" {
		return jobkit.Usagef("no output folder (--out)")
	}
	if err := checkNormalize(&o.Normalize); err != nil {
		return err
	}
	if o.Align {
		o.Input.Align, o.Input.Resampling = true, o.Resampling
	}
	if err := o.Output.Check(); err != nil {
		return err
	}
	if err := o.Staging.Check(); err != nil {
		return err
	}
	return o.Input.Check()
}

// Config is the engine's configuration of the shared options, for
// command with options opts (recorded in a staged run's files); the
// command adds its dates, their inputs and its pairs.
func (o *SharedOptions) Config(command string, opts any) *Config {
	return &Config{Align: o.Align, Resampling: o.Resampling, Basis: o.Basis, Components: o.Components, Threshold: o.Threshold,
		MinArea: o.MinArea, Normalize: o.Normalize, Sample: o.Sample, Tile: o.Input.Tile, IgnoreBandNames: o.IgnoreBandNames,
		Out: o.Out, Overwrite: o.Overwrite, Command: command, Options: opts, Staging: o.Staging}
}

// Run is one run of the engine, a step per method.
type Run struct {
	Env jobkit.Env
	C   *Config

	Scenes   []*raster.Stack // in date order
	Args     []string        // their arguments
	inputs   []jobkit.Input
	Dates    []raster.Date
	Ref      int // the reference date's index
	Aligned  bool
	cleanups []func()
	// Areas is the ground area of the cells, nil without a CRS; it is set
	// by AwaitAreas, from a measurement that runs during the normalisation
	// (StartAreas, setAreas).
	Areas      *raster.CellAreas
	areasLater *tiles.Later[*raster.CellAreas]
	MinPixels  int
	tiles      []tiles.Tile
	only       []tiles.Tile // a shard's tiles, numbered among themselves (UseShard); nil for all
	shard      *jobkit.Shard
	scanAt     []int     // the global number of each of a shard's sample tiles
	tileAcc    []TileAcc // a shard's sample tiles' co-moments
	given      *transform.Basis
	Matched    string // how the bands were matched, for people; "" when as given

	pairs     [][2]int // scored
	sampled   [][2]int // scored, then the normalisation pairs not scored
	stats     seriesStats
	norms     [][]change.BandFit // per date onto the reference; nil for none
	NormSums  []NormalizationSummary
	basis     *transform.Basis
	BasisName string
	Proj      *transform.Projector
	Fits      []*PairFit
	Warnings  []string
	Dir       *output.Folder
	st        staged
}

func (r *Run) Close() {
	if r.Dir != nil {
		r.Dir.Abort()
	}
	for _, s := range r.Scenes {
		if s != nil {
			s.Close()
		}
	}
	for _, c := range r.cleanups {
		c()
	}
}

// warnf keeps a warning for the summary; the command prints them at the
// end, so that a run that fails prints only its error.
func (r *Run) warnf(format string, args ...any) {
	r.Warnings = append(r.Warnings, fmt.Sprintf(format, args...))
}

// Name names date i for people and outputs: its date and its stack's
// label, never one member file.
func (r *Run) Name(i int) string {
	if r.Dates[i].Label == "" {
		return jobkit.Describe(r.Scenes[i])
	}
	return r.Dates[i].Label + " (" + jobkit.Describe(r.Scenes[i]) + ")"
}

// LabelIn names date i's stack for people as the outputs record it: a
// stack's label, or its files by base name (their paths are recorded
// apart, relative to the output folder: jobkit.DocPaths).
func (r *Run) LabelIn(i int) string {
	s := r.Scenes[i]
	if name := jobkit.Describe(s); name != strings.Join(s.Paths, ",") {
		return name
	}
	names := make([]string, len(s.Paths))
	for j, p := range s.Paths {
		names[j] = path.Base(p)
	}
	return strings.Join(names, ",")
}

// NameIn is Name as the outputs record it (LabelIn), for their metadata,
// figures and descriptions; messages keep Name, the files as typed.
func (r *Run) NameIn(i int) string {
	if r.Dates[i].Label == "" {
		return r.LabelIn(i)
	}
	return r.Dates[i].Label + " (" + r.LabelIn(i) + ")"
}

// Open checks the files, dates the scenes, opens them in date order (all
// on the first's grid, or aligned onto it), matches their bands and opens
// the output folder.
func (r *Run) Open(context.Context) error {
	c := r.C
	var ins []output.Path
	for i, arg := range c.Args {
		ins = append(ins, jobkit.ArgPaths(c.Roles[i], []string{arg}, c.Inputs[i].Masks)...)
	}
	ins = append(ins, c.Extra...)
	outs := []output.Path{{Role: "output folder", Path: c.Out, Folder: true}}
	if err := output.Distinct(ins, outs); err != nil {
		return err
	}
	if err := output.CheckFolder(c.Out, c.Overwrite); err != nil {
		return err
	}
	if err := r.date(); err != nil {
		return err
	}
	var err error
	if c.Basis != "" {
		if r.given, err = transform.ReadBasis(c.Basis); err != nil {
			return err
		}
		for i := range r.inputs {
			if r.inputs[i], err = r.inputs[i].ForBasis(r.given, c.Basis, r.Args[i]); err != nil {
				return err
			}
		}
	}
	if err := r.openScenes(); err != nil {
		return err
	}
	if err := r.matchBands(); err != nil {
		return err
	}
	if err := r.distinct(outs); err != nil {
		return err
	}
	first := r.Scenes[0]
	if err := jobkit.NeedTwoBands(first, r.inputs[0].Bands); err != nil {
		return err
	}
	r.tiles = numbered(jobkit.GridFor(first, c.Tile))
	r.pairs = c.Pairs(len(r.Scenes))
	if err := r.setAreas(); err != nil {
		return err
	}
	if r.given != nil {
		if err := jobkit.CheckBands(r.given, c.Basis, first, jobkit.BandCheck{Selected: c.BandsChosen || r.Matched != "", IgnoreNames: c.IgnoreBandNames}); err != nil {
			return err
		}
	}
	if err := r.openStage(); err != nil {
		return err
	}
	if !c.Staging.WritesFolder() {
		return nil
	}
	r.Dir, err = output.CreateFolder(c.Out, c.Overwrite)
	return err
}

// distinct refuses an output folder that holds or is any file the stacks
// read (their members, masks and the MTLs beside them).
func (r *Run) distinct(outs []output.Path) error {
	ins := slices.Clone(r.C.Extra)
	for i, s := range r.Scenes {
		for _, p := range s.Paths {
			ins = append(ins, output.Path{Role: r.C.Roles[min(i, len(r.C.Roles)-1)], Path: p})
		}
		for _, m := range s.Masks {
			ins = append(ins, output.Path{Role: "mask", Path: m})
		}
		for _, p := range s.SideFiles() {
			ins = append(ins, output.Path{Role: "metadata", Path: p})
		}
	}
	return output.Distinct(ins, outs)
}

// setAreas prepares the measurement of the cell areas (none without a
// CRS) and sets the minimum mapping unit in pixels. Measuring every cell
// takes seconds on a large projected grid, and nothing needs the areas
// before the map is counted: StartAreas runs it on a goroutine of its own
// during the normalisation, whose fits leave a core idle, and AwaitAreas
// takes its result. A minimum mapping unit given as a ground area waits
// for it here. The scan, fit and map stages of a staged run measure
// nothing (the finish sieves and measures): they only refuse a ground
// area without a CRS.
func (r *Run) setAreas() error {
	first := r.Scenes[0]
	if first.Grid.Projection == "" && r.C.MinArea.M2 > 0 {
		return jobkit.Usagef("--min-area as a ground area needs a CRS, and %s has none: give it in px", jobkit.Describe(first))
	}
	if !r.C.Staging.WritesFolder() {
		return nil
	}
	if first.Grid.Projection == "" {
		r.Env.Warn("%s has no CRS: areas are given in pixels only", r.Args[0])
		r.areasLater = tiles.Done[*raster.CellAreas](nil, nil)
	}
	if r.C.MinArea.M2 > 0 {
		if err := r.AwaitAreas(context.Background()); err != nil {
			return err
		}
	}
	var err error
	r.MinPixels, err = r.C.MinArea.Pixels(r.Areas)
	return err
}

// StartAreas starts measuring the cell areas, once, where the run measures
// them: a run that writes the folder, on a grid with a CRS (setAreas).
func (r *Run) StartAreas() {
	if !r.C.Staging.WritesFolder() || r.areasLater != nil {
		return
	}
	grid := r.Scenes[0].Grid
	r.areasLater = tiles.Start(func() (*raster.CellAreas, error) { return raster.NewCellAreas(grid) })
}

// AwaitAreas sets Areas from the measurement (StartAreas), waiting for it
// if need be: a step of its own after the map pass, before anything is
// counted in ground area.
func (r *Run) AwaitAreas(context.Context) error {
	r.StartAreas()
	if r.areasLater == nil {
		return nil
	}
	areas, err := r.areasLater.Wait()
	if err != nil {
		return fmt.Errorf("%s: %w", r.Args[0], err)
	}
	r.Areas = areas
	return nil
}

// date dates every scene (--dates, else raster.SceneDate) and, for a
// chronological series, sorts them; two scenes of one date are refused,
// and sources of one scene that disagree are warned about.
func (r *Run) date() error {
	c := r.C
	type dated struct {
		arg string
		in  jobkit.Input
		d   raster.Date
	}
	var all []dated
	for i, arg := range c.Args {
		var d raster.Date
		if c.Dates != nil {
			given := strings.TrimSpace(c.Dates[i])
			v, ok := raster.ParseDate(given)
			if !ok {
				return jobkit.Usagef("--dates: %q (for %s) is not a date: want YYYY-MM-DD, YYYYMMDD or YYYY", given, arg)
			}
			v.Source, d = "--dates", v
		} else {
			v, disagree, err := raster.SceneDate(jobkit.SplitStack(arg)[0])
			if errors.Is(err, raster.ErrNoDate) && !c.Chronological {
				v, err = raster.Date{}, nil // an undated date of a pair is named by its stack alone
			}
			switch {
			case errors.Is(err, raster.ErrNoDate) && raster.IsSTAC(arg): // the item and its datetime named
				return fmt.Errorf("%w; give the dates with --dates", err)
			case errors.Is(err, raster.ErrNoDate):
				return fmt.Errorf("%s has no date: none in its metadata (a Landsat MTL's DATE_ACQUIRED, ACQUISITIONDATETIME, ACQUISITION_DATE, TIFFTAG_DATETIME) or its name (YYYY-MM-DD, YYYYMMDD, YYYY); give the dates with --dates", arg)
			case err != nil:
				return err
			}
			if len(disagree) > 0 {
				r.warnf("%s: its date %s from %s, but %s", arg, v.Label, v.Source, strings.Join(disagree, ", "))
			}
			d = v
		}
		all = append(all, dated{arg, c.Inputs[i], d})
	}
	if c.Chronological {
		slices.SortStableFunc(all, func(a, b dated) int { return a.d.Time.Compare(b.d.Time) })
	}
	for i := range all {
		for j := range i {
			if all[i].d.Label != "" && all[i].d.Time.Equal(all[j].d.Time) {
				return jobkit.Usagef("%s and %s have the same date %s (from %s and %s): each date needs one scene", all[j].arg, all[i].arg, all[i].d.Label, all[j].d.Source, all[i].d.Source)
			}
		}
	}
	if !c.Chronological && len(all) == 2 && all[1].d.Label != "" && all[0].d.Time.After(all[1].d.Time) {
		r.warnf("%s (%s) is later than %s (%s): the map shows the change from the later date to the earlier one; swap them if that is not meant",
			all[0].arg, all[0].d.Label, all[1].arg, all[1].d.Label)
	}
	for _, a := range all {
		r.Args, r.inputs, r.Dates = append(r.Args, a.arg), append(r.inputs, a.in), append(r.Dates, a.d)
	}
	if c.RefDate != "" {
		want, ok := raster.ParseDate(c.RefDate)
		if !ok {
			return jobkit.Usagef("--reference-date %q: want YYYY-MM-DD, YYYYMMDD or YYYY", c.RefDate)
		}
		r.Ref = slices.IndexFunc(r.Dates, func(d raster.Date) bool { return d.Label == want.Label })
		if r.Ref < 0 {
			labels := make([]string, len(r.Dates))
			for i, d := range r.Dates {
				labels[i] = d.Label
			}
			return jobkit.Usagef("--reference-date %s: no scene has that date (the dates are %s)", want.Label, strings.Join(labels, ", "))
		}
	}
	return nil
}

// openScenes opens the scenes in date order, each on the first's grid.
func (r *Run) openScenes() error {
	first, err := jobkit.OpenImage(r.Args[0], r.inputs[0].Options())
	if err != nil {
		return err
	}
	r.Scenes = append(r.Scenes[:0], first)
	g := onGrid{ref: first, align: r.C.Align, resampling: r.C.Resampling}
	for i, arg := range r.Args[1:] {
		s, aligned, err := g.open(r.Env, arg, r.inputs[i+1].Options(), &r.cleanups)
		if err != nil {
			return err
		}
		r.Scenes = append(r.Scenes, s)
		r.Aligned = r.Aligned || aligned
	}
	for _, s := range r.Scenes {
		for _, n := range s.Notes {
			if !slices.Contains(r.Warnings, n) {
				r.warnf("%s", n)
			}
		}
	}
	return nil
}

// reopen closes the scenes and opens them again with the inputs as they
// are now (after an automatic band selection).
func (r *Run) reopen() error {
	for _, s := range r.Scenes {
		s.Close()
	}
	r.Scenes = nil
	return r.openScenes()
}

// spectralBands describes a stack's bands for matching.
func spectralBands(s *raster.Stack) []transform.SpectralBand {
	out := make([]transform.SpectralBand, len(s.Bands))
	for i, b := range s.Bands {
		label := b.Name
		if b.Product != "" {
			label = b.Product
		}
		out[i] = transform.SpectralBand{Label: label, LoNM: b.Range.LoNM, HiNM: b.Range.HiNM, Centre: b.WavelengthNM}
	}
	return out
}

// matchBands checks that the dates' bands correspond, date by date against
// the first: the same number, and where both wavelengths are known, each
// band's centre within the other's range (transform.Compatible). When the
// user chose no bands and the dates' bands differ, the bands every date
// shares by wavelength are selected (said on stderr and in the summary);
// a mismatch of chosen bands is refused naming both bands, unless
// --ignore-band-names.
func (r *Run) matchBands() error {
	if r.C.IgnoreBandNames {
		return r.sameCount()
	}
	first := spectralBands(r.Scenes[0])
	bad := -1
	for d := 1; d < len(r.Scenes) && bad < 0; d++ {
		if !r.correspond(first, spectralBands(r.Scenes[d])) {
			bad = d
		}
	}
	if bad < 0 {
		return r.sameCount()
	}
	if r.C.BandsChosen || r.given != nil {
		return r.mismatch(bad)
	}
	// Keep the bands of the first date every other date has, each date's
	// band nearest in wavelength.
	keep := make([][]int, len(r.Scenes))
	shared := make([]bool, len(first))
	for i := range shared {
		shared[i] = first[i].Known()
	}
	pairs := make([][][2]int, len(r.Scenes))
	for d := 1; d < len(r.Scenes); d++ {
		pairs[d] = transform.MatchShared(first, spectralBands(r.Scenes[d]))
		in := make([]bool, len(first))
		for _, p := range pairs[d] {
			in[p[0]] = true
		}
		for i := range shared {
			shared[i] = shared[i] && in[i]
		}
	}
	var labels []string
	for i, ok := range shared {
		if !ok {
			continue
		}
		keep[0] = append(keep[0], i+1) // the stacks were opened whole: position i is band i+1
		parts := []string{first[i].Label}
		for d := 1; d < len(r.Scenes); d++ {
			for _, p := range pairs[d] {
				if p[0] == i {
					keep[d] = append(keep[d], p[1]+1)
					parts = append(parts, spectralBands(r.Scenes[d])[p[1]].Label)
				}
			}
		}
		labels = append(labels, strings.Join(parts, " = "))
	}
	if len(labels) < 2 {
		return r.mismatch(bad)
	}
	for d := range r.inputs {
		r.inputs[d].Bands = keep[d]
	}
	r.Matched = "bands matched by wavelength: " + strings.Join(labels, "; ")
	r.Env.Warn("the dates' bands differ: %s", r.Matched)
	if err := r.reopen(); err != nil {
		return err
	}
	return r.sameCount()
}

// correspond reports whether a date's bands can be compared with the
// first date's band for band.
func (r *Run) correspond(first, other []transform.SpectralBand) bool {
	if len(first) != len(other) {
		return false
	}
	for i := range first {
		if !transform.Compatible(first[i], other[i]) || namesDiffer(first[i], other[i]) {
			return false
		}
	}
	return true
}

// namesDiffer reports whether two bands of unknown wavelength carry
// different descriptions ("blue", "green"): bands named by their files
// ("scene:1") or by a product's band tables say nothing here.
func namesDiffer(a, b transform.SpectralBand) bool {
	if a.Known() && b.Known() {
		return false
	}
	described := func(s string) bool { return s != "" && !strings.Contains(s, ":") }
	return described(a.Label) && described(b.Label) && a.Label != b.Label
}

// sameCount refuses dates with different numbers of bands.
func (r *Run) sameCount() error {
	first := r.Scenes[0]
	every := "every date needs"
	if len(r.Scenes) == 2 {
		every = "both dates need"
	}
	for _, s := range r.Scenes[1:] {
		if s.Len() != first.Len() {
			err := fmt.Errorf("%s has %d bands but %s has %d bands: %s the same bands (select them per date: %s)",
				jobkit.Describe(first), first.Len(), jobkit.Describe(s), s.Len(), every, r.bandsHint())
			if r.C.BandsChosen {
				return jobkit.Usage(err) // the selections themselves differ
			}
			return err
		}
	}
	return nil
}

// bandsHint names the options that select bands per date.
func (r *Run) bandsHint() string {
	if r.C.Chronological {
		return "--scene-bands, once per scene"
	}
	return "--bands-before and --bands-after"
}

// mismatch is the refusal of date d's bands against the first date's.
func (r *Run) mismatch(d int) error {
	first, other := spectralBands(r.Scenes[0]), spectralBands(r.Scenes[d])
	if len(first) != len(other) {
		return r.sameCount()
	}
	for i := range first {
		if namesDiffer(first[i], other[i]) {
			return fmt.Errorf("band %d of %s is %q but of %s %q: every date needs the same bands in the same order (or pass --ignore-band-names)",
				i+1, jobkit.Describe(r.Scenes[d]), other[i].Label, jobkit.Describe(r.Scenes[0]), first[i].Label)
		}
		if !transform.Compatible(first[i], other[i]) {
			return jobkit.Usagef("band %d of %s is %s (%s) but of %s %s (%s): the dates would compare different wavelengths; select matching bands per date (%s), or pass --ignore-band-names to compare them anyway",
				i+1, jobkit.Describe(r.Scenes[0]), first[i].Label, nmRange(first[i]), jobkit.Describe(r.Scenes[d]), other[i].Label, nmRange(other[i]), r.bandsHint())
		}
	}
	return nil
}

// nmRange writes a band's wavelengths for people.
func nmRange(b transform.SpectralBand) string {
	if b.HiNM > b.LoNM {
		return fmt.Sprintf("%g-%g nm", b.LoNM, b.HiNM)
	}
	return fmt.Sprintf("%g nm", b.Centre)
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
func (g onGrid) open(env jobkit.Env, arg string, opts []raster.Option, cleanups *[]func()) (*raster.Stack, bool, error) {
	paths := jobkit.SplitStack(arg)
	if len(paths) == 0 {
		return nil, false, jobkit.Usagef("empty image argument %q", arg)
	}
	if raster.IsSTAC(arg) {
		return g.openItem(env, arg, opts)
	}
	// Masks are on the reference grid, so open the files alone first.
	probe, err := raster.Open(paths)
	if err != nil {
		return nil, false, err
	}
	defer probe.Close()
	gridErr := g.ref.Grid.Compare(probe.Grid)
	if gridErr == nil {
		s, err := jobkit.OpenStack(paths, opts)
		return s, false, err
	}
	if !g.align {
		return nil, false, g.offGrid(arg, gridErr)
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
	g.warnWarped(env, arg)
	s, err := jobkit.OpenStack(vrts, opts)
	return s, err == nil, err
}

// openItem opens a STAC item, its assets warped onto the reference grid
// when align is set and they are not on it (the item's assets may differ
// in grid among themselves too).
func (g onGrid) openItem(env jobkit.Env, arg string, opts []raster.Option) (*raster.Stack, bool, error) {
	if g.align {
		s, err := jobkit.OpenStack([]string{arg}, append(opts, raster.OntoGrid(g.ref.Grid, g.resampling)))
		if err != nil {
			return nil, false, err
		}
		if len(s.Aligned) > 0 {
			g.warnWarped(env, arg)
		}
		return s, len(s.Aligned) > 0, nil
	}
	s, err := jobkit.OpenStack([]string{arg}, opts)
	if err != nil {
		return nil, false, err
	}
	if gridErr := g.ref.Grid.Compare(s.Grid); gridErr != nil {
		s.Close()
		return nil, false, g.offGrid(arg, gridErr)
	}
	return s, false, nil
}

// offGrid is the refusal of a date not on the reference grid without align.
func (g onGrid) offGrid(arg string, err error) error {
	return fmt.Errorf("%s is not on the grid of %s (%v); pass --align to warp it onto that grid", arg, jobkit.Describe(g.ref), err)
}

// warnWarped says that a date was warped onto the reference grid.
func (g onGrid) warnWarped(env jobkit.Env, arg string) {
	env.Warn("%s was warped onto the grid of %s (%s resampling): any misregistration between the dates shows up as change along edges", arg, jobkit.Describe(g.ref), g.resampling)
}
