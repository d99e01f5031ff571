package raster

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/airbusgeo/godal"

	"bandfold/raster/output"
	"bandfold/tiles"
	"bandfold/tiles/testenv"
)

func TestMain(m *testing.M) {
	if err := Init(Config{CacheMB: 16}); err != nil {
		panic(err)
	}
	os.Exit(m.Run())
}

const utm33 = 32633

type testRaster struct {
	w, h, bands int
	dtype       godal.DataType
	gt          [6]float64
	epsg        int // 0: no CRS
	nodata      *float64
	values      func(x, y, b int) float64
	descs       []string
}

func defaultRaster() testRaster {
	return testRaster{w: 37, h: 23, bands: 3, dtype: godal.Float32,
		gt: [6]float64{500000, 10, 0, 4600000, 0, -10}, epsg: utm33,
		values: func(x, y, b int) float64 { return float64(1000*b + 37*y + x) }}
}

// write creates the test raster at path with godal directly, independent of
// the package's own writer.
func (r testRaster) write(t *testing.T, path string) string {
	t.Helper()
	ds, err := godal.Create(godal.GTiff, path, r.bands, r.dtype, r.w, r.h)
	if err != nil {
		t.Fatal(err)
	}
	if err := ds.SetGeoTransform(r.gt); err != nil {
		t.Fatal(err)
	}
	if r.epsg != 0 {
		sr, err := godal.NewSpatialRefFromEPSG(r.epsg)
		if err != nil {
			t.Fatal(err)
		}
		if err := ds.SetSpatialRef(sr); err != nil {
			t.Fatal(err)
		}
		sr.Close()
	}
	for b, band := range ds.Bands() {
		buf := make([]float64, r.w*r.h)
		for y := range r.h {
			for x := range r.w {
				buf[y*r.w+x] = r.values(x, y, b)
			}
		}
		if err := band.Write(0, 0, buf, r.w, r.h); err != nil {
			t.Fatal(err)
		}
		if r.nodata != nil {
			if err := band.SetNoData(*r.nodata); err != nil {
				t.Fatal(err)
			}
		}
		if b < len(r.descs) {
			band.SetDescription(r.descs[b])
		}
	}
	if err := ds.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func readAll(t *testing.T, s *Stack) ([]float64, []bool, int) {
	t.Helper()
	r, err := s.NewReader()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	tl := tiles.Tile{W: s.Width, H: s.Height}
	dst := make([]float64, tl.Pixels()*s.Len())
	valid := make([]bool, tl.Pixels())
	n, err := r.Read(tl, dst, valid)
	if err != nil {
		t.Fatal(err)
	}
	return dst, valid, n
}

func TestStackSelectsAndInterleavesBands(t *testing.T) {
	dir := t.TempDir()
	a := defaultRaster()
	b := defaultRaster()
	b.bands = 2
	b.values = func(x, y, bb int) float64 { return -float64(1000*bb + 37*y + x) }
	pa, pb := a.write(t, filepath.Join(dir, "a.tif")), b.write(t, filepath.Join(dir, "b.tif"))
	// Stacked image: a:1 a:2 a:3 b:1 b:2; select 5,1-2,4.
	s, err := Open([]string{pa, pb}, SelectBands([]int{5, 1, 2, 4}))
	if err != nil {
		t.Fatal(err)
	}
	wantNames := []string{"b:2", "a:1", "a:2", "b:1"}
	for i, band := range s.Bands {
		if band.Name != wantNames[i] {
			t.Errorf("band %d named %q, want %q", i, band.Name, wantNames[i])
		}
	}
	dst, _, n := readAll(t, s)
	if n != a.w*a.h {
		t.Fatalf("%d valid pixels, want %d", n, a.w*a.h)
	}
	// Known by construction: pixel (x, y) band values.
	x, y := 5, 7
	px := dst[(y*a.w+x)*4 : (y*a.w+x)*4+4]
	want := []float64{b.values(x, y, 1), a.values(x, y, 0), a.values(x, y, 1), b.values(x, y, 0)}
	for i := range want {
		if px[i] != want[i] {
			t.Fatalf("pixel (%d,%d) = %v, want %v", x, y, px, want)
		}
	}
}

func TestStackGridMismatch(t *testing.T) {
	dir := t.TempDir()
	base := defaultRaster().write(t, filepath.Join(dir, "base.tif"))
	tests := []struct {
		name   string
		change func(*testRaster)
		want   string
	}{
		{"size", func(r *testRaster) { r.w = 36 }, "size 36x23 against 37x23"},
		{"geotransform", func(r *testRaster) { r.gt[0] += 10 }, "geotransform"},
		{"crs", func(r *testRaster) { r.epsg = 32634 }, "CRS"},
		{"no crs", func(r *testRaster) { r.epsg = 0 }, "CRS (none)"},
	}
	for _, tc := range tests {
		r := defaultRaster()
		tc.change(&r)
		other := r.write(t, filepath.Join(dir, tc.name+".tif"))
		_, err := Open([]string{base, other})
		if !errors.Is(err, ErrGridMismatch) || !strings.Contains(err.Error(), tc.want) || !strings.Contains(err.Error(), other) {
			t.Errorf("%s: got %v, want a grid error naming %s and %q", tc.name, err, other, tc.want)
		}
	}
	// A geotransform equal to 1e-9 relative is the same grid.
	r := defaultRaster()
	r.gt[0] *= 1 + 1e-12
	near := r.write(t, filepath.Join(dir, "near.tif"))
	if _, err := Open([]string{base, near}); err != nil {
		t.Errorf("nearly equal geotransform refused: %v", err)
	}
}

func TestOpenBadInputs(t *testing.T) {
	dir := t.TempDir()
	good := defaultRaster().write(t, filepath.Join(dir, "good.tif"))
	text := filepath.Join(dir, "notes.txt")
	os.WriteFile(text, []byte("not a raster\n"), 0o644)
	other := defaultRaster()
	other.w = 10
	otherGrid := other.write(t, filepath.Join(dir, "other.tif"))
	// Issue 24, item 4: complex bands (band 2 of a stack of good.tif and
	// a one-band complex file; band 1 of a CFloat32 file) are refused,
	// naming the band and its file, and match ErrBadSpec too (exit 2).
	cx := defaultRaster()
	cx.bands, cx.dtype = 1, godal.CFloat32
	complexTif := cx.write(t, filepath.Join(dir, "x.tif"))
	cx.dtype = godal.CInt16
	cint := cx.write(t, filepath.Join(dir, "cint.tif"))
	tests := []struct {
		name  string
		paths []string
		opts  []Option
		is    error
		names string
	}{
		{"missing", []string{filepath.Join(dir, "missing.tif")}, nil, ErrNotFound, "missing.tif"},
		{"not raster", []string{text}, nil, ErrNotRaster, "notes.txt"},
		{"folder", []string{dir}, nil, ErrNotRaster, dir},
		{"band", []string{good}, []Option{SelectBands([]int{4})}, ErrBandRange, "band 4"},
		{"mask grid", []string{good}, []Option{Mask(otherGrid)}, ErrGridMismatch, "other.tif"},
		{"nodata count", []string{good}, []Option{NoData([]float64{1, 2})}, ErrBadSpec, "2 values given for 3 bands"},
		{"complex", []string{complexTif}, nil, ErrComplex, "band 1 of " + complexTif + " is complex (CFloat32): bandfold reads real values only"},
		{"complex in a stack", []string{good, cint}, nil, ErrComplex, "band 1 of " + cint + " is complex (CInt16)"},
		{"complex is a bad selection", []string{complexTif}, nil, ErrBadSpec, "complex"},
	}
	for _, tc := range tests {
		_, err := Open(tc.paths, tc.opts...)
		if !errors.Is(err, tc.is) || !strings.Contains(err.Error(), tc.names) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v, want one line wrapping %v naming %s", tc.name, err, tc.is, tc.names)
		}
	}
	// A complex band left out of the selection is no obstacle.
	s, err := Open([]string{good, cint}, SelectBands([]int{1, 2, 3}))
	if err != nil {
		t.Fatalf("complex band not selected: %v", err)
	}
	s.Close()
}

// TestValidity checks nodata, NaN, infinity and mask handling on a raster
// whose truth is known by construction.
func TestValidity(t *testing.T) {
	dir := t.TempDir()
	nd := -9999.0
	r := defaultRaster()
	r.w, r.h = 4, 3
	r.nodata = &nd
	r.values = func(x, y, b int) float64 {
		switch {
		case x == 0 && y == 0 && b == 1:
			return nd // nodata in one band invalidates the pixel
		case x == 1 && y == 0 && b == 2:
			return math.NaN()
		case x == 2 && y == 0 && b == 0:
			return math.Inf(1)
		}
		return float64(b + 1)
	}
	path := r.write(t, filepath.Join(dir, "v.tif"))
	m := defaultRaster()
	m.w, m.h, m.bands, m.dtype = 4, 3, 1, godal.Byte
	m.values = func(x, y, b int) float64 {
		if y == 2 && x == 3 {
			return 0
		}
		return 7
	}
	mask := m.write(t, filepath.Join(dir, "mask.tif"))

	tests := []struct {
		name    string
		opts    []Option
		invalid []int
	}{
		{"file nodata", nil, []int{0, 1, 2}},
		{"mask", []Option{Mask(mask)}, []int{0, 1, 2, 11}},
		{"override", []Option{NoData([]float64{1})}, []int{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11}},
		{"per band override", []Option{NoData([]float64{5, 5, 3})}, []int{0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11}},
		{"per band override off", []Option{NoData([]float64{5, 5, 5})}, []int{1, 2}},
	}
	for _, tc := range tests {
		s, err := Open([]string{path}, tc.opts...)
		if err != nil {
			t.Fatal(err)
		}
		_, valid, n := readAll(t, s)
		want := make([]bool, 12)
		for i := range want {
			want[i] = true
		}
		for _, i := range tc.invalid {
			want[i] = false
		}
		for i := range want {
			if valid[i] != want[i] {
				t.Errorf("%s: pixel %d valid=%v, want %v", tc.name, i, valid[i], want[i])
			}
		}
		if n != 12-len(tc.invalid) {
			t.Errorf("%s: %d valid pixels, want %d", tc.name, n, 12-len(tc.invalid))
		}
	}
}

func TestScaleOffsetApplied(t *testing.T) {
	dir := t.TempDir()
	r := defaultRaster()
	r.bands, r.dtype = 1, godal.Int16
	path := r.write(t, filepath.Join(dir, "s.tif"))
	ds, err := godal.Open(path, godal.Update())
	if err != nil {
		t.Fatal(err)
	}
	ds.Bands()[0].SetScaleOffset(0.5, 100)
	ds.Close()
	s, err := Open([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	if s.Bands[0].Scale != 0.5 || s.Bands[0].Offset != 100 {
		t.Fatalf("scale/offset %v %v", s.Bands[0].Scale, s.Bands[0].Offset)
	}
	dst, _, _ := readAll(t, s)
	if want := r.values(3, 2, 0)*0.5 + 100; dst[2*r.w+3] != want {
		t.Fatalf("got %v, want %v", dst[2*r.w+3], want)
	}
}

// gdalinfo runs GDAL's own gdalinfo -json on path: an outside check of what
// the writer put in the file.
func gdalinfo(t *testing.T, path string) map[string]any {
	t.Helper()
	testenv.NeedTool(t, "gdalinfo", "gdal-bin")
	out, err := exec.Command("gdalinfo", "-json", "-mdd", "all", path).Output()
	if err != nil {
		t.Fatalf("gdalinfo %s: %v", path, err)
	}
	var info map[string]any
	if err := json.Unmarshal(out, &info); err != nil {
		t.Fatal(err)
	}
	return info
}

func TestWriteRoundTripCheckedByGdalinfo(t *testing.T) {
	dir := t.TempDir()
	src, err := Open([]string{defaultRaster().write(t, filepath.Join(dir, "in.tif"))})
	if err != nil {
		t.Fatal(err)
	}
	nd := -32768.0
	for _, format := range []Format{GTiff, COG} {
		out := filepath.Join(dir, "out-"+string(format)+".tif")
		spec := Spec{Grid: src.Grid, Bands: 2, DataType: "Int16", NoData: &nd, Format: format,
			Descriptions: []string{"first", "second"}, Scales: []float64{0.25, 1}, Offsets: []float64{10, 0},
			Metadata: map[string]string{"BANDFOLD_TEST": "yes"}}
		o, err := Create(out, spec)
		if err != nil {
			t.Fatal(err)
		}
		g := tiles.NewGrid(src.Width, src.Height, 16, 16)
		for tl := range g.Tiles() {
			buf := make([]float64, tl.Pixels()*2)
			for i := range buf {
				buf[i] = float64(i % 100)
			}
			if err := o.Write(tl, buf); err != nil {
				t.Fatal(err)
			}
		}
		if err := o.Commit(); err != nil {
			t.Fatal(err)
		}
		info := gdalinfo(t, out)
		gt := info["geoTransform"].([]any)
		for i, v := range src.GeoTransform {
			if gt[i].(float64) != v {
				t.Errorf("%s: geotransform %v, want %v", format, gt, src.GeoTransform)
			}
		}
		cs := info["coordinateSystem"].(map[string]any)["wkt"].(string)
		if same, _ := sameCRS(cs, src.Projection); !same {
			t.Errorf("%s: CRS differs: %s", format, crsName(cs))
		}
		bands := info["bands"].([]any)
		for i, want := range []string{"first", "second"} {
			b := bands[i].(map[string]any)
			if b["description"] != want || b["noDataValue"].(float64) != nd || b["type"] != "Int16" {
				t.Errorf("%s band %d: %v", format, i+1, b)
			}
		}
		if b := bands[0].(map[string]any); b["scale"].(float64) != 0.25 || b["offset"].(float64) != 10 {
			t.Errorf("%s: scale/offset %v %v", format, b["scale"], b["offset"])
		}
		md := info["metadata"].(map[string]any)[""].(map[string]any)
		if md["BANDFOLD_TEST"] != "yes" {
			t.Errorf("%s: metadata %v", format, md)
		}
		if format == COG {
			if md2 := info["metadata"].(map[string]any)["IMAGE_STRUCTURE"].(map[string]any); md2["LAYOUT"] != "COG" {
				t.Errorf("COG layout: %v", md2)
			}
		}
	}
	left, _ := filepath.Glob(filepath.Join(dir, ".*tmp*"))
	if len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// TestAtomicOutput: a failure mid-write leaves no file, and an existing
// output is refused without overwrite.
func TestAtomicOutput(t *testing.T) {
	dir := t.TempDir()
	src, _ := Open([]string{defaultRaster().write(t, filepath.Join(dir, "in.tif"))})
	out := filepath.Join(dir, "out.tif")
	o, err := Create(out, Spec{Grid: src.Grid, Bands: 1, DataType: "Float32"})
	if err != nil {
		t.Fatal(err)
	}
	if err := o.Write(tiles.Tile{W: 4, H: 4}, make([]float64, 16)); err != nil {
		t.Fatal(err)
	}
	// A write outside the raster fails mid-way; the caller aborts.
	if err := o.Write(tiles.Tile{X: src.Width - 2, W: 4, H: 4}, make([]float64, 16)); err == nil {
		t.Error("write past the edge succeeded")
	}
	o.Abort()
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("files left after abort: %v", entries)
	}
	os.WriteFile(out, []byte("keep me"), 0o644)
	if _, err := Create(out, Spec{Grid: src.Grid, Bands: 1, DataType: "Float32"}); !errors.Is(err, output.ErrExists) {
		t.Errorf("existing output: got %v", err)
	}
	if b, _ := os.ReadFile(out); string(b) != "keep me" {
		t.Error("existing output was touched")
	}
	for _, bad := range []string{filepath.Join(out, "x.tif"), "/vsimem/x.tif"} {
		if _, err := Create(bad, Spec{Grid: src.Grid, Bands: 1, DataType: "Float32"}); err == nil || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: got %v", bad, err)
		}
	}
}

// TestCreateMakesParentFolders: a missing folder is made by Create and
// removed again by Abort; after Commit it stays.
func TestCreateMakesParentFolders(t *testing.T) {
	dir := t.TempDir()
	src, _ := Open([]string{defaultRaster().write(t, filepath.Join(dir, "in.tif"))})
	spec := Spec{Grid: src.Grid, Bands: 1, DataType: "Float32"}
	out := filepath.Join(dir, "a", "b", "x.tif")
	o, err := Create(out, spec)
	if err != nil {
		t.Fatal(err)
	}
	o.Abort()
	if _, err := os.Stat(filepath.Join(dir, "a")); !errors.Is(err, os.ErrNotExist) {
		t.Errorf("folder made by Create left after Abort: %v", err)
	}
	if o, err = Create(out, spec); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
	if _, err := ReadMetadata(out); err != nil {
		t.Error(err)
	}
}

// TestFinishThenCommit: after Finish the temporary file is whole and
// readable by path; Commit then moves it into place, as COG too.
func TestFinishThenCommit(t *testing.T) {
	dir := t.TempDir()
	src, _ := Open([]string{defaultRaster().write(t, filepath.Join(dir, "in.tif"))})
	for _, format := range []Format{GTiff, COG} {
		out := filepath.Join(dir, "out-"+string(format)+".tif")
		o, err := Create(out, Spec{Grid: src.Grid, Bands: 1, DataType: "Float32", Format: format, Metadata: map[string]string{"K": "v"}})
		if err != nil {
			t.Fatal(err)
		}
		if err := o.Finish(); err != nil {
			t.Fatal(err)
		}
		// The metadata item was set by construction above.
		if md, err := ReadMetadata(o.Temp()); err != nil || md["K"] != "v" {
			t.Errorf("%s: temporary after Finish: %v %v", format, md, err)
		}
		if _, err := os.Stat(out); !errors.Is(err, os.ErrNotExist) {
			t.Errorf("%s: output in place before Commit", format)
		}
		if err := o.Commit(); err != nil {
			t.Fatal(err)
		}
		if md, err := ReadMetadata(out); err != nil || md["K"] != "v" {
			t.Errorf("%s: committed: %v %v", format, md, err)
		}
	}
	if left, _ := filepath.Glob(filepath.Join(dir, ".*tmp*")); len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// TestCreationOptionsChecked: options GDAL's drivers do not accept are
// errors naming the option, checked with the real GDAL, before any file is
// made; an item without '=' too.
func TestCreationOptionsChecked(t *testing.T) {
	dir := t.TempDir()
	src, _ := Open([]string{defaultRaster().write(t, filepath.Join(dir, "in.tif"))})
	out := filepath.Join(dir, "sub", "out.tif")
	for _, c := range []struct {
		format Format
		co     string
		want   string // start of the message; GDAL's text follows
	}{
		{GTiff, "COMPRESS=NOPE", "output " + out + ": creation option COMPRESS=NOPE: "},
		{GTiff, "NO_SUCH_OPTION=1", "output " + out + ": creation option NO_SUCH_OPTION=1: "},
		{COG, "COMPRESS=NOPE", "output " + out + ": creation option COMPRESS=NOPE: "},
		{COG, "TILED=YES", "output " + out + ": creation option TILED=YES: "}, // a GTiff option, not COG's
		{GTiff, "COMPRESS", "output " + out + `: creation option "COMPRESS" is not KEY=VALUE`},
	} {
		_, err := Create(out, Spec{Grid: src.Grid, Bands: 1, DataType: "Float32", Format: c.format, CreationOptions: []string{c.co}})
		if err == nil || !strings.HasPrefix(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s %s: got %v, want %q...", c.format, c.co, err, c.want)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "sub")); !errors.Is(err, os.ErrNotExist) {
		t.Error("a refused output made its folder")
	}
	// Options GDAL accepts pass, for either driver.
	for _, c := range []struct {
		format Format
		co     string
	}{{GTiff, "COMPRESS=LZW"}, {COG, "COMPRESS=ZSTD"}} {
		o, err := Create(out, Spec{Grid: src.Grid, Bands: 1, DataType: "Float32", Format: c.format, CreationOptions: []string{c.co}})
		if err != nil {
			t.Errorf("%s %s: %v", c.format, c.co, err)
			continue
		}
		o.Abort()
	}
}
