package raster

import (
	"errors"
	"fmt"

	"github.com/airbusgeo/godal"
)

// Reference reads reference change data for accuracy assessment on a grid.
//
// A Reference on a raster file holds a GDAL handle: use it from one
// goroutine, and open one per worker. On a vector file it holds the
// polygons rasterised onto the grid when it was opened, W*H bytes of its
// own, freed by Close; open it once and share its reads where memory counts.
type Reference struct {
	path   string
	grid   Grid
	ds     *godal.Dataset // raster reference
	nodata float64
	hasND  bool
	buf    []float64
	burned []uint8 // vector reference: flags row by row
}

// OpenReference returns a reader for reference change data on grid g:
// either a raster on the same grid (band 1; non-zero = changed; its nodata,
// if any, and NaN = unknown) or a vector file of changed polygons (any OGR
// format: GPKG, GeoJSON, Shapefile ...; every layer is used), rasterised with
// GDAL onto g in memory: a pixel is changed when its centre lies in a
// polygon (all-touched off). Polygons in another CRS are reprojected by
// GDAL; a layer without a CRS is taken to be in g's. A raster of several
// bands, or a layer of points or lines, is refused: it is not clear what it
// says of change. A raster on another
// grid is an error naming the file and wrapping ErrGridMismatch. A file that
// is both (a GeoPackage with tiles and features) is read as a raster.
func OpenReference(path string, g Grid) (*Reference, error) {
	ds, err := openDataset(path)
	switch {
	case err == nil:
		if err := g.Compare(gridOf(ds)); err != nil {
			ds.Close(errLogger)
			return nil, fmt.Errorf("reference %s is not on the grid of the images: %w", path, err)
		}
		if n := len(ds.Bands()); n != 1 {
			ds.Close(errLogger)
			return nil, fmt.Errorf("reference %s has %d bands: give one band of reference change (non-zero = changed), for example gdal_translate -b 1", path, n)
		}
		r := &Reference{path: path, grid: g, ds: ds}
		r.nodata, r.hasND = ds.Bands()[0].NoData()
		return r, nil
	case errors.Is(err, ErrNotRaster):
		pixels, err := rasterizeVector(path, g)
		if err != nil {
			return nil, err
		}
		return &Reference{path: path, grid: g, burned: pixels}, nil
	default:
		return nil, fmt.Errorf("reference %w", err)
	}
}

// Read fills dst (w*h values, row by row) with 1 changed, 0 unchanged, 255
// unknown for window (x, y, w, h).
func (r *Reference) Read(x, y, w, h int, dst []uint8) error {
	if err := checkWindow(r.grid, x, y, w, h, len(dst)); err != nil {
		return fmt.Errorf("read reference %s: %w", r.path, err)
	}
	if r.ds == nil && r.burned == nil {
		return fmt.Errorf("read reference %s: closed", r.path)
	}
	if r.burned != nil {
		for row := range h {
			off := (y+row)*r.grid.Width + x
			copy(dst[row*w:row*w+w], r.burned[off:off+w])
		}
		return nil
	}
	r.buf = grow(r.buf, w*h)
	if err := r.ds.Bands()[0].Read(x, y, r.buf, w, h, errLogger); err != nil {
		return fmt.Errorf("read reference %s at %d,%d: %w", r.path, x, y, err)
	}
	for i, v := range r.buf {
		switch {
		case v != v || (r.hasND && v == r.nodata):
			dst[i] = flagNoData
		case v != 0:
			dst[i] = flagChange
		default:
			dst[i] = flagNoChange
		}
	}
	return nil
}

// Close releases the reader's GDAL handle or its rasterised polygons.
func (r *Reference) Close() error {
	var err error
	if r.ds != nil {
		err = r.ds.Close(errLogger)
		r.ds = nil
	}
	r.burned = nil
	return err
}

// rasterizeVector burns every layer of the vector file at path onto g.
func rasterizeVector(path string, g Grid) ([]uint8, error) {
	vds, err := godal.Open(path, godal.VectorOnly(), errLogger)
	if err != nil {
		return nil, fmt.Errorf("reference %s: neither a raster nor a vector file GDAL can read: %w", path, ErrNotRaster)
	}
	defer vds.Close(errLogger)
	if !g.HasGeoTransform {
		return nil, fmt.Errorf("reference %s: the images have no geotransform to rasterise polygons on", path)
	}
	sw := []string{"-burn", "1"}
	for _, l := range vds.Layers() {
		if kind := nonAreal(l.Type()); kind != "" {
			return nil, fmt.Errorf("reference %s: layer %s holds %s, not polygons of changed areas", path, l.Name(), kind)
		}
		sw = append(sw, "-l", l.Name())
	}
	if len(sw) == 2 {
		return nil, fmt.Errorf("reference %s: no layer", path)
	}
	mem, err := newMem(g, 1)
	if err != nil {
		return nil, fmt.Errorf("reference %s: rasterise: %w", path, err)
	}
	defer mem.Close(errLogger)
	if err := mem.RasterizeInto(vds, sw, errLogger); err != nil {
		return nil, fmt.Errorf("reference %s: rasterise: %s", path, firstLine(err.Error()))
	}
	pixels := make([]uint8, g.Width*g.Height)
	if err := mem.Bands()[0].Read(0, 0, pixels, g.Width, g.Height, errLogger); err != nil {
		return nil, fmt.Errorf("reference %s: rasterise: %w", path, err)
	}
	return pixels, nil
}

// nonAreal names the geometries of a layer type that cover no area ("" for
// polygons and for types that may hold them).
func nonAreal(t godal.GeometryType) string {
	switch t {
	case godal.GTPoint, godal.GTPoint25D, godal.GTMultiPoint, godal.GTMultiPoint25D:
		return "points"
	case godal.GTLineString, godal.GTLineString25D, godal.GTMultiLineString, godal.GTMultiLineString25D, godal.GTLinearRing:
		return "lines"
	case godal.GTNone:
		return "no geometry"
	}
	return ""
}
