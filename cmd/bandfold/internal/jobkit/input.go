package jobkit

import (
	"cmp"
	"errors"
	"fmt"
	"slices"
	"strings"

	"bandfold/raster"
	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/transform"
)

// Input says how to read the input images: which bands, what is invalid,
// how to calibrate and align them, and how to tile them.
type Input struct {
	// Bands are 1-based band numbers of the stack; nil means all.
	Bands []int
	// BandNames selects bands by name instead ("B4", or a product's "B02",
	// "B8A"; see raster.SelectBandNames).
	BandNames []string
	// Assets pick a STAC item's assets, in that order, by key or eo:bands
	// common name ("red", "nir08"; see raster.SelectAssets); nil gives the
	// item's data assets.
	Assets []string
	// NoData overrides the files' nodata: one value for all bands, or one
	// per selected band; nil keeps the files'.
	NoData []float64
	// Masks are quality masks (raster.ParseMask: non-zero = valid, or bit
	// and value rules); a pixel must pass all.
	Masks []raster.MaskRule
	// Align warps every file of a stack onto its first file's grid (a
	// warped VRT, no copy) with Resampling; masks on another grid are
	// warped with nearest neighbour.
	Align      bool
	Resampling string
	// Calibrate is how stored values become the values used: "scale" (the
	// bands' scale/offset metadata, the default), "toa" (Landsat Level-1
	// digital numbers to top-of-atmosphere reflectance from the MTL file)
	// or "reflectance" (as the product defines it; raster.Calibrate).
	// Empty means "scale", or the basis's calibration where a basis is read.
	Calibrate string
	// Tile is the side of square tiles; 0 aligns tiles to the file's
	// blocks, about tiles.DefaultBudget bytes of float64 per tile.
	Tile int
}

// Check refuses option values that cannot be right.
func (in Input) Check() error {
	if in.Tile < 0 {
		return Usagef("--tile %d: must be positive", in.Tile)
	}
	if in.Resampling != "" && !Contains(Resamplings, in.Resampling) {
		return Usagef("--resampling %q: want %s", in.Resampling, strings.Join(Resamplings, ", "))
	}
	if in.Calibrate != "" && !slices.Contains(raster.Calibrations, in.Calibrate) {
		return Usagef("--calibrate %q: want %s", in.Calibrate, strings.Join(raster.Calibrations, ", "))
	}
	return nil
}

// Options turns Input into raster options (a date's own masks are added with WithMasks).
func (in Input) Options() []raster.Option {
	opts := []raster.Option{raster.SelectBands(in.Bands), raster.NoData(in.NoData)}
	if len(in.BandNames) > 0 {
		opts = append(opts, raster.SelectBandNames(in.BandNames))
	}
	if len(in.Assets) > 0 {
		opts = append(opts, raster.SelectAssets(in.Assets))
	}
	if len(in.Masks) > 0 {
		opts = append(opts, raster.MaskRules(in.Masks...))
	}
	if in.Align {
		opts = append(opts, raster.AlignStack(cmp.Or(in.Resampling, "bilinear")), raster.AlignMasks("nearest"))
	}
	if in.Calibrate != "" {
		opts = append(opts, raster.Calibrate(in.Calibrate))
	}
	return opts
}

// WithMasks is in with more mask rules (one date's own masks).
func (in Input) WithMasks(rules []raster.MaskRule) Input {
	in.Masks = append(slices.Clone(in.Masks), rules...)
	return in
}

// WithBasis is in with the basis's calibration when none was asked for; a
// different one is an error, since the scores would be meaningless. The
// bands the basis was fitted on are chosen per image by ForBasis.
func (in Input) WithBasis(b *transform.Basis, path string) (Input, error) {
	want := b.Calibration()
	switch {
	case in.Calibrate == "":
		in.Calibrate = want
	case in.Calibrate != want:
		return in, Usagef("--calibrate %s: the basis %s was fitted on %s values", in.Calibrate, path, want)
	}
	return in, nil
}

// KeptBands are the 1-based numbers, in the stack the basis was fitted on,
// of the bands it kept (transform.Basis.Selection), 1..p when it kept them
// all or does not say.
func KeptBands(b *transform.Basis) []int {
	if sel, ok := b.Selection(); ok {
		return sel.Numbers
	}
	keep := make([]int, len(b.Bands))
	for i := range keep {
		keep[i] = i + 1
	}
	return keep
}

// MaskPaths are the files of mask rules.
func MaskPaths(rules []raster.MaskRule) []string {
	var out []string
	for _, r := range rules {
		out = append(out, r.Path)
	}
	return out
}

// SplitStack splits an IMAGE argument: several files joined with commas are
// one stack, in that order.
func SplitStack(arg string) []string {
	parts := strings.Split(arg, ",")
	out := parts[:0]
	for _, p := range parts {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

// ExpandImages replaces, where several IMAGE arguments are taken, each STAC
// ItemCollection (file or URL) and each folder of STAC item files by its
// items, in order (raster.ItemsOf); other arguments stay as they are.
func ExpandImages(args []string) ([]string, error) {
	var out []string
	for _, a := range args {
		items, ok, err := raster.ItemsOf(a)
		switch {
		case err != nil:
			return nil, err
		case ok:
			out = append(out, items...)
		default:
			out = append(out, a)
		}
	}
	return out, nil
}

// OpenImage opens one IMAGE argument as a stack.
func OpenImage(arg string, opts []raster.Option) (*raster.Stack, error) {
	paths := SplitStack(arg)
	if len(paths) == 0 {
		return nil, Usagef("empty image argument %q", arg)
	}
	return OpenStack(paths, opts)
}

// OpenStack opens paths as one stack. A band selection, nodata list or mask
// rule that does not fit the files is a usage error: the flag is wrong, not
// the data.
func OpenStack(paths []string, opts []raster.Option) (*raster.Stack, error) {
	s, err := raster.Open(paths, opts...)
	switch {
	case err == nil:
		return s, nil
	case errors.Is(err, raster.ErrBandRange):
		return nil, Usage(err)
	case errors.Is(err, raster.ErrBadSpec):
		if name := strings.Join(paths, ","); !strings.Contains(err.Error(), paths[0]) {
			err = fmt.Errorf("%s: %w", name, err)
		}
		return nil, Usage(err)
	}
	return nil, err
}

// GridFor returns the tile grid over s: N x N tiles when tile > 0, otherwise
// tiles aligned to the file's blocks.
func GridFor(s *raster.Stack, tile int) tiles.Grid {
	if tile > 0 {
		return tiles.NewGrid(s.Width, s.Height, tile, tile)
	}
	w, h := tiles.SizeFor(s.Width, s.Height, s.BlockW, s.BlockH, s.Len(), tiles.DefaultBudget)
	return tiles.NewGrid(s.Width, s.Height, w, h)
}

// BasisBands describes the stack's bands for a basis or partial file.
func BasisBands(s *raster.Stack) []transform.Band {
	out := make([]transform.Band, s.Len())
	for i, b := range s.Bands {
		out[i] = transform.Band{Name: b.Name, Source: b.Path, Index: b.Index, DataType: b.DataType,
			NoData: b.NoData, Scale: b.Scale, Offset: b.Offset, WavelengthNM: b.WavelengthNM, FWHMNM: b.FWHMNM}
		if b.Calibration != raster.CalibrateScale {
			out[i].Calibration = b.Calibration
		}
	}
	return out
}

// Fingerprints records every file of the stacks and their masks. GDAL
// virtual paths have no size or time to record.
func Fingerprints(stacks []*raster.Stack) ([]transform.Fingerprint, error) {
	var out []transform.Fingerprint
	add := func(p string) error {
		if raster.IsVirtual(p) {
			out = append(out, transform.Fingerprint{Path: p, Size: -1})
			return nil
		}
		fp, err := transform.FileFingerprint(p)
		if err != nil {
			return fmt.Errorf("fingerprint of %s: %w", p, err)
		}
		out = append(out, fp)
		return nil
	}
	for _, s := range stacks {
		for _, p := range append(append([]string(nil), s.Paths...), s.Masks...) {
			if err := add(p); err != nil {
				return nil, err
			}
		}
	}
	return out, nil
}

// Describe names a stack for messages: its file, or for a stack of
// several files its label (the files' common name and the band range).
func Describe(s *raster.Stack) string {
	if len(s.Paths) == 1 || s.Label == "" {
		return strings.Join(s.Paths, ",")
	}
	return s.Label
}

// DescribeAll names several stacks for messages.
func DescribeAll(scenes []*raster.Stack) string {
	var names []string
	for _, s := range scenes {
		names = append(names, Describe(s))
	}
	return strings.Join(names, ", ")
}

// CheckPooled requires every scene to have the bands of the first, by
// count and, where named, by name in order; several one-band images are
// most likely one stack given without --stack. ignoreNames skips the
// names (--ignore-band-names).
func CheckPooled(scenes []*raster.Stack, ignoreNames bool) error {
	if len(scenes) > 1 {
		single := true
		for _, s := range scenes {
			single = single && s.Len() == 1
		}
		if single {
			return Usagef("the %d images have 1 band each: give --stack to read them as one stack of bands, or join them with commas", len(scenes))
		}
	}
	for _, s := range scenes[1:] {
		if s.Len() != scenes[0].Len() {
			return fmt.Errorf("%s has %d bands but %s has %d: pooled scenes need the same bands",
				Describe(s), s.Len(), Describe(scenes[0]), scenes[0].Len())
		}
		if ignoreNames {
			continue
		}
		if err := sameBandNames(Describe(s), BasisBands(s), Describe(scenes[0]), BasisBands(scenes[0])); err != nil {
			return err
		}
	}
	return nil
}

// NeedTwoBands refuses a stack with fewer than two selected bands, saying
// how many the files have when a selection made it so.
func NeedTwoBands(s *raster.Stack, sel []int) error {
	if s.Len() >= 2 {
		return nil
	}
	if len(sel) > 0 {
		all, err := raster.Open(s.Paths)
		if err != nil {
			return err
		}
		defer all.Close()
		return Usagef("%s has %d bands but --bands selects only 1: principal components need at least 2", Describe(s), all.Len())
	}
	return fmt.Errorf("%s has 1 band: principal components need at least 2 (stack single-band files with commas)", Describe(s))
}

// ArgPaths are the files named by IMAGE arguments and mask rules, for the
// same-file check that runs before anything is opened.
func ArgPaths(role string, args []string, masks []raster.MaskRule) []output.Path {
	var out []output.Path
	for _, a := range args {
		for _, p := range SplitStack(a) {
			out = append(out, output.Path{Role: role, Path: raster.ItemFile(p)})
		}
	}
	for _, m := range MaskPaths(masks) {
		out = append(out, output.Path{Role: "mask", Path: m})
	}
	return out
}

// DistinctFromStacks refuses outputs that are the same file as any file or
// mask of the stacks, or as each other.
func DistinctFromStacks(stacks []*raster.Stack, outs ...output.Path) error {
	var ins []output.Path
	for _, s := range stacks {
		for _, p := range s.Paths {
			ins = append(ins, output.Path{Role: "input", Path: p})
		}
		for _, m := range s.Masks {
			ins = append(ins, output.Path{Role: "mask", Path: m})
		}
		for _, f := range s.SideFiles() {
			ins = append(ins, output.Path{Role: "metadata file", Path: f})
		}
	}
	return output.Distinct(ins, outs)
}

// sameBandNames requires two band lists of one length to carry the same
// names in the same order, where both sides have real names: a reordered
// stack would otherwise pass with a silently wrong result.
func sameBandNames(haveName string, have []transform.Band, wantName string, want []transform.Band) error {
	var hs, ws []string
	differ := false
	for i := range have {
		hs = append(hs, have[i].Name)
		ws = append(ws, want[i].Name)
		// Names made up from the file name ("scene:3") say nothing about
		// the band, so they are not compared.
		if !autoNamed(have[i].Name, have[i].Source, have[i].Index) && !autoNamed(want[i].Name, want[i].Source, want[i].Index) {
			differ = differ || have[i].Name != want[i].Name
		}
	}
	if differ {
		return fmt.Errorf("%s has bands [%s] but %s has [%s]; give the bands in the same order, or pass --ignore-band-names if they match in order",
			haveName, strings.Join(hs, ", "), wantName, strings.Join(ws, ", "))
	}
	return nil
}

// BandCheck says how CheckBands compares: whether --bands made the
// selection, and whether names are compared.
type BandCheck struct{ Selected, IgnoreNames bool }

// CheckBands requires the image's bands to match the basis's, by count and,
// where both sides carry real names, by name in order.
func CheckBands(b *transform.Basis, basisPath string, s *raster.Stack, how BandCheck) error {
	if s.Len() != len(b.Bands) && how.Selected {
		return Usagef("--bands selects %d bands of %s but the basis %s has %d", s.Len(), Describe(s), basisPath, len(b.Bands))
	}
	if s.Len() != len(b.Bands) {
		hint := ""
		if s.Len() == 1 && len(b.Bands) > 1 {
			hint = " (give --stack, or join the band files with commas, to read one file per band as one stack)"
		}
		return fmt.Errorf("%s has %d bands but the basis %s has %d%s", Describe(s), s.Len(), basisPath, len(b.Bands), hint)
	}
	if how.IgnoreNames {
		return nil
	}
	return sameBandNames(Describe(s), BasisBands(s), "the basis "+basisPath, b.Bands)
}

// autoNamed reports whether name is the "<file stem>:<band>" name given to a
// band without a description.
func autoNamed(name, path string, index int) bool {
	return name == fmt.Sprintf("%s:%d", raster.Stem(path), index)
}
