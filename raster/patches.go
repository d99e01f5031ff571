package raster

/*
#include <stdlib.h>
#include <cpl_conv.h>
#include <cpl_error.h>
#include <gdal_alg.h>

// bandfoldGoOn is the sieve's progress callback: it stops GDAL once *arg
// is set.
static int bandfoldGoOn(double done, const char *msg, void *arg) {
	(void)done;
	(void)msg;
	return __atomic_load_n((int *)arg, __ATOMIC_RELAXED) == 0;
}

// bandfoldSieve runs GDAL's 8-connected sieve filter with errors kept off
// stderr; on failure *msg holds GDAL's message (free it with VSIFree).
static int bandfoldSieve(GDALRasterBandH src, GDALRasterBandH mask, GDALRasterBandH dst, int threshold, int *stop, char **msg) {
	CPLPushErrorHandler(CPLQuietErrorHandler);
	CPLErrorReset();
	CPLErr err = GDALSieveFilter(src, mask, dst, threshold, 8, NULL, bandfoldGoOn, stop);
	if (err != CE_None) {
		*msg = CPLStrdup(CPLGetLastErrorMsg());
	}
	CPLPopErrorHandler();
	return err;
}
*/
import "C"

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"sync"
	"sync/atomic"
	"unsafe"

	"github.com/airbusgeo/godal"

	"bandfold/raster/output"
)

// Values of a change map.
const (
	flagNoChange uint8 = 0
	flagChange   uint8 = 1
	flagNoData   uint8 = 255
)

// Bands of a ChangeMask's MEM dataset (0-based).
const (
	maskRaw    = 0 // flags as written
	maskTop    = 1 // top component, 1-based; 0 for none
	maskSieved = 2 // flags after Sieve
)

// ChangeMask is an in-memory (GDAL MEM) uint8 change map of a grid: 1 change,
// 0 no change, 255 nodata, plus a second uint8 band with the top component
// (1-based; 0 for none) per pixel, and a third that receives the sieved
// map. It takes 3 bytes per pixel. Fill it tile by tile from one goroutine:
// a ChangeMask is not safe for concurrent use. (It is not named Mask: that
// is the Open option naming a validity mask file.)
type ChangeMask struct {
	grid   Grid
	ds     *godal.Dataset
	path   string // the scratch file of NewMaskFile, "" in memory
	sieved bool
	final  bool // Patches used the raw band: the map can only be read
}

// errFinal refuses to change or re-sieve a map whose patches were written.
var errFinal = errors.New("the change map is final once its patches are written")

// NewMask returns an empty change map of grid g (all pixels 0), held in
// memory (3 bytes a pixel).
func NewMask(g Grid) (*ChangeMask, error) {
	ds, err := newMem(g, 3)
	if err != nil {
		return nil, fmt.Errorf("change map in memory (%dx%d): %w", g.Width, g.Height, err)
	}
	return newMask(g, ds, "")
}

func newMask(g Grid, ds *godal.Dataset, path string) (*ChangeMask, error) {
	if err := georeference(ds, g); err != nil {
		ds.Close(errLogger)
		return nil, errors.Join(fmt.Errorf("change map: %w", err), removeScratch(path))
	}
	// 255 is nodata: the sieve's mask leaves those pixels out.
	for _, b := range []int{maskRaw, maskSieved} {
		if err := ds.Bands()[b].SetNoData(float64(flagNoData), errLogger); err != nil {
			ds.Close(errLogger)
			return nil, errors.Join(fmt.Errorf("change map: %w", err), removeScratch(path))
		}
	}
	return &ChangeMask{grid: g, ds: ds, path: path}, nil
}

// Write writes the flags (0, 1 or 255) and top components of window (x, y,
// w, h), row by row, w*h values each. It undoes an earlier Sieve: sieve
// again once the map is complete.
func (m *ChangeMask) Write(x, y, w, h int, flags, top []uint8) error {
	if err := checkWindow(m.grid, x, y, w, h, len(flags), len(top)); err != nil {
		return fmt.Errorf("write change map: %w", err)
	}
	if m.final {
		return fmt.Errorf("write change map: %w", errFinal)
	}
	m.sieved = false
	bands := m.ds.Bands()
	if err := bands[maskRaw].Write(x, y, flags, w, h, errLogger); err != nil {
		return fmt.Errorf("write change map at %d,%d: %w", x, y, err)
	}
	if err := bands[maskTop].Write(x, y, top, w, h, errLogger); err != nil {
		return fmt.Errorf("write top components at %d,%d: %w", x, y, err)
	}
	return nil
}

// Sieve removes patches smaller than minPixels: SieveContext without
// cancellation.
func (m *ChangeMask) Sieve(minPixels int) error {
	return m.SieveContext(context.Background(), minPixels)
}

// SieveContext removes patches smaller than minPixels with GDAL's sieve
// filter, 8-connected, run on the in-memory map into a separate band: the
// raw flags stay readable with ReadRaw. Nodata (255) is masked out and kept.
//
// Patches of either class smaller than minPixels are merged into their
// largest neighbour: small change patches vanish into no change, and small
// holes of no change inside change patches fill. A small patch whose only
// neighbours are nodata or other small patches is kept as it is.
// minPixels <= 1 copies the map unchanged.
//
// Cancelling ctx stops GDAL at its next progress report (every row) and
// returns ctx's error; the map then reads as if Sieve had not run.
func (m *ChangeMask) SieveContext(ctx context.Context, minPixels int) error {
	if m.final {
		return fmt.Errorf("sieve: %w", errFinal)
	}
	m.sieved = false
	bands := m.ds.Bands()
	if minPixels <= 1 {
		if err := ctx.Err(); err != nil {
			return fmt.Errorf("sieve: %w", err)
		}
		if err := m.mapBand(bands[maskRaw], bands[maskSieved], nil); err != nil {
			return fmt.Errorf("sieve: %w", err)
		}
		m.sieved = true
		return nil
	}
	// GDAL reads *stop at each progress report; a context already done
	// sets it before the first.
	stop := (*C.int)(C.calloc(1, C.sizeof_int))
	var mu sync.Mutex // guards stop against a late cancellation
	release := context.AfterFunc(ctx, func() {
		mu.Lock()
		defer mu.Unlock()
		if stop != nil {
			atomic.StoreInt32((*int32)(unsafe.Pointer(stop)), 1)
		}
	})
	defer func() {
		release()
		mu.Lock()
		defer mu.Unlock()
		C.free(unsafe.Pointer(stop))
		stop = nil
	}()
	if ctx.Err() != nil {
		atomic.StoreInt32((*int32)(unsafe.Pointer(stop)), 1)
	}
	var msg *C.char
	rc := C.bandfoldSieve(bandHandle(bands[maskRaw]), bandHandle(bands[maskRaw].MaskBand()), bandHandle(bands[maskSieved]), C.int(minPixels), stop, &msg)
	if rc != C.CE_None {
		text := C.GoString(msg)
		C.VSIFree(unsafe.Pointer(msg))
		if err := ctx.Err(); err != nil {
			return fmt.Errorf("sieve: %w", err)
		}
		return fmt.Errorf("sieve: %s", firstLine(text))
	}
	m.sieved = true
	return nil
}

// Read reads the map of window (x, y, w, h) into dst (w*h values, row by
// row): the sieved map once Sieve ran, the raw one before.
func (m *ChangeMask) Read(x, y, w, h int, dst []uint8) error {
	return m.read(m.current(), x, y, w, h, dst)
}

// ReadRaw reads the flags as written, sieved or not.
func (m *ChangeMask) ReadRaw(x, y, w, h int, dst []uint8) error {
	if m.final {
		return fmt.Errorf("read change map: %w", errFinal)
	}
	return m.read(maskRaw, x, y, w, h, dst)
}

func (m *ChangeMask) current() int {
	if m.sieved {
		return maskSieved
	}
	return maskRaw
}

func (m *ChangeMask) read(band, x, y, w, h int, dst []uint8) error {
	if err := checkWindow(m.grid, x, y, w, h, len(dst)); err != nil {
		return fmt.Errorf("read change map: %w", err)
	}
	if err := m.ds.Bands()[band].Read(x, y, dst, w, h, errLogger); err != nil {
		return fmt.Errorf("read change map at %d,%d: %w", x, y, err)
	}
	return nil
}

// Close releases the map's memory and removes its scratch file.
func (m *ChangeMask) Close() error {
	if m.ds == nil {
		return nil
	}
	err := m.ds.Close(errLogger)
	m.ds = nil
	return errors.Join(err, removeScratch(m.path))
}

// mapBand copies band from into band to of the map's grid, strip by strip,
// through f when not nil.
func (m *ChangeMask) mapBand(from, to godal.Band, f func(uint8) uint8) error {
	w := m.grid.Width
	buf := make([]uint8, w*stripRows(w))
	return strips(m.grid.Height, w, func(y, rows int) error {
		b := buf[:w*rows]
		if err := from.Read(0, y, b, w, rows, errLogger); err != nil {
			return err
		}
		if f != nil {
			for i, v := range b {
				b[i] = f(v)
			}
		}
		return to.Write(0, y, b, w, rows, errLogger)
	})
}

// PatchOptions are the options of Patches.
type PatchOptions struct {
	// Magnitude is the change statistic raster on the map's grid.
	Magnitude string
	// Overwrite allows replacing an existing file.
	Overwrite bool
	// Metadata is written as the layer's metadata (default domain).
	Metadata map[string]string
	// Before and After are the dates of the two scenes, written into the
	// Date fields date_before and date_after of every patch; a field
	// whose date is unknown (zero) is left out.
	Before, After Date
}

// PatchSummary sums up the patches written by Patches.
type PatchSummary struct {
	// Count is the number of patches (polygons).
	Count int
	// AreaM2 is the sum of their ground areas (m²); NaN without a CRS.
	AreaM2 float64
}

// Patches polygonizes the change patches (value 1) of the map, sieved if
// Sieve ran (the map is then final: Read still works, Write, SetMapped,
// Sieve and ReadRaw return an error), with GDAL's polygonize, 8-connected,
// and writes a GeoPackage at
// path (an output.File: written under a temporary name beside it and
// renamed on success; it refuses an existing path unless overwrite, also
// one that appears while it writes), layer "changes", polygons in
// the grid's CRS, fields:
//
//   - area_m2 (Real): ground area, PolygonArea's geodesic polygon area
//     (PROJ); null when the grid has no CRS.
//
//   - area_ha (Real): the same in hectares.
//
//   - z_mean, z_max (Real): mean and maximum of magnitude over the patch's
//     valid pixels (not nodata, not NaN); null when there are none.
//
//   - top_component (Integer): the most frequent top component (1-based)
//     over the patch's pixels, the smallest on ties; pixels with top
//     component 0 (filled holes) or 255 are not counted; null when none is
//     left.
//
//   - date_before, date_after (Date): o.Before and o.After, when known; a
//     date known to the year only is written as 1 January of it, as
//     first-change.tif does.
//
// The layer carries o.Metadata as GDAL layer metadata (the provenance of the
// map: dates, settings, tool version, caution).
//
// o.Magnitude is a raster file on the same grid (band 1 is used), such as
// the magnitude.tif just written. Per patch, its polygon is rasterised over
// its bounding window (pixel centres inside) and that window of magnitude
// and of the top band is read.
func (m *ChangeMask) Patches(path string, o PatchOptions) (PatchSummary, error) {
	sums, err := writePatches(path, o, []string{"date_before", "date_after"}, []patchMap{{PatchStep{Mask: m, Band: 1}, []Date{o.Before, o.After}}})
	if err != nil {
		return PatchSummary{AreaM2: math.NaN()}, err
	}
	return sums[0], nil
}

// patchMap is a map to polygonize with the dates of its fields.
type patchMap struct {
	PatchStep
	dates []Date // one per date field
}

// writePatches polygonizes the maps of steps into one GeoPackage at path,
// layer "changes", each step's polygons with its dates in the Date fields
// named by fields (a field no step has a date for is left out) and its Z
// from its band of o.Magnitude.
func writePatches(path string, o PatchOptions, fields []string, steps []patchMap) ([]PatchSummary, error) {
	if err := output.Check(path, o.Overwrite); err != nil {
		return nil, err
	}
	mag, err := openDataset(o.Magnitude)
	if err != nil {
		return nil, fmt.Errorf("magnitude %w", err)
	}
	defer mag.Close(errLogger)
	g := steps[0].Mask.grid
	if err := g.Compare(gridOf(mag)); err != nil {
		return nil, fmt.Errorf("magnitude %s is not on the grid of the change map: %w", o.Magnitude, err)
	}
	var ea *geodesy
	if g.Projection != "" {
		if ea, err = newGeodesy(g.Projection); err != nil {
			return nil, fmt.Errorf("patches for %s: %w", path, err)
		}
		defer ea.Close()
	}
	out, err := newPatchFile(path, g.Projection, o, datedFields(fields, steps))
	if err != nil {
		return nil, err
	}
	defer out.discard()
	sums := make([]PatchSummary, len(steps))
	for i, st := range steps {
		if sums[i], err = out.addMap(st, mag, ea); err != nil {
			return nil, fmt.Errorf("write %s: %w", path, tidy(err))
		}
	}
	if err := out.commit(); err != nil {
		return nil, err
	}
	return sums, nil
}

// datedFields returns the fields some step has a date for, and keeps in
// each step only the dates of those.
func datedFields(fields []string, steps []patchMap) []string {
	var dated []string
	var keep []int
	for i, f := range fields {
		if slices.ContainsFunc(steps, func(st patchMap) bool { return !st.dates[i].Time.IsZero() }) {
			dated, keep = append(dated, f), append(keep, i)
		}
	}
	for j := range steps {
		kept := make([]Date, len(keep))
		for k, i := range keep {
			kept[k] = steps[j].dates[i]
		}
		steps[j].dates = kept
	}
	return dated
}

// addMap polygonizes one map and writes its patches.
func (p *patchFile) addMap(st patchMap, mag *godal.Dataset, ea *geodesy) (PatchSummary, error) {
	sum := PatchSummary{AreaM2: math.NaN()}
	if ea != nil {
		sum.AreaM2 = 0
	}
	if st.Band < 1 || st.Band > len(mag.Bands()) {
		return sum, fmt.Errorf("magnitude band %d of %d", st.Band, len(mag.Bands()))
	}
	polys, err := st.Mask.polygonize()
	if err != nil {
		return sum, err
	}
	defer polys.Close(errLogger)
	zs := patchStats{m: st.Mask, mag: mag.Bands()[st.Band-1]}
	zs.nodata, zs.hasND = zs.mag.NoData()
	p.dates = st.dates
	src := polys.Layers()[0]
	for f := src.NextFeature(); f != nil; f = src.NextFeature() {
		area, err := p.add(f.Geometry(), &zs, ea)
		f.Close()
		if err != nil {
			return sum, err
		}
		sum.Count++
		sum.AreaM2 += area
	}
	return sum, nil
}

// polygonize returns an OGR Memory dataset whose one layer holds the
// polygons of the map's change patches.
func (m *ChangeMask) polygonize() (*godal.Dataset, error) {
	// Once sieved, the raw map is not needed again: it holds the 0/1 copy
	// GDAL polygonizes (a full-grid band less in memory), and the map is
	// final from then on.
	band := m.ds.Bands()[maskRaw]
	if !m.sieved {
		chg, err := newMem(m.grid, 1)
		if err != nil {
			return nil, err
		}
		defer chg.Close(errLogger)
		band = chg.Bands()[0]
	} else {
		m.final = true
	}
	isChange := func(v uint8) uint8 {
		if v == flagChange {
			return 1
		}
		return 0
	}
	if err := m.mapBand(m.ds.Bands()[m.current()], band, isChange); err != nil {
		return nil, err
	}
	vec, err := godal.CreateVector(godal.Memory, "", errLogger)
	if err != nil {
		return nil, err
	}
	layer, err := vec.CreateLayer("patches", nil, godal.GTPolygon, errLogger)
	if err == nil {
		// The band is its own mask: only change pixels make polygons.
		err = band.Polygonize(layer, godal.Mask(band), godal.EightConnected(), errLogger)
	}
	if err != nil {
		vec.Close(errLogger)
		return nil, fmt.Errorf("polygonize: %w", err)
	}
	return vec, nil
}

// patchStats reads magnitude and top components under patches.
type patchStats struct {
	m      *ChangeMask
	mag    godal.Band
	nodata float64
	hasND  bool
	burn   []uint8
	z      []float64
	top    []uint8
}

type patchZ struct {
	n        int
	sum, max float64
	top      int
}

// of rasterises geom over its bounding window, strip by strip, and sums up
// magnitude and top components under it.
func (s *patchStats) of(geom *godal.Geometry) (patchZ, error) {
	out := patchZ{max: math.Inf(-1)}
	bb, err := geom.Bounds()
	if err != nil {
		return out, err
	}
	g := s.m.grid
	if !g.HasGeoTransform {
		// GDAL's default, which polygonize used: pixel coordinates.
		g.GeoTransform, g.HasGeoTransform = [6]float64{0, 1, 0, 0, 0, 1}, true
	}
	x0, y0, x1, y1, err := pixelWindow(g, bb)
	if err != nil {
		return out, err
	}
	w := x1 - x0
	var counts [256]int
	err = strips(y1-y0, w, func(dy, rows int) error {
		n, y := w*rows, y0+dy
		win := Grid{Width: w, Height: rows, HasGeoTransform: true, GeoTransform: g.GeoTransform}
		win.GeoTransform[0], win.GeoTransform[3] = applyGT(g.GeoTransform, float64(x0), float64(y))
		mem, err := newMem(win, 1)
		if err != nil {
			return err
		}
		defer mem.Close(errLogger)
		if err := mem.RasterizeGeometry(geom, godal.Values(1), errLogger); err != nil {
			return fmt.Errorf("rasterize patch: %w", err)
		}
		s.burn, s.z, s.top = grow(s.burn, n), grow(s.z, n), grow(s.top, n)
		if err := mem.Bands()[0].Read(0, 0, s.burn, w, rows, errLogger); err != nil {
			return err
		}
		if err := s.mag.Read(x0, y, s.z, w, rows, errLogger); err != nil {
			return fmt.Errorf("read magnitude at %d,%d: %w", x0, y, err)
		}
		if err := s.m.ds.Bands()[maskTop].Read(x0, y, s.top, w, rows, errLogger); err != nil {
			return fmt.Errorf("read top components at %d,%d: %w", x0, y, err)
		}
		for i, b := range s.burn {
			if b == 0 {
				continue
			}
			counts[s.top[i]]++
			if z := s.z[i]; z == z && !(s.hasND && z == s.nodata) {
				out.n++
				out.sum += z
				out.max = max(out.max, z)
			}
		}
		return nil
	})
	for c := 1; c < int(flagNoData); c++ {
		if counts[c] > 0 && (out.top == 0 || counts[c] > counts[out.top]) {
			out.top = c
		}
	}
	return out, err
}

// pixelWindow returns the window of whole pixels x0 <= col < x1,
// y0 <= row < y1 of g covering the georeferenced box bb (minx, miny, maxx,
// maxy), clipped to the grid. Box edges within 1e-6 pixel of a pixel edge
// count as on it.
func pixelWindow(g Grid, bb [4]float64) (x0, y0, x1, y1 int, err error) {
	gt := g.GeoTransform
	det := gt[1]*gt[5] - gt[2]*gt[4]
	if det == 0 {
		return 0, 0, 0, 0, errors.New("the grid's geotransform cannot be inverted")
	}
	minC, minR, maxC, maxR := math.Inf(1), math.Inf(1), math.Inf(-1), math.Inf(-1)
	for _, p := range [][2]float64{{bb[0], bb[1]}, {bb[0], bb[3]}, {bb[2], bb[1]}, {bb[2], bb[3]}} {
		dx, dy := p[0]-gt[0], p[1]-gt[3]
		c, r := (gt[5]*dx-gt[2]*dy)/det, (gt[1]*dy-gt[4]*dx)/det
		minC, maxC, minR, maxR = min(minC, c), max(maxC, c), min(minR, r), max(maxR, r)
	}
	clamp := func(v float64, hi int) int { return max(0, min(hi, int(v))) }
	x0, x1 = clamp(math.Floor(minC+1e-6), g.Width), clamp(math.Ceil(maxC-1e-6), g.Width)
	y0, y1 = clamp(math.Floor(minR+1e-6), g.Height), clamp(math.Ceil(maxR-1e-6), g.Height)
	return x0, y0, x1, y1, nil
}

// newMem returns a GDAL MEM dataset of Byte bands on grid g.
func newMem(g Grid, bands int) (*godal.Dataset, error) {
	ds, err := godal.Create(godal.Memory, "", bands, godal.Byte, g.Width, g.Height, errLogger)
	if err != nil {
		return nil, err
	}
	if err := georeference(ds, g); err != nil {
		ds.Close(errLogger)
		return nil, err
	}
	return ds, nil
}

// georeference gives ds the geotransform and projection of g, where g has them.
func georeference(ds *godal.Dataset, g Grid) error {
	if g.HasGeoTransform {
		if err := ds.SetGeoTransform(g.GeoTransform, errLogger); err != nil {
			return err
		}
	}
	if g.Projection != "" {
		return ds.SetProjection(g.Projection, errLogger)
	}
	return nil
}

// stripRows is the number of rows of width w in a strip of about 1 MiB.
func stripRows(w int) int { return max(1, (1<<20)/max(1, w)) }

// strips calls fn for consecutive strips of rows of an h-row window of
// width w, each about 1 MiB of pixels, stopping at the first error.
func strips(h, w int, fn func(y, rows int) error) error {
	step := stripRows(w)
	for y := 0; y < h; y += step {
		if err := fn(y, min(step, h-y)); err != nil {
			return err
		}
	}
	return nil
}

// checkWindow checks that window (x, y, w, h) lies in g and that buffers
// of the given lengths hold its w*h values.
func checkWindow(g Grid, x, y, w, h int, lens ...int) error {
	if x < 0 || y < 0 || w <= 0 || h <= 0 || x+w > g.Width || y+h > g.Height {
		return fmt.Errorf("window %d,%d %dx%d outside the %dx%d grid", x, y, w, h, g.Width, g.Height)
	}
	for _, n := range lens {
		if n < w*h {
			return fmt.Errorf("buffer of %d values for a %dx%d window", n, w, h)
		}
	}
	return nil
}

// grow returns buf resliced to n values, reallocated when too small.
func grow[T any](buf []T, n int) []T {
	if cap(buf) < n {
		return make([]T, n)
	}
	return buf[:n]
}
