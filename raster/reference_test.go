package raster

import (
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"
)

func readReference(t *testing.T, path string, g Grid) []uint8 {
	t.Helper()
	r, err := OpenReference(path, g)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	got := make([]uint8, g.Width*g.Height)
	// Read in two windows, as workers do.
	h := g.Height / 2
	buf := make([]uint8, g.Width*g.Height)
	for _, win := range [][2]int{{0, h}, {h, g.Height}} {
		y, rows := win[0], win[1]-win[0]
		if err := r.Read(0, y, g.Width, rows, buf); err != nil {
			t.Fatal(err)
		}
		copy(got[y*g.Width:], buf[:g.Width*rows])
	}
	return got
}

func TestReferenceRaster(t *testing.T) {
	dir := t.TempDir()
	nan := math.NaN()
	tests := []struct {
		name   string
		dtype  godal.DataType
		nodata float64
		values []float64
		want   []uint8
	}{
		{"byte, nodata 255", godal.Byte, 255, []float64{0, 1, 2, 255}, []uint8{0, 1, 1, 255}},
		{"float, nodata -1", godal.Float32, -1, []float64{0, 0.5, nan, -1}, []uint8{0, 1, 255, 255}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			r := defaultRaster()
			r.w, r.h, r.bands, r.dtype, r.nodata = 4, 3, 1, tc.dtype, &tc.nodata
			r.values = func(x, y, _ int) float64 { return tc.values[(x+y)%4] }
			path := r.write(t, filepath.Join(dir, strings.Fields(tc.name)[0]+".tif"))
			g := testGrid(t, utm33, r.w, r.h, r.gt)
			got := readReference(t, path, g)
			for i, v := range got {
				if want := tc.want[(i%r.w+i/r.w)%4]; v != want {
					t.Fatalf("pixel %d = %d, want %d", i, v, want)
				}
			}
		})
	}
}

func TestReferenceErrors(t *testing.T) {
	dir := t.TempDir()
	other := defaultRaster()
	other.w = 10
	otherPath := other.write(t, filepath.Join(dir, "other.tif"))
	text := filepath.Join(dir, "notes.txt")
	os.WriteFile(text, []byte("not data\n"), 0o644)
	threeBands := defaultRaster().write(t, filepath.Join(dir, "three.tif"))
	points := filepath.Join(dir, "points.geojson")
	os.WriteFile(points, []byte(`{"type":"FeatureCollection","features":[{"type":"Feature","properties":{},"geometry":{"type":"Point","coordinates":[500100,4599900]}}]}`), 0o644)
	lines := filepath.Join(dir, "lines.geojson")
	os.WriteFile(lines, []byte(`{"type":"FeatureCollection","features":[{"type":"Feature","properties":{},"geometry":{"type":"LineString","coordinates":[[500100,4599900],[500200,4599800]]}}]}`), 0o644)
	g := testGrid(t, utm33, defaultRaster().w, defaultRaster().h, defaultRaster().gt)
	tests := []struct {
		name, path string
		is         error  // nil: any error
		says       string // part of the message
	}{
		{"raster on another grid", otherPath, ErrGridMismatch, "not on the grid"},
		{"missing", filepath.Join(dir, "missing.gpkg"), ErrNotFound, ""},
		{"neither raster nor vector", text, ErrNotRaster, ""},
		{"three bands", threeBands, nil, "has 3 bands"},
		{"points", points, nil, "holds points, not polygons"},
		{"lines", lines, nil, "holds lines, not polygons"},
	}
	for _, tc := range tests {
		_, err := OpenReference(tc.path, g)
		if err == nil || (tc.is != nil && !errors.Is(err, tc.is)) || !strings.Contains(err.Error(), tc.path) ||
			!strings.Contains(err.Error(), tc.says) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v, want one line wrapping %v naming %s and saying %q", tc.name, err, tc.is, tc.path, tc.says)
		}
	}
	r := defaultRaster()
	r.bands = 1
	path := r.write(t, filepath.Join(dir, "ref.tif"))
	ref, err := OpenReference(path, g)
	if err != nil {
		t.Fatal(err)
	}
	defer ref.Close()
	if err := ref.Read(r.w-1, 0, 2, 1, make([]uint8, 2)); err == nil {
		t.Errorf("a window past the grid's edge read without error")
	}
}

// TestReferenceGeoJSON4326 rasterises a polygon given in longitude and
// latitude onto a UTM 33N grid: a square of ground whose corners are pixel
// corners (columns 10-29, rows 5-24 of 40 x 30 pixels of 10 m), taken to
// EPSG:4326. Its edges, straight in longitude and latitude, stay within
// millimetres of the pixel edges, so pixel centres (5 m away) fall on the
// same side.
func TestReferenceGeoJSON4326(t *testing.T) {
	dir := t.TempDir()
	g := testGrid(t, utm33, 40, 30, [6]float64{499800, 10, 0, 4600200, 0, -10})
	const c0, c1, r0, r1 = 10, 30, 5, 25
	var xs, ys []float64
	for _, p := range [][2]int{{c0, r0}, {c1, r0}, {c1, r1}, {c0, r1}, {c0, r0}} {
		x, y := applyGT(g.GeoTransform, float64(p[0]), float64(p[1]))
		xs, ys = append(xs, x), append(ys, y)
	}
	reproject(t, utm33, 4326, xs, ys)
	var ring []string
	for i := range xs {
		ring = append(ring, fmt.Sprintf("[%.10f,%.10f]", xs[i], ys[i]))
	}
	geojson := `{"type":"FeatureCollection","features":[{"type":"Feature","properties":{},` +
		`"geometry":{"type":"Polygon","coordinates":[[` + strings.Join(ring, ",") + `]]}}]}`
	path := filepath.Join(dir, "changed.geojson")
	if err := os.WriteFile(path, []byte(geojson), 0o644); err != nil {
		t.Fatal(err)
	}
	got := readReference(t, path, g)
	var edges int
	for r := range g.Height {
		for c := range g.Width {
			want := uint8(0)
			if c >= c0 && c < c1 && r >= r0 && r < r1 {
				want = 1
			}
			onEdge := c == c0 || c == c1-1 || r == r0 || r == r1-1 || c == c0-1 || c == c1 || r == r0-1 || r == r1
			if v := got[r*g.Width+c]; v != want {
				if !onEdge {
					t.Fatalf("pixel (%d,%d) = %d, want %d", c, r, v, want)
				}
				edges++
			}
		}
	}
	if edges > 0 {
		t.Logf("%d edge pixels differ", edges)
	}
}

// TestReferenceFromPatches reads the GeoPackage that Patches wrote as a
// reference: it must give back the sieved change map, nodata aside (a
// vector reference knows no unknown pixels).
func TestReferenceFromPatches(t *testing.T) {
	dir := t.TempDir()
	s := newPatchScene(t, utm33)
	m := s.mask(t)
	if err := m.Sieve(4); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "changes.gpkg")
	if _, err := m.Patches(path, PatchOptions{Magnitude: s.writeMagnitude(t, filepath.Join(dir, "magnitude.tif")), Overwrite: false}); err != nil {
		t.Fatal(err)
	}
	want := s.sieved()
	for i, v := range want {
		if v == flagNoData {
			want[i] = flagNoChange
		}
	}
	// Each reader rasterises the polygons on its own; Close frees them.
	a, err := OpenReference(path, s.g)
	if err != nil {
		t.Fatal(err)
	}
	got := readReference(t, path, s.g)
	if !slices.Equal(got, want) {
		t.Errorf("reference differs from the sieved map at pixel %d", firstDiff(got, want))
	}
	if a.Close(); a.burned != nil {
		t.Errorf("the rasterised polygons are kept after Close")
	}
	if err := a.Read(0, 0, 1, 1, make([]uint8, 1)); err == nil {
		t.Errorf("a closed reference read without error")
	}
}
