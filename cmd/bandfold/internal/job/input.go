package job

import (
	"errors"
	"fmt"
	"strings"

	"bandfold/raster"
	"bandfold/tiles"
	"bandfold/transform"
)

// Input says how to read the input images: which bands, what is invalid,
// and how to tile them.
type Input struct {
	// Bands are 1-based band numbers of the stack; nil means all.
	Bands []int
	// NoData overrides the files' nodata: one value for all bands, or one
	// per selected band; nil keeps the files'.
	NoData []float64
	// Masks are validity masks on the image grid (non-zero = valid); a
	// pixel must pass all.
	Masks []string
	// Tile is the side of square tiles; 0 aligns tiles to the file's
	// blocks, about tiles.DefaultBudget bytes of float64 per tile.
	Tile int
}

// check refuses option values that cannot be right.
func (in Input) check() error {
	if in.Tile < 0 {
		return Usagef("--tile %d: must be positive", in.Tile)
	}
	return nil
}

// options turns Input into raster options; extra masks come last.
func (in Input) options(extraMasks ...string) []raster.Option {
	opts := []raster.Option{raster.SelectBands(in.Bands), raster.NoData(in.NoData)}
	for _, m := range append(append([]string(nil), in.Masks...), extraMasks...) {
		if m != "" {
			opts = append(opts, raster.Mask(m))
		}
	}
	return opts
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

// openImage opens one IMAGE argument as a stack.
func openImage(arg string, opts []raster.Option) (*raster.Stack, error) {
	paths := SplitStack(arg)
	if len(paths) == 0 {
		return nil, Usagef("empty image argument %q", arg)
	}
	return openStack(paths, opts)
}

// openStack opens paths as one stack. A band selection, nodata list or mask
// rule that does not fit the files is a usage error: the flag is wrong, not
// the data.
func openStack(paths []string, opts []raster.Option) (*raster.Stack, error) {
	s, err := raster.Open(paths, opts...)
	switch {
	case err == nil:
		return s, nil
	case errors.Is(err, raster.ErrBandRange):
		return nil, usage(err)
	case errors.Is(err, raster.ErrBadSpec):
		if name := strings.Join(paths, ","); !strings.Contains(err.Error(), paths[0]) {
			err = fmt.Errorf("%s: %w", name, err)
		}
		return nil, usage(err)
	}
	return nil, err
}

// gridFor returns the tile grid over s: N x N tiles when tile > 0, otherwise
// tiles aligned to the file's blocks.
func gridFor(s *raster.Stack, tile int) tiles.Grid {
	if tile > 0 {
		return tiles.NewGrid(s.Width, s.Height, tile, tile)
	}
	w, h := tiles.SizeFor(s.Width, s.Height, s.BlockW, s.BlockH, s.Len(), tiles.DefaultBudget)
	return tiles.NewGrid(s.Width, s.Height, w, h)
}

// basisBands describes the stack's bands for a basis or partial file.
func basisBands(s *raster.Stack) []transform.Band {
	out := make([]transform.Band, s.Len())
	for i, b := range s.Bands {
		out[i] = transform.Band{Name: b.Name, Source: b.Path, Index: b.Index, DataType: b.DataType,
			NoData: b.NoData, Scale: b.Scale, Offset: b.Offset}
	}
	return out
}

// fingerprints records every file of the stacks and their masks. GDAL
// virtual paths have no size or time to record.
func fingerprints(stacks []*raster.Stack) ([]transform.Fingerprint, error) {
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

// describe names a stack for messages.
func describe(s *raster.Stack) string { return strings.Join(s.Paths, ",") }

// describeAll names several stacks for messages.
func describeAll(scenes []*raster.Stack) string {
	var names []string
	for _, s := range scenes {
		names = append(names, describe(s))
	}
	return strings.Join(names, ", ")
}

// checkBandCounts requires every scene to have the band count of the first.
func checkBandCounts(scenes []*raster.Stack) error {
	for _, s := range scenes[1:] {
		if s.Len() != scenes[0].Len() {
			return fmt.Errorf("%s has %d bands but %s has %d: pooled scenes need the same bands",
				describe(s), s.Len(), describe(scenes[0]), scenes[0].Len())
		}
	}
	return nil
}

// needTwoBands refuses a stack with fewer than two selected bands, saying
// how many the files have when a selection made it so.
func needTwoBands(s *raster.Stack, sel []int) error {
	if s.Len() >= 2 {
		return nil
	}
	if len(sel) > 0 {
		all, err := raster.Open(s.Paths)
		if err != nil {
			return err
		}
		defer all.Close()
		return Usagef("%s has %d bands but --bands selects only 1: principal components need at least 2", describe(s), all.Len())
	}
	return fmt.Errorf("%s has 1 band: principal components need at least 2 (stack single-band files with commas)", describe(s))
}
