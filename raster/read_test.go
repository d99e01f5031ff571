package raster

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"

	"bandfold/tiles"
)

// TestReadWidensStoredTypes checks that a full-resolution read, which takes
// integer and Float32 bands in their stored type and widens them in Go,
// gives exactly the float64 values GDAL's own conversion gives (the
// reference: godal reading each band into a []float64), for every type
// handled, the extremes of each type included, in a stack whose selected
// bands form several runs of two files and a window off the origin.
func TestReadWidensStoredTypes(t *testing.T) {
	for _, c := range []struct {
		dtype  godal.DataType
		lo, hi float64
	}{
		{godal.Byte, 0, 255},
		{godal.Int16, -32768, 32767},
		{godal.UInt16, 0, 65535},
		{godal.Int32, -2147483648, 2147483647},
		{godal.UInt32, 0, 4294967295},
		{godal.Float32, -3.4e38, 1.1},
		{godal.Float64, -1e300, 0.1},
	} {
		t.Run(c.dtype.String(), func(t *testing.T) {
			dir := t.TempDir()
			a := defaultRaster()
			a.dtype = c.dtype
			a.values = func(x, y, b int) float64 {
				switch (x + 3*y + b) % 5 {
				case 0:
					return c.lo
				case 1:
					return c.hi
				}
				return float64((x*7 + y*13 + b) % 100)
			}
			b := defaultRaster()
			b.bands, b.dtype = 2, godal.Float64
			b.values = func(x, y, bb int) float64 { return -float64(1000*bb + 37*y + x) }
			pa, pb := a.write(t, filepath.Join(dir, "a.tif")), b.write(t, filepath.Join(dir, "b.tif"))
			// a alone is one run of every band; stacked (a:1 a:2 a:3 b:1
			// b:2, bands 5, 1, 2, 4 selected) the runs are b:2 | a:1 a:2 |
			// b:1.
			for _, paths := range [][]string{{pa}, {pa, pb}} {
				var opts []Option
				if len(paths) == 2 {
					opts = append(opts, SelectBands([]int{5, 1, 2, 4}))
				}
				s, err := Open(paths, opts...)
				if err != nil {
					t.Fatal(err)
				}
				defer s.Close()
				tl := tiles.Tile{X: 3, Y: 2, W: 30, H: 19}
				got := readWindow(t, s, tl)
				for k, band := range s.Bands {
					want := gdalBand(t, band.Path, band.Index, tl)
					for i, v := range want {
						if g := got[i*s.Len()+k]; g != v {
							t.Fatalf("%d files, band %s pixel %d: read %v, GDAL %v", len(paths), band.Name, i, g, v)
						}
					}
				}
			}
		})
	}
}

// readWindow reads window t of s through a Reader.
func readWindow(t *testing.T, s *Stack, tl tiles.Tile) []float64 {
	t.Helper()
	r, err := s.NewReader()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	dst := make([]float64, tl.Pixels()*s.Len())
	if _, err := r.Read(tl, dst, make([]bool, tl.Pixels())); err != nil {
		t.Fatal(err)
	}
	return dst
}

// gdalBand reads window t of band index (1-based) of path as float64 with
// godal alone.
func gdalBand(t *testing.T, path string, index int, tl tiles.Tile) []float64 {
	t.Helper()
	ds, err := godal.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer ds.Close()
	buf := make([]float64, tl.Pixels())
	if err := ds.Bands()[index-1].Read(tl.X, tl.Y, buf, tl.W, tl.H); err != nil {
		t.Fatal(fmt.Errorf("read %s: %w", path, err))
	}
	return buf
}

// TestReadTruncated (issue 24, item 10): reading a GeoTIFF cut short fails
// with one line naming the file and saying it is damaged or truncated, not
// GDAL's bare "unknown cpl error 3" nor libtiff's own complaint. Known by
// construction: the file loses the last part of its data, striped and
// uncompressed, or tiled and DEFLATE-compressed.
func TestReadTruncated(t *testing.T) {
	for _, tc := range []struct {
		name    string
		options []string // gdal_translate creation options; nil keeps the striped file
		keep    float64  // the share of the file kept
	}{
		{"striped", nil, 0.5},
		{"tiled deflate", []string{"-co", "TILED=YES", "-co", "BLOCKXSIZE=64", "-co", "BLOCKYSIZE=64", "-co", "COMPRESS=DEFLATE"}, 0.7},
	} {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "cut.tif")
			r := defaultRaster()
			r.w, r.h = 300, 200
			r.write(t, path)
			if tc.options != nil {
				translated := filepath.Join(dir, "tiled.tif")
				src, err := godal.Open(path)
				if err != nil {
					t.Fatal(err)
				}
				dst, err := src.Translate(translated, tc.options, godal.GTiff)
				src.Close()
				if err != nil {
					t.Fatal(err)
				}
				dst.Close()
				path = translated
			}
			fi, err := os.Stat(path)
			if err != nil {
				t.Fatal(err)
			}
			if err := os.Truncate(path, int64(float64(fi.Size())*tc.keep)); err != nil {
				t.Fatal(err)
			}
			err = readAllOf(path, r)
			if err == nil || !strings.Contains(err.Error(), path) || !strings.Contains(err.Error(), "damaged or truncated") ||
				strings.Contains(err.Error(), "cpl error") || strings.Contains(err.Error(), "TIFF") || strings.Contains(err.Error(), "expected") || strings.Contains(err.Error(), "\n") {
				t.Errorf("read of a truncated file: %v", err)
			}
		})
	}
}

// readAllOf reads the whole of the test raster r written at path.
func readAllOf(path string, r testRaster) error {
	s, err := Open([]string{path})
	if err != nil {
		return err
	}
	defer s.Close()
	rd, err := s.NewReader()
	if err != nil {
		return err
	}
	defer rd.Close()
	_, err = rd.Read(tiles.Tile{W: r.w, H: r.h}, make([]float64, r.w*r.h*r.bands), make([]bool, r.w*r.h))
	return err
}
