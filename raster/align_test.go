package raster

import (
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"

	"bandfold/tiles"
)

// ramp is smooth test data defined on the ground: a plane in UTM 33N
// eastings and northings, so bilinear resampling reproduces it exactly
// wherever the kernel sees only valid pixels.
func ramp(e, n float64) float64 { return (e-499000)/30 + 2*(n-4600000)/30 }

// readGrid reads band 1 of path through Open and a Reader, as bandfold's
// workers do.
func readGrid(t *testing.T, path string, g Grid) ([]float64, []bool) {
	t.Helper()
	s, err := Open([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	if err := g.Compare(s.Grid); err != nil {
		t.Fatalf("aligned grid: %v", err)
	}
	r, err := s.NewReader()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	tl := tiles.Tile{W: g.Width, H: g.Height}
	dst, valid := make([]float64, tl.Pixels()*s.Len()), make([]bool, tl.Pixels())
	if _, err := r.Read(tl, dst, valid); err != nil {
		t.Fatal(err)
	}
	return dst, valid
}

func TestAlignTo(t *testing.T) {
	dir := t.TempDir()
	// Target: UTM 33N, 40 x 30 pixels of 30 m.
	target := testGrid(t, utm33, 40, 30, [6]float64{499000, 30, 0, 4601000, 0, -30})
	centre := func(c, r int) (float64, float64) { return applyGT(target.GeoTransform, float64(c)+0.5, float64(r)+0.5) }

	// Source 1: UTM 33N, shifted by half a pixel, without nodata, ending
	// at easting 500035 (target column 34 of 40).
	shifted := defaultRaster()
	shifted.w, shifted.h, shifted.bands = 34, 32, 1
	shifted.gt = [6]float64{499015, 30, 0, 4601015, 0, -30}
	shifted.values = func(x, y, _ int) float64 {
		e, n := applyGT(shifted.gt, float64(x)+0.5, float64(y)+0.5)
		return ramp(e, n)
	}
	// Source 2: EPSG:4326, pixels of 0.0004° x 0.0003° (about 34 m x 33 m,
	// so bilinear upsamples with a one-pixel kernel), with a nodata collar
	// (-9999) on its western 12 columns. Values are the ramp at the ground
	// position of each pixel centre.
	xs, ys := []float64{498900, 500300}, []float64{4601100, 4599900}
	reproject(t, utm33, 4326, xs, ys)
	const dLon, dLat, collar = 0.0004, 0.0003, 12
	geo := defaultRaster()
	geo.epsg, geo.bands = 4326, 1
	geo.gt = [6]float64{xs[0] + 0.37*dLon, dLon, 0, ys[0] + 0.37*dLat, 0, -dLat}
	geo.w, geo.h = int((xs[1]-geo.gt[0])/dLon)+2, int((geo.gt[3]-ys[1])/dLat)+2
	nd := -9999.0
	geo.nodata = &nd
	geoValues := make([]float64, geo.w*geo.h)
	{
		lon, lat := make([]float64, len(geoValues)), make([]float64, len(geoValues))
		for i := range lon {
			lon[i], lat[i] = applyGT(geo.gt, float64(i%geo.w)+0.5, float64(i/geo.w)+0.5)
		}
		reproject(t, 4326, utm33, lon, lat)
		for i := range geoValues {
			geoValues[i] = ramp(lon[i], lat[i])
			if i%geo.w < collar {
				geoValues[i] = nd
			}
		}
	}
	geo.values = func(x, y, _ int) float64 { return geoValues[y*geo.w+x] }

	// srcCol returns the source column (pixel-edge coordinates) under the
	// centre of target pixel (c, r).
	geoCol := func(c, r int) float64 {
		e, n := centre(c, r)
		lon, lat := []float64{e}, []float64{n}
		reproject(t, utm33, 4326, lon, lat)
		return (lon[0] - geo.gt[0]) / dLon
	}
	tests := []struct {
		name string
		src  testRaster
		// where says whether target pixel (c, r) must be invalid, must be
		// the ramp, or may be either (its kernel straddles an edge; then
		// it must still be near the ramp, never blended with nodata).
		where func(c, r int) (mustInvalid, mustValid bool)
		// tol bounds |value - ramp| of pixels that must be valid.
		tol float64
	}{
		{"UTM half-pixel shift, no nodata", shifted, func(c, r int) (bool, bool) {
			// The source starts half a pixel east: the centre of target
			// column c lies on source column edge c.
			col := float64(c)
			return col > 34.6, col < 33.4 && c > 0
		}, 1e-3},
		{"EPSG:4326 with a nodata collar", geo, func(c, r int) (bool, bool) {
			col := geoCol(c, r)
			return col < collar-0.6, col > collar+0.6
		}, 0.05},
	}
	for i, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := tc.src.write(t, filepath.Join(dir, fmt.Sprintf("source%d.tif", i)))
			vrt, cleanup, err := AlignTo(path, target, "bilinear")
			if err != nil {
				t.Fatal(err)
			}
			if !strings.HasPrefix(vrt, "/vsimem/") {
				t.Errorf("VRT %s is not in /vsimem/", vrt)
			}
			got, valid := readGrid(t, vrt, target)
			var invalid, exact int
			for r := range target.Height {
				for c := range target.Width {
					i := r*target.Width + c
					mustInvalid, mustValid := tc.where(c, r)
					want := ramp(centre(c, r))
					switch {
					case mustInvalid && valid[i]:
						t.Fatalf("pixel (%d,%d) = %g, want invalid", c, r, got[i])
					case mustValid && (!valid[i] || math.Abs(got[i]-want) > tc.tol):
						t.Fatalf("pixel (%d,%d) = %g (valid %v), want %g", c, r, got[i], valid[i], want)
					case valid[i] && math.Abs(got[i]-want) > 3:
						t.Fatalf("edge pixel (%d,%d) = %g, want near %g: nodata or the outside blended in", c, r, got[i], want)
					}
					if mustInvalid {
						invalid++
					} else if mustValid {
						exact++
					}
				}
			}
			if invalid == 0 || exact == 0 {
				t.Errorf("%d pixels must be invalid and %d valid: the test checks nothing", invalid, exact)
			}
			// A second opener sees the same VRT; after cleanup it is gone.
			readGrid(t, vrt, target)
			cleanup()
			if _, err := Open([]string{vrt}); err == nil {
				t.Errorf("%s still opens after cleanup", vrt)
			}
		})
	}
}

func TestAlignToRefuses(t *testing.T) {
	dir := t.TempDir()
	path := defaultRaster().write(t, filepath.Join(dir, "src.tif"))
	noCRS := defaultRaster()
	noCRS.epsg = 0
	bare := noCRS.write(t, filepath.Join(dir, "bare.tif"))
	good := testGrid(t, utm33, 10, 10, [6]float64{500000, 10, 0, 4600000, 0, -10})
	rotated, southUp, noGT := good, good, good
	rotated.GeoTransform[2] = 0.5
	southUp.GeoTransform[5] = 10
	noGT.HasGeoTransform = false
	tests := []struct {
		name, path string
		g          Grid
		want       string
		is         error
	}{
		{"rotated", path, rotated, "rotated", nil},
		{"south-up", path, southUp, "not north-up", nil},
		{"no geotransform", path, noGT, "no geotransform", nil},
		{"source without CRS", bare, good, "no CRS", nil},
		{"missing", filepath.Join(dir, "missing.tif"), good, "missing.tif", ErrNotFound},
		{"bad resampling", path, good, "src.tif", nil},
	}
	for _, tc := range tests {
		r := "bilinear"
		if tc.name == "bad resampling" {
			r = "wobbly"
		}
		_, _, err := AlignTo(tc.path, tc.g, r)
		if err == nil || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), filepath.Base(tc.path)) ||
			strings.Contains(err.Error(), "\n") || (tc.is != nil && !errors.Is(err, tc.is)) {
			t.Errorf("%s: got %v, want a one-line error naming the file and %q", tc.name, err, tc.want)
		}
	}
}

// TestAlignToKeepsIntegerNodata checks that a source whose bands all have
// nodata keeps its type and nodata value.
func TestAlignToKeepsIntegerNodata(t *testing.T) {
	r := defaultRaster()
	r.dtype, r.bands = godal.UInt16, 2
	nd := 0.0
	r.nodata = &nd
	path := r.write(t, filepath.Join(t.TempDir(), "u16.tif"))
	// The target grid reaches 5 pixels east of the source.
	g := testGrid(t, utm33, r.w+5, r.h, r.gt)
	vrt, cleanup, err := AlignTo(path, g, "nearest")
	if err != nil {
		t.Fatal(err)
	}
	defer cleanup()
	s, err := Open([]string{vrt})
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range s.Bands {
		if b.DataType != "UInt16" || b.NoData == nil || *b.NoData != 0 {
			t.Errorf("band %s: %s, nodata %v; want UInt16, nodata 0", b.Name, b.DataType, b.NoData)
		}
	}
	got, valid := readGrid(t, vrt, g)
	for y := range g.Height {
		for x := range g.Width {
			i := y*g.Width + x
			if x >= r.w {
				if valid[i] {
					t.Fatalf("pixel (%d,%d) outside the source is valid", x, y)
				}
				continue
			}
			if want := r.values(x, y, 0); (want != 0) != valid[i] || (valid[i] && got[2*i] != want) {
				t.Fatalf("pixel (%d,%d) = %g (valid %v), want %g", x, y, got[2*i], valid[i], want)
			}
		}
	}
}
