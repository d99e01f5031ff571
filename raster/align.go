package raster

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync/atomic"

	"github.com/airbusgeo/godal"
)

// alignSeq numbers the warped VRTs of this process.
var alignSeq atomic.Uint64

// AlignTo returns a GDAL warped VRT of path on grid g, in /vsimem/, that
// workers open like any file (each its own handle), and a cleanup func that
// unlinks it. resampling is a gdalwarp -r name ("bilinear", "nearest",
// "cubic", ...). No pixel is copied: the VRT resamples on each read.
//
// Nodata is honoured on both sides, so resampling does not smear the nodata
// edge into false change: the warper leaves source nodata out of every
// kernel (-srcnodata), and destination pixels that no valid source pixel
// reaches are nodata (-dstnodata, which also makes GDAL start from nodata).
// When every band of the source has a nodata value, the VRT keeps the
// source's data type and those values. Otherwise it is Float32 (Float64 for
// sources of wider types, which Float32 would round) with NaN as nodata,
// bands that had a nodata value keeping it as source nodata: pixels outside
// the source read as NaN, which readers take as invalid. No alpha band is
// added.
//
// g must be north-up (no rotation, rows running south); a rotated grid is
// refused. A source without a CRS cannot go onto a grid with one. The VRT
// refers to the source by its absolute path.
func AlignTo(path string, g Grid, resampling string) (vrt string, cleanup func(), err error) {
	return alignTo(path, g, resampling, nil)
}

// alignTo is AlignTo with nodata values that override those of the source's
// (0-based) bands.
func alignTo(path string, g Grid, resampling string, overrides map[int]float64) (vrt string, cleanup func(), err error) {
	te, err := northUpBounds(g)
	if err != nil {
		return "", nil, fmt.Errorf("align %s: %w", path, err)
	}
	source := path
	if !IsVirtual(path) {
		if source, err = filepath.Abs(path); err != nil {
			return "", nil, fmt.Errorf("align %s: %w", path, err)
		}
	}
	src, err := openDataset(source)
	if err != nil {
		return "", nil, fmt.Errorf("align %w", err)
	}
	defer src.Close(errLogger)
	if g.Projection != "" && src.Projection() == "" {
		return "", nil, fmt.Errorf("align %s: it has no CRS, the target grid has %s", path, crsName(g.Projection))
	}
	sw := []string{"-of", "VRT", "-r", resampling,
		"-te", ftoa(te[0]), ftoa(te[1]), ftoa(te[2]), ftoa(te[3]),
		"-ts", strconv.Itoa(g.Width), strconv.Itoa(g.Height)}
	if g.Projection != "" {
		sw = append(sw, "-t_srs", g.Projection)
	}
	sw = append(sw, nodataSwitches(src.Bands(), overrides)...)

	name := fmt.Sprintf("/vsimem/bandfold/align-%d-%d-%s.vrt", os.Getpid(), alignSeq.Add(1), Stem(path))
	cleanup = func() {
		godal.VSIUnlink(name, errLogger)
		godal.VSIUnlink(name+".aux.xml", errLogger)
	}
	out, err := godal.Warp(name, []*godal.Dataset{src}, sw, errLogger)
	if err != nil {
		cleanup()
		return "", nil, fmt.Errorf("align %s: %s", path, firstLine(err.Error()))
	}
	got := gridOf(out)
	// Closing writes the VRT to its /vsimem/ file.
	if err := out.Close(errLogger); err != nil {
		cleanup()
		return "", nil, fmt.Errorf("align %s: %w", path, err)
	}
	if err := g.Compare(got); err != nil {
		cleanup()
		return "", nil, fmt.Errorf("align %s: the warped grid differs from the target: %w", path, err)
	}
	return name, cleanup, nil
}

// nodataSwitches returns the gdalwarp nodata switches for a source's bands
// (see AlignTo), with overrides replacing the nodata of some bands.
func nodataSwitches(bands []godal.Band, overrides map[int]float64) []string {
	src, all, some, wide := make([]string, len(bands)), true, false, false
	for i, b := range bands {
		src[i] = "nan"
		nd, ok := b.NoData()
		if v, given := overrides[i]; given {
			nd, ok = v, true
		}
		dt := b.Structure().DataType
		if ok && math.IsNaN(nd) && integerBits(dt.String()) > 0 {
			ok = false // no integer is NaN: the band has no nodata
		}
		if ok {
			src[i], some = ftoa(nd), true
		} else {
			all = false
		}
		switch dt {
		case godal.Byte, godal.Int16, godal.UInt16, godal.Float32:
		default:
			wide = true // Float32 would round these values
		}
	}
	var sw []string
	if some {
		sw = append(sw, "-srcnodata", strings.Join(src, " "))
	}
	if all {
		return append(sw, "-dstnodata", strings.Join(src, " "))
	}
	ot := "Float32"
	if wide {
		ot = "Float64"
	}
	return append(sw, "-ot", ot, "-dstnodata", "nan")
}

// ftoa formats a float for GDAL switches, exactly.
func ftoa(v float64) string {
	if math.IsNaN(v) {
		return "nan"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// northUpBounds returns the extent xmin, ymin, xmax, ymax of a north-up grid.
func northUpBounds(g Grid) ([4]float64, error) {
	gt := g.GeoTransform
	switch {
	case !g.HasGeoTransform:
		return [4]float64{}, errors.New("the target grid has no geotransform")
	case gt[2] != 0 || gt[4] != 0:
		return [4]float64{}, fmt.Errorf("the target grid is rotated (geotransform %v); only north-up grids are supported", gt)
	case gt[1] <= 0 || gt[5] >= 0:
		return [4]float64{}, fmt.Errorf("the target grid is not north-up (pixel size %g x %g)", gt[1], gt[5])
	case g.Width <= 0 || g.Height <= 0:
		return [4]float64{}, fmt.Errorf("the target grid is empty (%dx%d)", g.Width, g.Height)
	}
	return [4]float64{gt[0], gt[3] + float64(g.Height)*gt[5], gt[0] + float64(g.Width)*gt[1], gt[3]}, nil
}
