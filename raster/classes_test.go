package raster

import (
	"fmt"
	"image/color"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// TestClasses (issue 26): Spec.Classes gives every band of a class raster
// a raster attribute table read back by GDAL (ReadClasses), category names
// where the values are small codes and a colour table on a one-band Byte
// raster, in GeoTIFF and COG, kept in the .aux.xml beside the output.
// Expected: the classes written (known by construction), as GDAL's
// gdalinfo -json reports them.
func TestClasses(t *testing.T) {
	change := []Class{{0, "no change", color.RGBA{236, 236, 228, 255}}, {1, "change", color.RGBA{214, 40, 120, 255}}, {255, "nodata", color.RGBA{}}}
	steps := []Class{{0, "none", color.RGBA{236, 236, 228, 255}}, {1, "flagged", color.RGBA{230, 159, 0, 255}}, {2, "lasting", color.RGBA{0, 114, 178, 255}}, {255, "nodata", color.RGBA{}}}
	dates := []Class{{20200616, "2020-06-16", color.RGBA{227, 89, 51, 255}}, {20210614, "2021-06-14", color.RGBA{85, 15, 109, 255}}}
	tests := []struct {
		name       string
		dtype      string
		bands      int
		classes    []Class
		categories bool // GDAL category names expected
		palette    bool // a colour table expected
	}{
		{"change", "Byte", 1, change, true, true},
		{"steps", "Byte", 4, steps, true, false},
		{"first-change", "Int32", 1, dates, false, false},
	}
	dir := t.TempDir()
	for _, tc := range tests {
		for _, format := range []Format{GTiff, COG} {
			path := filepath.Join(dir, fmt.Sprintf("%s-%s.tif", tc.name, format))
			writeZeros(t, path, Spec{Grid: Grid{Width: 8, Height: 5}, Bands: tc.bands, DataType: tc.dtype, Classes: tc.classes, Format: format})
			what := fmt.Sprintf("%s (%s)", tc.name, format)
			got, err := ReadClasses(path)
			if err != nil {
				t.Fatal(err)
			}
			for b := range tc.bands {
				if !slices.Equal(got[b], tc.classes) {
					t.Errorf("%s band %d: classes %v, want %v", what, b+1, got[b], tc.classes)
				}
			}
			checkCategories(t, what, gdalinfo(t, path), tc.classes, tc.categories, tc.palette)
		}
	}
	left, _ := filepath.Glob(filepath.Join(dir, ".*"))
	if len(left) > 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

// checkCategories checks gdalinfo's category names and colour table of
// every band against classes.
func checkCategories(t *testing.T, what string, info map[string]any, classes []Class, categories, palette bool) {
	t.Helper()
	for i, band := range info["bands"].([]any) {
		b := band.(map[string]any)
		cats, hasCats := b["categories"].([]any)
		ct, hasCT := b["colorTable"].(map[string]any)
		if hasCats != categories || hasCT != palette {
			t.Errorf("%s band %d: categories %v, colour table %v; want %v and %v", what, i+1, hasCats, hasCT, categories, palette)
			continue
		}
		for _, c := range classes {
			if hasCats && cats[c.Value] != c.Name {
				t.Errorf("%s band %d: category %d named %v, want %q", what, i+1, c.Value, cats[c.Value], c.Name)
			}
			if !hasCT {
				continue
			}
			// TIFF's palette holds no alpha (GDAL reads 255): the
			// attribute table and nodata carry transparency.
			e := ct["entries"].([]any)[c.Value].([]any)
			want := []any{float64(c.Colour.R), float64(c.Colour.G), float64(c.Colour.B), 255.0}
			if !slices.Equal(e, want) {
				t.Errorf("%s band %d: colour of %d is %v, want %v", what, i+1, c.Value, e, want)
			}
		}
	}
}

// TestClassesReplaceStaleAux: an .aux.xml left beside the target by an
// earlier file is replaced by the new output's, or removed when the new
// output has none, so that GDAL never reads another file's classes into
// it (known by construction).
func TestClassesReplaceStaleAux(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.tif")
	stale := `<PAMDataset><PAMRasterBand band="1"><CategoryNames><Category>stale</Category></CategoryNames></PAMRasterBand></PAMDataset>`
	for _, classes := range [][]Class{{{Value: 1, Name: "new", Colour: color.RGBA{1, 2, 3, 255}}}, nil} {
		if err := os.WriteFile(path+".aux.xml", []byte(stale), 0o644); err != nil {
			t.Fatal(err)
		}
		writeZeros(t, path, Spec{Grid: Grid{Width: 4, Height: 4}, Bands: 1, DataType: "Byte", Classes: classes, Overwrite: true})
		got, err := ReadClasses(path)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(got[0], classes) {
			t.Errorf("classes %v read back as %v", classes, got[0])
		}
		cats, _ := gdalinfo(t, path)["bands"].([]any)[0].(map[string]any)["categories"].([]any)
		if slices.Contains(cats, any("stale")) {
			t.Errorf("classes %v: the stale category names were read into the new file: %v", classes, cats)
		}
	}
}
