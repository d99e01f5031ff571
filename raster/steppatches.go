package raster

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"

	"github.com/airbusgeo/godal"
)

// PatchStep is one map of a series for WriteStepPatches.
type PatchStep struct {
	Mask *ChangeMask
	// Band is the 1-based band of the magnitude raster holding this
	// map's change statistic.
	Band int
	// Date fills the Date field "date" of the map's patches (left out
	// when no map has a date).
	Date Date
}

// WriteStepPatches polygonizes the change patches (value 1) of several maps
// on one grid into one GeoPackage at path, as Patches does for one map, with
// each map's date in the Date field "date" and z_mean and z_max from its
// band of o.Magnitude (o.Before and o.After are not used). It returns each map's summary.
func WriteStepPatches(path string, o PatchOptions, steps []PatchStep) ([]PatchSummary, error) {
	if len(steps) == 0 {
		panic("raster: WriteStepPatches without maps")
	}
	for _, st := range steps[1:] {
		if err := steps[0].Mask.grid.Compare(st.Mask.grid); err != nil {
			return nil, fmt.Errorf("patches for %s: maps on different grids: %w", path, err)
		}
	}
	maps := make([]patchMap, len(steps))
	for i, st := range steps {
		maps[i] = patchMap{st, []Date{st.Date}}
	}
	return writePatches(path, o, []string{"date"}, maps)
}

// SetMapped replaces the map of window (x, y, w, h) (the sieved map once
// Sieve ran, the raw one before) with flags (0, 1 or 255), for example to
// keep only the patches a later rule confirms before Patches.
func (m *ChangeMask) SetMapped(x, y, w, h int, flags []uint8) error {
	if err := checkWindow(m.grid, x, y, w, h, len(flags)); err != nil {
		return fmt.Errorf("write change map: %w", err)
	}
	if m.final {
		return fmt.Errorf("write change map: %w", errFinal)
	}
	if err := m.ds.Bands()[m.current()].Write(x, y, flags, w, h, errLogger); err != nil {
		return fmt.Errorf("write change map at %d,%d: %w", x, y, err)
	}
	return nil
}

// NewMaskFile returns an empty change map of grid g held in a scratch
// GeoTIFF at path (uncompressed, in strips, read and written through GDAL's
// block cache), with a band more for the job's marks (WriteMarks), for
// jobs that keep many maps at once or maps of large grids: memory then
// grows neither with their number nor with the grid, as GDAL's sieve and
// polygonize read the map row by row. Its reads go through the block cache too
// (no GTIFF_DIRECT_IO): the sieve's rows are then read from memory, twice
// as fast on a 21960 x 21960 map. Close removes the file.
func NewMaskFile(g Grid, path string) (*ChangeMask, error) {
	ds, err := godal.Create(godal.GTiff, path, maskMarks+1, godal.Byte, g.Width, g.Height,
		godal.CreationOption("COMPRESS=NONE", "INTERLEAVE=BAND", "SPARSE_OK=TRUE", "BIGTIFF=IF_SAFER"), godal.ConfigOption("GTIFF_DIRECT_IO=NO"), errLogger)
	if err != nil {
		return nil, fmt.Errorf("change map %s (%dx%d): %w", path, g.Width, g.Height, err)
	}
	return newMask(g, ds, path)
}

// maskMarks is the band of a map on file (NewMaskFile) that holds a byte
// of the job's own per pixel (WriteMarks, ReadMarks), 0-based.
const maskMarks = 3

// errNoMarks refuses marks on a map in memory.
var errNoMarks = errors.New("only a change map on file (NewMaskFile) holds marks")

// WriteMarks writes a byte of the job's own per pixel of window (x, y, w,
// h), row by row, into the map's file beside its flags: for example
// whether a later rule confirms each flag, kept on disk rather than in
// memory for every map of a series. Sieve and Patches leave the marks as
// they are. Only a map made by NewMaskFile has marks.
func (m *ChangeMask) WriteMarks(x, y, w, h int, marks []uint8) error {
	if err := checkWindow(m.grid, x, y, w, h, len(marks)); err != nil {
		return fmt.Errorf("write marks: %w", err)
	}
	if m.path == "" {
		return fmt.Errorf("write marks: %w", errNoMarks)
	}
	if err := m.ds.Bands()[maskMarks].Write(x, y, marks, w, h, errLogger); err != nil {
		return fmt.Errorf("write marks at %d,%d: %w", x, y, err)
	}
	return nil
}

// ReadMarks reads the marks of window (x, y, w, h) into dst (w*h values,
// row by row): 0 where none were written.
func (m *ChangeMask) ReadMarks(x, y, w, h int, dst []uint8) error {
	if m.path == "" {
		return fmt.Errorf("read marks: %w", errNoMarks)
	}
	return m.read(maskMarks, x, y, w, h, dst)
}

// removeScratch removes a scratch file, if there is one; a file already gone
// is not an error.
func removeScratch(path string) error {
	if path == "" {
		return nil
	}
	if err := os.Remove(path); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	return nil
}

// SieveAgain applies the minimum mapping unit to the map as it now reads
// (after SetMapped kept only some of its flags): that map becomes the raw
// flags and is sieved again, so that no patch left smaller than minPixels
// survives a later selection of flags.
func (m *ChangeMask) SieveAgain(ctx context.Context, minPixels int) error {
	if m.final {
		return fmt.Errorf("sieve: %w", errFinal)
	}
	bands := m.ds.Bands()
	if m.sieved {
		if err := m.mapBand(bands[maskSieved], bands[maskRaw], nil); err != nil {
			return fmt.Errorf("sieve: %w", err)
		}
	}
	return m.SieveContext(ctx, minPixels)
}
