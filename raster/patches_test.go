package raster

import (
	"github.com/airbusgeo/godal"

	"context"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"bandfold/raster/output"
	"bandfold/tiles/testenv"
)

// patchScene is a change map whose truth is known by construction, on a
// 20 x 16 grid of 10 m pixels in UTM 33N on the central meridian:
//
//   - column 0 is nodata (255);
//   - blob A, 3 pixels (an L), smaller than 4: sieved away;
//   - blob B, 10 pixels (5 x 2): kept;
//   - a diagonal pair of 2-pixel pieces touching at a corner: one 4-pixel
//     patch 8-connected (two 2-pixel ones 4-connected): kept;
//   - blob C, a 4 x 4 square with a 1-pixel hole: kept, the hole filled.
type patchScene struct {
	g          Grid
	flags, top []uint8
	magnitude  []float64
}

const sceneW, sceneH = 20, 16

var (
	blobA    = [][2]int{{3, 2}, {4, 2}, {3, 3}}
	pair     = [][2]int{{3, 8}, {4, 8}, {5, 9}, {6, 9}}
	holeC    = [2]int{13, 10}
	magNoVal = -1.0 // magnitude nodata
)

func blobB() (px [][2]int) {
	for y := 2; y <= 3; y++ {
		for x := 8; x <= 12; x++ {
			px = append(px, [2]int{x, y})
		}
	}
	return px
}

func blobC() (px [][2]int) { // without the hole
	for y := 9; y <= 12; y++ {
		for x := 12; x <= 15; x++ {
			if [2]int{x, y} != holeC {
				px = append(px, [2]int{x, y})
			}
		}
	}
	return px
}

func newPatchScene(t *testing.T, epsg int) patchScene {
	s := patchScene{g: testGrid(t, epsg, sceneW, sceneH, [6]float64{499900, 10, 0, 4600080, 0, -10})}
	n := sceneW * sceneH
	s.flags, s.top, s.magnitude = make([]uint8, n), make([]uint8, n), make([]float64, n)
	set := func(px [][2]int, top uint8, z float64) {
		for _, p := range px {
			i := p[1]*sceneW + p[0]
			s.flags[i], s.top[i], s.magnitude[i] = flagChange, top, z
		}
	}
	set(blobA, 4, 9)
	set(blobB(), 2, 2)
	set(blobB()[:3], 1, 2) // B: 7 pixels of component 2, 3 of component 1
	s.magnitude[2*sceneW+10] = 5
	set(pair, 3, 0)
	s.top[9*sceneW+6] = 1 // pair: 3 pixels of component 3, 1 of component 1
	for i, p := range pair {
		s.magnitude[p[1]*sceneW+p[0]] = float64(i + 1)
	}
	set(blobC(), 1, 3)
	s.magnitude[holeC[1]*sceneW+holeC[0]] = math.NaN() // no data under the hole
	s.magnitude[12*sceneW+15] = magNoVal               // nor in C's corner
	for y := range sceneH {
		s.flags[y*sceneW] = flagNoData
	}
	return s
}

// sieved is the map expected after Sieve(4).
func (s patchScene) sieved() []uint8 {
	out := slices.Clone(s.flags)
	for _, p := range blobA {
		out[p[1]*sceneW+p[0]] = flagNoChange
	}
	out[holeC[1]*sceneW+holeC[0]] = flagChange
	return out
}

func (s patchScene) mask(t *testing.T) *ChangeMask {
	t.Helper()
	m, err := NewMask(s.g)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { m.Close() })
	// Written in two tiles, as workers do.
	h := sceneH / 2
	for _, y := range []int{0, h} {
		if err := m.Write(0, y, sceneW, h, s.flags[y*sceneW:], s.top[y*sceneW:]); err != nil {
			t.Fatal(err)
		}
	}
	return m
}

func (s patchScene) writeMagnitude(t *testing.T, path string) string {
	r := defaultRaster()
	r.w, r.h, r.bands, r.gt, r.nodata = sceneW, sceneH, 1, s.g.GeoTransform, &magNoVal
	r.epsg = 0
	if s.g.Projection != "" {
		r.epsg = utm33
	}
	r.values = func(x, y, _ int) float64 { return s.magnitude[y*sceneW+x] }
	return r.write(t, path)
}

func readMask(t *testing.T, read func(x, y, w, h int, dst []uint8) error) []uint8 {
	t.Helper()
	got := make([]uint8, sceneW*sceneH)
	if err := read(0, 0, sceneW, sceneH, got); err != nil {
		t.Fatal(err)
	}
	return got
}

func TestSieve(t *testing.T) {
	s := newPatchScene(t, utm33)
	tests := []struct {
		name      string
		minPixels int
		want      []uint8
	}{
		{"4 pixels", 4, s.sieved()},
		{"1 pixel copies", 1, s.flags},
		{"0 copies", 0, s.flags},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			m := s.mask(t)
			if err := m.Sieve(tc.minPixels); err != nil {
				t.Fatal(err)
			}
			if got := readMask(t, m.Read); !slices.Equal(got, tc.want) {
				t.Errorf("sieved map differs at pixel %d: got\n%v\nwant\n%v", firstDiff(got, tc.want), got, tc.want)
			}
			if got := readMask(t, m.ReadRaw); !slices.Equal(got, s.flags) {
				t.Errorf("raw flags changed by the sieve")
			}
		})
	}
	// Sieve(4) kept the pair, which 4-connected is two 2-pixel patches;
	// Sieve(5) removes it: it is one patch of 4 pixels.
	m := s.mask(t)
	if err := m.Sieve(5); err != nil {
		t.Fatal(err)
	}
	got := readMask(t, m.Read)
	for _, p := range pair {
		if got[p[1]*sceneW+p[0]] != flagNoChange {
			t.Errorf("pair pixel %v kept by Sieve(5)", p)
		}
	}
}

func firstDiff(a, b []uint8) int {
	for i := range a {
		if a[i] != b[i] {
			return i
		}
	}
	return -1
}

func TestSieveCancelled(t *testing.T) {
	s := newPatchScene(t, utm33)
	m := s.mask(t)
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := m.SieveContext(ctx, 4); !errors.Is(err, context.Canceled) {
		t.Fatalf("got %v, want context.Canceled", err)
	}
	if got := readMask(t, m.Read); !slices.Equal(got, s.flags) {
		t.Errorf("a cancelled sieve changed the map that Read returns")
	}
	// The map is still usable.
	if err := m.Sieve(4); err != nil {
		t.Fatal(err)
	}
	if got := readMask(t, m.Read); !slices.Equal(got, s.sieved()) {
		t.Errorf("sieve after a cancelled one differs")
	}
}

func TestMaskWindowErrors(t *testing.T) {
	m := newPatchScene(t, utm33).mask(t)
	buf := make([]uint8, 4)
	for _, tc := range []struct{ x, y, w, h int }{{-1, 0, 2, 2}, {19, 0, 2, 2}, {0, 15, 2, 2}, {0, 0, 3, 2}} {
		if err := m.Write(tc.x, tc.y, tc.w, tc.h, buf, buf); err == nil {
			t.Errorf("Write%v: no error", tc)
		}
		if err := m.Read(tc.x, tc.y, tc.w, tc.h, buf); err == nil {
			t.Errorf("Read%v: no error", tc)
		}
	}
}

// patchRow is a feature read back from a GeoPackage; nil fields are null.
type patchRow struct {
	pixels                      int // polygon area in grid units / pixel area
	areaM2, areaHa, zMean, zMax *float64
	top                         *float64
}

// readPatches reads layer "changes" of a GeoPackage back with GDAL's own
// ogr2ogr (testenv.ReadPolygons), nulls included. Rows are sorted by size;
// crs is the GeoJSON crs name.
func readPatches(t *testing.T, path string) (rows []patchRow, crs string) {
	t.Helper()
	polys, crs := testenv.ReadPolygons(t, path, "changes")
	for _, f := range polys {
		p := f.Properties
		rows = append(rows, patchRow{pixels: int(math.Round(f.Area / 100)),
			areaM2: p["area_m2"], areaHa: p["area_ha"], zMean: p["z_mean"], zMax: p["z_max"], top: p["top_component"]})
	}
	slices.SortFunc(rows, func(a, b patchRow) int { return a.pixels - b.pixels })
	return rows, crs
}

// near reports whether v is set and within tol (relative) of want.
func near(v *float64, want, tol float64) bool {
	return v != nil && math.Abs(*v-want) <= tol*math.Abs(want)
}

func TestPatches(t *testing.T) {
	dir := t.TempDir()
	s := newPatchScene(t, utm33)
	mag := s.writeMagnitude(t, filepath.Join(dir, "magnitude.tif"))
	m := s.mask(t)
	if err := m.Sieve(4); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "changes.gpkg")
	sum, err := m.Patches(out, PatchOptions{Magnitude: mag, Overwrite: false})
	if err != nil {
		t.Fatal(err)
	}
	rows, crs := readPatches(t, out)
	// Truth by construction (sorted by size): the pair, B, C with its hole
	// filled. Ground area is grid area / k0² on the central meridian.
	want := []struct {
		pixels      int
		zMean, zMax float64
		top         float64
	}{
		{4, 2.5, 4, 3},  // magnitudes 1..4; 3 pixels of component 3
		{10, 2.3, 5, 2}, // nine 2s and a 5; 7 pixels of component 2
		{16, 3, 3, 1},   // 3s; the hole (NaN) and a nodata pixel left out
	}
	if sum.Count != len(want) || len(rows) != len(want) {
		t.Fatalf("%d patches written, summary says %d, want %d", len(rows), sum.Count, len(want))
	}
	var total float64
	for i, w := range want {
		r := rows[i]
		wantArea := float64(w.pixels) * 100 / (utmK0 * utmK0)
		total += wantArea
		if r.pixels != w.pixels {
			t.Errorf("patch %d: %d pixels, want %d", i, r.pixels, w.pixels)
		}
		if !near(r.areaM2, wantArea, 1e-4) || !near(r.areaHa, wantArea/1e4, 1e-4) {
			t.Errorf("patch %d: area %v m², %v ha, want %g m²", i, deref(r.areaM2), deref(r.areaHa), wantArea)
		}
		if !near(r.zMean, w.zMean, 1e-9) || !near(r.zMax, w.zMax, 0) {
			t.Errorf("patch %d: z mean %v max %v, want %g and %g", i, deref(r.zMean), deref(r.zMax), w.zMean, w.zMax)
		}
		if !near(r.top, w.top, 0) {
			t.Errorf("patch %d: top component %v, want %g", i, deref(r.top), w.top)
		}
	}
	if relErr(sum.AreaM2, total) > 1e-4 {
		t.Errorf("summary area %g m², want %g", sum.AreaM2, total)
	}
	if !strings.HasSuffix(crs, ":32633") {
		t.Errorf("layer CRS %s, want EPSG:32633", crs)
	}
	onlyFiles(t, dir, "changes.gpkg", "magnitude.tif")

	// An existing output is refused without overwrite, replaced with it.
	if _, err := m.Patches(out, PatchOptions{Magnitude: mag, Overwrite: false}); !errors.Is(err, output.ErrExists) {
		t.Errorf("existing output: got %v, want ErrExists", err)
	}
	if _, err := m.Patches(out, PatchOptions{Magnitude: mag, Overwrite: true}); err != nil {
		t.Errorf("overwrite: %v", err)
	}
	onlyFiles(t, dir, "changes.gpkg", "magnitude.tif")
}

func TestPatchesWithoutCRS(t *testing.T) {
	dir := t.TempDir()
	s := newPatchScene(t, 0)
	mag := s.writeMagnitude(t, filepath.Join(dir, "magnitude.tif"))
	m := s.mask(t) // not sieved: the raw map, blob A included
	sum, err := m.Patches(filepath.Join(dir, "changes.gpkg"), PatchOptions{Magnitude: mag, Overwrite: false})
	if err != nil {
		t.Fatal(err)
	}
	rows, _ := readPatches(t, filepath.Join(dir, "changes.gpkg"))
	if sum.Count != 4 || len(rows) != 4 || !math.IsNaN(sum.AreaM2) {
		t.Fatalf("%d patches (summary %+v), want 4 and a NaN area", len(rows), sum)
	}
	for i, r := range rows {
		if r.areaM2 != nil || r.areaHa != nil || r.zMean == nil {
			t.Errorf("patch %d: area %v m², %v ha, z mean %v; want null areas, z set", i, deref(r.areaM2), deref(r.areaHa), deref(r.zMean))
		}
	}
	// Blob A, unsieved; C keeps its hole.
	if rows[0].pixels != 3 || !near(rows[0].zMax, 9, 0) || !near(rows[0].top, 4, 0) || rows[3].pixels != 15 || !near(rows[3].zMean, 3, 1e-9) {
		t.Errorf("patches of the raw map: %+v", rows)
	}
}

func deref(v *float64) any {
	if v == nil {
		return "null"
	}
	return *v
}

func TestPatchesErrorsLeaveNoFiles(t *testing.T) {
	dir := t.TempDir()
	s := newPatchScene(t, utm33)
	other := defaultRaster() // another grid
	otherPath := other.write(t, filepath.Join(dir, "other.tif"))
	m := s.mask(t)
	tests := []struct {
		name, magnitude string
		is              error
	}{
		{"magnitude on another grid", otherPath, ErrGridMismatch},
		{"missing magnitude", filepath.Join(dir, "missing.tif"), ErrNotFound},
	}
	for _, tc := range tests {
		_, err := m.Patches(filepath.Join(dir, "changes.gpkg"), PatchOptions{Magnitude: tc.magnitude, Overwrite: false})
		if !errors.Is(err, tc.is) || !strings.Contains(err.Error(), filepath.Base(tc.magnitude)) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v, want %v naming the file", tc.name, err, tc.is)
		}
	}
	onlyFiles(t, dir, "other.tif")
}

// onlyFiles checks that dir holds exactly the named files: no temporary
// file is left behind.
func onlyFiles(t *testing.T, dir string, names ...string) {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range entries {
		got = append(got, e.Name())
	}
	slices.Sort(got)
	slices.Sort(names)
	if !slices.Equal(got, names) {
		t.Errorf("%s holds %v, want %v", dir, got, names)
	}
}

// TestPatchesProvenance: the layer carries the given metadata and every
// polygon the dates in fields of type Date (issue 26; known by
// construction), read back through GDAL: a change map's date_before and
// date_after, a series' date per step; a field without a date is left out,
// and a year alone is 1 January.
func TestPatchesProvenance(t *testing.T) {
	day := func(s string) Date {
		d, ok := ParseDate(s)
		if !ok {
			t.Fatalf("bad test date %q", s)
		}
		return d
	}
	tests := []struct {
		name   string
		o      PatchOptions
		steps  []Date // WriteStepPatches with a map per date; nil: Patches
		want   map[string]string
		absent []string
	}{
		{"change", PatchOptions{Before: day("2001-06-14"), After: day("2013-07-02")}, nil,
			map[string]string{"date_before": "2001-06-14", "date_after": "2013-07-02"}, []string{"dates"}},
		{"change, a year and an unknown date", PatchOptions{Before: day("2001")}, nil,
			map[string]string{"date_before": "2001-01-01"}, []string{"date_after"}},
		{"series", PatchOptions{}, []Date{day("2020-06-16"), day("2020-06-16")},
			map[string]string{"date": "2020-06-16"}, []string{"date_before", "date_after"}},
		{"series without dates", PatchOptions{}, []Date{{}, {}}, nil, []string{"date"}},
	}
	md := map[string]string{"BANDFOLD_BEFORE": "2001-06-14 (a.tif)", "BANDFOLD_CAUTION": "verify before acting"}
	for _, tc := range tests {
		dir := t.TempDir()
		s := newPatchScene(t, utm33)
		o := tc.o
		o.Magnitude, o.Metadata = s.writeMagnitude(t, filepath.Join(dir, "magnitude.tif")), md
		out := filepath.Join(dir, "changes.gpkg")
		var err error
		if tc.steps == nil {
			_, err = s.mask(t).Patches(out, o)
		} else {
			var steps []PatchStep
			for _, d := range tc.steps {
				steps = append(steps, PatchStep{Mask: s.mask(t), Band: 1, Date: d})
			}
			_, err = WriteStepPatches(out, o, steps)
		}
		if err != nil {
			t.Fatal(err)
		}
		checkPatchDates(t, tc.name, out, md, tc.want, tc.absent)
	}
}

// checkPatchDates checks the layer metadata md and, on every feature, the
// Date fields of want and that the fields absent do not exist.
func checkPatchDates(t *testing.T, name, path string, md, want map[string]string, absent []string) {
	t.Helper()
	ds, err := godal.Open(path, godal.VectorOnly())
	if err != nil {
		t.Fatal(err)
	}
	defer ds.Close()
	layer := ds.Layers()[0]
	got := layer.Metadatas()
	for k, v := range md {
		if got[k] != v {
			t.Errorf("%s: layer metadata %s = %q, want %q", name, k, got[k], v)
		}
	}
	n := 0
	for f := layer.NextFeature(); f != nil; f = layer.NextFeature() {
		fields := f.Fields()
		for k, v := range want {
			fd, ok := fields[k]
			if !ok || fd.Type() != godal.FTDate || fd.DateTime() == nil || fd.DateTime().Format("2006-01-02") != v {
				t.Errorf("%s: field %s is %v (type %v), want the Date %s", name, k, fd.DateTime(), fd.Type(), v)
			}
		}
		for _, k := range absent {
			if _, ok := fields[k]; ok {
				t.Errorf("%s: field %s should not exist", name, k)
			}
		}
		f.Close()
		n++
	}
	if n == 0 {
		t.Errorf("%s: no patches", name)
	}
}

// Patches of a sieved map use its raw band as scratch: the sieved map still
// reads as before, and changing or re-sieving the map is refused. Truth by
// construction: the sieved map read before Patches.
func TestPatchesLeaveTheMapFinal(t *testing.T) {
	dir := t.TempDir()
	s := newPatchScene(t, utm33)
	mag := s.writeMagnitude(t, filepath.Join(dir, "magnitude.tif"))
	m := s.mask(t)
	if err := m.Sieve(4); err != nil {
		t.Fatal(err)
	}
	before := make([]uint8, sceneW*sceneH)
	if err := m.Read(0, 0, sceneW, sceneH, before); err != nil {
		t.Fatal(err)
	}
	if _, err := m.Patches(filepath.Join(dir, "changes.gpkg"), PatchOptions{Magnitude: mag}); err != nil {
		t.Fatal(err)
	}
	after := make([]uint8, sceneW*sceneH)
	if err := m.Read(0, 0, sceneW, sceneH, after); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(before, after) {
		t.Error("Patches changed the sieved map")
	}
	raw := make([]uint8, sceneW*sceneH)
	for name, err := range map[string]error{
		"Write":     m.Write(0, 0, sceneW, sceneH, s.flags, s.top),
		"SetMapped": m.SetMapped(0, 0, sceneW, sceneH, s.flags),
		"Sieve":     m.Sieve(4),
		"ReadRaw":   m.ReadRaw(0, 0, sceneW, sceneH, raw),
	} {
		if !errors.Is(err, errFinal) {
			t.Errorf("%s after Patches: %v, want %v", name, err, errFinal)
		}
	}
}
