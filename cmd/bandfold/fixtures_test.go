package main

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"bandfold/raster"
	"bandfold/tiles"
)

// fixtures are the files of the bad-input suite, all in one temporary
// folder (dir). Each field is an absolute path. Every file is made by the
// command itself, run in-process, or written with the raster package, so
// what each holds is known by construction.
type fixtures struct {
	dir string

	// sceneA and sceneB are two invented 6-band Int16 scenes on one grid
	// (demo synth --bands 6 --width 40 --height 30, seeds 1 and 2): 40 x 30
	// pixels of 10 m, EPSG:32633, no nodata, every pixel valid.
	sceneA, sceneB string
	// five is a 5-band scene on the same grid (demo synth --bands 5).
	five string
	// otherGrid is a 6-band scene on another grid: 30 x 20 pixels (demo
	// synth --width 30 --height 20).
	otherGrid string
	// basis is the basis of sceneA (learn sceneA), basisB that of sceneB
	// (same bands, another fit), and fiveBasis that of five (5 bands).
	basis, basisB, fiveBasis string
	// components is sceneA folded with basis (fold --type float32).
	components string
	// partial is the partial statistics of shard 0 of 2 of sceneA (learn
	// --shard 0/2 --partial); shard 1 was never written.
	partial string
	// mask is a one-band Byte validity mask on sceneA's grid (1 = valid,
	// one corner of 0s); maskOther the same on otherGrid's grid.
	mask, maskOther string
	// text is a plain text file; empty an empty file named like a GeoTIFF.
	text, empty string
	// corrupt is basis with every eigenvalue multiplied by 100: valid JSON
	// whose eigenvalues no longer belong to its covariance matrix.
	corrupt string
	// list is a --list file naming sceneA and sceneB by relative paths.
	list string
	// nanScene is sceneA as Float32 with nodata NaN declared on every band
	// and one pixel in ten set to NaN.
	nanScene string
	// allNaN is sceneA as Float32 with band 3 NaN everywhere, so that no
	// pixel is valid in every band.
	allNaN string
	// noCRSA and noCRSB are sceneA and sceneB with their geotransform but
	// without a CRS.
	noCRSA, noCRSB string
	// changeOut is a previous change output folder (change sceneA sceneB
	// --out), with its manifest.
	changeOut string
	// misc is a folder holding unrelated files (notes.md and data.csv).
	misc string
	// missing names a file that does not exist, in dir.
	missing string
}

// path returns name inside the fixture folder.
func (f *fixtures) path(name string) string { return filepath.Join(f.dir, name) }

// newFixtures builds every fixture in a fresh temporary folder.
func newFixtures(t *testing.T) *fixtures {
	t.Helper()
	dir := t.TempDir()
	f := &fixtures{dir: dir}
	p := f.path
	f.sceneA, f.sceneB, f.five, f.otherGrid = p("scene_a.tif"), p("scene_b.tif"), p("five.tif"), p("other_grid.tif")
	f.basis, f.basisB, f.fiveBasis = p("scene_a.basis.json"), p("scene_b.basis.json"), p("five.basis.json")
	f.components, f.partial = p("scene_a.components.tif"), p("part0.json")
	f.mask, f.maskOther = p("mask.tif"), p("mask_other.tif")
	f.text, f.empty, f.corrupt, f.list = p("notes.txt"), p("empty.tif"), p("corrupt.basis.json"), p("scenes.txt")
	f.nanScene, f.allNaN = p("nan_nodata.tif"), p("all_nan_band.tif")
	f.noCRSA, f.noCRSB = p("nocrs_a.tif"), p("nocrs_b.tif")
	f.changeOut, f.misc, f.missing = p("chg"), p("misc"), p("missing.tif")

	synth := func(out string, extra ...string) {
		mustRun(t, append([]string{"demo", "synth", "--width", "40", "--height", "30", "--out", out, "--quiet"}, extra...)...)
	}
	synth(f.sceneA, "--bands", "6", "--seed", "1")
	synth(f.sceneB, "--bands", "6", "--seed", "2")
	synth(f.five, "--bands", "5", "--seed", "3")
	synth(f.otherGrid, "--bands", "6", "--seed", "4", "--width", "30", "--height", "20")
	mustRun(t, "learn", f.sceneA, "--out", f.basis, "--quiet")
	mustRun(t, "learn", f.sceneB, "--out", f.basisB, "--quiet")
	mustRun(t, "learn", f.five, "--out", f.fiveBasis, "--quiet")
	mustRun(t, "fold", f.sceneA, "--basis", f.basis, "--out", f.components, "--quiet")
	mustRun(t, "learn", f.sceneA, "--shard", "0/2", "--partial", f.partial, "--tile", "16", "--quiet")
	mustRun(t, "change", f.sceneA, f.sceneB, "--out", f.changeOut, "--quiet")

	if err := raster.Init(raster.Config{}); err != nil {
		t.Fatal(err)
	}
	a := readAll(t, f.sceneA)
	writeMask(t, f.mask, a.Grid)
	writeMask(t, f.maskOther, readAll(t, f.otherGrid).Grid)
	nan := math.NaN()
	withNaN := append([]float64(nil), a.values...)
	for i := 0; i < len(withNaN); i += 10 * a.bands {
		withNaN[i] = nan
	}
	writeScene(t, f.nanScene, a.Grid, a.bands, "Float32", &nan, withNaN)
	band3 := append([]float64(nil), a.values...)
	for i := 2; i < len(band3); i += a.bands {
		band3[i] = nan
	}
	writeScene(t, f.allNaN, a.Grid, a.bands, "Float32", nil, band3)
	b := readAll(t, f.sceneB)
	for _, s := range []struct {
		path string
		img  image
	}{{f.noCRSA, a}, {f.noCRSB, b}} {
		g := s.img.Grid
		g.Projection = ""
		writeScene(t, s.path, g, s.img.bands, "Int16", nil, s.img.values)
	}

	writeFile(t, f.text, "not a raster, just a note\n")
	writeFile(t, f.empty, "")
	writeFile(t, f.list, "scene_a.tif\nscene_b.tif\n")
	data, err := os.ReadFile(f.basis)
	if err != nil {
		t.Fatal(err)
	}
	writeFile(t, f.corrupt, string(scaleEigenvalues(t, data, 100)))
	if err := os.Mkdir(f.misc, 0o755); err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(f.misc, "notes.md"), "# field notes\n")
	writeFile(t, filepath.Join(f.misc, "data.csv"), "id,value\n1,2\n")
	return f
}

// image is a whole raster read into memory, pixel-major.
type image struct {
	raster.Grid
	bands  int
	values []float64
	valid  []bool
}

// readAll reads every band of the raster at path.
func readAll(t *testing.T, path string) image {
	t.Helper()
	s, err := raster.Open([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	r, err := s.NewReader()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	tl := tiles.Tile{W: s.Width, H: s.Height}
	buf := make([]float64, tl.Pixels()*s.Len())
	valid := make([]bool, tl.Pixels())
	if _, err := r.Read(tl, buf, valid); err != nil {
		t.Fatal(err)
	}
	return image{Grid: s.Grid, bands: s.Len(), values: buf, valid: valid}
}

// writeScene writes a raster of the given grid, band count, type and nodata
// from pixel-major values.
func writeScene(t *testing.T, path string, g raster.Grid, bands int, dtype string, nodata *float64, values []float64) {
	t.Helper()
	o, err := raster.Create(path, raster.Spec{Grid: g, Bands: bands, DataType: dtype, NoData: nodata})
	if err != nil {
		t.Fatal(err)
	}
	defer o.Abort()
	if err := o.Write(tiles.Tile{W: g.Width, H: g.Height}, values); err != nil {
		t.Fatal(err)
	}
	if err := o.Commit(); err != nil {
		t.Fatal(err)
	}
}

// writeMask writes a one-band Byte mask on grid g: 1 everywhere but the
// top-left 4 x 4 pixels, which are 0.
func writeMask(t *testing.T, path string, g raster.Grid) {
	t.Helper()
	v := make([]float64, g.Width*g.Height)
	for i := range v {
		if i%g.Width >= 4 || i/g.Width >= 4 {
			v[i] = 1
		}
	}
	writeScene(t, path, g, 1, "Byte", nil, v)
}

func writeFile(t *testing.T, path, text string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
}

// scaleEigenvalues returns a basis file with every eigenvalue multiplied by
// factor and every other member unchanged.
func scaleEigenvalues(t *testing.T, data []byte, factor float64) []byte {
	t.Helper()
	var doc map[string]json.RawMessage
	var ev []float64
	if err := json.Unmarshal(data, &doc); err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(doc["eigenvalues"], &ev); err != nil {
		t.Fatal(err)
	}
	for i := range ev {
		ev[i] *= factor
	}
	raw, err := json.Marshal(ev)
	if err != nil {
		t.Fatal(err)
	}
	doc["eigenvalues"] = raw
	out, err := json.MarshalIndent(doc, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	return out
}
